"""Robust least squares of the line model's thermal parameters against the observations.

The parameters of the line (cavity losses, air heat transfer) are shared by all its
products; each product has its own (loss-factor scale, field non-uniformity, and the
freezing-point correction or drying rate). Where independent references exist (QA probes
for temperature, laboratory samples for moisture), the calibration offset of the line's
outfeed array or moisture meter is a parameter too, so the model predicts the product and
the offset explains the reading. Uncertainty comes from the Jacobian at the optimum.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import least_squares

from ..config import Line, Product
from ..line import LineModel, ModelParameters, ProductTables
from .data import CHANNELS, Observations

LINE_THERMAL = ("cavity_loss_equiv_kg", "air_htc_w_per_m2_k")
PRODUCT_THERMAL = {"tempering": ("loss_factor_scale", "field_nonuniformity", "freezing_point_shift_k"),
                   "drying": ("loss_factor_scale", "field_nonuniformity", "drying_rate_per_s")}
OFFSET_SPECS = {  # name: (unit, bounds, scale, meaning)
    "outfeed_array_offset_k": ("K", (-3.0, 3.0), 0.3, "outfeed array reading minus product temperature"),
    "moisture_meter_offset_pct": ("% points", (-3.0, 3.0), 0.3, "moisture meter reading minus laboratory moisture"),
}
#: Prior standard deviation of every parameter around its default, in units of its scale:
#: wide (a few times the typical size) so the data, not the prior, set what they can.
PRIOR_SD_SCALES = 4.0
#: Relative change of a channel's noise estimate below which the weighting counts as settled.
SIGMA_SETTLED = 0.15
#: A pass of the optimiser ends when a step lowers the cost (½ χ²) by less than this.
COST_TOL = 0.01
#: Typical size of each parameter, the unit of the optimiser's scaled coordinates.
SCALES = {"cavity_loss_equiv_kg": None, "air_htc_w_per_m2_k": 10.0, "loss_factor_scale": 0.3,
          "field_nonuniformity": 0.1, "freezing_point_shift_k": 0.5, "drying_rate_per_s": None}


@dataclass
class Unknown:
    name: str
    product_id: str | None  # None: a line parameter or an offset
    start: float
    low: float
    high: float
    scale: float
    unit: str
    meaning: str
    identified_by: str


@dataclass
class ThermalFit:
    unknowns: list[Unknown]
    values: np.ndarray
    covariance: np.ndarray | None
    success: bool
    message: str
    nfev: int
    cost: float
    residual_count: int
    sigma: dict[str, float]  # noise per channel, estimated from the residuals
    at_bound: list[str] = field(default_factory=list)

    def value(self, name, product_id=None):
        for u, v in zip(self.unknowns, self.values):
            if u.name == name and u.product_id == product_id:
                return float(v)
        raise KeyError(name)


class LineProblem:
    """The residual function of one line with several products."""

    def __init__(self, line: Line, products: dict[str, Product], observations: dict[str, Observations],
                 start: dict[str, ModelParameters], reflection_of: dict, *, fit_array_offset: bool,
                 fit_moisture_offset: bool, free_line=LINE_THERMAL, initial: dict | None = None,
                 sigma: dict[str, float] | None = None):
        """``start`` holds the defaults (the origin of the coordinates and the priors' centre);
        ``initial`` ({(name, product_id or None): value}, e.g. from the active model) is where
        the optimiser begins, and ``sigma`` the noise per channel it begins weighting with."""
        self.line = line
        self.products = products
        self.obs = observations
        self.models = {pid: LineModel(line, products[pid], start[pid], reflection_of.get(pid)) for pid in observations}
        self._table_cache: dict[tuple[str, float], ProductTables] = {}
        self.unknowns: list[Unknown] = []
        any_pid = next(iter(observations))
        specs = {s.name: s for s in start[any_pid].specs}
        for name in free_line:
            s = specs[name]
            scale = SCALES[name] or max(abs(specs[name].default), 1.0)
            self.unknowns.append(Unknown(name, None, start[any_pid][name], s.low, s.high, scale, s.unit, s.meaning,
                                         s.identified_by))
        for pid in observations:
            pspecs = {s.name: s for s in start[pid].specs}
            for name in PRODUCT_THERMAL[line.kind]:
                s = pspecs[name]
                scale = SCALES[name] or abs(pspecs[name].default) * 0.5
                self.unknowns.append(Unknown(name, pid, start[pid][name], s.low, s.high, scale, s.unit, s.meaning,
                                             s.identified_by))
        for name, flag in (("outfeed_array_offset_k", fit_array_offset), ("moisture_meter_offset_pct", fit_moisture_offset)):
            if flag:
                unit, (lo, hi), scale, meaning = OFFSET_SPECS[name]
                self.unknowns.append(Unknown(name, None, 0.0, lo, hi, scale, unit, meaning,
                                             "QA probe or laboratory samples from the same lots"))
        self.sigma = {ch: nominal for ch, (_, nominal) in CHANNELS.items()}
        for ch, value in (sigma or {}).items():
            if ch in self.sigma and np.isfinite(value) and value > 0:
                self.sigma[ch] = max(float(value), 0.1 * CHANNELS[ch][1])
        self.initial = dict(initial or {})
        self._last = None  # (x and weighting, residuals per product) of the last evaluation

    # -- coordinates ------------------------------------------------------------------------
    def x0(self):
        """Scaled start: the ``initial`` values where given (clipped inside the bounds), else the defaults."""
        x = np.zeros(len(self.unknowns))
        lo, hi = self.bounds()
        for i, u in enumerate(self.unknowns):
            v = self.initial.get((u.name, u.product_id))
            if v is not None and np.isfinite(v):
                x[i] = (v - u.start) / u.scale
        margin = 1e-6 * (hi - lo)
        return np.clip(x, lo + margin, hi - margin)

    def bounds(self):
        lo = [(u.low - u.start) / u.scale for u in self.unknowns]
        hi = [(u.high - u.start) / u.scale for u in self.unknowns]
        return np.array(lo), np.array(hi)

    def values(self, x):
        return np.array([u.start + u.scale * xi for u, xi in zip(self.unknowns, x)])

    def _split(self, values):
        line_vals, prod_vals, offsets = {}, {pid: {} for pid in self.obs}, {}
        for u, v in zip(self.unknowns, values):
            if u.product_id is not None:
                prod_vals[u.product_id][u.name] = float(v)
            elif u.name in OFFSET_SPECS:
                offsets[u.name] = float(v)
            else:
                line_vals[u.name] = float(v)
        return line_vals, prod_vals, offsets

    # -- predictions ----------------------------------------------------------------------------
    def predict(self, values, pid, obs: Observations | None = None):
        """Model predictions per channel for product ``pid`` at parameter ``values``."""
        line_vals, prod_vals, offsets = self._split(values)
        model = self.models[pid]
        overrides = {**line_vals, **prod_vals[pid]}
        shift = overrides.pop("freezing_point_shift_k", None)
        if shift is not None:
            key = (pid, round(shift, 9))
            if key not in self._table_cache:
                if len(self._table_cache) > 64:
                    self._table_cache.clear()
                self._table_cache[key] = ProductTables.build(self.line, self.products[pid], shift)
            model.tables = self._table_cache[key]
        obs = obs or self.obs[pid]
        out = model.run(obs.passages, param_overrides=overrides)
        return channel_predictions(out, offsets)

    def _product_residuals(self, values, pid) -> np.ndarray:
        obs = self.obs[pid]
        pred = self.predict(values, pid)
        parts = []
        for ch, reading in obs.readings.items():
            ok = np.isfinite(reading)
            if ok.any():
                parts.append(np.nan_to_num((pred[ch][ok] - reading[ok]) / self.sigma[ch], nan=1e3))
        return np.concatenate(parts) if parts else np.zeros(0)

    def _prior_residuals(self, x) -> np.ndarray:
        """Weak priors around the first-principles defaults (sd = PRIOR_SD_SCALES × scale).

        They decide nothing the data decide, but keep directions the data cannot see (e.g.
        cavity losses against loss factor at constant load) from wandering to their bounds
        and give every parameter a finite variance.
        """
        return np.asarray(x) / PRIOR_SD_SCALES

    def _base(self, x) -> dict[str, np.ndarray]:
        """Residuals per product at ``x``, kept for the last ``x`` and weighting: the optimiser
        asks for the residuals and then the Jacobian at the same point."""
        key = (np.asarray(x, float).tobytes(), tuple(sorted(self.sigma.items())))
        if self._last is None or self._last[0] != key:
            values = self.values(x)
            self._last = (key, {pid: self._product_residuals(values, pid) for pid in self.obs})
        return self._last[1]

    def residuals(self, x):
        base = self._base(x)
        return np.concatenate([*(base[pid] for pid in self.obs), self._prior_residuals(x)])

    def jacobian(self, x, step: float = 1e-3):
        """Forward differences, recomputing only the products a parameter acts on."""
        base = self._base(x)
        offsets = np.cumsum([0] + [base[p].size for p in self.obs])
        n_data = offsets[-1]
        J = np.zeros((n_data + len(x), len(x)))
        lo, hi = self.bounds()
        for j, u in enumerate(self.unknowns):
            h = step if x[j] + step <= hi[j] else -step
            xj = np.array(x, float)
            xj[j] += h
            vj = self.values(xj)
            for k, pid in enumerate(self.obs):
                if u.product_id is None or u.product_id == pid:
                    J[offsets[k]:offsets[k + 1], j] = (self._product_residuals(vj, pid) - base[pid]) / h
            J[n_data + j, j] = 1.0 / PRIOR_SD_SCALES
        return J

    def residuals_by_channel(self, values):
        out = {}
        for pid, obs in self.obs.items():
            pred = self.predict(values, pid)
            for ch, reading in obs.readings.items():
                ok = np.isfinite(reading) & np.isfinite(pred[ch])
                if ok.any():
                    out.setdefault(ch, []).append(pred[ch][ok] - reading[ok])
        return {ch: np.concatenate(v) for ch, v in out.items()}


def channel_predictions(out, offsets: dict[str, float]) -> dict[str, np.ndarray]:
    """What each channel would read for a model outcome (line sensors carry their offsets)."""
    a = offsets.get("outfeed_array_offset_k", 0.0)
    m = offsets.get("moisture_meter_offset_pct", 0.0)
    temps = out.compartment_temp_c
    moisture = out.outfeed_moisture_pct_wb
    nan = np.full(temps.shape[0], np.nan)
    return {
        "array_mean": out.outfeed_temp_mean_c + a, "array_min": out.outfeed_temp_min_c + a,
        "array_max": out.outfeed_temp_max_c + a,
        "moisture": nan if moisture is None else moisture + m,
        "qa_core": out.core_temp_c, "qa_surface": 0.25 * temps[:, 0] + 0.75 * temps[:, 1],
        "qa_edge": out.hottest_temp_c, "qa_lab": nan if moisture is None else moisture,
    }


def _soft_l1(r: np.ndarray, f_scale: float) -> np.ndarray:
    """scipy's soft-L1 ρ applied to residuals, scaled back: 2 f² (√(1 + (r/f)²) − 1)."""
    z = (r / f_scale) ** 2
    return 2.0 * f_scale ** 2 * (np.sqrt(1.0 + z) - 1.0)


def _reestimate_sigma(problem: LineProblem, x) -> bool:
    """Robust σ (MAD) per channel from the residuals at ``x``; True when one moved beyond chance.

    A move counts when it exceeds SIGMA_SETTLED and twice the sampling error of a MAD
    estimate from n residuals (relative sd ≈ 1/√(0.37·2n): MAD's efficiency of 37 % at the
    normal, Rousseeuw & Croux 1993, from memory), so sparse QA channels do not force passes.
    """
    moved = False
    for ch, r in problem.residuals_by_channel(problem.values(x)).items():
        if r.size >= 10:  # never below a tenth of the nominal
            new = max(1.4826 * float(np.median(np.abs(r - np.median(r)))), 0.1 * CHANNELS[ch][1])
            chance = 2.0 / np.sqrt(0.37 * 2 * r.size)
            moved |= abs(new / problem.sigma[ch] - 1.0) > max(SIGMA_SETTLED, chance)
            problem.sigma[ch] = new
    return moved


def solve(problem: LineProblem, *, max_nfev: int = 60, reweight: bool = True, xtol: float = 1e-6,
          cost_tol: float = COST_TOL) -> ThermalFit:
    """Robust least squares (soft-L1 loss, bounds) with the noise per channel re-estimated.

    The first pass weights the channels with the problem's starting σ (nominal, or the
    active model's); σ is then re-estimated from the residuals (MAD) and a second pass
    runs only when some channel's σ moved by more than SIGMA_SETTLED: a warm start from a
    recent model usually needs one pass. The reported σ is re-estimated at the optimum.

    A pass stops when a step lowers the cost (½ χ² in units of the noise) by less than
    ``cost_tol`` — far below the change of 0.5 that moves a parameter by one standard
    error — or the scaled step is below ``xtol`` (units of each parameter's typical size).
    """
    lo, hi = problem.bounds()
    x = np.clip(problem.x0(), lo, hi)
    res = None
    for attempt in range(2 if reweight else 1):
        cost0 = 0.5 * float(np.sum(_soft_l1(problem.residuals(x), 2.0)))
        ftol = float(np.clip(cost_tol / max(cost0, 1e-12), 1e-10, 1e-4))
        res = least_squares(problem.residuals, x, jac=problem.jacobian, bounds=(lo, hi), loss="soft_l1",
                            f_scale=2.0, max_nfev=max_nfev, x_scale=1.0, xtol=xtol, ftol=ftol)
        x = res.x
        if not reweight:
            break
        moved = _reestimate_sigma(problem, x)
        if not moved:
            break
    J = res.jac
    m, n = J.shape
    cov = None
    try:
        jtj = J.T @ J
        if np.linalg.cond(jtj) < 1e12:
            s2 = 2.0 * res.cost / max(m - n, 1)
            cov_x = np.linalg.inv(jtj) * s2
            S = np.diag([u.scale for u in problem.unknowns])
            cov = S @ cov_x @ S
    except np.linalg.LinAlgError:
        cov = None
    values = problem.values(x)
    width = hi - lo
    at_bound = [u.name + (f" ({u.product_id})" if u.product_id else "")
                for u, xi, l, h, w in zip(problem.unknowns, x, lo, hi, width)
                if min(xi - l, h - xi) < min(1e-3 * w, 1e-3)]  # within 0.001 of a parameter's scale
    return ThermalFit(problem.unknowns, values, cov, bool(res.success), str(res.message), int(res.nfev),
                      float(res.cost), m, dict(problem.sigma), at_bound)
