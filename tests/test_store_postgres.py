"""The store and the nightly job on PostgreSQL (opt-in: needs a server you point it at).

Set ``BELTWAVE_TEST_POSTGRES_URL`` to a SQLAlchemy URL of a server where the user may create
databases, e.g. ``postgresql+psycopg://postgres@/postgres?host=/tmp/pg&port=55432``, and install
the driver (``pip install -e '.[postgres]'``). Each test creates a database of its own and drops
it afterwards. Without the variable these tests skip: CI runs on SQLite, the embedded default.
"""
from __future__ import annotations

import os
import uuid

import numpy as np
import pandas as pd
import pytest

from optimizer.config import load_plant
from optimizer.errors import StoreError
from optimizer.jobs import EXIT_OK, EXIT_WARNINGS, run_nightly
from optimizer.store import Store

SERVER_URL = os.environ.get("BELTWAVE_TEST_POSTGRES_URL")
pytestmark = pytest.mark.skipif(not SERVER_URL, reason="BELTWAVE_TEST_POSTGRES_URL is not set (opt-in PostgreSQL "
                                                       "tests; see this module's notes)")


@pytest.fixture
def pg_url():
    sa = pytest.importorskip("sqlalchemy")
    pytest.importorskip("psycopg", reason="pip install -e '.[postgres]' for the PostgreSQL tests")
    server = sa.engine.make_url(SERVER_URL)
    name = f"beltwave_test_{uuid.uuid4().hex[:12]}"
    admin = sa.create_engine(server, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(sa.text(f'CREATE DATABASE "{name}"'))
    try:
        yield server.set(database=name).render_as_string(hide_password=False)
    finally:
        with admin.connect() as conn:
            conn.execute(sa.text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


def test_samples_round_trip_and_read_only_refuses_writes(pg_url):
    t = pd.date_range("2026-03-16T05:00Z", periods=5, freq="30s").as_unit("ms")
    block = pd.DataFrame({"row_number": np.arange(2, 7), "timestamp_utc": t, "utc_offset_min": 60.0,
                          "product_id": "P", "lot_id": "L1", "belt_speed_m_per_min": 0.6,
                          "zone1_forward_kw": 10.0, "zone2_forward_kw": 12.5})
    with Store.open(pg_url) as store:
        with store.writer() as w:
            f = w.add_file("a.csv", "0" * 64, 5, "process", "k")
            w.add_block(f, "TL-1", block)
        back = store.samples("TL-1")
        assert len(back) == 5 and back["zone2_forward_kw"].tolist() == [12.5] * 5
        assert back["timestamp_utc"].tolist() == list(t)
    with Store.open(pg_url, readonly=True) as ro:
        assert len(ro.ingested_files()) == 1
        with pytest.raises(StoreError, match="read-only"):
            ro.add_alerts([{"kind": "test", "message": "must not be written"}])


def test_nightly_on_postgresql_is_complete_and_idempotent(pg_url, tmp_path):
    from test_nightly import counts, drop_logs, make_plant

    path = make_plant(tmp_path, store_url=pg_url)
    drop_logs(tmp_path)
    plant, _ = load_plant(path)
    first = run_nightly(plant, plan_date="2026-05-05")
    assert first.exit_code in (EXIT_OK, EXIT_WARNINGS), first.summary
    pork = [d for d in first.summary["steps"]["fit"]["decisions"] if d["product_id"] == "PORK-SHLDR-BLK"]
    assert pork and pork[0]["promoted"]
    before = counts(plant)
    again = run_nightly(plant, plan_date="2026-05-05")
    after = counts(plant)
    assert again.summary["steps"]["ingest"]["skipped"] == 2
    for table in ("samples", "model_versions", "model_activations", "recommendations", "lots", "ingested_files"):
        assert after[table] == before[table], table
    with Store.open(plant.store_url, readonly=True) as store:
        rec = store.recommendations(date="2026-05-05")
        assert rec["product_id"].tolist() == ["PORK-SHLDR-BLK"]
        assert int(rec["model_version_id"].iloc[0]) == pork[0]["version_id"]
