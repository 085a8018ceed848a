"""The store: one database for samples, QA samples, quarantine, lots, windows, models, runs.

``Store.open(url, readonly=False)`` is the entry point; see ``schema`` for the tables and
their migrations, ``database`` for the API the ingest, fit, recommend, nightly and dashboard
steps call.
"""
from .database import Store, Writer, ms_to_utc, to_utc_ms
from .schema import MIGRATIONS, SCHEMA_VERSION

__all__ = ["Store", "Writer", "to_utc_ms", "ms_to_utc", "MIGRATIONS", "SCHEMA_VERSION"]
