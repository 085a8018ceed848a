"""The robust recommendation problem: one line × product model, tomorrow's conditions, and the
samples that stand for what we do not know.

A setting (belt speed, forward power per zone) is *in spec* for one sample of the model's
parameters and of the infeed conditions when every target of the product holds; it is
*robust* when the share of samples in spec is at least the confidence. The samples are drawn
once per problem (common random numbers), so two settings are always compared on the same
draws and the criterion changes smoothly with the setting.

Targets are split into one-sided edges (a band such as core −4 ± 1 °C becomes a lower and an
upper edge) and each edge is tagged with the way more processing moves it: more power or a
slower belt helps an *under-processing* edge (core too cold, outfeed too wet) and hurts an
*over-processing* one (hottest point too warm, outfeed too dry). The search uses the tag to
find, along a line of settings, where the product first comes into spec.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from ..config import Line, Product
from ..errors import InputError
from ..line import LineModel, Outcome
from ..models import FittedModel
from ..simulate import WhatIf, _check_conditions
from ..targets import check_targets

OBJECTIVES = ("energy", "throughput")
#: Samples of parameters and conditions per problem; 256 puts the standard error of a 95 %
#: probability at 1.4 points (binomial), within the 200–400 the design asks for.
DEFAULT_SAMPLES = 256
SAMPLES_RANGE = (50, 5000)
CONFIDENCE_RANGE = (0.5, 0.999)
#: Lot-to-lot spread assumed when no recent lots are known: a thermostatted cold store holds
#: blocks within about ±1 K (sd) and a fed belt holds its lot-average load within about 2 %
#: (common practice, from memory). Override with recent lots or ``[recommend]`` in the config.
DEFAULT_INFEED_TEMP_SD_C = 1.0
DEFAULT_BELT_LOAD_RELATIVE_SD = 0.02
#: A sampled belt load is kept above this share of the mean (a normal draw could go negative).
MIN_LOAD_SHARE = 0.2
#: Resolution a setting is keyed in with when the line states none: 0.1 kW of forward power and
#: 0.001 m/min of belt speed (what a generator panel and a belt drive setpoint take; assumption).
KEYED_POWER_STEP_KW = 0.1
KEYED_SPEED_STEP_M_PER_MIN = 0.001
#: Rows per model call: bounds memory (each row carries a few (3, 3) matrices per sub-step).
CHUNK_ROWS = 8192

#: Edges of two-sided targets and the processing role of each (see the module docstring).
_TWO_SIDED = {
    "core_temp_c": ("core_temp_c", {"lower": "under", "upper": "over"}),
    "outfeed_moisture_pct_wb": ("outfeed_moisture_pct_wb", {"lower": "over", "upper": "under"}),
}
_ONE_SIDED_ROLE = {"max_temp_c": "over", "min_temp_c": "under"}


@dataclass(frozen=True)
class Conditions:
    """What the line will see tomorrow (the nominal case of the robust problem)."""

    infeed_temp_c: float  # [°C]
    belt_load_kg_per_m: float  # [kg m⁻¹]
    air_temp_c: float  # [°C]; dryers: held, not a decision variable
    infeed_moisture_pct_wb: float | None = None  # [% wb], dryers
    air_rh_pct: float | None = None  # [%], dryers

    def to_json(self) -> dict:
        return {k: (None if v is None else round(float(v), 4)) for k, v in self.__dict__.items()}


@dataclass(frozen=True)
class ConditionsSpread:
    """Lot-to-lot standard deviations of the infeed conditions the recommendation must absorb."""

    infeed_temp_sd_c: float  # [K]
    belt_load_sd_kg_per_m: float  # [kg m⁻¹]

    def to_json(self) -> dict:
        return {k: round(float(v), 4) for k, v in self.__dict__.items()}


@dataclass(frozen=True)
class Edge:
    """One side of one target: the column of the margin arrays that carries it."""

    target: str  # the TargetCheck name, e.g. core_temp_c
    edge: str  # lower | upper | limit
    role: str  # under | over | other
    unit: str

    @property
    def label(self) -> str:
        return self.target if self.edge == "limit" else f"{self.target} ({self.edge} edge)"


@dataclass
class Scored:
    """Model outcome of N settings and their one-sided target margins (N, J)."""

    outcome: Outcome
    margins: np.ndarray


@dataclass
class RobustScored:
    """M settings, each under the S samples: margins (M, S, J), criterion (M,), in-spec share (M,)."""

    speed: np.ndarray  # (M,)
    powers: np.ndarray  # (M, Z)
    nominal: Scored
    margins: np.ndarray  # (M, S, J)
    criterion: np.ndarray  # (M,) the order statistic q; q >= 0 <=> probability >= confidence
    probability: np.ndarray  # (M,)
    outcome: Outcome  # over M·S rows, sample index fastest


@dataclass
class RobustProblem:
    """Everything the search needs; build it with :meth:`build`."""

    line: Line
    product: Product
    fitted: FittedModel
    model: LineModel
    conditions: Conditions
    spread: ConditionsSpread
    confidence: float
    objective: str
    min_throughput_kg_per_h: float | None
    samples: dict[str, np.ndarray]  # parameter draws (S,) each
    infeed_temp_samples_c: np.ndarray  # (S,)
    belt_load_samples_kg_per_m: np.ndarray  # (S,)
    edges: tuple[Edge, ...]
    evaluations: dict[str, int] = field(default_factory=lambda: {"nominal": 0, "sampled": 0})

    # -- construction -----------------------------------------------------------------------
    @classmethod
    def build(cls, line: Line, product: Product, fitted: FittedModel, *, conditions: Conditions,
              spread: ConditionsSpread, confidence: float = 0.95, objective: str = "energy",
              min_throughput_kg_per_h: float | None = None, n_samples: int = DEFAULT_SAMPLES,
              rng: np.random.Generator) -> "RobustProblem":
        """Validate the inputs, build the model and draw the common samples.

        Raises
        ------
        InputError
            An option outside its allowed range, a product that does not run on the line,
            a model of another line or product, or targets that contradict each other.
        """
        _check_options(line, product, fitted, conditions, spread, confidence, objective,
                       min_throughput_kg_per_h, n_samples)
        check_target_consistency(product)
        model = fitted.build(line, product)
        problem = cls(line, product, fitted, model, conditions, spread, float(confidence), objective,
                      min_throughput_kg_per_h, *_draw(fitted, line, product, conditions, spread, n_samples, rng), ())
        probe = problem._steady(np.array([line.belt_speed_min_m_per_min]),
                                np.zeros((1, line.zone_count)))
        problem.edges = _edges(product, probe)
        return problem

    def resampled(self, n_samples: int, rng: np.random.Generator) -> "RobustProblem":
        """The same problem on fresh, independent samples (e.g. to check a probability out of sample)."""
        params, t_in, load = _draw(self.fitted, self.line, self.product, self.conditions, self.spread,
                                   n_samples, rng)
        return replace(self, samples=params, infeed_temp_samples_c=t_in, belt_load_samples_kg_per_m=load,
                       evaluations={"nominal": 0, "sampled": 0})

    def with_objective(self, objective: str, min_throughput_kg_per_h: float | None) -> "RobustProblem":
        """The same samples and model for another objective or throughput requirement."""
        return replace(self, objective=objective, min_throughput_kg_per_h=min_throughput_kg_per_h)

    # -- sizes and bounds -----------------------------------------------------------------
    @property
    def n_samples(self) -> int:
        return int(self.infeed_temp_samples_c.size)

    @property
    def needed_in_spec(self) -> int:
        """Samples that must be in spec for the probability to reach the confidence."""
        return int(math.ceil(self.confidence * self.n_samples - 1e-9))

    @property
    def speed_bounds_m_per_min(self) -> tuple[float, float]:
        """Belt speeds allowed by the line and the required throughput (low may exceed high)."""
        lo, hi = self.line.belt_speed_min_m_per_min, self.line.belt_speed_max_m_per_min
        if self.min_throughput_kg_per_h is not None:
            lo = max(lo, self.min_throughput_kg_per_h / (60.0 * self.conditions.belt_load_kg_per_m))
        return lo, hi

    @property
    def belt_capacity_kg_per_h(self) -> float:
        """Throughput at the top belt speed and the nominal load [kg h⁻¹]."""
        return self.line.belt_speed_max_m_per_min * self.conditions.belt_load_kg_per_m * 60.0

    def role_columns(self, role: str) -> np.ndarray:
        return np.array([i for i, e in enumerate(self.edges) if e.role == role], dtype=int)

    # -- keying resolution ------------------------------------------------------------------
    @property
    def power_step_kw(self) -> float:
        """The line's power step, or the keying resolution when it has none [kW]."""
        return float(self.line.power_step_kw or KEYED_POWER_STEP_KW)

    def round_to_steps(self, powers: np.ndarray) -> np.ndarray:
        """Forward powers as the operator keys them in: nearest step, within ratings and cap.

        Nearest-step rounding can lift the total above the cap; those rows are rounded down
        instead (the sum of rounded-down powers never exceeds the sum of the originals).
        """
        powers = np.asarray(powers, dtype=float)
        step = self.power_step_kw
        top = np.floor(np.asarray(self.line.zone_max_kw) / step + 1e-9) * step
        near = np.clip(np.round(powers / step) * step, 0.0, top)
        down = np.clip(np.floor(powers / step + 1e-9) * step, 0.0, top)
        over = near.sum(axis=-1) > self.line.total_power_cap_kw + 1e-9
        return np.round(np.where(over[..., None], down, near), 6)

    def round_speed(self, speed: np.ndarray) -> np.ndarray:
        """Belt speed as keyed in (nearest step), kept within the allowed range."""
        step = KEYED_SPEED_STEP_M_PER_MIN
        lo, hi = self.speed_bounds_m_per_min
        keyed = np.round(np.asarray(speed, dtype=float) / step) * step
        keyed = np.where(keyed < lo - 1e-12, np.ceil(lo / step - 1e-9) * step, keyed)
        return np.round(np.minimum(keyed, hi), 6)

    # -- evaluations ------------------------------------------------------------------------
    def _steady(self, speed, powers, **kwargs) -> Outcome:
        c = self.conditions
        kwargs.setdefault("infeed_temp_c", c.infeed_temp_c)
        kwargs.setdefault("belt_load_kg_per_m", c.belt_load_kg_per_m)
        return self.model.steady(belt_speed_m_per_min=speed, zone_forward_kw=powers, air_temp_c=c.air_temp_c,
                                 infeed_moisture_pct_wb=c.infeed_moisture_pct_wb, air_rh_pct=c.air_rh_pct,
                                 **kwargs)

    def margins_of(self, outcome: Outcome) -> np.ndarray:
        """One-sided margins (N, J) of an outcome, in the order of :attr:`edges`; NaN counts as unmet."""
        return _edge_margins(self.product, check_targets(self.product, outcome))

    def nominal(self, speed, powers, keep_history=False) -> Scored:
        """Settings (N,), (N, Z) at the nominal conditions and the model's parameter values."""
        speed = np.asarray(speed, dtype=float)
        powers = np.asarray(powers, dtype=float)
        parts = []
        for lo in range(0, speed.size, CHUNK_ROWS):
            sl = slice(lo, lo + CHUNK_ROWS)
            parts.append(self._steady(speed[sl], powers[sl], keep_history=keep_history))
        out = parts[0] if len(parts) == 1 else _concat(parts)
        self.evaluations["nominal"] += speed.size
        return Scored(out, self.margins_of(out))

    def robust(self, speed, powers) -> RobustScored:
        """Each of M settings under every sample: margins, the order-statistic criterion, the share in spec."""
        speed = np.asarray(speed, dtype=float).reshape(-1)
        powers = np.asarray(powers, dtype=float).reshape(speed.size, -1)
        m, s = speed.size, self.n_samples
        per_chunk = max(1, CHUNK_ROWS // s)
        parts = []
        for lo in range(0, m, per_chunk):
            k = min(per_chunk, m - lo)
            params = {name: np.tile(v, k) for name, v in self.samples.items()}
            zone_kw = np.repeat(powers[lo:lo + k], s, axis=0)
            if self.line.power_follows_load:
                zone_kw = self.load_following_kw(zone_kw, np.tile(self.belt_load_samples_kg_per_m, k))
            parts.append(self._steady(np.repeat(speed[lo:lo + k], s), zone_kw,
                                      infeed_temp_c=np.tile(self.infeed_temp_samples_c, k),
                                      belt_load_kg_per_m=np.tile(self.belt_load_samples_kg_per_m, k),
                                      param_overrides=params or None))
        out = parts[0] if len(parts) == 1 else _concat(parts)
        self.evaluations["sampled"] += m * s
        margins = self.margins_of(out).reshape(m, s, -1)
        return RobustScored(speed, powers, self.nominal(speed, powers), margins, self.criterion(margins),
                            self.in_spec_share(margins), out)

    def load_following_kw(self, zone_kw: np.ndarray, belt_load_kg_per_m: np.ndarray) -> np.ndarray:
        """Zone forward powers [kW] (N, Z) that a line whose controls follow the belt load sets at
        each row's load: the setting scaled by load / nominal load, each zone within its rating,
        and all zones scaled back together where their sum would pass the line's cap."""
        ratio = np.asarray(belt_load_kg_per_m, dtype=float) / self.conditions.belt_load_kg_per_m
        kw = np.minimum(zone_kw * ratio[:, None], np.asarray(self.line.zone_max_kw, dtype=float)[None, :])
        total = kw.sum(axis=1)
        over = total > self.line.total_power_cap_kw
        kw[over] *= (self.line.total_power_cap_kw / total[over])[:, None]
        return kw

    def criterion(self, margins: np.ndarray, columns=None) -> np.ndarray:
        """The robust criterion q of margins (..., S, J): q ≥ 0 exactly when the share in spec ≥ confidence.

        q is the (S − n)-th smallest of the per-sample worst margin, n = ⌈confidence·S⌉
        (an order statistic): it is continuous in the setting when the samples are fixed,
        which lets a line search interpolate it, and it says by how much the weakest
        edge misses (negative) or clears (positive) at the confidence.
        """
        m = margins if columns is None else margins[..., columns]
        worst = np.nan_to_num(m.min(axis=-1), nan=-np.inf)
        k = self.n_samples - self.needed_in_spec
        return np.partition(worst, k, axis=-1)[..., k]

    def in_spec_share(self, margins: np.ndarray) -> np.ndarray:
        return (np.nan_to_num(margins, nan=-np.inf) >= 0.0).all(axis=-1).mean(axis=-1)

    def quantile_margins(self, margins: np.ndarray) -> np.ndarray:
        """Per edge, the margin that the confidence share of samples clears: (..., S, J) → (..., J)."""
        k = self.n_samples - self.needed_in_spec
        return np.partition(np.nan_to_num(margins, nan=-np.inf), k, axis=-2)[..., k, :]

    def objective_of(self, scored: Scored) -> np.ndarray:
        """Lower is better: specific energy [kWh t⁻¹] or minus throughput [kg h⁻¹]."""
        out = scored.outcome
        if self.objective == "energy":
            return np.nan_to_num(out.specific_energy_kwh_per_t, nan=np.inf)
        return -out.throughput_kg_per_h


def _draw(fitted: FittedModel, line: Line, product: Product, conditions: Conditions, spread: ConditionsSpread,
          n: int, rng: np.random.Generator):
    """Parameter draws of the fitted distribution and normal draws of infeed temperature and load."""
    params = fitted.sample(line, product, n, rng)
    z = rng.standard_normal((2, n))
    t_in = conditions.infeed_temp_c + spread.infeed_temp_sd_c * z[0]
    load = np.maximum(conditions.belt_load_kg_per_m + spread.belt_load_sd_kg_per_m * z[1],
                      MIN_LOAD_SHARE * conditions.belt_load_kg_per_m)
    return params, t_in, load


def check_target_consistency(product: Product):
    """Raise :class:`InputError` when no outfeed can meet the product's targets at once."""
    tg = product.targets
    p = f"products.{product.product_id}.targets"
    if tg.core_tol_c is not None and tg.core_tol_c <= 0:
        raise InputError(f"{p}.core_tol_c {tg.core_tol_c:g} K must be > 0")
    if tg.moisture_tol_pct is not None and tg.moisture_tol_pct <= 0:
        raise InputError(f"{p}.moisture_tol_pct {tg.moisture_tol_pct:g} % points must be > 0")
    if tg.min_temp_c is not None and tg.max_temp_c is not None and tg.min_temp_c >= tg.max_temp_c:
        raise InputError(f"{p}: the coldest-point limit min_temp_c ({tg.min_temp_c:g} °C) is not below the "
                         f"hottest-point limit max_temp_c ({tg.max_temp_c:g} °C); the targets contradict "
                         "each other: min_temp_c must be below max_temp_c")
    if tg.core_temp_c is not None and tg.core_tol_c is not None:
        low, high = tg.core_temp_c - tg.core_tol_c, tg.core_temp_c + tg.core_tol_c
        if tg.max_temp_c is not None and low >= tg.max_temp_c:
            raise InputError(f"{p}: the core band {low:g}…{high:g} °C lies at or above the hottest-point "
                             f"limit max_temp_c ({tg.max_temp_c:g} °C); the core can never be warmer than the "
                             "hottest point, so the targets contradict each other")
        if tg.min_temp_c is not None and high <= tg.min_temp_c:
            raise InputError(f"{p}: the core band {low:g}…{high:g} °C lies at or below the coldest-point "
                             f"limit min_temp_c ({tg.min_temp_c:g} °C); the targets contradict each other")


def _check_options(line, product, fitted, conditions, spread, confidence, objective, min_throughput,
                   n_samples):
    if product.product_id not in line.products:
        raise InputError(f"product {product.product_id} does not run on line {line.line_id}; "
                         f"its products: {', '.join(line.products)}")
    if (fitted.line_id, fitted.product_id) != (line.line_id, product.product_id):
        raise InputError(f"the model is for line {fitted.line_id} × product {fitted.product_id}, not "
                         f"{line.line_id} × {product.product_id}")
    if objective not in OBJECTIVES:
        raise InputError(f"objective '{objective}' is not allowed; use one of: {', '.join(OBJECTIVES)}")
    lo, hi = CONFIDENCE_RANGE
    if not (isinstance(confidence, (int, float)) and lo <= confidence <= hi):
        raise InputError(f"confidence {confidence!r} is outside the allowed range {lo:g}…{hi:g} "
                         "(a probability, e.g. 0.95)")
    lo, hi = SAMPLES_RANGE
    if not (isinstance(n_samples, int) and lo <= n_samples <= hi):
        raise InputError(f"samples {n_samples!r} is outside the allowed range {lo}…{hi} (a whole number)")
    if min_throughput is not None and not (math.isfinite(min_throughput) and min_throughput > 0):
        raise InputError(f"min_throughput_kg_per_h {min_throughput:g} must be a positive number of kg/h")
    _check_conditions(product, WhatIf(0.0, (), conditions.infeed_temp_c, conditions.belt_load_kg_per_m,
                                      conditions.air_temp_c, conditions.infeed_moisture_pct_wb,
                                      conditions.air_rh_pct))
    if not (0.0 <= spread.infeed_temp_sd_c <= 20.0):
        raise InputError(f"infeed_temp_sd_c {spread.infeed_temp_sd_c:g} K is outside the allowed range 0…20 K")
    if not (0.0 <= spread.belt_load_sd_kg_per_m <= 0.5 * conditions.belt_load_kg_per_m):
        raise InputError(f"belt_load_sd_kg_per_m {spread.belt_load_sd_kg_per_m:g} is outside the allowed range "
                         f"0…{0.5 * conditions.belt_load_kg_per_m:g} kg/m (half the belt load)")


def _edges(product: Product, outcome: Outcome) -> tuple[Edge, ...]:
    edges = []
    for c in check_targets(product, outcome):
        if c.name in _TWO_SIDED:
            roles = _TWO_SIDED[c.name][1]
            edges += [Edge(c.name, "lower", roles["lower"], c.unit), Edge(c.name, "upper", roles["upper"], c.unit)]
        else:
            edges.append(Edge(c.name, "limit", _ONE_SIDED_ROLE.get(c.name, "other"), c.unit))
    return tuple(edges)


def _edge_margins(product: Product, checks) -> np.ndarray:
    """Split each two-sided margin tol − |v − centre| into its lower and upper edge."""
    cols = []
    for c in checks:
        if c.name in _TWO_SIDED:
            centre = getattr(product.targets, _TWO_SIDED[c.name][0])
            above = np.maximum(c.value - centre, 0.0)
            below = np.maximum(centre - c.value, 0.0)
            cols += [c.margin + 2.0 * above, c.margin + 2.0 * below]
        else:
            cols.append(c.margin)
    return np.nan_to_num(np.stack(cols, axis=-1).astype(float), nan=-np.inf)


def _concat(parts: list[Outcome]) -> Outcome:
    """Join outcomes of consecutive chunks (array fields only; the trajectory is dropped)."""
    first = parts[0]
    joined = {}
    for name, value in first.__dict__.items():
        if isinstance(value, np.ndarray) and name != "positions_m":
            joined[name] = np.concatenate([getattr(p, name) for p in parts], axis=0)
        else:
            joined[name] = value
    joined["trajectory"] = None
    return Outcome(**joined)
