"""Fit speed: one line × product from 90 days of 10-s logs (target under 30 s on 2 cores).

Reports the fit's seconds and its ratio to one model evaluation over the same observations
(the number of effective evaluations the fit spent).
"""
from __future__ import annotations

import tempfile
import time
from pathlib import Path

from optimizer.config import load_plant
from optimizer.demo import generate_demo_logs
from optimizer.fit import fit_line
from optimizer.fit.data import build_observations, find_lots, line_record
from optimizer.ingest import ingest_paths
from optimizer.line import LineModel
from optimizer.store import Store

ROOT = Path(__file__).resolve().parents[1]


def run(quick: bool = False) -> list[dict]:
    days = 10 if quick else 90
    line_id, product_id = "TMP-2", "SALMON-TRIM-BLK"
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        text = (ROOT / "configs" / "demo.toml").read_text().replace(
            'url = "sqlite:///../data/demo/beltwave.sqlite"', f'url = "sqlite:///{tmp / "s.sqlite"}"')
        (tmp / "plant.toml").write_text(text)
        plant, _ = load_plant(tmp / "plant.toml")
        generate_demo_logs(plant, tmp / "logs", start="2026-08-03", days=days, interval_s=10, seed=3)
        store = Store.open(plant.store_url)
        ingest_paths(plant, store, [p for p in (tmp / "logs").iterdir() if p.name.startswith(line_id)], segment=False)
        samples, qa = store.samples(line_id), store.qa_samples(line_id)
        store.close()
        t0 = time.perf_counter()
        report = fit_line(plant, line_id, samples, qa, products=[product_id])
        fit_s = time.perf_counter() - t0
        line, product = plant.line(line_id), plant.product(product_id)
        model = LineModel(line, product)
        record = line_record(samples, line)
        obs = build_observations(record, qa, line, product, model, find_lots(record), per_lot=25)
        t0 = time.perf_counter()
        model.run(obs.passages)
        one = time.perf_counter() - t0
    pf = report.products[product_id]
    return [{"name": f"fit {line_id} × {product_id}, {days} d of 10-s logs ({len(samples)} rows)", "value": fit_s,
             "unit": "s", "baseline_value": one, "ratio": fit_s / one,
             "target": f"< 30 s; ratio = effective model evaluations ({pf.observations} observations)"}]
