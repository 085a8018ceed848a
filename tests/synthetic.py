"""Synthetic logs from the line model with known parameters, for recovery tests of the fit."""
from __future__ import annotations

import numpy as np
import pandas as pd

from optimizer.line import LineModel, ModelParameters, ReflectionRelation

T0 = pd.Timestamp("2026-05-04T06:00:00Z")


def synthetic_line_logs(line, product, true: dict, *, rng: np.random.Generator, lots: int = 8,
                        lot_minutes: float = 50.0, interval_s: float = 30.0, array_offset_k: float = 0.3,
                        noise_k: float = 0.15, reflection=ReflectionRelation(0.04, 0.0)):
    """A record of ``lots`` lots at different settings, its QA core probes and the truth.

    Settings vary between lots (belt speed, power level, belt load, air temperature) so that
    every parameter leaves a trace; within a lot they are steady apart from small noise.
    """
    params = ModelParameters.defaults(line, product).with_values(**true)
    model = LineModel(line, product, params, reflection)
    z = line.zone_count
    rows_per_lot = int(lot_minutes * 60 / interval_s)
    gap = 20  # idle rows between lots
    n = lots * (rows_per_lot + gap)
    t = np.arange(n) * interval_s
    speed = np.zeros(n)
    power = np.zeros((n, z))
    load = np.zeros(n)
    air = np.full(n, 2.0)
    infeed = np.full(n, product.typical.infeed_temp_c)
    lot_id = np.full(n, None, dtype=object)
    vmin, vmax = line.belt_speed_min_m_per_min, line.belt_speed_max_m_per_min
    for k in range(lots):
        sl = slice(k * (rows_per_lot + gap), k * (rows_per_lot + gap) + rows_per_lot)
        v = rng.uniform(0.3, 0.7) * (vmax - vmin) * 0.5 + vmin + 0.1
        level = rng.uniform(0.35, 0.8)
        shape = np.linspace(1.0, 0.6, z)
        speed[sl] = v
        power[sl] = level * np.asarray(line.zone_max_kw) * shape * (v / (0.5 * vmax))
        power[sl] = np.minimum(power[sl], np.asarray(line.zone_max_kw))
        load[sl] = product.typical.belt_load_kg_per_m * rng.uniform(0.7, 1.3)
        air[sl] = rng.uniform(-2.0, 4.0)
        infeed[sl] = product.typical.infeed_temp_c + rng.normal(0, 1.5) + rng.normal(0, 0.2, rows_per_lot)
        lot_id[sl] = f"SYN-{k + 1:03d}"
    power *= 1 + rng.normal(0, 0.005, power.shape) * (power > 0)
    refl = reflection.fraction(load[:, None] * np.asarray(line.zone_length_m)) * power
    out = model.series(time_s=t, belt_speed_m_per_min=speed, zone_forward_kw=power, infeed_temp_c=infeed,
                       belt_load_kg_per_m=load, air_temp_c=air, zone_reflected_kw=refl)
    mains = power.sum(axis=1) / params["mains_to_rf_efficiency"] + params["aux_power_kw"]
    energy = 1000.0 + np.concatenate([[0.0], np.cumsum(mains[:-1] * interval_s / 3600.0)])
    df = pd.DataFrame({
        "timestamp": [(T0 + pd.Timedelta(seconds=float(x))).isoformat() for x in t],
        "line_id": line.line_id, "product_id": np.where(lot_id != None, product.product_id, None),  # noqa: E711
        "lot_id": lot_id, "belt_speed_m_per_min": speed, "belt_load_kg_per_m": load, "infeed_temp_c": infeed,
        "air_temp_c": air, "energy_kwh": np.round(energy, 1),
    })
    for i in range(z):
        df[f"zone{i + 1}_forward_kw"] = power[:, i]
        df[f"zone{i + 1}_reflected_kw"] = refl[:, i]
    reading = ~np.isnan(out.outfeed_temp_mean_c) & (lot_id != None)  # noqa: E711
    for col in ("outfeed_temp_mean_c", "outfeed_temp_min_c", "outfeed_temp_max_c"):
        v = getattr(out, col) + array_offset_k + rng.normal(0, noise_k, n)
        df[col] = np.where(reading, v, np.nan)
    # QA: a core probe every ~10 minutes of each lot, hand-probe noise 0.3 K
    qa_rows = np.flatnonzero(reading)[::20]
    qa = pd.DataFrame({"timestamp": df["timestamp"].to_numpy()[qa_rows], "line_id": line.line_id,
                       "product_id": product.product_id, "lot_id": lot_id[qa_rows], "position": "core",
                       "temp_c": out.core_temp_c[qa_rows] + rng.normal(0, 0.3, qa_rows.size),
                       "moisture_pct_wb": np.nan})
    return df, qa, params
