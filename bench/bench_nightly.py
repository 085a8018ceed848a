"""The nightly run on the demo plant: 60 days of 10-s history, then one new day (target < 60 s).

Reports the end-to-end seconds of the new day's run, the share of each step, and the
speed-up of a local Dask cluster of 2 workers (its start included) on the same new day.
The generator writes process and QA files per line and local day, as a plant sends them: the
history's arrive with the history, the new day's with the new day.
"""
from __future__ import annotations

import datetime as dt
import shutil
import tempfile
import time
from pathlib import Path

from optimizer.config import load_plant
from optimizer.demo import generate_demo_logs
from optimizer.jobs import DaskExecutor, run_nightly

ROOT = Path(__file__).resolve().parents[1]


def _plant(folder: Path):
    text = (ROOT / "configs" / "demo.toml").read_text()
    text = text.replace('url = "sqlite:///../data/demo/beltwave.sqlite"', f'url = "sqlite:///{folder / "s.sqlite"}"')
    text = text.replace('incoming = ["../data/demo/incoming"]', f'incoming = ["{folder / "in"}"]')
    text = text.replace('exports = "../data/demo/exports"', f'exports = "{folder / "out"}"')
    (folder / "in").mkdir(parents=True)
    (folder / "plant.toml").write_text(text)
    return load_plant(folder / "plant.toml")[0]


def run(quick: bool = False) -> list[dict]:
    days = 8 if quick else 61
    start = dt.date(2026, 8, 3)
    last = (start + dt.timedelta(days=days - 1)).isoformat()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        staging = tmp / "staging"
        plant = _plant(tmp / "a")
        generate_demo_logs(plant, staging, start=start.isoformat(), days=days, interval_s=10, seed=5)
        new_day = [p for p in staging.iterdir() if p.name.endswith(f"_{last}.csv.gz")]  # process and QA files
        timings = {}
        for mode in ("serial", "dask"):
            folder = tmp / mode
            p = _plant(folder)
            for f in staging.iterdir():
                if f.name.endswith(".csv.gz") and f not in new_day:
                    shutil.copy(f, folder / "in" / f.name)
            run_nightly(p, plan_date=last)  # the history
            for f in new_day:
                shutil.copy(f, folder / "in" / f.name)
            t0 = time.perf_counter()  # a local cluster's start is part of the run
            executor = DaskExecutor(workers=2) if mode == "dask" else None
            try:
                result = run_nightly(p, plan_date=(start + dt.timedelta(days=days)).isoformat(), executor=executor)
                timings[mode] = (time.perf_counter() - t0, result)
            finally:
                if executor is not None:
                    executor.close()
        serial_s, result = timings["serial"]
        rows.append({"name": f"nightly, one new day on {days - 1} d of history", "value": serial_s, "unit": "s",
                     "baseline_value": None, "ratio": None, "target": "< 60 s"})
        for step, info in result.summary["steps"].items():  # serial: the steps follow each other
            rows.append({"name": f"  share of step {step}", "value": 100 * info["seconds"] / serial_s, "unit": "%",
                         "baseline_value": None, "ratio": None, "target": ""})
        rows.append({"name": "nightly, local Dask cluster of 2 (incl. its start)", "value": timings["dask"][0],
                     "unit": "s",
                     "baseline_value": serial_s, "ratio": serial_s / timings["dask"][0],
                     "target": "< 60 s; ratio = speed-up over serial"})
    return rows
