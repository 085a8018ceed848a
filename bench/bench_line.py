"""Line model speed: many candidate settings in one vectorised call versus one ODE solve each.

Baseline: the same equations (``LineModel.ode_rhs``) integrated candidate by candidate with
``scipy.integrate.solve_ivp`` (LSODA, rtol 1e-4), as a straightforward implementation would.
The baseline is timed on a sample of candidates and scaled to the full count.
"""
from __future__ import annotations

import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

from optimizer.config import load_plant
from optimizer.line import LineModel

ROOT = Path(__file__).resolve().parents[1]


def _candidates(line, n, rng):
    speed = rng.uniform(line.belt_speed_min_m_per_min, line.belt_speed_max_m_per_min, n)
    power = rng.uniform(0.0, 1.0, (n, line.zone_count)) * np.asarray(line.zone_max_kw)
    return speed, power


def _solve_one(model: LineModel, speed, power):
    """One candidate through the tunnel with solve_ivp, zone by zone (piecewise constant inputs)."""
    tb = model.tables
    typ = model.product.typical
    water_in = np.atleast_1d(tb.infeed_water_db(typ.infeed_moisture_pct_wb)).astype(float)
    coef = model._coefficients(1, water_in)
    temp0 = np.full((1, 3), typ.infeed_temp_c)
    state = np.concatenate([tb.enthalpy(temp0, np.full((1, 3), water_in[0]))[0], np.full(3, water_in[0])])
    v = speed / 60.0
    load = typ.belt_load_kg_per_m
    rh = np.array([typ.air_rh_pct if typ.air_rh_pct is not None else 20.0])
    air = np.array([typ.air_temp_c])
    sections = [(model.line.infeed_choke_m, 0.0, 1.0)]
    for z, length in enumerate(model.line.zone_length_m):
        mass = load * length
        net = power[z] * (1.0 - model.reflection.fraction(mass))
        sections.append((length, net, mass))
    sections.append((model.line.outfeed_choke_m, 0.0, 1.0))
    for length, net, mass in sections:
        if length <= 0:
            continue
        net_a, mass_a = np.array([net]), np.array([mass])

        def rhs(_t, y):
            return model.ode_rhs(coef, y[None, :], net_a, mass_a, air, rh)[0]

        sol = solve_ivp(rhs, (0.0, length / v), state, method="LSODA", rtol=1e-4, atol=1e-3)
        state = sol.y[:, -1]
    return state


def run(quick: bool = False) -> list[dict]:
    plant, _ = load_plant(ROOT / "configs" / "demo.toml")
    rng = np.random.default_rng(7)
    rows = []
    n = 1_000 if quick else 10_000
    sample = 5 if quick else 30
    for line_id, product_id in (("TMP-1", "PORK-SHLDR-BLK"), ("DRY-1", "FUSILLI-DRY")):
        line = plant.line(line_id)
        model = LineModel(line, plant.product(product_id))
        speed, power = _candidates(line, n, rng)
        model.steady(belt_speed_m_per_min=speed[:10], zone_forward_kw=power[:10])  # warm-up
        t0 = time.perf_counter()
        model.steady(belt_speed_m_per_min=speed, zone_forward_kw=power)
        vectorised = time.perf_counter() - t0
        t0 = time.perf_counter()
        for i in range(sample):
            _solve_one(model, speed[i], power[i])
        per_candidate = (time.perf_counter() - t0) / sample
        baseline = per_candidate * n
        rows.append({"name": f"steady state, {n} candidates, {line_id}", "value": vectorised, "unit": "s",
                     "baseline_value": baseline, "ratio": baseline / vectorised,
                     "target": "≤ 1 s; ratio ≥ 50 (solve_ivp per candidate, scaled from "
                               f"{sample} candidates)"})
    return rows
