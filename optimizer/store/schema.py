"""The store's tables (SQLAlchemy Core) and the list of migrations that builds them.

Samples are stored in *blocks*: one row of ``sample_blocks`` holds the accepted samples of
one line from one parse block of one file (typically a day's export, or ~100 k rows of a big
file) as a Parquet payload (snappy), with the line id, the time span and the row count in
plain columns for selection. Lines with any number of zones fit without a schema change (a
block carries the columns its line has), a line-year reads back in about a second, and an
ingest costs little more than parsing the CSV. Row-per-sample tables were measured at ~9 s
per million rows for the inserts alone on the target machine, five times the parse time.
Everything small and queried by value (QA samples, quarantine, lots, windows, models,
recommendations, job runs, alerts) is ordinary rows.

Append-only: samples, QA samples, quarantine, ingested files, model versions and their
activations, recommendations and alerts are only ever inserted. ``lots`` and ``windows``
are derived indexes, recomputed from the samples inside the writing transaction; a job
run's row is completed once when the run finishes.

Times of data (sample, lot and window times) are integer milliseconds since 1970-01-01 UTC
(``*_utc_ms``), exact and cheap to compare; bookkeeping times (``created_utc`` …) are
timezone-aware UTC datetimes.

Migrations: ``MIGRATIONS[i]`` takes the schema from version i to i + 1. A new schema change
appends a function (ALTER TABLE, new table, data backfill) and leaves the earlier ones as
they are; when a later migration alters a table, migration 1 must keep creating that table
as it was in version 1 (give it a frozen copy of the old definition then).
"""
from __future__ import annotations

from datetime import datetime, timezone

from sqlalchemy import (BigInteger, Column, DateTime, Float, ForeignKey, Index, Integer,
                        LargeBinary, MetaData, String, Table, Text, TypeDecorator, UniqueConstraint)


class UtcDateTime(TypeDecorator):
    """A timezone-aware UTC datetime on any database (SQLite keeps no zone: store UTC, read UTC)."""

    impl = DateTime
    cache_ok = True

    def process_bind_param(self, value, dialect):
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError(f"naive datetime {value!r}: pass a timezone-aware (UTC) datetime")
        return value.astimezone(timezone.utc).replace(tzinfo=None)

    def process_result_value(self, value, dialect):
        if value is None:
            return None
        return value.replace(tzinfo=timezone.utc)


def utc_now() -> datetime:
    return datetime.now(timezone.utc)


metadata = MetaData()

schema_version = Table(
    "schema_version", metadata,
    Column("version", Integer, primary_key=True),
    Column("applied_utc", UtcDateTime, nullable=False),
    Column("description", Text, nullable=False),
)

ingested_files = Table(
    "ingested_files", metadata,
    Column("id", Integer, primary_key=True),
    Column("path", Text, nullable=False),
    Column("sha256", String(64), nullable=False),
    Column("size_bytes", BigInteger, nullable=False),
    Column("kind", String(16), nullable=False),  # process | qa
    Column("layout_key", String(32), nullable=False),  # how the file was read (mapping, units, csv)
    Column("line_ids", Text, nullable=False),  # JSON list of the lines whose rows it held
    Column("rows_read", Integer, nullable=False, default=0),
    Column("accepted", Integer, nullable=False, default=0),
    Column("duplicates", Integer, nullable=False, default=0),
    Column("quarantined", Integer, nullable=False, default=0),
    Column("first_utc_ms", BigInteger),
    Column("last_utc_ms", BigInteger),
    Column("report_json", Text, nullable=False, default="{}"),
    Column("ingested_utc", UtcDateTime, nullable=False),
    UniqueConstraint("sha256", "layout_key", name="uq_ingested_files_content"),
)

sample_blocks = Table(
    "sample_blocks", metadata,
    Column("id", Integer, primary_key=True),
    Column("file_id", Integer, ForeignKey("ingested_files.id"), nullable=False),
    Column("line_id", String(64), nullable=False),
    Column("first_utc_ms", BigInteger, nullable=False),
    Column("last_utc_ms", BigInteger, nullable=False),
    Column("row_count", Integer, nullable=False),
    Column("format", String(32), nullable=False),
    Column("payload", LargeBinary, nullable=False),
    Index("ix_sample_blocks_span", "line_id", "first_utc_ms", "last_utc_ms"),
)

qa_samples = Table(
    "qa_samples", metadata,
    Column("id", Integer, primary_key=True),
    Column("file_id", Integer, ForeignKey("ingested_files.id"), nullable=False),
    Column("row_number", Integer, nullable=False),
    Column("line_id", String(64), nullable=False),
    Column("timestamp_utc_ms", BigInteger, nullable=False),
    Column("utc_offset_min", Float),
    Column("product_id", String(64)),
    Column("lot_id", String(64)),
    Column("position", String(16), nullable=False),
    Column("temp_c", Float),
    Column("moisture_pct_wb", Float),
    Index("ix_qa_samples_time", "line_id", "timestamp_utc_ms"),
)

quarantine = Table(
    "quarantine", metadata,
    Column("id", Integer, primary_key=True),
    Column("file_id", Integer, ForeignKey("ingested_files.id"), nullable=False),
    Column("row_number", Integer, nullable=False),
    Column("line_id", String(64)),  # as written in the row (may be unknown)
    Column("reason", String(32), nullable=False),
    Column("detail", Text, nullable=False),
    Column("raw_text", Text, nullable=False),
    Index("ix_quarantine_file", "file_id", "row_number"),
    Index("ix_quarantine_reason", "reason"),
)

lots = Table(
    "lots", metadata,
    Column("line_id", String(64), primary_key=True),
    Column("lot_id", String(64), primary_key=True),
    Column("product_id", String(64)),
    Column("first_utc_ms", BigInteger, nullable=False),
    Column("last_utc_ms", BigInteger, nullable=False),
    Column("sample_count", Integer, nullable=False),
    Column("windows_sample_count", Integer),  # sample_count when its windows were computed
)

windows = Table(
    "windows", metadata,
    Column("id", Integer, primary_key=True),
    Column("line_id", String(64), nullable=False),
    Column("lot_id", String(64), nullable=False),
    Column("product_id", String(64)),
    Column("settled_utc_ms", BigInteger, nullable=False),
    Column("start_utc_ms", BigInteger, nullable=False),
    Column("end_utc_ms", BigInteger, nullable=False),
    Column("sample_count", Integer, nullable=False),
    Column("residence_time_s", Float, nullable=False),
    Column("belt_speed_m_per_min", Float, nullable=False),
    Column("settings_json", Text, nullable=False),  # {"zone_forward_kw": [...], "zone_reflected_kw": [...]}
    Column("computed_utc", UtcDateTime, nullable=False),
    Index("ix_windows_lot", "line_id", "lot_id"),
)

model_versions = Table(
    "model_versions", metadata,
    Column("id", Integer, primary_key=True),
    Column("line_id", String(64), nullable=False),
    Column("product_id", String(64), nullable=False),
    Column("created_utc", UtcDateTime, nullable=False),
    Column("data_start_utc", UtcDateTime),
    Column("data_end_utc", UtcDateTime),
    Column("status", String(16), nullable=False),  # candidate | accepted | rejected
    Column("reason", Text, nullable=False, default=""),
    Column("payload_json", Text, nullable=False),
    Index("ix_model_versions_pair", "line_id", "product_id"),
)

model_activations = Table(
    "model_activations", metadata,
    Column("id", Integer, primary_key=True),
    Column("version_id", Integer, ForeignKey("model_versions.id"), nullable=False),
    Column("line_id", String(64), nullable=False),
    Column("product_id", String(64), nullable=False),
    Column("activated_utc", UtcDateTime, nullable=False),
    Column("reason", Text, nullable=False),
    Index("ix_model_activations_pair", "line_id", "product_id"),
)

job_runs = Table(
    "job_runs", metadata,
    Column("id", Integer, primary_key=True),
    Column("kind", String(32), nullable=False),
    Column("started_utc", UtcDateTime, nullable=False),
    Column("finished_utc", UtcDateTime),
    Column("status", String(16), nullable=False),  # running | ok | warning | failed
    Column("summary_json", Text, nullable=False, default="{}"),
)

recommendations = Table(
    "recommendations", metadata,
    Column("id", Integer, primary_key=True),
    Column("run_id", Integer, ForeignKey("job_runs.id")),
    Column("plan_date", String(10), nullable=False),  # YYYY-MM-DD, the production day it is for
    Column("line_id", String(64), nullable=False),
    Column("product_id", String(64), nullable=False),
    Column("model_version_id", Integer, ForeignKey("model_versions.id")),
    Column("created_utc", UtcDateTime, nullable=False),
    Column("payload_json", Text, nullable=False),
    Index("ix_recommendations_date", "plan_date", "line_id", "product_id"),
)

alerts = Table(
    "alerts", metadata,
    Column("id", Integer, primary_key=True),
    Column("run_id", Integer, ForeignKey("job_runs.id")),
    Column("created_utc", UtcDateTime, nullable=False),
    Column("severity", String(16), nullable=False),  # info | warning | critical
    Column("kind", String(32), nullable=False),
    Column("line_id", String(64)),
    Column("product_id", String(64)),
    Column("message", Text, nullable=False),
    Column("payload_json", Text, nullable=False, default="{}"),
)

MODEL_STATUSES = ("candidate", "accepted", "rejected")
JOB_STATUSES = ("running", "ok", "warning", "failed")
ALERT_SEVERITIES = ("info", "warning", "critical")


def _v1_create_tables(conn) -> None:
    metadata.create_all(conn, checkfirst=True)


#: (description, function) per version step; the store's version is the number applied.
MIGRATIONS = [
    ("create the tables: files, sample blocks, QA samples, quarantine, lots, windows, models, "
     "activations, job runs, recommendations, alerts", _v1_create_tables),
]
SCHEMA_VERSION = len(MIGRATIONS)

__all__ = ["metadata", "MIGRATIONS", "SCHEMA_VERSION", "UtcDateTime", "utc_now", "MODEL_STATUSES",
           "JOB_STATUSES", "ALERT_SEVERITIES", "schema_version", "ingested_files", "sample_blocks", "qa_samples",
           "quarantine", "lots", "windows", "model_versions", "model_activations", "job_runs", "recommendations",
           "alerts"]
