"""Fitting a line: electric and reflection relations, thermal parameters, validation, drift.

``fit_line`` composes the steps for every product of one line and returns a
:class:`LineFitReport`: per product a :class:`~optimizer.models.FittedModel` with
uncertainties, its scores on the newest lots (held out by time) against two baselines
(the model at its composition-based defaults, and a linear regression on the
settings), identifiability warnings, and the line's efficiency drift over time.
"""
from __future__ import annotations

import logging
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..config import Line, Plant
from ..errors import ConfigError, DataError
from ..line import LineModel, ModelParameters
from ..models import FittedModel
from .data import CHANNELS, LINE_CHANNELS, Observations, build_observations, find_lots, line_record
from .electric import fit_electric, fit_reflection, meter_intervals
from .thermal import LINE_THERMAL, PRODUCT_THERMAL, LineProblem, channel_predictions, solve

log = logging.getLogger(__name__)

DEFAULTS = {
    "holdout_fraction": 0.2,  # newest share of each product's lots kept for validation
    "min_lots": 3,  # fewer lots than this: the product keeps its cold-start model
    "observations_per_lot": 25,
    "max_observations": 600,  # per product: long histories thin out per lot (down to PER_LOT_STEPS[0])
    "max_lots_per_product": 120,  # the thermal fit uses each product's newest lots
    "history_days": 90.0,  # the store's samples read for a fit: this many days before the newest (0: all)
    "max_evaluations": 60,
    "drift_window_days": 7.0,
    "drift_threshold_pct": 3.0,  # generator efficiency change that raises an alert
    "correlation_warning": 0.95,
    "warm_start": True,  # begin at the active models' values and noise (same priors, same optimum, fewer steps)
}


@dataclass
class ChannelScore:
    mae: float
    bias: float
    n: int


@dataclass
class ProductFit:
    product_id: str
    model: FittedModel
    status: str  # fitted | cold_start
    message: str
    converged: bool
    lots_train: list[str] = field(default_factory=list)
    lots_holdout: list[str] = field(default_factory=list)
    scores: dict[str, dict[str, ChannelScore]] = field(default_factory=dict)  # model|defaults|linear
    parameters: list[dict] = field(default_factory=list)
    correlations: dict[str, dict[str, float]] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    beats_baselines: bool | None = None
    data_span: tuple[str, str] | None = None
    observations: int = 0
    holdout: list[dict] = field(default_factory=list)  # time, channel, measured, predicted on held-out lots

    def summary(self) -> dict:
        """Plain-JSON record of the fit (archived with the model version)."""
        return {
            "product_id": self.product_id, "status": self.status, "message": self.message,
            "converged": self.converged, "lots_train": self.lots_train, "lots_holdout": self.lots_holdout,
            "scores": {k: {ch: vars(s) for ch, s in v.items()} for k, v in self.scores.items()},
            "parameters": self.parameters, "correlations": self.correlations, "warnings": self.warnings,
            "beats_baselines": self.beats_baselines, "data_span": list(self.data_span) if self.data_span else None,
            "observations": self.observations, "model": self.model.to_json(), "holdout": self.holdout,
        }


@dataclass
class LineFitReport:
    line_id: str
    products: dict[str, ProductFit]
    electric: dict | None
    drift: list[dict]
    alerts: list[dict]
    thermal: dict | None


def _scores(pred: dict[str, np.ndarray], obs: Observations) -> dict[str, ChannelScore]:
    out = {}
    for ch in LINE_CHANNELS:
        reading = obs.readings[ch]
        ok = np.isfinite(reading) & np.isfinite(pred[ch])
        if ok.sum() >= 3:
            err = pred[ch][ok] - reading[ok]
            out[ch] = ChannelScore(float(np.mean(np.abs(err))), float(np.mean(err)), int(ok.sum()))
    return out


def _holdout_table(pred: dict[str, np.ndarray], obs: Observations, limit: int = 3000) -> list[dict]:
    """Measured and predicted on the held-out lots, for the dashboard's fit plots."""
    rows = []
    times = pd.to_datetime(obs.time_s, unit="s", utc=True)
    for ch in LINE_CHANNELS:
        reading = obs.readings[ch]
        ok = np.flatnonzero(np.isfinite(reading) & np.isfinite(pred[ch]))
        rows += [{"time": times[i].isoformat(), "channel": ch, "measured": round(float(reading[i]), 3),
                  "predicted": round(float(pred[ch][i]), 3)} for i in ok]
    return rows[:limit]


def _features(obs: Observations) -> np.ndarray:
    """Settings a data-driven regression would use: specific net energy, infeed and air, time."""
    p = obs.passages
    specific = (p.zone_net_kw * 1e3 * p.dt_s / p.zone_mass_kg).sum(axis=1) / 1e3  # kJ/kg
    return np.column_stack([np.ones(len(obs)), specific, p.infeed_temp_c, p.air_temp_c.mean(axis=1),
                            p.residence_s / 60.0, np.nan_to_num(p.infeed_water_db)])


def _linear_baseline(train: Observations, test: Observations) -> dict[str, np.ndarray]:
    Xtr, Xte = _features(train), _features(test)
    pred = {}
    rows_ok = np.isfinite(Xtr).all(axis=1)
    for ch in CHANNELS:
        y = train.readings[ch]
        ok = np.isfinite(y) & rows_ok
        if ok.sum() > Xtr.shape[1] + 2:
            coef = np.linalg.lstsq(Xtr[ok], y[ok], rcond=None)[0]
            pred[ch] = Xte @ coef
        else:
            pred[ch] = np.full(len(test), np.nan)
    return pred


def _split_lots(obs: Observations, fraction: float) -> tuple[np.ndarray, list[str], list[str]]:
    present = np.unique(obs.lot_index)
    order = present[np.argsort([obs.lots[k].start_s for k in present])]
    n_hold = max(1, int(round(fraction * order.size))) if order.size >= 2 else 0
    held = set(order[order.size - n_hold:].tolist())
    mask = np.isin(obs.lot_index, list(held))
    names = lambda ks: [obs.lots[k].lot_id for k in ks]  # noqa: E731
    return mask, names([k for k in order if k not in held]), names(sorted(held))


def bootstrap_over_lots(problem, result, train: dict, start: dict, rounds: int, rng) -> list[float | None]:
    """Standard errors from refits on lots drawn with replacement (each product's lots resampled).

    Each refit starts at the fit's optimum (few evaluations) and keeps its noise estimates;
    lots, not samples, are resampled because samples within a lot are not independent.
    """
    from .thermal import LineProblem

    draws = []
    names = [(u.name, u.product_id) for u in problem.unknowns]
    for _ in range(rounds):
        resampled = {}
        for pid, obs in train.items():
            lots = np.unique(obs.lot_index)
            pick = rng.choice(lots, size=lots.size, replace=True)
            parts = [np.flatnonzero(obs.lot_index == k) for k in pick]
            resampled[pid] = obs.take_rows(np.concatenate(parts))
        begin = {pid: start[pid].with_values(**{n: float(v) for (n, owner), v in zip(names, result.values)
                                                if owner in (None, pid) and n in start[pid].values})
                 for pid in resampled}
        again = LineProblem(problem.line, problem.products, resampled, begin,
                            {pid: m.reflection for pid, m in problem.models.items()},
                            fit_array_offset="outfeed_array_offset_k" in dict(names),
                            fit_moisture_offset="moisture_meter_offset_pct" in dict(names))
        again.sigma = dict(result.sigma)
        refit = solve(again, max_nfev=25, reweight=False)
        draws.append([refit.value(n, owner) for n, owner in names])
    d = np.asarray(draws)
    return [float(x) for x in d.std(axis=0, ddof=1)] if rounds > 1 else [None] * len(names)


def _parameter_table(unknowns, values, cov, corr_limit) -> tuple[list[dict], dict, list[tuple[set, str]]]:
    """Parameter rows with 95 % intervals, correlations, and warnings tagged with the products they concern."""
    se = np.sqrt(np.clip(np.diag(cov), 0, None)) if cov is not None else np.full(len(values), np.nan)
    rows, warnings = [], []
    corr = {}
    if cov is not None:
        d = np.where(se > 0, se, 1.0)
        c = cov / np.outer(d, d)
    for i, (u, v) in enumerate(zip(unknowns, values)):
        label = u.name if u.product_id is None else f"{u.name} ({u.product_id})"
        rows.append({"name": u.name, "product_id": u.product_id, "unit": u.unit, "value": float(v),
                     "stderr": float(se[i]) if np.isfinite(se[i]) else None,
                     "low95": float(v - 1.96 * se[i]) if np.isfinite(se[i]) else None,
                     "high95": float(v + 1.96 * se[i]) if np.isfinite(se[i]) else None,
                     "bounds": [u.low, u.high], "meaning": u.meaning})
        if cov is None:
            continue
        if se[i] > 2.0 * u.scale:
            warnings.append(({u.product_id}, f"{label}: the data hardly determine it (±{1.96 * se[i]:.3g} "
                                              f"{u.unit}); {u.identified_by} would"))
        corr[label] = {}
        for j, w in enumerate(unknowns):
            if j != i:
                other = w.name if w.product_id is None else f"{w.name} ({w.product_id})"
                corr[label][other] = float(c[i, j])
                if j > i and abs(c[i, j]) > corr_limit:
                    warnings.append(({u.product_id, w.product_id}, f"{label} and {other} are {c[i, j]:+.2f} "
                                     f"correlated: the data cannot tell them apart; {u.identified_by} would"))
    if cov is None:
        warnings.append(({None}, "no uncertainty could be estimated (the data do not determine all parameters)"))
    return rows, corr, warnings


def efficiency_drift(record: pd.DataFrame, line: Line, window_days: float, threshold_pct: float,
                     electric_values: dict | None) -> tuple[list[dict], list[dict]]:
    """Generator efficiency fitted in consecutive windows; an alert when it moved past the threshold."""
    if electric_values is None:
        return [], []
    intervals = meter_intervals(record, line)
    if intervals.empty:
        return [], []
    width = window_days * 86400.0
    start = intervals["start_s"].min()
    points = []
    for k in range(int((intervals["start_s"].max() - start) // width) + 1):
        part = intervals[(intervals["start_s"] >= start + k * width) & (intervals["start_s"] < start + (k + 1) * width)]
        fit = fit_electric(part, line)
        if fit is None or not np.isfinite(fit.values["mains_to_rf_efficiency"]):
            continue
        points.append({"window_start": pd.Timestamp(start + k * width, unit="s", tz="UTC").isoformat(),
                       "mains_to_rf_efficiency": fit.values["mains_to_rf_efficiency"],
                       "stderr": fit.standard_errors["mains_to_rf_efficiency"], "intervals": fit.intervals})
    alerts = []
    if len(points) >= 2:
        first = points[0]["mains_to_rf_efficiency"]
        for p in points[1:]:
            change = 100.0 * (p["mains_to_rf_efficiency"] - first) / first
            if abs(change) > threshold_pct:
                alerts.append({"kind": "drift", "line_id": line.line_id, "parameter": "mains_to_rf_efficiency",
                               "change_pct": round(change, 2), "since": points[0]["window_start"],
                               "window_start": p["window_start"],
                               "message": f"line {line.line_id}: generator efficiency changed {change:+.1f} % "
                                          f"(from {first:.3f} to {p['mains_to_rf_efficiency']:.3f}) by the week of "
                                          f"{p['window_start'][:10]}; check generators and the energy meter"})
                break
    return points, alerts


#: Observations taken per lot come from these steps, so that one more lot rarely changes how
#: every other lot is sampled (which would move the optimum from one night to the next).
PER_LOT_STEPS = (5, 8, 12, 16, 25, 40, 60)


def observations_per_lot(n_lots: int, wanted: int, max_observations: int) -> int:
    """The largest step ≤ ``wanted`` that keeps ``n_lots`` × step within ``max_observations``."""
    fitting = [s for s in PER_LOT_STEPS if s <= max(wanted, PER_LOT_STEPS[0]) and s * max(n_lots, 1) <= max_observations]
    return fitting[-1] if fitting else PER_LOT_STEPS[0]


def fit_options(plant: Plant, options: dict | None = None) -> dict:
    """DEFAULTS, then the plant's ``[fit]`` section, then ``options``; an unknown key is an error
    (a misspelt option would otherwise be ignored without a word)."""
    allowed = {*DEFAULTS, "bootstrap", "bootstrap_seed"}
    for where, given in (("[fit]", plant.sections.get("fit", {})), ("fit options", options or {})):
        unknown = sorted(set(given) - allowed)
        if unknown:
            raise ConfigError(str(plant.source), [f"{where}: unknown option(s) {', '.join(unknown)}; "
                                                  f"allowed: {', '.join(sorted(allowed))}"])
    return {**DEFAULTS, **plant.sections.get("fit", {}), **(options or {})}


def warm_start(incumbents: dict | None, products: list[str]) -> tuple[dict, dict]:
    """Starting values and channel noise from the fitted active models of the products.

    Line parameters and sensor offsets are shared: every product's model carries a copy
    (possibly from fits of different nights), so the start is their median. The priors
    stay at the composition-based defaults; only where the optimiser begins changes.
    """
    fitted = [m for pid, m in (incumbents or {}).items() if pid in products and m.status == "fitted"]
    if not fitted:
        return {}, {}
    initial: dict = {}
    shared: dict[str, list[float]] = {}
    for m in fitted:
        for name in LINE_THERMAL:
            if name in m.values:
                shared.setdefault(name, []).append(float(m.values[name]))
        for name, v in m.sensor_offsets.items():
            shared.setdefault(name, []).append(float(v))
        for names in PRODUCT_THERMAL.values():
            for name in names:
                if name in m.values:
                    initial[(name, m.product_id)] = float(m.values[name])
    for name, vals in shared.items():
        initial[(name, None)] = float(np.median(vals))
    noise: dict[str, list[float]] = {}
    for m in fitted:
        for ch, v in m.noise_sigma.items():
            noise.setdefault(ch, []).append(float(v))
    return initial, {ch: float(np.median(v)) for ch, v in noise.items()}


def fit_line(plant: Plant, line_id: str, samples: pd.DataFrame, qa: pd.DataFrame | None = None,
             options: dict | None = None, products: list[str] | None = None,
             incumbents: dict[str, FittedModel] | None = None) -> LineFitReport:
    """Fit every product of a line (or those named) from its samples and QA readings.

    ``incumbents`` (the active models, by product) are scored on the same held-out lots as
    the new fit (``scores["active"]``), which is what the promotion gate compares.
    """
    opt = fit_options(plant, options)
    line = plant.line(line_id)
    record = line_record(samples, line)
    lots = find_lots(record)
    if not lots:
        raise DataError(f"line {line_id}: the samples hold no lots (no lot_id); nothing to fit")
    wanted = [p for p in line.products if products is None or p in products]
    # electricity and reflection: line-wide
    electric = fit_electric(meter_intervals(record, line), line) if "energy_kwh" in record else None
    reflection = fit_reflection(record, line)
    drift, alerts = efficiency_drift(record, line, opt["drift_window_days"], opt["drift_threshold_pct"],
                                     electric.values if electric else None)
    start, obs_all, fits = {}, {}, {}
    for pid in wanted:
        product = plant.product(pid)
        params = ModelParameters.defaults(line, product)
        if electric:
            params = params.with_values(**{k: v for k, v in electric.values.items()
                                           if k in params.values and np.isfinite(v) and v > 0})
        start[pid] = params
        model = LineModel(line, product, params, reflection)
        mine = [l for l in lots if l.product_id == pid][-int(opt["max_lots_per_product"]):]
        per_lot = observations_per_lot(len(mine), opt["observations_per_lot"], opt["max_observations"])
        obs = build_observations(record, qa, line, product, model, mine, per_lot=per_lot)
        n_lots = 0 if obs is None else np.unique(obs.lot_index).size
        if obs is None or n_lots < opt["min_lots"]:
            cold = FittedModel.cold_start(line, product)
            cold = FittedModel(line_id, pid, {**cold.values, **params.values}, cold.free, cold.covariance,
                               reflection or cold.reflection, {}, "cold_start")
            fits[pid] = ProductFit(pid, cold, "cold_start", f"{n_lots} usable lot(s), fewer than {opt['min_lots']}: "
                                   "the composition-based model is used, marked as cold start", True)
            continue
        obs_all[pid] = obs
    thermal_summary = None
    if obs_all:
        train, test, names = {}, {}, {}
        for pid, obs in obs_all.items():
            held, tr_names, ho_names = _split_lots(obs, opt["holdout_fraction"])
            train[pid], test[pid] = obs.take(~held), obs.take(held)
            names[pid] = (tr_names, ho_names)
        has_qa_temp = any(tr.count("qa_core") + tr.count("qa_surface") >= 5 for tr in train.values())
        has_lab = any(tr.count("qa_lab") >= 5 for tr in train.values())
        initial, sigma0 = warm_start(incumbents, list(train)) if opt["warm_start"] else ({}, {})
        problem = LineProblem(line, {p: plant.product(p) for p in train}, train, start,
                              {p: reflection for p in train}, fit_array_offset=has_qa_temp,
                              fit_moisture_offset=has_lab and line.kind == "drying", initial=initial, sigma=sigma0)
        log.info("line %s: fitting %d parameters to %d observations", line_id, len(problem.unknowns),
                 sum(len(o) for o in train.values()))
        result = solve(problem, max_nfev=opt["max_evaluations"])
        rows, corr, warnings = _parameter_table(problem.unknowns, result.values, result.covariance,
                                                opt["correlation_warning"])
        if int(opt.get("bootstrap", 0)) > 0:
            boot = bootstrap_over_lots(problem, result, train, start, int(opt["bootstrap"]),
                                       np.random.default_rng(int(opt.get("bootstrap_seed", 0))))
            for row, se in zip(rows, boot):
                row["bootstrap_stderr"] = se
        if result.at_bound:
            warnings.append(({None}, "at a bound (the data push it beyond its physical range; check the data or "
                                     "the description): " + ", ".join(result.at_bound)))
        offsets = {u.name: float(v) for u, v in zip(problem.unknowns, result.values) if u.product_id is None
                   and u.name.endswith(("_offset_k", "_offset_pct"))}
        thermal_summary = {"success": result.success, "message": result.message, "evaluations": result.nfev,
                           "residuals": result.residual_count, "sigma": result.sigma,
                           "reduced_chi2": 2 * result.cost / max(result.residual_count - len(result.values), 1),
                           "warm_start": bool(initial)}
        used_channels = {ch for tr in train.values() for ch in tr.readings if tr.count(ch)}
        for pid in train:
            product = plant.product(pid)
            idx = [i for i, u in enumerate(problem.unknowns) if u.product_id in (None, pid)]
            free = [problem.unknowns[i].name for i in idx if problem.unknowns[i].name not in offsets]
            keep = [i for i in idx if problem.unknowns[i].name not in offsets]
            values = dict(start[pid].values)
            for i in keep:
                values[problem.unknowns[i].name] = float(result.values[i])
            cov = None if result.covariance is None else result.covariance[np.ix_(keep, keep)]
            fitted = FittedModel(line_id, pid, values, tuple(free), cov, reflection or FittedModel.cold_start(line, product).reflection,
                                 offsets, "fitted", noise_sigma={ch: float(v) for ch, v in result.sigma.items()
                                                                 if ch in used_channels})
            pf = ProductFit(pid, fitted, "fitted", result.message, result.success,
                            lots_train=names[pid][0], lots_holdout=names[pid][1],
                            parameters=[r for r in rows if r["product_id"] in (None, pid)],
                            correlations=corr, warnings=[text for owners, text in warnings
                                                         if pid in owners or owners <= {None}],
                            observations=len(obs_all[pid]))
            t = obs_all[pid].time_s
            pf.data_span = (pd.Timestamp(t.min(), unit="s", tz="UTC").isoformat(),
                            pd.Timestamp(t.max(), unit="s", tz="UTC").isoformat())
            if electric:
                for name, value in electric.values.items():
                    pf.parameters.append({"name": name, "product_id": None, "unit": "1" if "efficiency" in name else (
                        "kW" if name == "aux_power_kw" else "kW K-1"), "value": value,
                        "stderr": electric.standard_errors[name],
                        "low95": value - 1.96 * electric.standard_errors[name],
                        "high95": value + 1.96 * electric.standard_errors[name], "bounds": None,
                        "meaning": "from the electricity meter"})
                    if not electric.identified.get(name, True):
                        pf.warnings.append(f"{name}: the logged power hardly varied; runs at different total power "
                                           "would determine it")
            if not result.success:
                pf.warnings.append(f"the fit did not converge: {result.message}")
            ts = test[pid]
            if len(ts):
                predicted = problem.predict(result.values, pid, ts)
                pf.scores["model"] = _scores(predicted, ts)
                pf.holdout = _holdout_table(predicted, ts)
                default_model = LineModel(line, product, ModelParameters.defaults(line, product), reflection)
                pf.scores["defaults"] = _scores(channel_predictions(default_model.run(ts.passages), {}), ts)
                pf.scores["linear"] = _scores(_linear_baseline(train[pid], ts), ts)
                incumbent = (incumbents or {}).get(pid)
                if incumbent is not None and incumbent.status == "fitted":
                    inc_model = incumbent.build(line, product)
                    pf.scores["active"] = _scores(channel_predictions(inc_model.run(ts.passages),
                                                                      incumbent.sensor_offsets), ts)
                pf.beats_baselines = _beats(pf.scores)
                if pf.beats_baselines is False:
                    pf.warnings.append("on the held-out lots the physical model does not beat both baselines "
                                       "on every channel; see the scores")
            fits[pid] = pf
    return LineFitReport(line_id, fits, None if electric is None else {
        "values": electric.values, "standard_errors": electric.standard_errors, "intervals": electric.intervals,
        "residual_kw_rms": electric.residual_kw_rms}, drift, alerts, thermal_summary)


def _beats(scores) -> bool | None:
    model = scores.get("model", {})
    if not model:
        return None
    ok = True
    for ch, s in model.items():
        for base in ("defaults", "linear"):  # the baselines; "active" is the gate's business
            b = scores.get(base, {}).get(ch)
            if b is not None and s.mae > b.mae:
                ok = False
    return ok
