"""Robust recommendation time per line × product, against the dense search of the same problem.

For every product of every line of the demo plant (cold-start models, default spreads, 256
samples) the recommendation is timed end to end (problem, search, Pareto front, explanation);
the baseline is :func:`optimizer.recommend.dense_search` on the same problem (same samples),
a full grid of 16 belt speeds × a simplex lattice of power profiles (~100 shapes). A second
row per product gives the specific-energy gap of the recommendation to the dense search's best
(negative: the recommendation is better): NaN where only the recommendation found a feasible
setting; none where the recommendation is infeasible.
"""
from __future__ import annotations

import time
from pathlib import Path

import numpy as np

from optimizer.config import load_plant
from optimizer.recommend import RobustProblem, dense_search, load_model, recommend_problem
from optimizer.recommend.core import resolve_conditions, resolve_spread
from optimizer.recommend.problem import DEFAULT_BELT_LOAD_RELATIVE_SD, DEFAULT_INFEED_TEMP_SD_C

ROOT = Path(__file__).resolve().parents[1]
QUICK_CASES = (("TMP-1", "PORK-SHLDR-BLK"), ("TMP-2", "HAKE-FLT-BLK"), ("DRY-1", "FUSILLI-DRY"))


def _problem(plant, line_id, product_id, n_samples, seed):
    line, product = plant.line(line_id), plant.product(product_id)
    conds = resolve_conditions(product, None, None)
    spread = resolve_spread(conds, None, None, DEFAULT_INFEED_TEMP_SD_C, DEFAULT_BELT_LOAD_RELATIVE_SD)
    return RobustProblem.build(line, product, load_model(plant, line_id, product_id), conditions=conds,
                               spread=spread, n_samples=n_samples, rng=np.random.default_rng(seed))


def run(quick: bool = False) -> list[dict]:
    plant, _ = load_plant(ROOT / "configs" / "demo.toml")
    cases = QUICK_CASES if quick else tuple((lid, pid) for lid, line in plant.lines.items() for pid in line.products)
    n_samples = 128 if quick else 256
    rows = []
    _problem(plant, *cases[0], 50, 0).nominal(np.array([1.0]), np.zeros((1, plant.line(cases[0][0]).zone_count)))
    for line_id, product_id in cases:
        t0 = time.perf_counter()
        problem = _problem(plant, line_id, product_id, n_samples, seed=1)
        rec = recommend_problem(problem, rng=np.random.default_rng(2))
        seconds = time.perf_counter() - t0
        t0 = time.perf_counter()
        dense = dense_search(problem, speed_levels=10 if quick else 16)
        dense_seconds = time.perf_counter() - t0
        label = f"{line_id} × {product_id}"
        rows.append({"name": f"recommend {label}", "value": seconds, "unit": "s", "baseline_value": dense_seconds,
                     "ratio": dense_seconds / seconds,
                     "target": "≤ 5 s; baseline dense search" + ("" if rec.feasible else " (infeasible: compromise)")})
        if rec.feasible and dense.best is not None:
            dense_energy = float(dense.best.scored.nominal.outcome.specific_energy_kwh_per_t[dense.best.index])
            gap = 100.0 * (rec.specific_energy_kwh_per_t / dense_energy - 1.0)
            rows.append({"name": f"energy gap to dense, {label}", "value": gap, "unit": "%",
                         "baseline_value": dense_energy, "ratio": None,
                         "target": "≤ 1 % (baseline: dense best kWh/t)"})
        elif rec.feasible:
            rows.append({"name": f"energy gap to dense, {label}", "value": float("nan"), "unit": "%",
                         "baseline_value": None, "ratio": None,
                         "target": "≤ 1 %; the dense grid found no feasible point"})
    return rows
