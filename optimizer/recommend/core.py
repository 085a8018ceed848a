"""Tomorrow's settings for one line × product: the robust optimum and why.

:func:`recommend` resolves the conditions (given, else the recent lots, else the product's
typical values) and their lot-to-lot spread, searches the belt speed and forward power per
zone that meet every target with the stated probability at the least specific energy (or the
most throughput), and explains the answer: margins and probabilities of every target,
binding constraints, a small Pareto front, the change against recent practice with its
saving, and — when nothing is feasible — which constraint fails, by how much, and the
closest compromise. Dryers' air temperature is held at the given value, not optimised.
"""
from __future__ import annotations

import logging
import math
import time
from dataclasses import dataclass, field, fields

import numpy as np
import pandas as pd

from ..config import Economics, Line, Plant, Product
from ..errors import InputError
from ..models import FittedModel
from ..simulate import outcome_record
from ..targets import check_targets
from .practice import RecentPractice, recent_practice_from_samples
from .problem import (CONFIDENCE_RANGE, DEFAULT_BELT_LOAD_RELATIVE_SD, DEFAULT_INFEED_TEMP_SD_C, DEFAULT_SAMPLES,
                      OBJECTIVES, SAMPLES_RANGE, Conditions, ConditionsSpread, RobustProblem)
from .search import Candidate, SearchResult, closest_compromise, from_compromise, pareto_front, search

logger = logging.getLogger(__name__)

CAUTION = ("Advisory only: these settings come from a model of the line. Verify the outfeed with a probe "
           "measurement on the first lot before running on them; microwave/RF installations and food safety "
           "follow local codes and licensed practice.")
#: A target edge binds when the margin the confidence share of samples clears is below this
#: (in the target's unit): about the resolution of a needle probe, or of a moisture analyser.
BINDING_MARGIN = {"K": 0.2, "% points": 0.1}
#: An equipment limit binds when the setting lies within this share of it.
BINDING_LIMIT_SHARE = 0.01
#: Fresh samples for the out-of-sample check of the chosen setting's probability.
CHECK_SAMPLES = 1000
#: Options of the ``[recommend]`` section of the plant description and their allowed ranges.
OPTION_RANGES = {
    "samples": SAMPLES_RANGE,
    "confidence": CONFIDENCE_RANGE,
    "infeed_temp_sd_c": (0.0, 20.0),
    "belt_load_relative_sd": (0.0, 0.5),
    "throughput_floor_share": (0.0, 2.0),
}
#: Without a required throughput (argument, or a plan row with tonnes and hours), the setting
#: must carry at least this share of the recent practice's throughput: a cheaper setting that
#: slows the line down is a different decision, the planner's, not the optimiser's. 0 turns it off.
DEFAULT_THROUGHPUT_FLOOR_SHARE = 1.0


def load_model(plant: Plant, line_id: str, product_id: str) -> FittedModel:
    """The model a recommendation uses for a line × product.

    For now the composition-based cold start, with its wide prior uncertainty; when the
    store exists, the store's active (promoted) model version for this line × product takes
    its place here.

    Raises
    ------
    ConfigError
        Unknown line or product.
    InputError
        The product does not run on the line.
    """
    line, product = plant.line(line_id), plant.product(product_id)
    if product_id not in line.products:
        raise InputError(f"product {product_id} does not run on line {line_id}; its products: "
                         f"{', '.join(line.products)}")
    return FittedModel.cold_start(line, product)


def recommend_arguments(options: dict) -> dict:
    """The ``[recommend]`` options (from :func:`recommend_options`) as arguments of :func:`recommend`."""
    names = {"samples": "samples", "confidence": "confidence", "objective": "objective",
             "infeed_temp_sd_c": "default_infeed_temp_sd_c", "belt_load_relative_sd": "belt_load_relative_sd",
             "throughput_floor_share": "throughput_floor_share"}
    out = {names[k]: v for k, v in options.items() if k in names}
    out.setdefault("throughput_floor_share", DEFAULT_THROUGHPUT_FLOOR_SHARE)
    return out


def throughput_floor(practice: RecentPractice | None, planned_tonnes_per_day: float | None,
                     planned_hours_per_day: float | None, share: float | None):
    """(throughput [kg h⁻¹], its source, a note) a recommendation must carry when none is required
    explicitly; (None, None, None) when there is nothing to go by.

    The plan's tonnes over its hours when both are given; else ``share`` × the recent
    practice's throughput (belt speed × belt load); else none.
    """
    if planned_tonnes_per_day and planned_hours_per_day:
        need = 1000.0 * planned_tonnes_per_day / planned_hours_per_day
        return need, "plan", (f"Required throughput {need:.0f} kg/h: the plan's "
                              f"{planned_tonnes_per_day:g} t in {planned_hours_per_day:g} h.")
    if share and practice is not None and practice.belt_load_kg_per_m and practice.belt_speed_m_per_min:
        recent = 60.0 * practice.belt_speed_m_per_min * practice.belt_load_kg_per_m
        need = share * recent
        return need, "recent practice", (
            f"Required throughput {need:.0f} kg/h: {share:.0%} of the recent practice's {recent:.0f} kg/h "
            "(recommend.throughput_floor_share; a plan row with tonnes and hours sets it instead).")
    return None, None, None


def recommend_options(plant: Plant) -> dict:
    """The ``[recommend]`` section of a plant description, checked (unknown keys and ranges)."""
    raw = dict(plant.sections.get("recommend", {}))
    out = {}
    for key, value in raw.items():
        if key == "objective":
            if value not in OBJECTIVES:
                raise InputError(f"{plant.source}: recommend.objective '{value}' is not one of: "
                                 f"{', '.join(OBJECTIVES)}")
            out[key] = value
            continue
        if key not in OPTION_RANGES:
            raise InputError(f"{plant.source}: recommend.{key} is not a known option; allowed: "
                             f"{', '.join(sorted([*OPTION_RANGES, 'objective']))}")
        lo, hi = OPTION_RANGES[key]
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not lo <= value <= hi \
                or (key == "samples" and not float(value).is_integer()):
            raise InputError(f"{plant.source}: recommend.{key} = {value!r} is outside the allowed range {lo:g}…{hi:g}")
        out[key] = int(value) if key == "samples" else float(value)
    return out


@dataclass
class Recommendation:
    """Settings for one line × product with their prediction, confidence and explanation."""

    line_id: str
    product_id: str
    feasible: bool
    objective: str
    confidence: float
    belt_speed_m_per_min: float | None  # the setting (or, when infeasible, the closest compromise)
    zone_forward_kw: tuple[float, ...] | None
    predicted: dict  # as ``simulate`` reports it, at the nominal conditions and parameter values
    predicted_interval_5_95: dict  # each predicted quantity's 5 and 95 % points under the samples
    targets: dict  # per target: value, margin, probability, margin at the confidence
    probability_in_spec: float | None  # share of the common samples with every target met
    probability_check: dict  # the same on fresh samples, with its standard error
    specific_energy_kwh_per_t: float | None
    throughput_kg_per_h: float | None
    electric_kw: float | None
    binding_constraints: list[dict]
    pareto_front: list[dict]
    recent_practice: dict | None
    savings: dict | None
    infeasible: dict | None
    model_version: int | None
    model_status: str
    inputs: dict
    search: dict
    notes: list[str] = field(default_factory=list)
    caution: str = CAUTION

    def settings_text(self) -> str:
        """The setting as an operator keys it in."""
        if self.belt_speed_m_per_min is None:
            return "no setting"
        zones = ", ".join(f"zone {i} {p:g} kW" for i, p in enumerate(self.zone_forward_kw, start=1))
        text = f"belt speed {self.belt_speed_m_per_min:g} m/min; {zones}"
        if self.inputs.get("power_follows_load"):
            load = self.inputs["conditions"]["belt_load_kg_per_m"]
            text += f" (at {load:g} kg/m belt load; the line scales the zone powers with the measured load)"
        return text

    def to_json(self) -> dict:
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["zone_forward_kw"] = None if self.zone_forward_kw is None else list(self.zone_forward_kw)
        out["settings_text"] = self.settings_text()
        return out


def recommend(line: Line, product: Product, fitted: FittedModel, *, conditions=None, conditions_spread=None,
              min_throughput_kg_per_h: float | None = None, objective: str = "energy", confidence: float = 0.95,
              recent_practice=None, economics: Economics | None = None,
              planned_tonnes_per_day: float | None = None, planned_hours_per_day: float | None = None,
              samples: int = DEFAULT_SAMPLES,
              belt_load_relative_sd: float = DEFAULT_BELT_LOAD_RELATIVE_SD,
              default_infeed_temp_sd_c: float = DEFAULT_INFEED_TEMP_SD_C,
              throughput_floor_share: float | None = None,
              rng: np.random.Generator) -> Recommendation:
    """Belt speed and forward power per zone that meet every target with probability ≥ ``confidence``.

    Parameters
    ----------
    line, product
        From the plant description; the product must run on the line.
    fitted : FittedModel
        The line × product model; its parameter distribution (``fitted.sample``) is the
        uncertainty the confidence covers, with the spread of the infeed conditions.
    conditions : Conditions or dict, optional
        ``infeed_temp_c`` [°C], ``belt_load_kg_per_m`` [kg m⁻¹], ``air_temp_c`` [°C],
        ``infeed_moisture_pct_wb`` [% wb], ``air_rh_pct`` [%]; missing ones come from the recent
        lots (infeed temperature, belt load), else from ``product.typical``.
    conditions_spread : ConditionsSpread or dict, optional
        Lot-to-lot sd of infeed temperature [K] and belt load [kg m⁻¹]; missing ones come from
        the recent lots (≥ 3 lots), else ``default_infeed_temp_sd_c`` and
        ``belt_load_relative_sd`` × belt load.
    min_throughput_kg_per_h : float, optional
        Required throughput [kg h⁻¹] at the nominal belt load. When not given, see
        ``throughput_floor_share``.
    objective : {'energy', 'throughput'}
        Least specific electric energy [kWh t⁻¹], or most throughput (ties: least energy).
    confidence : float
        Probability [0.5…0.999] with which every target must hold.
    recent_practice : RecentPractice, dict or DataFrame, optional
        What operators ran recently (a DataFrame of canonical log rows is summarised with
        :func:`recent_practice_from_samples`).
    economics : Economics, optional
        Price and CO₂ factors for the savings (default: ``Economics()``).
    planned_tonnes_per_day, planned_hours_per_day : float, optional
        Planned volume for the savings [t d⁻¹], or planned running hours [h d⁻¹] at the
        recommended throughput; default the recent practice's volume.
    samples : int
        Common samples of parameters and conditions [50…5000].
    throughput_floor_share : float, optional
        Without ``min_throughput_kg_per_h``: require the plan's tonnes over hours when both
        are given, else this share of the recent practice's throughput (:func:`throughput_floor`).
        None or 0: no floor from practice (the objective alone decides the belt speed).
    rng : numpy.random.Generator
        Source of every random number (samples, screen, local search, check).

    Returns
    -------
    Recommendation
        ``feasible`` False when no setting meets the targets; ``infeasible`` then names the
        constraint, the shortfall and the closest compromise, whose setting is reported.

    Raises
    ------
    InputError
        An option outside its range, a product not run on the line, contradictory targets.

    Notes
    -----
    The search is described in :mod:`optimizer.recommend.search`: a Sobol screen of rays
    stratified by belt speed, a shrinking local screen around the best three, an exact line
    search under every sample, and power steps settled by checking the neighbouring steps.
    Every reported setting has been checked on all samples; the probability is also checked
    on ``CHECK_SAMPLES`` fresh ones (``probability_check``).
    """
    practice = _as_practice(recent_practice, line, product)
    conds = resolve_conditions(product, conditions, practice)
    spread = resolve_spread(conds, conditions_spread, practice, default_infeed_temp_sd_c, belt_load_relative_sd)
    floor_source = floor_note = None
    if min_throughput_kg_per_h is None:
        min_throughput_kg_per_h, floor_source, floor_note = throughput_floor(
            practice, planned_tonnes_per_day, planned_hours_per_day, throughput_floor_share)
    problem = RobustProblem.build(line, product, fitted, conditions=conds, spread=spread, confidence=confidence,
                                  objective=objective, min_throughput_kg_per_h=min_throughput_kg_per_h,
                                  n_samples=samples, rng=rng)
    rec = recommend_problem(problem, recent_practice=practice, economics=economics,
                            planned_tonnes_per_day=planned_tonnes_per_day,
                            planned_hours_per_day=planned_hours_per_day, rng=rng)
    if floor_note:
        rec.notes.insert(0, floor_note)
        rec.inputs["min_throughput_source"] = floor_source
    return rec


def recommend_problem(problem: RobustProblem, *, recent_practice=None, economics: Economics | None = None,
                      planned_tonnes_per_day: float | None = None, planned_hours_per_day: float | None = None,
                      rng: np.random.Generator) -> Recommendation:
    """:func:`recommend` on a problem already built (its samples fixed): for tests that compare
    the search with :func:`~optimizer.recommend.search.dense_search` on the same samples."""
    started = time.perf_counter()
    line, product = problem.line, problem.product
    practice = _as_practice(recent_practice, line, product)
    objective, min_throughput_kg_per_h = problem.objective, problem.min_throughput_kg_per_h
    notes = _notes(problem)
    v_lo, v_hi = problem.speed_bounds_m_per_min
    infeasible = None
    result = None
    chosen: Candidate | None = None
    belt_limited = v_lo > v_hi * (1 + 1e-12)
    if not belt_limited:
        result = search(problem, rng)
        chosen = result.best
    if chosen is None and min_throughput_kg_per_h is not None:
        infeasible, chosen = _throughput_infeasible(problem, rng, belt_limited)
    if chosen is None:  # the targets fail at any throughput
        free = problem.with_objective(objective, None)
        free_result = result if not belt_limited else search(free, rng)
        info, chosen = _targets_infeasible(free, free_result, rng)
        rescued = from_compromise(free, free_result, chosen) if min_throughput_kg_per_h is None else None
        if rescued is not None:  # the search missed a sliver the compromise search found
            logger.info("recommend %s × %s: the screen missed a feasible sliver; taken from the compromise",
                        line.line_id, product.product_id)
            result = SearchResult(rescued, free_result.pool, free_result.rays, free_result.deviation)
            chosen, info = rescued, None
        elif infeasible is not None:
            info["message"] = infeasible["message"] + " " + info["message"]
        infeasible = info
    front = pareto_front(problem, result) if (result is not None and result.best is not None) else []
    if objective == "energy" and front and infeasible is None:
        cheapest = min(front, key=lambda c: c.objective)  # the front's faster bands can beat a local optimum
        if cheapest.objective < chosen.objective:
            chosen = cheapest
    if len(front) == 1:
        notes.append("No energy–throughput trade-off to show: " + (
            "no faster setting met the targets at the confidence in the screen, so the least-energy setting is "
            "also the highest throughput found." if objective == "energy" else
            "no slower setting in the screen used less energy while meeting the targets at the confidence."))
    rec = _record(problem, chosen, infeasible, front, practice, economics or Economics(),
                  (planned_tonnes_per_day, planned_hours_per_day), notes, rng)
    rec.search["seconds"] = round(time.perf_counter() - started, 3)
    logger.info("recommend %s × %s: %s in %.2f s", line.line_id, product.product_id,
                "feasible" if rec.feasible else "infeasible", rec.search["seconds"])
    return rec


# ----------------------------------------------------------------------------- inputs

def resolve_conditions(product: Product, conditions, practice: RecentPractice | None) -> Conditions:
    """Given values first, then the recent lots (infeed temperature, belt load), then typical values."""
    given = _as_mapping(conditions, Conditions, "conditions")
    typ = product.typical
    recent = {"infeed_temp_c": practice.infeed_temp_c, "belt_load_kg_per_m": practice.belt_load_kg_per_m} \
        if practice is not None else {}
    values = {}
    for f in fields(Conditions):
        for source in (given, recent):
            if source.get(f.name) is not None:
                values[f.name] = float(source[f.name])
                break
        else:
            values[f.name] = getattr(typ, f.name)
    return Conditions(**values)


def resolve_spread(conds: Conditions, spread, practice: RecentPractice | None, default_temp_sd_c: float,
                   load_relative_sd: float) -> ConditionsSpread:
    given = _as_mapping(spread, ConditionsSpread, "conditions_spread")
    recent = {"infeed_temp_sd_c": practice.infeed_temp_sd_c,
              "belt_load_sd_kg_per_m": practice.belt_load_sd_kg_per_m} if practice is not None else {}
    defaults = {"infeed_temp_sd_c": default_temp_sd_c,
                "belt_load_sd_kg_per_m": load_relative_sd * conds.belt_load_kg_per_m}
    values = {}
    for name in ("infeed_temp_sd_c", "belt_load_sd_kg_per_m"):
        values[name] = float(next(s[name] for s in (given, recent, defaults) if s.get(name) is not None))
    return ConditionsSpread(**values)


def _as_mapping(value, cls, option: str) -> dict:
    if value is None:
        return {}
    if isinstance(value, cls):
        return dict(value.__dict__)
    if not isinstance(value, dict):
        raise InputError(f"{option} must be a {cls.__name__} or a dict, not {type(value).__name__}")
    allowed = {f.name for f in fields(cls)}
    unknown = set(value) - allowed
    if unknown:
        raise InputError(f"{option}: unknown key(s) {', '.join(sorted(unknown))}; "
                         f"allowed: {', '.join(sorted(allowed))}")
    for k, v in value.items():
        if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v)):
            raise InputError(f"{option}.{k} must be a number, not {v!r}")
    return dict(value)


def _as_practice(value, line: Line, product: Product) -> RecentPractice | None:
    if value is None or isinstance(value, RecentPractice):
        return value
    if isinstance(value, pd.DataFrame):
        return recent_practice_from_samples(value, line, product)
    if isinstance(value, dict):
        return RecentPractice.from_mapping(value, line)
    raise InputError(f"recent_practice must be a RecentPractice, a dict or a DataFrame of log rows, "
                     f"not {type(value).__name__}")


def _notes(problem: RobustProblem) -> list[str]:
    notes = []
    if problem.fitted.status == "cold_start":
        notes.append("The model is a cold start (composition-based defaults with a wide uncertainty); a model "
                     "fitted to this line's logs narrows it and usually widens what is feasible.")
    if problem.line.power_follows_load:
        notes.append(f"Zone powers are given for a belt load of {problem.conditions.belt_load_kg_per_m:g} kg/m; "
                     f"line {problem.line.line_id} scales them with the measured load (power_follows_load), "
                     "and the probability in spec counts on it. Where the controls do not follow the load, "
                     "set power_follows_load = false: lot-to-lot load then spreads the outfeed more.")
    if problem.line.kind == "drying":
        notes.append(f"Tunnel air temperature is held at {problem.conditions.air_temp_c:g} °C; it is not "
                     "a decision variable of this recommendation.")
    return notes


# ----------------------------------------------------------------------------- infeasible

def _throughput_infeasible(problem: RobustProblem, rng, belt_limited: bool):
    """The required throughput cannot be met: report the most that is reachable at the targets.

    Returns (info, the highest-throughput feasible setting or None when the targets fail at
    any throughput; info then only says why the throughput is out of reach).
    """
    need = problem.min_throughput_kg_per_h
    load = problem.conditions.belt_load_kg_per_m
    if belt_limited:
        why = (f"min_throughput_kg_per_h {need:g} kg/h is above what the belt carries at {load:g} kg/m: "
               f"{problem.belt_capacity_kg_per_h:.0f} kg/h at the top belt speed of "
               f"{problem.line.belt_speed_max_m_per_min:g} m/min")
    else:
        why = (f"min_throughput_kg_per_h {need:g} kg/h cannot be met together with the targets at "
               f"{problem.confidence:.0%} confidence within the power ratings")
    best = search(problem.with_objective("throughput", None), rng).best
    if best is None:
        return {"constraint": "min_throughput_kg_per_h", "required": need, "unit": "kg/h", "message": why + "."}, None
    reach = float(best.scored.nominal.outcome.throughput_kg_per_h[best.index])
    if reach >= need:  # the constrained screen missed a narrow feasible region the throughput search found
        # a search detail, not the user's problem (the result is feasible): the log keeps it
        logger.info("recommend %s × %s: the screen at %.0f kg/h found nothing; the fastest setting that meets "
                    "the targets (%.0f kg/h) is taken", problem.line.line_id, problem.product.product_id, need, reach)
        return None, best
    info = {"constraint": "min_throughput_kg_per_h", "required": need, "reachable": round(reach, 1),
            "shortfall": round(need - reach, 1), "unit": "kg/h",
            "message": f"{why}; the most that meets the targets is {reach:.0f} kg/h "
                       f"({need - reach:.0f} kg/h short). The setting shown is that compromise.",
            "compromise": "the highest throughput that meets every target at the confidence"}
    return info, best


def _targets_infeasible(problem: RobustProblem, result: SearchResult, rng):
    """No setting meets the targets: name the weakest edge, how far it misses, the reachable tolerance."""
    cand = closest_compromise(problem, result, rng)
    margins = cand.scored.margins[cand.index]  # (S, J)
    q = problem.quantile_margins(margins)
    j = int(np.argmin(q))
    edge = problem.edges[j]
    widen = _reachable_widening(problem, margins, edge.target)
    tg = problem.product.targets
    # widening a target by δ: a tolerance grows by δ, the hottest limit rises, the coldest falls
    relax = {"core_temp_c": ("core_tol_c", tg.core_tol_c, +1), "outfeed_moisture_pct_wb": ("moisture_tol_pct",
             tg.moisture_tol_pct, +1), "max_temp_c": ("max_temp_c", tg.max_temp_c, +1),
             "min_temp_c": ("min_temp_c", tg.min_temp_c, -1)}.get(edge.target)
    reachable = None
    if relax is not None and relax[1] is not None and math.isfinite(widen):
        name, value, sign = relax
        relaxed = value + sign * widen  # rounded outwards, so that the stated value does hold
        relaxed = math.ceil(relaxed * 1000 - 1e-6) / 1000 if sign > 0 else math.floor(relaxed * 1000 + 1e-6) / 1000
        reachable = {"target": name, "value": relaxed, "unit": "°C" if name.endswith("temp_c") else edge.unit}
    share = float(problem.in_spec_share(margins[:, [j]]))
    message = (f"No setting meets every target with {problem.confidence:.0%} probability. {edge.label} fails: at "
               f"the closest compromise it holds in {share:.0%} of samples and misses by {-q[j]:.2f} {edge.unit} at "
               f"the confidence; all targets together hold with {cand.probability:.0%} at best there.")
    if reachable is not None:
        message += (f" Reachable at the confidence with this setting: {reachable['target']} = "
                    f"{reachable['value']:g} {reachable['unit']}.")
    info = {"constraint": edge.target, "edge": edge.edge, "shortfall": round(float(-q[j]), 3), "unit": edge.unit,
            "best_probability": round(cand.probability, 4), "reachable_target": reachable, "message": message,
            "compromise": "the setting that comes closest to meeting every target at the confidence"}
    return info, cand


def _reachable_widening(problem: RobustProblem, margins: np.ndarray, target: str) -> float:
    """Smallest widening δ of one target (both its edges, in its unit) that brings the share to the confidence."""
    own = np.array([e.target == target for e in problem.edges])
    others_ok = (margins[:, ~own] >= 0).all(axis=1) if (~own).any() else np.ones(margins.shape[0], bool)
    need = np.where(others_ok, np.maximum(-margins[:, own].min(axis=1), 0.0), np.inf)
    k = problem.needed_in_spec - 1
    return float(np.sort(need)[k])


# ----------------------------------------------------------------------------- the record

def _record(problem: RobustProblem, cand: Candidate | None, infeasible, front, practice, economics,
            planned, notes, rng) -> Recommendation:
    inputs = {"conditions": problem.conditions.to_json(), "conditions_spread": problem.spread.to_json(),
              "min_throughput_kg_per_h": problem.min_throughput_kg_per_h, "samples": problem.n_samples,
              "decision_variables": ["belt_speed_m_per_min", "zone_forward_kw"],
              "held": {"air_temp_c": problem.conditions.air_temp_c},
              "power_follows_load": bool(problem.line.power_follows_load)}
    search_info = {"evaluations": dict(problem.evaluations)}
    common = dict(line_id=problem.line.line_id, product_id=problem.product.product_id, objective=problem.objective,
                  confidence=problem.confidence, model_version=problem.fitted.version_id,
                  model_status=problem.fitted.status, inputs=inputs, search=search_info, notes=notes,
                  recent_practice=None if practice is None else practice.to_json())
    if cand is None:
        return Recommendation(feasible=False, belt_speed_m_per_min=None, zone_forward_kw=None, predicted={},
                              predicted_interval_5_95={}, targets={}, probability_in_spec=None,
                              probability_check={}, specific_energy_kwh_per_t=None, throughput_kg_per_h=None,
                              electric_kw=None, binding_constraints=[], pareto_front=[], savings=None,
                              infeasible=infeasible, **common)
    speed = float(cand.speed)  # already keyed: checked as the operator will enter it
    powers = tuple(float(p) for p in cand.powers)
    nominal = problem.nominal(np.array([speed]), np.array([powers]))
    record = outcome_record(problem.model, nominal.outcome, 0)
    s = problem.n_samples
    rows = slice(cand.index * s, (cand.index + 1) * s)
    sampled = {k: getattr(cand.scored.outcome, k)[rows] for k in record["predicted"]}
    interval = {k: [round(float(np.percentile(v, 5)), 3), round(float(np.percentile(v, 95)), 3)]
                for k, v in sampled.items()}
    check = problem.resampled(CHECK_SAMPLES, rng).robust(np.array([speed]), np.array([powers]))
    p_check = float(check.probability[0])
    rec = Recommendation(
        feasible=infeasible is None, belt_speed_m_per_min=speed, zone_forward_kw=powers,
        predicted=record["predicted"], predicted_interval_5_95=interval,
        targets=_target_report(problem, nominal, cand),
        probability_in_spec=round(cand.probability, 4),
        probability_check={"samples": CHECK_SAMPLES, "probability": round(p_check, 4),
                           "standard_error": round(math.sqrt(max(p_check * (1 - p_check), 1e-12) / CHECK_SAMPLES), 4)},
        specific_energy_kwh_per_t=record["specific_energy_kwh_per_t"],
        throughput_kg_per_h=record["throughput_kg_per_h"],
        electric_kw=record["electric_kw"], binding_constraints=_binding(problem, cand),
        pareto_front=[_front_point(c) for c in front], savings=None, infeasible=infeasible, **common)
    if practice is not None:
        rec.savings = _savings(problem, rec, practice, economics, planned, notes)
    return rec


def _target_report(problem: RobustProblem, nominal, cand: Candidate) -> dict:
    s = problem.n_samples
    out = cand.scored.outcome
    rows = slice(cand.index * s, (cand.index + 1) * s)
    sampled_checks = {c.name: c for c in check_targets(problem.product, _slice_outcome(out, rows))}
    q = problem.quantile_margins(cand.scored.margins[cand.index])
    report = {}
    for c in check_targets(problem.product, nominal.outcome):
        sc = sampled_checks[c.name]
        cols = [j for j, e in enumerate(problem.edges) if e.target == c.name]
        report[c.name] = {
            "target": c.limit_text, "unit": c.unit, "value": round(float(c.value[0]), 3),
            "margin": round(float(c.margin[0]), 3),
            "probability": round(float(sc.met.mean()), 4),
            "margin_at_confidence": round(float(min(q[j] for j in cols)), 3),
            "value_interval_5_95": [round(float(np.percentile(sc.value, 5)), 3),
                                    round(float(np.percentile(sc.value, 95)), 3)],
        }
    return report


def _slice_outcome(out, rows: slice):
    n = out.belt_speed_m_per_min.shape[0]
    values = {k: (v[rows] if isinstance(v, np.ndarray) and v.ndim >= 1 and v.shape[0] == n else v)
              for k, v in out.__dict__.items()}
    return type(out)(**values)


def _binding(problem: RobustProblem, cand: Candidate) -> list[dict]:
    """Targets whose margin at the confidence is within ``BINDING_MARGIN``, limits within 1 %."""
    out = []
    q = problem.quantile_margins(cand.scored.margins[cand.index])
    for j, e in enumerate(problem.edges):
        if q[j] <= BINDING_MARGIN.get(e.unit, 0.2):
            out.append({"name": e.target, "kind": "target", "edge": e.edge,
                        "detail": f"{e.label}: margin {q[j]:+.2f} {e.unit} at {problem.confidence:.0%} confidence"})
    line = problem.line
    step = line.power_step_kw or 0.0
    for i, (p, rating) in enumerate(zip(cand.powers, line.zone_max_kw), start=1):
        if p >= rating - max(step, BINDING_LIMIT_SHARE * rating):
            out.append({"name": f"zone{i}_forward_kw", "kind": "limit",
                        "detail": f"zone {i} at its rating {rating:g} kW"})
    if cand.powers.sum() >= line.total_power_cap_kw - max(step, BINDING_LIMIT_SHARE * line.total_power_cap_kw):
        out.append({"name": "total_power_cap_kw", "kind": "limit",
                    "detail": f"total forward power at the cap {line.total_power_cap_kw:g} kW"})
    span = line.belt_speed_max_m_per_min - line.belt_speed_min_m_per_min
    if cand.speed <= line.belt_speed_min_m_per_min + BINDING_LIMIT_SHARE * span:
        out.append({"name": "belt_speed_min_m_per_min", "kind": "limit",
                    "detail": f"belt at its slowest, {line.belt_speed_min_m_per_min:g} m/min"})
    if cand.speed >= line.belt_speed_max_m_per_min - BINDING_LIMIT_SHARE * span:
        out.append({"name": "belt_speed_max_m_per_min", "kind": "limit",
                    "detail": f"belt at its fastest, {line.belt_speed_max_m_per_min:g} m/min"})
    v_lo = problem.speed_bounds_m_per_min[0]
    at_required = v_lo * (1 - 1e-9) <= cand.speed <= v_lo * (1 + BINDING_LIMIT_SHARE)
    if problem.min_throughput_kg_per_h is not None and at_required:
        out.append({"name": "min_throughput_kg_per_h", "kind": "limit",
                    "detail": f"throughput at the required {problem.min_throughput_kg_per_h:g} kg/h"})
    return out


def _front_point(c: Candidate) -> dict:
    o = c.scored.nominal.outcome
    return {"belt_speed_m_per_min": round(c.speed, 4), "zone_forward_kw": [round(float(p), 3) for p in c.powers],
            "specific_energy_kwh_per_t": round(float(o.specific_energy_kwh_per_t[c.index]), 3),
            "throughput_kg_per_h": round(float(o.throughput_kg_per_h[c.index]), 1),
            "probability_in_spec": round(c.probability, 4)}


def _savings(problem: RobustProblem, rec: Recommendation, practice: RecentPractice, economics: Economics,
             planned: tuple[float | None, float | None], notes) -> dict:
    """Recent median settings through the same model at the same conditions, against the recommendation."""
    speed = np.array([practice.belt_speed_m_per_min])
    powers = np.array([practice.zone_forward_kw])
    checked = problem.robust(speed, powers)
    predicted = float(checked.nominal.outcome.specific_energy_kwh_per_t[0])
    per_t = predicted - rec.specific_energy_kwh_per_t
    tonnes, hours = planned
    if tonnes is None and hours is not None:
        tonnes = hours * rec.throughput_kg_per_h / 1000.0
    if tonnes is None:
        tonnes = practice.tonnes_per_day
    out = {"recent_belt_speed_m_per_min": practice.belt_speed_m_per_min,
           "recent_zone_forward_kw": list(practice.zone_forward_kw),
           "recent_specific_energy_measured_kwh_per_t": practice.specific_energy_kwh_per_t,
           "recent_specific_energy_predicted_kwh_per_t": round(predicted, 3),
           "recent_probability_in_spec": round(float(checked.probability[0]), 4),
           "change_belt_speed_m_per_min": round(rec.belt_speed_m_per_min - practice.belt_speed_m_per_min, 4),
           "change_zone_forward_kw": [round(a - b, 3) for a, b in zip(rec.zone_forward_kw, practice.zone_forward_kw)],
           "saving_kwh_per_t": round(per_t, 3), "planned_tonnes_per_day": tonnes,
           "basis": "the model's prediction of both settings at the same conditions"}
    if tonnes is not None:
        per_day = per_t * tonnes
        per_year = per_day * economics.operating_days_per_year
        out.update({"saving_kwh_per_day": round(per_day, 1), "saving_kwh_per_year": round(per_year, 0),
                    "saving_money_per_year": round(per_year * economics.electricity_price_per_kwh, 0),
                    "currency": economics.currency,
                    "saving_co2_kg_per_year": round(per_year * economics.co2_kg_per_kwh, 0)})
    else:
        notes.append("No planned volume and none from recent runs: savings are given per tonne only.")
    if per_t < 0:
        p = checked.probability[0]
        why = (f"recent practice meets every target in only {p:.0%} of samples, below the required "
               f"{problem.confidence:.0%}: the extra energy buys that confidence") if p < problem.confidence else \
              ("recent practice also meets the targets at the confidence and is predicted to use less energy; "
               "the search did not reach it — run it with the recent settings as a check")
        notes.append(f"The recommendation uses {-per_t:.2f} kWh/t more than recent practice: {why}.")
    return out
