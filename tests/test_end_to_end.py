"""End to end on the demo plant: logs arrive day by day, the nightly job runs after each day."""
from __future__ import annotations

import pytest

from optimizer.jobs import EXIT_OK, EXIT_WARNINGS, run_nightly
from optimizer.store import Store


def test_each_night_ingests_that_days_files_fits_gates_and_recommends(demo_runs):
    plant = demo_runs.plant
    store = Store.open(plant.store_url, readonly=True)
    try:
        for night, (result, delivered) in enumerate(zip(demo_runs.results, demo_runs.delivered)):
            assert result.exit_code in (EXIT_OK, EXIT_WARNINGS), (night, result.summary.get("errors"))
            ingest = result.summary["steps"]["ingest"]
            assert ingest["ingested"] == len(delivered), (night, delivered)
            assert ingest["skipped"] == sum(len(d) for d in demo_runs.delivered[:night])
            fit = result.summary["steps"]["fit"]
            assert sorted(fit["lines"]) == sorted(plant.lines)  # every line got new data each day
            fitted = [d for d in fit["decisions"] if d["status"] == "fitted"]
            assert fitted, night
            for d in fitted:
                row = store.model_version(d["version_id"])
                assert row["status"] == ("accepted" if d["promoted"] else "rejected")
            plan_date = result.summary["plan_date"]
            recs = store.recommendations(date=plan_date)
            assert result.summary["steps"]["recommend"]["new"] == len(recs) > 0
            for r in recs.itertuples():
                assert r.product_id in plant.line(r.line_id).products
                assert r.payload["line_id"] == r.line_id and "feasible" in r.payload
        # versions are appended, never overwritten; later nights compare with the active model
        versions = store.model_versions()
        assert versions["id"].is_monotonic_increasing and versions["id"].is_unique
        later = [d for d in demo_runs.results[-1].summary["steps"]["fit"]["decisions"] if d["status"] == "fitted"]
        assert any("active model" in d["reason"] for d in later)
    finally:
        store.close()


def test_a_repeated_night_changes_nothing(demo_runs):
    plant = demo_runs.plant
    store = Store.open(plant.store_url, readonly=True)
    before = store.table_counts()
    store.close()
    again = run_nightly(plant, plan_date=demo_runs.results[-1].summary["plan_date"])
    store = Store.open(plant.store_url, readonly=True)
    after = store.table_counts()
    store.close()
    for table in ("samples", "model_versions", "recommendations", "ingested_files", "quarantine"):
        assert after[table] == before[table], table
    assert again.exit_code == EXIT_WARNINGS
