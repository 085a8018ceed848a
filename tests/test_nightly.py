"""The nightly job: composition, idempotency, the lock, faults, a kill mid-run, Dask = serial."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from optimizer.config import load_plant
from optimizer.jobs import (EXIT_FAILED, EXIT_LOCKED, EXIT_OK, EXIT_WARNINGS, DaskExecutor, exclusive_lock,
                            longest_first, plant_paths, run_nightly)
from optimizer.store import Store
from synthetic import synthetic_line_logs

ROOT = Path(__file__).resolve().parents[1]
TRUE = dict(cavity_loss_equiv_kg=2.5, air_htc_w_per_m2_k=18.0, loss_factor_scale=1.1, field_nonuniformity=0.25,
            freezing_point_shift_k=0.2, mains_to_rf_efficiency=0.8, aux_power_kw=7.0)


def make_plant(tmp_path: Path, *, store_url: str | None = None) -> Path:
    """A copy of the demo description whose store, incoming and export folders live in tmp_path."""
    text = (ROOT / "configs" / "demo.toml").read_text()
    text = text.replace('url = "sqlite:///../data/demo/beltwave.sqlite"',
                        f'url = "{store_url or "sqlite:///" + str(tmp_path / "store.sqlite")}"')
    text = text.replace('incoming = ["../data/demo/incoming"]', f'incoming = ["{tmp_path / "incoming"}"]')
    text = text.replace('exports = "../data/demo/exports"', f'exports = "{tmp_path / "exports"}"')
    (tmp_path / "incoming").mkdir(exist_ok=True)
    path = tmp_path / "plant.toml"
    path.write_text(text)
    return path


def drop_logs(tmp_path: Path, seed: int = 11, name: str = "TMP-1_day1.csv") -> None:
    plant, _ = load_plant(ROOT / "configs" / "demo.toml")
    df, qa, _ = synthetic_line_logs(plant.line("TMP-1"), plant.product("PORK-SHLDR-BLK"), TRUE,
                                    rng=np.random.default_rng(seed), lots=6, lot_minutes=40)
    df.to_csv(tmp_path / "incoming" / name, index=False)
    qa.to_csv(tmp_path / "incoming" / f"qa_{name}", index=False)


def counts(plant) -> dict:
    with_store = Store.open(plant.store_url, readonly=True)
    try:
        return with_store.table_counts()
    finally:
        with_store.close()


@pytest.fixture(scope="module")
def first_run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("nightly")
    path = make_plant(tmp)
    drop_logs(tmp)
    plant, _ = load_plant(path)
    result = run_nightly(plant, plan_date="2026-05-05")
    return tmp, plant, result


def test_first_run_ingests_fits_promotes_recommends_and_exports(first_run):
    tmp, plant, result = first_run
    assert result.exit_code in (EXIT_OK, EXIT_WARNINGS), result.summary
    steps = result.summary["steps"]
    assert steps["ingest"]["ingested"] == 2 and steps["ingest"]["rejected"] == 0
    decisions = steps["fit"]["decisions"]
    pork = [d for d in decisions if d["product_id"] == "PORK-SHLDR-BLK"]
    assert pork and pork[0]["promoted"] and pork[0]["version_id"] is not None
    assert set(steps["fit"]["seconds_by_line"]) == {"TMP-1"} and steps["fit"]["seconds_by_line"]["TMP-1"] > 0
    assert steps["recommend"]["new"] == 1  # only the product run recently on a line with data
    exported = steps["recommend"]["exported"]
    assert exported and all(Path(p).exists() for p in exported)
    store = Store.open(plant.store_url, readonly=True)
    try:
        rec = store.recommendations(date="2026-05-05")
        assert list(rec["product_id"]) == ["PORK-SHLDR-BLK"]
        assert int(rec["model_version_id"].iloc[0]) == pork[0]["version_id"]
        runs = store.job_runs(kind="nightly")
        assert runs["status"].iloc[0] in ("ok", "warning")
    finally:
        store.close()
    assert any(line.startswith("TMP-1: 1 model(s) fitted, 1 promoted, 2 on cold start; 1 new") for line in result.lines)


def test_second_run_on_the_same_data_changes_nothing(first_run):
    tmp, plant, _ = first_run
    before = counts(plant)
    again = run_nightly(plant, plan_date="2026-05-05")
    after = counts(plant)
    for table in ("samples", "qa_samples", "model_versions", "model_activations", "recommendations", "lots",
                  "quarantine", "ingested_files"):
        assert after[table] == before[table], table
    assert after["job_runs"] == before["job_runs"] + 1
    assert again.summary["steps"]["ingest"]["skipped"] == 2
    assert again.summary["steps"]["fit"]["lines"] == []
    assert again.exit_code == EXIT_WARNINGS  # "no new data" is a warning a supervisor must see
    assert any(a["kind"] == "no_new_data" and a["line_id"] == "TMP-1" for a in again.summary["alerts"])


def test_a_second_run_while_one_holds_the_lock_exits_with_its_own_code(first_run):
    tmp, plant, _ = first_run
    with exclusive_lock(plant_paths(plant)["lock"]):
        res = run_nightly(plant, plan_date="2026-05-05")
    assert res.exit_code == EXIT_LOCKED
    assert "another nightly run holds the lock" in res.lines[0]


class _RunsOnly:
    """A store stand-in holding only job runs (newest first, as Store.job_runs gives them)."""

    def __init__(self, summaries):
        import pandas as pd

        self.runs = pd.DataFrame({"summary": summaries})

    def job_runs(self, kind=None, limit=None):
        return self.runs.head(limit)


def test_parallel_fits_start_with_the_line_that_took_longest_last_time():
    # the newest run that timed a line counts; a line never timed (a first fit) leads; ties keep
    # the plant's order
    newest = {"steps": {"fit": {"seconds_by_line": {"A": 3.0, "B": 11.0}}}}
    older = {"steps": {"fit": {"seconds_by_line": {"A": 20.0, "C": 7.0}}}}
    no_fit = {"steps": {"ingest": {}}}
    store = _RunsOnly([no_fit, newest, older, {}])
    assert longest_first(store, ["A", "B", "C", "D", "E"]) == ["D", "E", "B", "C", "A"]
    assert longest_first(_RunsOnly([]), ["B", "A"]) == ["B", "A"]


def test_a_corrupt_file_is_reported_and_the_run_finishes_with_warnings(tmp_path):
    path = make_plant(tmp_path)
    drop_logs(tmp_path)
    (tmp_path / "incoming" / "garbage.csv").write_bytes(bytes(range(256)) * 40)
    plant, _ = load_plant(path)
    res = run_nightly(plant, plan_date="2026-05-05")
    assert res.exit_code == EXIT_WARNINGS
    assert res.summary["steps"]["ingest"]["rejected"] == 1
    assert any("garbage.csv" in w for w in res.summary["warnings"])
    assert res.summary["steps"]["fit"]["decisions"]  # the good files were used


def test_a_store_that_cannot_be_written_fails_clearly_and_changes_nothing(tmp_path):
    folder = tmp_path / "not-a-file"
    folder.mkdir()  # a folder where the database file should be: SQLite cannot open it
    path = make_plant(tmp_path, store_url=f"sqlite:///{folder}")
    drop_logs(tmp_path)
    plant, _ = load_plant(path)
    res = run_nightly(plant, plan_date="2026-05-05")
    assert res.exit_code == EXIT_FAILED
    assert "cannot open the store for writing" in res.summary["error"]
    assert list(folder.iterdir()) == []


def test_a_run_killed_mid_way_leaves_a_consistent_store_and_the_next_run_completes(tmp_path):
    path = make_plant(tmp_path)
    drop_logs(tmp_path)
    plant, _ = load_plant(path)
    cmd = [sys.executable, "-m", "optimizer.cli", "nightly", "--config", str(path), "--date", "2026-05-05"]
    proc = subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    store_file = tmp_path / "store.sqlite"
    deadline = time.time() + 120
    while time.time() < deadline:  # kill once the run is recorded and its ingest has landed
        if store_file.exists():
            try:
                c = counts(plant)
                if c["job_runs"] >= 1 and c["ingested_files"] >= 2:
                    break
            except Exception:  # noqa: BLE001 - the store may be mid-creation
                pass
        time.sleep(0.05)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait(timeout=30)
    c = counts(plant)  # readable and consistent
    assert c["recommendations"] == 0 or c["model_versions"] >= 1
    res = run_nightly(plant, plan_date="2026-05-05")
    assert res.exit_code in (EXIT_OK, EXIT_WARNINGS), res.summary
    store = Store.open(plant.store_url, readonly=True)
    try:
        runs = store.job_runs(kind="nightly")
        assert (runs["status"] != "running").all()
        assert store.recommendations(date="2026-05-05")["product_id"].tolist() == ["PORK-SHLDR-BLK"]
    finally:
        store.close()


@pytest.mark.slow
def test_dask_parallel_run_gives_the_same_models_and_recommendations_as_the_serial_run(tmp_path):
    results = {}
    for mode in ("serial", "dask"):
        folder = tmp_path / mode
        folder.mkdir()
        path = make_plant(folder)
        drop_logs(folder)
        plant, _ = load_plant(path)
        executor = DaskExecutor(workers=2) if mode == "dask" else None
        try:
            res = run_nightly(plant, plan_date="2026-05-05", executor=executor)
        finally:
            if executor is not None:
                executor.close()
        assert res.exit_code in (EXIT_OK, EXIT_WARNINGS), res.summary
        store = Store.open(plant.store_url, readonly=True)
        try:
            model = store.active_model("TMP-1", "PORK-SHLDR-BLK")["payload"]["model"]
            rec = store.recommendations(date="2026-05-05")["payload"].iloc[0]
        finally:
            store.close()
        results[mode] = (model["values"], rec["belt_speed_m_per_min"], rec["zone_forward_kw"])
    assert results["serial"] == results["dask"]
