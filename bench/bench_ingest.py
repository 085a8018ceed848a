"""Ingest speed and memory: one line-year of 10-s samples (≈3.2 M rows) into the SQLite store.

Baseline: ``pyarrow.csv.read_csv`` of the same file with its defaults (types inferred, all
cores) — what parsing the CSV alone costs — measured in the same run. The ingest (read,
convert, validate, deduplicate against the store, write Parquet blocks, lots, report) runs
in its own subprocess so that its peak resident memory (``getrusage`` ``ru_maxrss``) is its
own; the segmentation of the stored year into steady windows is timed separately, as the
nightly job runs it as its own step. Targets: ingest ≤ 3 × the parse; peak memory < 2 GiB.

The machine is shared: parse and ingest runs alternate (three parses, two ingests) and the
fastest of each counts — the best estimate of each one's uncontended time. CPU times
(user + system of each child) are reported beside, as they suffer less from other load.
"""
from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pa_csv

ROOT = Path(__file__).resolve().parents[1]
CONFIG = ROOT / "configs" / "demo.toml"
LINE_ID = "TMP-1"  # 5 zones × 25 kW, 6.2 m tunnel
PRODUCT_ID = "PORK-SHLDR-BLK"
SAMPLE_S = 10
YEAR_ROWS = 365 * 24 * 3600 // SAMPLE_S  # 3 153 600
LOT_S, IDLE_S = 4 * 3600, 1800  # a 4-h lot, then half an hour of cleaning
BLOCK_ROWS = 500_000

_CHILD = """
import json, resource, sys, time
sys.path.insert(0, {root!r})
mode, csv_path, db = sys.argv[1:4]
import pyarrow.csv as pa_csv
from optimizer.config import load_plant
from optimizer.ingest import ingest_paths, update_windows
from optimizer.store import Store
t0 = time.perf_counter()  # imports are not part of either figure
u0 = resource.getrusage(resource.RUSAGE_SELF)
if mode == "parse":
    rows = pa_csv.read_csv(csv_path).num_rows
else:
    plant, _ = load_plant({config!r})
    with Store.open("sqlite:///" + db) as store:
        if mode == "ingest":
            reports = ingest_paths(plant, store, [csv_path], segment=False)
            rows = reports[0].accepted
            assert reports[0].status == "ingested" and reports[0].rows_read == rows, reports[0]
        else:
            rows = sum(done["lots"] for done in update_windows(plant, store).values())
seconds = time.perf_counter() - t0
usage = resource.getrusage(resource.RUSAGE_SELF)
cpu = usage.ru_utime + usage.ru_stime - u0.ru_utime - u0.ru_stime
print(json.dumps({{"seconds": seconds, "rows": rows, "cpu_s": cpu,
                   "peak_mib": usage.ru_maxrss / 1024}}))
"""


def generate(path: Path, n_rows: int, seed: int = 4) -> None:
    """Write ``n_rows`` 10-s samples of a tempering line in the canonical layout, lots and idle alike."""
    rng = np.random.default_rng(seed)
    start_s = 1767225600  # 2026-01-01T00:00:00Z
    options = pa_csv.WriteOptions(quoting_style="needed")
    writer = None
    try:
        for first in range(0, n_rows, BLOCK_ROWS):
            n = min(BLOCK_ROWS, n_rows - first)
            t = start_s + (first + np.arange(n)) * SAMPLE_S
            phase = (t - start_s) % (LOT_S + IDLE_S)
            lot_no = (t - start_s) // (LOT_S + IDLE_S)
            running = phase < LOT_S
            speed = np.where(running, 0.6 + 0.1 * np.sin(lot_no)[...] + rng.normal(0, 0.002, n), 0.0)
            stamp = pa.array(t, pa.int64()).cast(pa.timestamp("s", tz="UTC")).cast(pa.timestamp("s", tz="Europe/Berlin"))
            text = pc.replace_substring_regex(pc.strftime(stamp, format="%Y-%m-%dT%H:%M:%S%z"), r"(\d\d)(\d\d)$", r"\1:\2")
            lot = pc.if_else(pa.array(running), pc.binary_join_element_wise(
                "TMP1-", pc.cast(pa.array(lot_no), pa.string()), ""), pa.scalar(None, pa.string()))
            columns = {"timestamp": text, "line_id": pa.array(np.full(n, LINE_ID)),
                       "product_id": pc.if_else(pa.array(running), PRODUCT_ID, pa.scalar(None, pa.string())),
                       "lot_id": lot, "belt_speed_m_per_min": np.round(speed, 3),
                       "belt_load_kg_per_m": np.round(np.where(running, rng.normal(55, 2, n), 0.0), 2),
                       "infeed_temp_c": _maybe(running, np.round(rng.normal(-18, 0.5, n), 2))}
            for z, level in enumerate((20, 19, 17, 14, 10), start=1):
                columns[f"zone{z}_forward_kw"] = np.round(np.where(running, rng.normal(level, 0.2, n), 0.0), 2)
            for z in range(1, 6):
                columns[f"zone{z}_reflected_kw"] = np.round(np.where(running, rng.normal(0.6, 0.05, n), 0.0), 2)
            columns["air_temp_c"] = np.round(rng.normal(2, 0.3, n), 2)
            for name, mean in (("outfeed_temp_mean_c", -4.0), ("outfeed_temp_min_c", -4.6), ("outfeed_temp_max_c", -3.4)):
                columns[name] = _maybe(running, np.round(rng.normal(mean, 0.3, n), 2))
            columns["energy_kwh"] = np.round(10000 + (first + np.arange(n)) * 0.2, 1)
            table = pa.table(columns)
            if writer is None:
                writer = pa_csv.CSVWriter(str(path), table.schema, write_options=options)
            writer.write_table(table)
    finally:
        if writer is not None:
            writer.close()


def _maybe(mask: np.ndarray, values: np.ndarray) -> pa.Array:
    return pa.array(values, mask=~mask)


def _child(mode: str, csv_path: Path, db: Path) -> dict:
    code = _CHILD.format(root=str(ROOT), config=str(CONFIG))
    out = subprocess.run([sys.executable, "-c", code, mode, str(csv_path), str(db)], capture_output=True,
                         text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def run(quick: bool = False) -> list[dict]:
    n_rows = YEAR_ROWS // 20 if quick else YEAR_ROWS  # quick: a smoke run; fixed costs dominate its ratio
    label = f"{n_rows / 1e6:.2f} M rows" + (" (quick)" if quick else "")
    with tempfile.TemporaryDirectory(prefix="beltwave-bench-") as tmp:
        csv_path, db = Path(tmp) / f"{LINE_ID}_year.csv", Path(tmp) / "bench.sqlite"
        t0 = time.perf_counter()
        generate(csv_path, n_rows)
        gen_s = time.perf_counter() - t0
        parses, ingests = [_child("parse", csv_path, db)], []
        for _ in range(2):
            for f in db.parent.glob(db.name + "*"):
                f.unlink()
            ingests.append(_child("ingest", csv_path, db))
            parses.append(_child("parse", csv_path, db))
        parse = min(parses, key=lambda r: r["seconds"])
        ingest = min(ingests, key=lambda r: r["seconds"])
        segment = _child("segment", csv_path, db)
        size_mib = csv_path.stat().st_size / 2**20
        db_mib = db.stat().st_size / 2**20
    rows = ingest["rows"]
    return [
        {"name": f"ingest {label}, {size_mib:.0f} MiB CSV: time", "value": ingest["seconds"], "unit": "s",
         "baseline_value": parse["seconds"], "ratio": ingest["seconds"] / parse["seconds"],
         "target": "ratio ≤ 3 (baseline: pyarrow read_csv alone)"},
        {"name": "ingest: throughput", "value": rows / ingest["seconds"], "unit": "rows/s",
         "baseline_value": rows / parse["seconds"], "ratio": parse["seconds"] / ingest["seconds"],
         "target": "(rows/s of the parse alone as baseline)"},
        {"name": "ingest: CPU time", "value": min(r["cpu_s"] for r in ingests), "unit": "s",
         "baseline_value": min(r["cpu_s"] for r in parses),
         "ratio": min(r["cpu_s"] for r in ingests) / min(r["cpu_s"] for r in parses),
         "target": "(informative: less sensitive to other load)"},
        {"name": "ingest: peak memory", "value": ingest["peak_mib"], "unit": "MiB",
         "baseline_value": parse["peak_mib"], "ratio": ingest["peak_mib"] / parse["peak_mib"],
         "target": "< 2048 MiB (baseline: read_csv's peak)"},
        {"name": f"ingest: store size ({size_mib:.0f} MiB CSV)", "value": db_mib, "unit": "MiB",
         "baseline_value": size_mib, "ratio": db_mib / size_mib, "target": "(informative)"},
        {"name": "segment the stored samples into steady windows", "value": segment["seconds"], "unit": "s",
         "baseline_value": None, "ratio": None, "target": f"(informative; {segment['rows']} lots, "
                                                          f"peak {segment['peak_mib']:.0f} MiB)"},
        {"name": "generate the CSV (setup)", "value": gen_s, "unit": "s", "baseline_value": None, "ratio": None,
         "target": "(informative)"},
    ]


if __name__ == "__main__":
    for row in run(quick="--quick" in sys.argv):
        print(row)
