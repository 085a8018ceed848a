"""The what-if run: one line, one product, one set of settings, through the line model.

A thin layer over :class:`optimizer.line.LineModel` that checks the settings against
the line's ratings and turns the outcome into the record the CLI and dashboard show.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .config import Line, Plant, Product
from .errors import InputError
from .line import LineModel, ModelParameters, ReflectionRelation
from .targets import check_targets


@dataclass(frozen=True)
class WhatIf:
    """Settings and conditions of a what-if run (None = the product's typical value)."""

    belt_speed_m_per_min: float
    zone_forward_kw: tuple[float, ...]
    infeed_temp_c: float | None = None
    belt_load_kg_per_m: float | None = None
    air_temp_c: float | None = None
    infeed_moisture_pct_wb: float | None = None
    air_rh_pct: float | None = None


def check_settings(line: Line, speed_m_per_min: float, zone_forward_kw, *, option_speed="--belt-speed",
                   option_power="--zone-power"):
    """Raise :class:`InputError` naming the option and the allowed range when a setting is out of it."""
    lo, hi = line.belt_speed_min_m_per_min, line.belt_speed_max_m_per_min
    if not np.isfinite(speed_m_per_min) or speed_m_per_min <= 0:
        raise InputError(f"{option_speed} {speed_m_per_min:g}: the belt speed must be a positive number "
                         f"of m/min; line {line.line_id} runs at {lo:g}…{hi:g} m/min")
    if not lo <= speed_m_per_min <= hi:
        raise InputError(f"{option_speed} {speed_m_per_min:g} m/min is outside line {line.line_id}'s "
                         f"range {lo:g}…{hi:g} m/min")
    powers = list(zone_forward_kw)
    if len(powers) != line.zone_count:
        raise InputError(f"{option_power}: {len(powers)} value(s) given, but line {line.line_id} has "
                         f"{line.zone_count} zones; give one forward power [kW] per zone, comma-separated")
    for i, (p, rating) in enumerate(zip(powers, line.zone_max_kw), start=1):
        if not np.isfinite(p) or p < 0 or p > rating:
            raise InputError(f"{option_power}: zone {i} power {p:g} kW is outside 0…{rating:g} kW "
                             f"(the zone's rating)")
    if sum(powers) > line.total_power_cap_kw + 1e-9:
        raise InputError(f"{option_power}: total {sum(powers):g} kW exceeds line {line.line_id}'s "
                         f"total power cap of {line.total_power_cap_kw:g} kW")


def _check_conditions(product: Product, w: WhatIf):
    checks = [("--infeed-temp-c", w.infeed_temp_c, -60, 120), ("--belt-load-kg-per-m", w.belt_load_kg_per_m, 1e-6, 1e4),
              ("--air-temp-c", w.air_temp_c, -60, 250), ("--infeed-moisture-pct-wb", w.infeed_moisture_pct_wb, 0, 95),
              ("--air-rh-pct", w.air_rh_pct, 0, 100)]
    for option, value, lo, hi in checks:
        if value is not None and not (lo <= value <= hi):
            raise InputError(f"{option} {value:g} is outside the allowed range {lo:g}…{hi:g}")


def model_for(line: Line, product: Product, parameters: ModelParameters | None = None,
              reflection: ReflectionRelation | None = None) -> LineModel:
    if product.product_id not in line.products:
        raise InputError(f"product {product.product_id} does not run on line {line.line_id}; "
                         f"its products: {', '.join(line.products)}")
    return LineModel(line, product, parameters, reflection)


def run_what_if(plant: Plant, line_id: str, product_id: str, what_if: WhatIf,
                model: LineModel | None = None) -> dict:
    """Simulate one setting and return a plain-JSON record (see ``beltwave simulate --json``)."""
    line = plant.line(line_id)
    product = plant.product(product_id)
    check_settings(line, what_if.belt_speed_m_per_min, what_if.zone_forward_kw)
    _check_conditions(product, what_if)
    model = model or model_for(line, product)
    out = model.steady(belt_speed_m_per_min=what_if.belt_speed_m_per_min,
                       zone_forward_kw=np.asarray(what_if.zone_forward_kw, float),
                       infeed_temp_c=what_if.infeed_temp_c, belt_load_kg_per_m=what_if.belt_load_kg_per_m,
                       air_temp_c=what_if.air_temp_c, infeed_moisture_pct_wb=what_if.infeed_moisture_pct_wb,
                       air_rh_pct=what_if.air_rh_pct, keep_history=True)
    return outcome_record(model, out, index=0, what_if=what_if)


def outcome_record(model: LineModel, out, index: int = 0, what_if: WhatIf | None = None) -> dict:
    """One candidate of an :class:`~optimizer.line.Outcome` as a plain-JSON dict."""
    i = index
    product = model.product

    def f(x):
        return None if x is None else round(float(np.asarray(x)[i]), 4)

    predicted = {
        "outfeed_temp_mean_c": f(out.outfeed_temp_mean_c),
        "outfeed_temp_min_c": f(out.outfeed_temp_min_c),
        "outfeed_temp_max_c": f(out.outfeed_temp_max_c),
        "core_temp_c": f(out.core_temp_c),
        "hottest_temp_c": f(out.hottest_temp_c),
        "coldest_temp_c": f(out.coldest_temp_c),
        "mean_temp_c": f(out.mean_temp_c),
    }
    if product.process == "drying":
        predicted["hottest_during_passage_c"] = f(out.hottest_during_passage_c)
        predicted["outfeed_moisture_pct_wb"] = f(out.outfeed_moisture_pct_wb)
    targets = {c.name: {"met": bool(c.met[i]), "margin": round(float(c.margin[i]), 3), "unit": c.unit,
                        "target": c.limit_text, "value": round(float(c.value[i]), 3)}
               for c in check_targets(product, out)}
    record = {
        "line_id": model.line.line_id,
        "product_id": product.product_id,
        "belt_speed_m_per_min": f(out.belt_speed_m_per_min),
        "zone_forward_kw": [round(float(x), 3) for x in out.forward_kw[i]],
        "zone_reflected_kw": [round(float(x), 3) for x in out.reflected_kw[i]],
        "inputs": {"infeed_temp_c": f(out.infeed_temp_c), "belt_load_kg_per_m": f(out.belt_load_kg_per_m),
                   "air_temp_c": f(out.air_temp_c)},
        "predicted": predicted,
        "specific_energy_kwh_per_t": f(out.specific_energy_kwh_per_t),
        "throughput_kg_per_h": f(out.throughput_kg_per_h),
        "electric_kw": f(out.electric_kw),
        "absorbed_kw": f(out.absorbed_kw),
        "cavity_loss_kw": f(out.cavity_loss_kw),
        "air_gain_kw": f(out.air_gain_kw),
        "residence_time_s": f(out.residence_time_s),
        "targets_met": targets,
        "all_targets_met": all(t["met"] for t in targets.values()),
        "model": "cold start (composition-based defaults)",
    }
    if product.process == "drying":
        record["inputs"]["infeed_moisture_pct_wb"] = round(float(100 * out.infeed_water_db[i] / (1 + out.infeed_water_db[i])), 3)
        record["evaporation_kw"] = f(out.evaporation_kw)
    traj = out.trajectory
    if traj.history_temp_c is not None:
        record["profile"] = {
            "position_m": [round(float(x), 3) for x in out.positions_m],
            "hot_c": [round(float(x), 3) for x in traj.history_temp_c[i, :, 0]],
            "cold_c": [round(float(x), 3) for x in traj.history_temp_c[i, :, 1]],
            "core_c": [round(float(x), 3) for x in traj.history_temp_c[i, :, 2]],
        }
        if product.process == "drying":
            x = traj.history_water_db[i].mean(axis=1)
            record["profile"]["moisture_pct_wb"] = [round(float(v), 3) for v in 100 * x / (1 + x)]
    return record
