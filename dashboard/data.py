"""Read-only access to the store for the dashboard (no writes, short read transactions).

The reader opens the store read-only, so nothing the browser does can change it; every
method returns plain frames or dicts for the layout and figure builders.
"""
from __future__ import annotations

import logging
from pathlib import Path

import pandas as pd

from optimizer.errors import StoreError
from optimizer.models import FittedModel
from optimizer.store import Store

log = logging.getLogger(__name__)


class StoreReader:
    def __init__(self, store: Store):
        self.store = store

    def active_version(self, line_id: str, product_id: str) -> dict | None:
        return self.store.active_model(line_id, product_id)

    def active_model(self, line_id: str, product_id: str) -> FittedModel | None:
        row = self.active_version(line_id, product_id)
        if row is None:
            return None
        return FittedModel.from_json(row["payload"]["model"], version_id=int(row["id"]))

    def last_run(self) -> dict | None:
        runs = self.store.job_runs(kind="nightly", limit=1)
        return None if runs.empty else runs.iloc[0].to_dict()

    def job_runs(self, limit: int = 50) -> pd.DataFrame:
        return self.store.job_runs(limit=limit)

    def latest_recommendations(self) -> pd.DataFrame:
        """The newest recommendation per line × product."""
        recs = self.store.recommendations()
        if recs.empty:
            return recs
        return recs.sort_values("id").groupby(["line_id", "product_id"], as_index=False).tail(1)

    def alerts(self, run_id: int | None = None) -> pd.DataFrame:
        return self.store.alerts(run_id=run_id)

    def ingested_files(self) -> pd.DataFrame:
        return self.store.ingested_files()

    def quarantine_summary(self) -> pd.DataFrame:
        return self.store.quarantine_summary()

    def lots_per_day(self) -> pd.DataFrame:
        lots = self.store.lots()
        if lots.empty:
            return pd.DataFrame(columns=["date", "line_id", "lots"])
        lots["date"] = pd.to_datetime(lots["first_utc"], utc=True).dt.strftime("%Y-%m-%d")
        return lots.groupby(["date", "line_id"]).size().rename("lots").reset_index()

    def model_versions(self, line_id: str, product_id: str) -> pd.DataFrame:
        return self.store.model_versions(line_id, product_id)

    def drift(self, line_id: str) -> list[dict]:
        """The efficiency drift stored with the newest model version of the line."""
        versions = self.store.model_versions(line_id)
        if versions.empty:
            return []
        return self.store.model_version(int(versions["id"].iloc[-1]))["payload"].get("drift", [])


def open_reader(plant) -> StoreReader | None:
    """A read-only reader of the plant's store, or None when no store exists yet."""
    url = plant.store_url
    if url.startswith("sqlite:///") and not Path(url[len("sqlite:///"):]).exists():
        return None
    try:
        return StoreReader(Store.open(url, readonly=True))
    except StoreError as exc:
        log.warning("dashboard without store: %s", exc)
        return None
