"""``beltwave recommend``: tomorrow's settings for one line × product, as an operator keys them in.

Exit codes: 0 a feasible recommendation; 1 none is feasible (the explanation and the closest
compromise are printed); domain errors (bad option, unknown line) are raised for the main
command to report as one message (exit 2).
"""
from __future__ import annotations

import argparse
import json
from pathlib import Path

import numpy as np
import pandas as pd

from .config import load_plant
from .errors import InputError
from .recommend import Recommendation, load_model, recommend, recommend_arguments, recommend_options
from .recommend.problem import OBJECTIVES

EXIT_FEASIBLE = 0
EXIT_INFEASIBLE = 1


def add_recommend_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``recommend`` on the ``beltwave`` sub-command parsers."""
    p = subparsers.add_parser("recommend", help="settings that meet the targets with a stated confidence at "
                              "the least energy (or the most throughput)")
    p.add_argument("--config", required=True, help="plant description (TOML)")
    p.add_argument("--line", required=True, help="line id")
    p.add_argument("--product", required=True, help="product id")
    p.add_argument("--infeed-temp-c", type=float, help="expected product temperature at the infeed [°C]")
    p.add_argument("--belt-load-kg-per-m", type=float, help="expected product mass per metre of belt [kg/m]")
    p.add_argument("--air-temp-c", type=float, help="tunnel air temperature [°C] (held, not optimised)")
    p.add_argument("--infeed-moisture-pct-wb", type=float, help="dryers: infeed moisture [%% wet basis]")
    p.add_argument("--min-throughput-kg-per-h", type=float, help="required throughput [kg/h]")
    p.add_argument("--objective", choices=OBJECTIVES, default=None,
                   help="minimise specific energy (default) or maximise throughput")
    p.add_argument("--confidence", type=float, default=None,
                   help="probability with which every target must hold, 0.5…0.999 (default 0.95)")
    p.add_argument("--planned-tonnes-per-day", type=float, help="planned volume for the savings [t/day]")
    p.add_argument("--recent-log", metavar="CSV",
                   help="recent runs in canonical log columns (for the comparison with recent practice)")
    p.add_argument("--seed", type=int, default=0, help="random seed of the samples and the search (default 0)")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=cmd_recommend)
    return p


def cmd_recommend(args) -> int:
    from .jobs import recent_samples
    from .store import Store
    from .train import load_active_model

    plant, _ = load_plant(args.config)
    line, product = plant.line(args.line), plant.product(args.product)
    options = recommend_options(plant)
    store = _open_existing_store(plant, Store)
    try:
        if product.product_id not in line.products:
            load_model(plant, args.line, args.product)  # raises the clear "does not run on line" error
        fitted = load_active_model(plant, store, args.line, args.product)
        recent = _read_recent_log(args.recent_log) if args.recent_log else (
            recent_samples(store, args.line, args.product) if store is not None else None)
    finally:
        if store is not None:
            store.close()
    if recent is not None and len(recent) == 0:
        recent = None
    conditions = {"infeed_temp_c": args.infeed_temp_c, "belt_load_kg_per_m": args.belt_load_kg_per_m,
                  "air_temp_c": args.air_temp_c, "infeed_moisture_pct_wb": args.infeed_moisture_pct_wb}
    kwargs = recommend_arguments(options)
    if args.objective:
        kwargs["objective"] = args.objective
    if args.confidence is not None:
        kwargs["confidence"] = args.confidence
    rec = recommend(line, product, fitted, conditions=conditions, min_throughput_kg_per_h=args.min_throughput_kg_per_h,
                    recent_practice=recent, economics=plant.economics,
                    planned_tonnes_per_day=args.planned_tonnes_per_day, rng=np.random.default_rng(args.seed), **kwargs)
    if args.json:
        print(json.dumps(rec.to_json(), indent=2, ensure_ascii=False))
    else:
        for row in format_recommendation(rec):
            print(row)
    return EXIT_FEASIBLE if rec.feasible else EXIT_INFEASIBLE


def _read_recent_log(path: str) -> pd.DataFrame:
    try:
        return pd.read_csv(path)
    except (OSError, ValueError) as exc:
        raise InputError(f"--recent-log {path}: cannot read it as CSV: {exc}") from None


def format_recommendation(rec: Recommendation) -> list[str]:
    """The human-readable report, line by line (pure: tests read it without a terminal)."""
    out = [f"Line {rec.line_id} · product {rec.product_id}  (model: {rec.model_status}"
           + (f", version {rec.model_version}" if rec.model_version is not None else "") + ")"]
    if not rec.feasible:
        out += ["", "NOT FEASIBLE: " + rec.infeasible["message"]]
        if rec.belt_speed_m_per_min is None:
            out += ["", rec.caution]
            return out
        out += ["", "Closest compromise (does NOT meet the targets at the confidence):"]
    else:
        out += ["", f"Settings to key in ({rec.objective} objective, targets held with ≥ {rec.confidence:.0%} "
                    "probability):"]
    out.append(f"  belt speed              {rec.belt_speed_m_per_min:g} m/min")
    for i, p in enumerate(rec.zone_forward_kw, start=1):
        out.append(f"  zone {i} forward power    {p:g} kW")
    p, iv = rec.predicted, rec.predicted_interval_5_95
    out += ["", "Predicted outfeed                      nominal      5 % … 95 %"]
    labels = [("outfeed_temp_mean_c", "array reading mean [°C]"), ("outfeed_temp_min_c", "array reading min [°C]"),
              ("outfeed_temp_max_c", "array reading max [°C]"), ("core_temp_c", "core (mid-thickness) [°C]"),
              ("hottest_temp_c", "hottest point [°C]"), ("coldest_temp_c", "coldest point [°C]"),
              ("hottest_during_passage_c", "hottest during passage [°C]"),
              ("outfeed_moisture_pct_wb", "outfeed moisture [% wb]")]
    for key, label in labels:
        if key in p:
            out.append(f"  {label:<36} {p[key]:8.2f}   {iv[key][0]:8.2f} … {iv[key][1]:.2f}")
    out += ["", "Targets                                 margin   P(met)   margin at confidence"]
    for t in rec.targets.values():
        out.append(f"  {t['target']:<38} {t['margin']:+6.2f}   {t['probability']:6.1%}   "
                   f"{t['margin_at_confidence']:+6.2f} {t['unit']}")
    chk = rec.probability_check
    out += ["", f"All targets met in {rec.probability_in_spec:.1%} of {rec.inputs['samples']} samples "
                f"(check on {chk['samples']} fresh samples: {chk['probability']:.1%} ± {chk['standard_error']:.1%})",
            f"Specific energy {rec.specific_energy_kwh_per_t:.2f} kWh/t · "
            f"throughput {rec.throughput_kg_per_h:.0f} kg/h "
            f"· electric {rec.electric_kw:.1f} kW"]
    binding = ", ".join(b["detail"] for b in rec.binding_constraints) or "none"
    out.append(f"Binding: {binding}")
    if len(rec.pareto_front) > 1:
        out += ["", "Energy vs throughput (each meets the targets at the confidence):"]
        for pt in rec.pareto_front:
            out.append(f"  {pt['throughput_kg_per_h']:8.0f} kg/h  {pt['specific_energy_kwh_per_t']:8.2f} kWh/t   "
                       f"belt {pt['belt_speed_m_per_min']:g} m/min; zones "
                       + ", ".join(f"{x:g}" for x in pt["zone_forward_kw"]) + " kW")
    out += [""] + _savings_lines(rec)
    for note in rec.notes:
        out.append(f"Note: {note}")
    out += ["", rec.caution]
    return out


def _savings_lines(rec: Recommendation) -> list[str]:
    s = rec.savings
    if s is None:
        return ["Savings: no recent runs given (--recent-log), so no comparison with recent practice."]
    rows = [f"Recent practice: belt {s['recent_belt_speed_m_per_min']:g} m/min; zones "
            + ", ".join(f"{x:g}" for x in s["recent_zone_forward_kw"]) + " kW; predicted "
            f"{s['recent_specific_energy_predicted_kwh_per_t']:.2f} kWh/t "
            f"(in spec {s['recent_probability_in_spec']:.0%})"
            + (f", measured {s['recent_specific_energy_measured_kwh_per_t']:.2f} kWh/t"
               if s["recent_specific_energy_measured_kwh_per_t"] is not None else "")]
    line = f"Saving: {s['saving_kwh_per_t']:+.2f} kWh/t"
    if "saving_kwh_per_day" in s:
        line += (f" · {s['saving_kwh_per_day']:+.0f} kWh/day at {s['planned_tonnes_per_day']:g} t/day · "
                 f"{s['saving_kwh_per_year']:+.0f} kWh/year · {s['saving_money_per_year']:+.0f} {s['currency']}/year · "
                 f"{s['saving_co2_kg_per_year']:+.0f} kg CO₂/year")
    return rows + [line]


def _open_existing_store(plant, store_cls):
    """The plant's store read-only when it exists (else None: the cold-start model is used)."""
    url = plant.store_url
    if url.startswith("sqlite:///") and not Path(url[len("sqlite:///"):]).exists():
        return None
    return store_cls.open(url, readonly=True)
