"""The store: schema and migrations, read-only opening, WAL, transactions, and the typed API."""
from __future__ import annotations

import math
import sqlite3

import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa

from optimizer.errors import StoreError
from optimizer.store import Store, schema


@pytest.fixture
def url(tmp_path):
    return f"sqlite:///{tmp_path / 'store' / 'beltwave.sqlite'}"


@pytest.fixture
def store(url):
    with Store.open(url) as s:
        yield s


def _block(n=5, start="2026-03-16T05:00Z", zones=4, lot="L1"):
    t = pd.date_range(start, periods=n, freq="30s").as_unit("ms")
    df = pd.DataFrame({"row_number": np.arange(2, n + 2), "timestamp_utc": t, "utc_offset_min": 60.0,
                       "product_id": "P", "lot_id": lot, "belt_speed_m_per_min": 0.6 + 0.01 * np.arange(n)})
    for i in range(1, zones + 1):
        df[f"zone{i}_forward_kw"] = float(i)
    return df


def test_open_creates_the_schema_once_in_wal_mode(url, tmp_path):
    with Store.open(url) as s:
        assert s.schema_version == schema.SCHEMA_VERSION == 1
    with Store.open(url) as s:
        assert s.table_counts()["schema_version"] == 1  # not migrated twice
    con = sqlite3.connect(tmp_path / "store" / "beltwave.sqlite")
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    con.close()


def test_read_only_store_cannot_write(url, store):
    with Store.open(url, readonly=True) as ro:
        with pytest.raises(StoreError, match="open read-only"):
            ro.start_job_run("nightly")
        with ro.engine.connect() as conn, pytest.raises(sa.exc.OperationalError, match="readonly|read-only"):
            conn.execute(sa.text("INSERT INTO job_runs (kind, started_utc, status, summary_json) "
                                 "VALUES ('x', '2026-01-01', 'running', '{}')"))
    assert store.job_runs().empty


def test_read_only_open_of_a_missing_or_outdated_store(tmp_path, url, store, monkeypatch):
    with pytest.raises(StoreError, match="there is no store at .*; create it with `beltwave ingest` first"):
        Store.open(f"sqlite:///{tmp_path / 'nothing.sqlite'}", readonly=True)
    # a second migration appears: read-only opening refuses until a writer migrates
    added = []
    monkeypatch.setattr(schema, "MIGRATIONS", schema.MIGRATIONS + [("add a test table", lambda conn: added.append(1)
                                                                    or conn.execute(sa.text("CREATE TABLE t2 (x)")))])
    monkeypatch.setattr(schema, "SCHEMA_VERSION", 2)
    with pytest.raises(StoreError, match="schema version 1, this beltwave needs 2; run a writing command"):
        Store.open(url, readonly=True)
    with Store.open(url) as s:
        assert s.schema_version == 2 and added == [1]
    with Store.open(url, readonly=True) as ro:
        assert ro.schema_version == 2


def test_a_store_from_a_newer_tool_is_refused(url, store):
    with store.engine.begin() as conn:
        conn.execute(sa.insert(schema.schema_version).values(version=9, applied_utc=schema.utc_now(),
                                                             description="future"))
    with pytest.raises(StoreError, match="schema version 9, newer than this beltwave's 1; upgrade beltwave"):
        Store.open(url)


def test_bad_url_is_a_clear_error():
    with pytest.raises(StoreError, match="is not a database URL"):
        Store.open("not a url")


def test_a_url_whose_driver_is_missing_is_a_clear_error():
    # SQLAlchemy knows no "nosuchdriver" for PostgreSQL: the error names the store and the fix
    with pytest.raises(StoreError, match=r"database driver is missing.*pip install -e '.\[postgres\]'"):
        Store.open("postgresql+nosuchdriver://user@host/beltwave")


def test_a_failed_transaction_leaves_nothing(store):
    with pytest.raises(RuntimeError):
        with store.writer() as w:
            file_id = w.add_file("a.csv", "0" * 64, 10, "process", "k")
            w.add_block(file_id, "TL-1", _block())
            raise RuntimeError("killed")
    assert store.table_counts()["ingested_files"] == 0 and store.sample_count() == 0


def test_reader_sees_the_last_commit_while_a_writer_is_busy(url, store):
    with Store.open(url, readonly=True) as ro:
        with store.writer() as w:
            w.add_file("a.csv", "0" * 64, 10, "process", "k")
            assert ro.ingested_files().empty  # not blocked, and not seeing uncommitted rows
        assert len(ro.ingested_files()) == 1


def test_samples_round_trip_with_lines_of_different_zone_counts(store):
    with store.writer() as w:
        f = w.add_file("a.csv", "0" * 64, 10, "process", "k")
        w.add_block(f, "TL-1", _block(zones=4))
        w.add_block(f, "DR-1", _block(zones=6, lot="D1"))
        w.add_block(f, "TL-1", _block(n=3, start="2026-03-16T06:00Z", lot="L2"))
    tl = store.samples("TL-1")
    assert len(tl) == 8 and tl["timestamp_utc"].is_monotonic_increasing
    assert [c for c in tl.columns if c.startswith("zone")] == [f"zone{i}_forward_kw" for i in range(1, 5)]
    assert tl["zone3_forward_kw"].tolist() == [3.0] * 8 and tl["line_id"].unique().tolist() == ["TL-1"]
    assert np.isnan(tl["infeed_temp_c"]).all()  # canonical columns never logged come back as NaN
    assert tl["row_number"].tolist()[:5] == [2, 3, 4, 5, 6] and (tl["file_id"] == f).all()
    assert [c for c in store.samples("DR-1").columns if c.endswith("forward_kw")][-1] == "zone6_forward_kw"
    assert len(store.samples("TL-1", start="2026-03-16T05:01Z", end="2026-03-16T06:00Z")) == 4
    assert store.samples("TL-1", lot_ids=["L2"])["lot_id"].tolist() == ["L2"] * 3
    assert store.samples("TL-1", product_id="other").empty
    assert store.sample_count() == 13 and store.lines_with_samples() == ["DR-1", "TL-1"]
    assert store.newest_sample_utc("TL-1") == tl["timestamp_utc"].max()
    assert store.newest_sample_utc("nowhere") is None


def test_model_versions_are_appended_and_activations_kept(store):
    first = store.add_model_version("TL-1", "COD-BLOCK", {"cavity_loss_equiv_kg": 3.5}, status="accepted",
                                    reason="first fit", data_start="2026-03-16", data_end="2026-03-30",
                                    activate=True)
    second = store.add_model_version("TL-1", "COD-BLOCK", {"cavity_loss_equiv_kg": 3.9})
    assert store.active_model("TL-1", "COD-BLOCK")["id"] == first
    store.activate_model(second, "better on held-out lots")
    active = store.active_model("TL-1", "COD-BLOCK")
    assert (active["id"], active["payload"], active["activation_reason"]) == \
        (second, {"cavity_loss_equiv_kg": 3.9}, "better on held-out lots")
    versions = store.model_versions("TL-1")
    assert versions["id"].tolist() == [first, second] and versions["active"].tolist() == [False, True]
    assert versions["status"].tolist() == ["accepted", "candidate"]
    assert len(store.model_activations()) == 2
    assert store.model_version(first)["data_start_utc"] == pd.Timestamp("2026-03-16T00:00Z").to_pydatetime()
    assert store.active_model("TL-1", "BEEF-TRIM-90") is None
    with pytest.raises(StoreError, match="there is no model version 99"):
        store.activate_model(99, "x")
    with pytest.raises(StoreError, match="model status 'great' is not one of candidate, accepted, rejected"):
        store.add_model_version("TL-1", "COD-BLOCK", {}, status="great")
    with pytest.raises(StoreError, match="not plain JSON .*not NaN"):
        store.add_model_version("TL-1", "COD-BLOCK", {"x": math.nan})


def test_job_runs_recommendations_and_alerts(store):
    run = store.start_job_run("nightly")
    assert store.job_runs()["status"].tolist() == ["running"]
    version = store.add_model_version("DR-1", "PASTA-SHORT", {"k": 1})
    ids = store.add_recommendations([
        {"line_id": "DR-1", "product_id": "PASTA-SHORT", "model_version_id": version,
         "payload": {"belt_speed_m_per_min": 0.35, "zone_forward_kw": [3.5, 3.6]}},
        {"line_id": "TL-1", "product_id": "COD-BLOCK", "payload": {"feasible": False}, "plan_date": "2026-04-01"},
    ], run_id=run, plan_date="2026-03-31")
    assert len(ids) == 2
    day = store.recommendations(date="2026-03-31")
    assert day["line_id"].tolist() == ["DR-1"] and day["payload"].iloc[0]["zone_forward_kw"] == [3.5, 3.6]
    assert store.recommendations(date="2026-04-01")["run_id"].tolist() == [run]
    store.add_alerts([{"kind": "drift", "message": "cavity loss up 20 %", "line_id": "DR-1"}], run_id=run)
    assert store.alerts(run_id=run)["severity"].tolist() == ["warning"]
    store.finish_job_run(run, "ok", {"lines": 2})
    runs = store.job_runs(kind="nightly")
    assert runs["status"].tolist() == ["ok"] and runs["summary"].iloc[0] == {"lines": 2}
    with pytest.raises(StoreError, match="already finished"):
        store.finish_job_run(run, "failed", {})
    with pytest.raises(StoreError, match="job status 'done' is not one of ok, warning, failed"):
        store.finish_job_run(run, "done", {})
    with pytest.raises(StoreError, match="plan date '31/03' is not YYYY-MM-DD"):
        store.add_recommendations([{"line_id": "x", "product_id": "y", "payload": {}}], plan_date="31/03")


def test_lots_and_windows_are_derived_and_replaceable(store):
    with store.writer() as w:
        w.merge_lots(pd.DataFrame({"line_id": ["TL-1"], "lot_id": ["L1"], "product_id": ["P"],
                                   "first_utc_ms": [1_000], "last_utc_ms": [5_000], "sample_count": [5]}))
        w.merge_lots(pd.DataFrame({"line_id": ["TL-1"], "lot_id": ["L1"], "product_id": [None],
                                   "first_utc_ms": [500], "last_utc_ms": [9_000], "sample_count": [3]}))
    lots = store.lots()
    assert lots[["lot_id", "product_id", "sample_count"]].values.tolist() == [["L1", "P", 8]]
    assert lots["first_utc"].iloc[0] == pd.Timestamp(500, unit="ms", tz="UTC")
    assert store.stale_lots()["lot_id"].tolist() == ["L1"]
    windows = pd.DataFrame({"lot_id": ["L1"], "product_id": ["P"], "settled_utc": [pd.Timestamp(500, unit="ms", tz="UTC")],
                            "start_utc": [pd.Timestamp(1_000, unit="ms", tz="UTC")],
                            "end_utc": [pd.Timestamp(9_000, unit="ms", tz="UTC")], "sample_count": [3],
                            "residence_time_s": [600.0], "belt_speed_m_per_min": [0.58],
                            "zone1_forward_kw": [10.0], "zone2_forward_kw": [20.0], "zone1_reflected_kw": [0.5],
                            "zone2_reflected_kw": [np.nan]})
    assert store.replace_windows("TL-1", {"L1": 8}, windows) == 1
    assert store.replace_windows("TL-1", {"L1": 8}, windows) == 1  # replaced, not added
    stored = store.windows("TL-1")
    assert len(stored) == 1 and stored["zone_forward_kw"].iloc[0] == [10.0, 20.0]
    assert stored["zone_reflected_kw"].iloc[0] == [0.5, None]
    assert store.stale_lots().empty


def test_in_memory_store_for_notebooks():
    with Store.open("sqlite://") as s:
        s.start_job_run("x")
        assert len(s.job_runs()) == 1
