"""The store: one database (SQLite in WAL mode by default, any SQLAlchemy URL) behind a small typed API.

Writers open every transaction with ``BEGIN IMMEDIATE`` on SQLite, so a second writer waits
for the lock instead of failing half-way; readers (the dashboard) open the file read-only
(``mode=ro``) and are never blocked by the writer thanks to WAL. An ingest writes a whole
file in one transaction: killed at any point, the store is as it was before that file.
"""
from __future__ import annotations

import json
import logging
import math
import urllib.parse
from concurrent.futures import Future, ThreadPoolExecutor
from contextlib import contextmanager
from datetime import date, datetime, timezone
from pathlib import Path
from typing import Any, Iterable, Iterator

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq
from sqlalchemy import create_engine, event, func, insert, inspect, select, update
from sqlalchemy.engine import Connection, Engine, make_url
from sqlalchemy.exc import ArgumentError, NoSuchModuleError, OperationalError
from sqlalchemy.pool import StaticPool

from ..config import CANONICAL_COLUMNS
from ..errors import StoreError
from . import schema as s

log = logging.getLogger(__name__)

BLOCK_FORMAT = "parquet-snappy"
_ID_BATCH = 500  # ids per IN (...) list, under every database's parameter limit
_TEXT = ("line_id", "product_id", "lot_id")
_NUMERIC = tuple(c for c in CANONICAL_COLUMNS if c not in ("timestamp",) + _TEXT)


# ----------------------------------------------------------------------------- helpers

def to_utc_ms(value) -> int | None:
    """Milliseconds since 1970 UTC of a time (datetime, pandas Timestamp or ISO text; naive = UTC)."""
    if value is None:
        return None
    ts = pd.Timestamp(value)
    if ts.tzinfo is None:
        ts = ts.tz_localize("UTC")
    return int(ts.value // 1_000_000)  # .value is in ns whatever the unit


def ms_to_utc(values) -> pd.Series | pd.Timestamp | None:
    """Milliseconds since 1970 UTC to pandas UTC times (NaT for missing)."""
    if values is None:
        return None
    if np.isscalar(values):
        return pd.Timestamp(int(values), unit="ms", tz="UTC")
    return pd.to_datetime(pd.Series(values, dtype="float64"), unit="ms", utc=True)


def _equal(query, table, **values):
    """``query`` narrowed to rows whose columns equal the given values (None: no condition)."""
    for name, value in values.items():
        if value is not None:
            query = query.where(table.c[name] == value)
    return query


def _json(payload: Any, what: str) -> str:
    try:
        return json.dumps(payload, allow_nan=False, sort_keys=True, default=_json_default)
    except (TypeError, ValueError) as exc:
        raise StoreError(f"{what} is not plain JSON ({exc}); give numbers, text, lists and dicts, "
                         "with None for missing values (not NaN)") from None


def _json_default(obj):
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating,)):
        if not math.isfinite(float(obj)):
            raise ValueError(f"non-finite number {obj!r}")
        return float(obj)
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, (datetime, date, pd.Timestamp)):
        return obj.isoformat()
    raise TypeError(f"{type(obj).__name__} is not JSON serialisable")


def encode_block(frame: pd.DataFrame) -> bytes:
    """One block of samples as Parquet bytes.

    Snappy, with dictionaries for the text columns only: the cheapest to write of the
    settings measured (bench/bench_ingest.py), at ~1/3 of the CSV's size.
    """
    columns = {}
    for name in frame.columns:
        values = frame[name]
        if values.dtype.kind in "fiu":
            columns[name] = pa.array(values.to_numpy())
        else:
            columns[name] = pa.array(values)
            if pa.types.is_large_string(columns[name].type) or pa.types.is_null(columns[name].type):
                columns[name] = columns[name].cast(pa.string())
    sink = pa.BufferOutputStream()
    pq.write_table(pa.table(columns), sink, compression="snappy", write_statistics=False,
                   use_dictionary=[c for c in ("product_id", "lot_id") if c in columns])
    return sink.getvalue().to_pybytes()


def decode_block(payload: bytes) -> pa.Table:
    return pq.read_table(pa.BufferReader(payload))


def _frame(rows, columns) -> pd.DataFrame:
    return pd.DataFrame([tuple(r) for r in rows], columns=columns)


def _chunks(items: list, n: int = _ID_BATCH):
    for i in range(0, len(items), n):
        yield items[i:i + n]


def _zone_order(col: str) -> tuple:
    head, _, stem = col.partition("_")
    return (int(head[4:]), stem)


def _sample_frame(table: pa.Table, line_id: str) -> pd.DataFrame:
    """Stored samples in the documented column order (canonical numeric columns always present)."""
    if table.num_rows:
        table = table.sort_by([("timestamp_utc", "ascending")])
    df = table.to_pandas()
    df["line_id"] = line_id
    for c in _NUMERIC:
        if c not in df:
            df[c] = np.nan
    for c in ("product_id", "lot_id"):
        if c not in df:
            df[c] = pd.Series([None] * len(df), dtype=object)
    zones = sorted((c for c in df.columns if c.startswith("zone") and c.split("_", 1)[0][4:].isdigit()),
                   key=_zone_order)
    tail = [c for c in ("utc_offset_min", "file_id", "row_number") if c in df]
    return df[["timestamp_utc", "line_id", "product_id", "lot_id", *_NUMERIC, *zones, *tail]].reset_index(drop=True)


# ----------------------------------------------------------------------------- the store

class Store:
    """The database behind every step. Open with :meth:`open`; use as a context manager or close()."""

    def __init__(self, engine: Engine, url: str, readonly: bool):
        self.engine = engine
        self.url = url
        self.readonly = readonly

    # ---- opening

    @classmethod
    def open(cls, url: str, readonly: bool = False) -> "Store":
        """Open (and, when writable, create or migrate) the store at an SQLAlchemy URL.

        ``readonly=True`` opens without any possibility to write (SQLite ``mode=ro`` plus
        ``query_only``); it fails with a clear message when the store does not exist yet or
        needs a migration.
        """
        try:
            parsed = make_url(url)
        except ArgumentError:
            raise StoreError(f"'{url}' is not a database URL; use e.g. sqlite:///data/beltwave.sqlite or "
                             "postgresql+psycopg://user@host/beltwave") from None
        sqlite = parsed.get_backend_name() == "sqlite"
        if sqlite:
            engine = _sqlite_engine(parsed, readonly)
        else:
            options = {"postgresql_readonly": True} if readonly and parsed.get_backend_name() == "postgresql" else {}
            try:
                engine = create_engine(url, execution_options=options)
            except (ImportError, NoSuchModuleError) as exc:
                hint = ("pip install -e '.[postgres]'" if parsed.get_backend_name() == "postgresql"
                        else "install the database driver this URL names")
                raise StoreError(f"cannot open the store {url}: its database driver is missing ({exc}); {hint}, "
                                 "or use the embedded default sqlite:///data/beltwave.sqlite") from None
        store = cls(engine, url, readonly)
        try:
            store._prepare_schema()
        except OperationalError as exc:
            engine.dispose()
            raise StoreError(f"cannot open the store {url}: {exc.orig}") from None
        except StoreError:
            engine.dispose()
            raise
        return store

    def close(self):
        self.engine.dispose()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def _prepare_schema(self):
        if self.readonly:
            with self._read() as conn:
                version = _schema_version(conn)
            if version is None:
                raise StoreError(f"{self.url} is not a beltwave store yet (no schema_version table); "
                                 "create it with `beltwave ingest`")
            if version < s.SCHEMA_VERSION:
                raise StoreError(f"{self.url} has schema version {version}, this beltwave needs "
                                 f"{s.SCHEMA_VERSION}; run a writing command (e.g. `beltwave ingest`) once to migrate")
        else:
            with self._write() as conn:
                s.schema_version.create(conn, checkfirst=True)
                version = _schema_version(conn) or 0
                for number in range(version + 1, s.SCHEMA_VERSION + 1):
                    description, migrate = s.MIGRATIONS[number - 1]
                    log.info("store %s: migrating to schema version %d (%s)", self.url, number, description)
                    migrate(conn)
                    conn.execute(insert(s.schema_version).values(version=number, applied_utc=s.utc_now(),
                                                                 description=description))
        if version is not None and version > s.SCHEMA_VERSION:
            raise StoreError(f"{self.url} has schema version {version}, newer than this beltwave's "
                             f"{s.SCHEMA_VERSION}; upgrade beltwave")

    @property
    def schema_version(self) -> int:
        with self._read() as conn:
            return _schema_version(conn) or 0

    @contextmanager
    def _read(self) -> Iterator[Connection]:
        with self.engine.connect().execution_options(beltwave_read=True) as conn:
            with conn.begin():
                yield conn

    @contextmanager
    def _write(self) -> Iterator[Connection]:
        if self.readonly:
            raise StoreError(f"the store {self.url} is open read-only; nothing can be written through it")
        with self.engine.begin() as conn:
            yield conn

    @contextmanager
    def writer(self) -> Iterator["Writer"]:
        """One write transaction (``BEGIN IMMEDIATE`` on SQLite): all of it is stored or none."""
        with self._write() as conn:
            w = Writer(conn)
            try:
                yield w
                w.flush()
            finally:
                w.discard()

    # ---- files, samples, QA, quarantine

    def find_file(self, sha256: str, layout_key: str) -> dict | None:
        """The ingested file with this content read with this layout, if any."""
        with self._read() as conn:
            row = conn.execute(select(s.ingested_files).where(
                s.ingested_files.c.sha256 == sha256, s.ingested_files.c.layout_key == layout_key)).mappings().first()
        return dict(row) if row else None

    def ingested_files(self) -> pd.DataFrame:
        """Every file ingested, oldest first, with its counts (``report`` holds the full report)."""
        t = s.ingested_files
        with self._read() as conn:
            rows = conn.execute(select(t).order_by(t.c.id)).mappings().all()
        df = pd.DataFrame([dict(r) for r in rows], columns=[c.name for c in t.columns])
        df["line_ids"] = df["line_ids"].map(json.loads)
        df["report"] = df.pop("report_json").map(json.loads)
        for c in ("first_utc_ms", "last_utc_ms"):
            df[c.replace("_ms", "")] = ms_to_utc(df.pop(c)).to_numpy()
        return df

    def samples(self, line_id: str, product_id: str | None = None, start=None, end=None,
                lot_ids: Iterable[str] | None = None) -> pd.DataFrame:
        """A line's samples, sorted by time, in canonical columns and units.

        Parameters
        ----------
        start, end : time bounds, inclusive (datetime, Timestamp or ISO text; naive means UTC).
        product_id, lot_ids : keep only these.

        Returns
        -------
        DataFrame with ``timestamp_utc`` (UTC), ``line_id``, ``product_id``, ``lot_id``, every
        numeric canonical column (NaN where never logged), ``zone{i}_forward_kw`` and
        ``zone{i}_reflected_kw`` for the zones logged, ``utc_offset_min`` (as the historian wrote
        it), and for provenance ``file_id`` and ``row_number`` (line in that file).
        """
        with self._read() as conn:
            table = _stored_blocks(conn, line_id, to_utc_ms(start), to_utc_ms(end))
        if product_id is not None:
            table = table.filter(pc.equal(table.column("product_id"), product_id))
        if lot_ids is not None:
            table = table.filter(pc.is_in(table.column("lot_id"), pa.array(list(lot_ids), pa.string())))
        return _sample_frame(table, line_id)

    def sample_count(self, line_id: str | None = None) -> int:
        t = s.sample_blocks
        q = select(func.coalesce(func.sum(t.c.row_count), 0))
        q = _equal(q, t, line_id=line_id)
        with self._read() as conn:
            return int(conn.execute(q).scalar_one())

    def newest_sample_utc(self, line_id: str) -> pd.Timestamp | None:
        """Time of the line's newest stored sample (UTC), None without samples."""
        t = s.sample_blocks
        with self._read() as conn:
            ms = conn.execute(select(func.max(t.c.last_utc_ms)).where(t.c.line_id == line_id)).scalar_one()
        return None if ms is None else pd.Timestamp(int(ms), unit="ms", tz="UTC")

    def lines_with_samples(self) -> list[str]:
        with self._read() as conn:
            return sorted(conn.execute(select(s.sample_blocks.c.line_id).distinct()).scalars())

    def qa_samples(self, line_id: str | None = None, product_id: str | None = None,
                   lot_ids: Iterable[str] | None = None, start=None, end=None) -> pd.DataFrame:
        """QA probe readings (position core/surface/edge/lab), sorted by line and time."""
        t = s.qa_samples
        q = select(t)
        q = _equal(q, t, line_id=line_id, product_id=product_id)
        if lot_ids is not None:
            q = q.where(t.c.lot_id.in_(list(lot_ids)))
        if start is not None:
            q = q.where(t.c.timestamp_utc_ms >= to_utc_ms(start))
        if end is not None:
            q = q.where(t.c.timestamp_utc_ms <= to_utc_ms(end))
        with self._read() as conn:
            df = _frame(conn.execute(q.order_by(t.c.line_id, t.c.timestamp_utc_ms, t.c.id)), [c.name for c in t.c])
        df.insert(1, "timestamp_utc", ms_to_utc(df.pop("timestamp_utc_ms")).to_numpy())
        return df.drop(columns=["id"])

    def quarantine(self, reason: str | None = None, limit: int | None = None, path: str | None = None) -> pd.DataFrame:
        """Quarantined rows of each file's latest reading (path, row_number, line_id, reason, detail, raw_text).

        A file read again after its layout was fixed replaces its earlier reading here; the
        earlier rows stay in the table as history.
        """
        q_, f = s.quarantine, s.ingested_files
        q = select(f.c.path, q_.c.row_number, q_.c.line_id, q_.c.reason, q_.c.detail, q_.c.raw_text, q_.c.file_id) \
            .join(f, f.c.id == q_.c.file_id).where(q_.c.file_id.in_(_latest_readings()))
        if reason is not None:
            q = q.where(q_.c.reason == reason)
        if path is not None:
            q = q.where(f.c.path == path)
        q = q.order_by(q_.c.reason, f.c.path, q_.c.row_number)
        if limit is not None:
            q = q.limit(limit)
        with self._read() as conn:
            return _frame(conn.execute(q), ["path", "row_number", "line_id", "reason", "detail", "raw_text", "file_id"])

    def quarantine_summary(self) -> pd.DataFrame:
        """Quarantined rows by reason (latest reading of each file): reason, rows, files, example."""
        q_ = s.quarantine
        q = select(q_.c.reason, func.count(), func.count(func.distinct(q_.c.file_id)), func.min(q_.c.id)) \
            .where(q_.c.file_id.in_(_latest_readings())).group_by(q_.c.reason).order_by(func.count().desc(), q_.c.reason)
        with self._read() as conn:
            rows = conn.execute(q).all()
            examples = {r[3]: conn.execute(select(q_.c.detail).where(q_.c.id == r[3])).scalar_one() for r in rows}
        return pd.DataFrame([(r[0], r[1], r[2], examples[r[3]]) for r in rows],
                            columns=["reason", "rows", "files", "example"])

    # ---- lots and windows

    def lots(self, line_id: str | None = None, product_id: str | None = None) -> pd.DataFrame:
        """Lots found in the samples: line_id, lot_id, product_id, first_utc, last_utc, sample_count."""
        t = s.lots
        q = select(t)
        q = _equal(q, t, line_id=line_id, product_id=product_id)
        with self._read() as conn:
            df = _frame(conn.execute(q.order_by(t.c.line_id, t.c.first_utc_ms)), [c.name for c in t.c])
        df["first_utc"] = ms_to_utc(df.pop("first_utc_ms")).to_numpy()
        df["last_utc"] = ms_to_utc(df.pop("last_utc_ms")).to_numpy()
        df["windows_current"] = df.pop("windows_sample_count") == df["sample_count"]
        return df[["line_id", "lot_id", "product_id", "first_utc", "last_utc", "sample_count", "windows_current"]]

    def stale_lots(self, line_id: str | None = None) -> pd.DataFrame:
        """Lots whose windows were computed on fewer samples than they now have (or never)."""
        lots = self.lots(line_id)
        return lots[~lots["windows_current"]].reset_index(drop=True)

    def replace_windows(self, line_id: str, lot_sample_counts: dict[str, int], windows: pd.DataFrame) -> int:
        """Store the windows of these lots (a ``segment.steady_windows`` frame), replacing their old ones.

        ``lot_sample_counts`` says on how many samples of each lot they were computed, so
        that :meth:`stale_lots` knows when they are out of date. Returns the windows stored.
        """
        lot_ids = list(lot_sample_counts)
        zone_f = sorted((c for c in windows.columns if c.endswith("_forward_kw")), key=_zone_order)
        zone_r = sorted((c for c in windows.columns if c.endswith("_reflected_kw")), key=_zone_order)
        now = s.utc_now()
        rows = [{
            "line_id": line_id, "lot_id": w["lot_id"], "product_id": w["product_id"],
            "settled_utc_ms": to_utc_ms(w["settled_utc"]), "start_utc_ms": to_utc_ms(w["start_utc"]),
            "end_utc_ms": to_utc_ms(w["end_utc"]), "sample_count": int(w["sample_count"]),
            "residence_time_s": float(w["residence_time_s"]), "belt_speed_m_per_min": float(w["belt_speed_m_per_min"]),
            "settings_json": _json({"zone_forward_kw": [_num(w[c]) for c in zone_f],
                                    "zone_reflected_kw": [_num(w[c]) for c in zone_r]}, "window settings"),
            "computed_utc": now,
        } for w in windows[windows["lot_id"].isin(lot_ids)].to_dict("records")]
        with self._write() as conn:
            for part in _chunks(lot_ids):
                conn.execute(s.windows.delete().where(s.windows.c.line_id == line_id, s.windows.c.lot_id.in_(part)))
            if rows:
                conn.execute(insert(s.windows), rows)
            for lot_id, count in lot_sample_counts.items():
                conn.execute(update(s.lots).where(s.lots.c.line_id == line_id, s.lots.c.lot_id == lot_id)
                             .values(windows_sample_count=int(count)))
        return len(rows)

    def windows(self, line_id: str | None = None, product_id: str | None = None,
                lot_ids: Iterable[str] | None = None) -> pd.DataFrame:
        """Steady windows: line, lot, product, settled/start/end times, samples, residence time, settings."""
        t = s.windows
        q = select(t)
        q = _equal(q, t, line_id=line_id, product_id=product_id)
        if lot_ids is not None:
            q = q.where(t.c.lot_id.in_(list(lot_ids)))
        with self._read() as conn:
            df = _frame(conn.execute(q.order_by(t.c.line_id, t.c.start_utc_ms)), [c.name for c in t.c])
        for c in ("settled", "start", "end"):
            df[f"{c}_utc"] = ms_to_utc(df.pop(f"{c}_utc_ms")).to_numpy()
        settings = df.pop("settings_json").map(json.loads)
        df["zone_forward_kw"] = settings.map(lambda d: d["zone_forward_kw"])
        df["zone_reflected_kw"] = settings.map(lambda d: d["zone_reflected_kw"])
        return df.rename(columns={"id": "window_id"})

    # ---- model versions

    def add_model_version(self, line_id: str, product_id: str, payload: dict, *, status: str = "candidate",
                          reason: str = "", data_start=None, data_end=None, activate: bool = False) -> int:
        """Append a fitted model (``payload``: the fit's JSON summary); returns its id.

        ``status`` is the promotion gate's verdict (candidate | accepted | rejected); with
        ``activate`` the version also becomes the active one in the same transaction.
        """
        if status not in s.MODEL_STATUSES:
            raise StoreError(f"model status '{status}' is not one of {', '.join(s.MODEL_STATUSES)}")
        text = _json(payload, "the model payload")
        with self._write() as conn:
            version_id = conn.execute(insert(s.model_versions).values(
                line_id=line_id, product_id=product_id, created_utc=s.utc_now(),
                data_start_utc=_aware(data_start), data_end_utc=_aware(data_end), status=status,
                reason=reason, payload_json=text)).inserted_primary_key[0]
            if activate:
                _activate(conn, version_id, line_id, product_id, reason or "activated on creation")
        return int(version_id)

    def activate_model(self, version_id: int, reason: str) -> None:
        """Make a model version the active one of its line × product (appends an activation)."""
        with self._write() as conn:
            row = conn.execute(select(s.model_versions.c.line_id, s.model_versions.c.product_id)
                               .where(s.model_versions.c.id == version_id)).first()
            if row is None:
                raise StoreError(f"there is no model version {version_id}")
            _activate(conn, version_id, row.line_id, row.product_id, reason)

    def model_versions(self, line_id: str | None = None, product_id: str | None = None) -> pd.DataFrame:
        """Model versions, newest last, without payloads; ``active`` marks the active one per pair."""
        t = s.model_versions
        cols = [c for c in t.c if c.name != "payload_json"]
        q = select(*cols)
        q = _equal(q, t, line_id=line_id, product_id=product_id)
        with self._read() as conn:
            df = _frame(conn.execute(q.order_by(t.c.id)), [c.name for c in cols])
            active = set(conn.execute(select(_active_versions().c.version_id)).scalars())
        df["active"] = df["id"].isin(active)
        return df

    def model_version(self, version_id: int) -> dict:
        """One model version with its payload (raises StoreError when unknown)."""
        with self._read() as conn:
            row = conn.execute(select(s.model_versions).where(s.model_versions.c.id == version_id)).mappings().first()
        if row is None:
            raise StoreError(f"there is no model version {version_id}")
        out = dict(row)
        out["payload"] = json.loads(out.pop("payload_json"))
        return out

    def active_model(self, line_id: str, product_id: str) -> dict | None:
        """The active model version of a line × product (with payload and activation), or None."""
        a = s.model_activations
        with self._read() as conn:
            row = conn.execute(select(a).where(a.c.line_id == line_id, a.c.product_id == product_id)
                               .order_by(a.c.id.desc()).limit(1)).mappings().first()
        if row is None:
            return None
        out = self.model_version(row["version_id"])
        out["activated_utc"] = row["activated_utc"]
        out["activation_reason"] = row["reason"]
        return out

    def model_activations(self, line_id: str | None = None, product_id: str | None = None) -> pd.DataFrame:
        a = s.model_activations
        q = select(a)
        q = _equal(q, a, line_id=line_id, product_id=product_id)
        with self._read() as conn:
            return _frame(conn.execute(q.order_by(a.c.id)), [c.name for c in a.c])

    # ---- recommendations, job runs, alerts

    def add_recommendations(self, records: Iterable[dict], *, run_id: int | None = None,
                            plan_date: str | date | None = None) -> list[int]:
        """Append recommendations; each record has ``line_id``, ``product_id``, ``payload`` and
        optionally ``model_version_id`` and ``plan_date`` (YYYY-MM-DD; default the call's
        ``plan_date``, else today in UTC). Returns their ids."""
        default_date = _plan_date(plan_date)
        now = s.utc_now()
        rows = []
        for i, r in enumerate(records):
            missing = [k for k in ("line_id", "product_id", "payload") if k not in r]
            if missing:
                raise StoreError(f"recommendation {i} lacks {', '.join(missing)}")
            rows.append({"run_id": run_id, "plan_date": _plan_date(r.get("plan_date")) if r.get("plan_date")
                         else default_date, "line_id": r["line_id"], "product_id": r["product_id"],
                         "model_version_id": r.get("model_version_id"), "created_utc": now,
                         "payload_json": _json(r["payload"], f"recommendation {i}'s payload")})
        with self._write() as conn:
            return [int(conn.execute(insert(s.recommendations).values(**row)).inserted_primary_key[0]) for row in rows]

    def recommendations(self, date: str | date | None = None, line_id: str | None = None,
                        product_id: str | None = None, run_id: int | None = None) -> pd.DataFrame:
        """Recommendations (newest last) with their payloads as dicts."""
        t = s.recommendations
        q = select(t)
        if date is not None:
            q = q.where(t.c.plan_date == _plan_date(date))
        q = _equal(q, t, line_id=line_id, product_id=product_id, run_id=run_id)
        with self._read() as conn:
            df = _frame(conn.execute(q.order_by(t.c.id)), [c.name for c in t.c])
        df["payload"] = df.pop("payload_json").map(json.loads)
        return df

    def start_job_run(self, kind: str) -> int:
        """Record that a job (``nightly``, ``ingest``, …) started; returns the run id."""
        with self._write() as conn:
            return int(conn.execute(insert(s.job_runs).values(kind=kind, started_utc=s.utc_now(), status="running",
                                                              summary_json="{}")).inserted_primary_key[0])

    def finish_job_run(self, run_id: int, status: str, summary: dict) -> None:
        """Complete a running job run once, with its status (ok | warning | failed) and JSON summary."""
        if status not in s.JOB_STATUSES or status == "running":
            raise StoreError(f"job status '{status}' is not one of ok, warning, failed")
        text = _json(summary, "the job summary")
        with self._write() as conn:
            done = conn.execute(update(s.job_runs).where(s.job_runs.c.id == run_id, s.job_runs.c.status == "running")
                                .values(status=status, finished_utc=s.utc_now(), summary_json=text)).rowcount
            if done != 1:
                raise StoreError(f"job run {run_id} does not exist or has already finished")

    def job_runs(self, kind: str | None = None, limit: int | None = None) -> pd.DataFrame:
        """Job runs, newest first, with their summaries as dicts."""
        t = s.job_runs
        q = select(t)
        q = _equal(q, t, kind=kind)
        q = q.order_by(t.c.id.desc())
        if limit is not None:
            q = q.limit(limit)
        with self._read() as conn:
            df = _frame(conn.execute(q), [c.name for c in t.c])
        df["summary"] = df.pop("summary_json").map(json.loads)
        return df

    def add_alerts(self, alerts: Iterable[dict], run_id: int | None = None) -> list[int]:
        """Append alerts: dicts with ``kind``, ``message`` and optionally ``severity`` (default
        warning), ``line_id``, ``product_id``, ``payload``. Returns their ids."""
        now = s.utc_now()
        rows = []
        for i, a in enumerate(alerts):
            severity = a.get("severity", "warning")
            if severity not in s.ALERT_SEVERITIES:
                raise StoreError(f"alert {i}: severity '{severity}' is not one of {', '.join(s.ALERT_SEVERITIES)}")
            if "kind" not in a or "message" not in a:
                raise StoreError(f"alert {i} needs a kind and a message")
            rows.append({"run_id": run_id, "created_utc": now, "severity": severity, "kind": a["kind"],
                         "line_id": a.get("line_id"), "product_id": a.get("product_id"), "message": a["message"],
                         "payload_json": _json(a.get("payload", {}), f"alert {i}'s payload")})
        with self._write() as conn:
            return [int(conn.execute(insert(s.alerts).values(**row)).inserted_primary_key[0]) for row in rows]

    def alerts(self, since=None, line_id: str | None = None, run_id: int | None = None) -> pd.DataFrame:
        t = s.alerts
        q = select(t)
        if since is not None:
            q = q.where(t.c.created_utc >= _aware(since))
        q = _equal(q, t, line_id=line_id, run_id=run_id)
        with self._read() as conn:
            df = _frame(conn.execute(q.order_by(t.c.id)), [c.name for c in t.c])
        df["payload"] = df.pop("payload_json").map(json.loads)
        return df

    def table_counts(self) -> dict[str, int]:
        """Rows per table (samples counted as rows inside their blocks)."""
        with self._read() as conn:
            out = {t.name: int(conn.execute(select(func.count()).select_from(t)).scalar_one())
                   for t in s.metadata.sorted_tables}
            out["samples"] = int(conn.execute(select(func.coalesce(func.sum(s.sample_blocks.c.row_count), 0)))
                                 .scalar_one())
        return out


class Writer:
    """Writes of one ingest transaction (obtained from :meth:`Store.writer`).

    Sample blocks are encoded to Parquet on a helper thread (pyarrow releases the GIL there)
    while the caller parses the next block; they are inserted, in order, on the transaction's
    own connection before anything reads the span they cover and before the commit.
    """

    MAX_PENDING = 2  # blocks encoded ahead; bounds the memory held

    def __init__(self, conn: Connection):
        self.conn = conn
        self._pending: list[tuple[dict, Future]] = []
        self._pool: ThreadPoolExecutor | None = None

    def add_file(self, path: str, sha256: str, size_bytes: int, kind: str, layout_key: str) -> int | None:
        """Register a file being ingested; None when another writer stored the same content and layout
        first (checked under the write lock, so two ingests of one file cannot both store it)."""
        f = s.ingested_files
        if self.conn.execute(select(f.c.id).where(f.c.sha256 == sha256, f.c.layout_key == layout_key)).first():
            return None
        return int(self.conn.execute(insert(s.ingested_files).values(
            path=path, sha256=sha256, size_bytes=size_bytes, kind=kind, layout_key=layout_key, line_ids="[]",
            rows_read=0, accepted=0, duplicates=0, quarantined=0, report_json="{}",
            ingested_utc=s.utc_now())).inserted_primary_key[0])

    def finish_file(self, file_id: int, report: dict) -> None:
        """Record the file's counts and full report (the same transaction as its rows)."""
        self.conn.execute(update(s.ingested_files).where(s.ingested_files.c.id == file_id).values(
            line_ids=json.dumps(report["line_ids"]), rows_read=report["rows_read"], accepted=report["accepted"],
            duplicates=report["duplicates"], quarantined=sum(report["quarantined"].values()),
            first_utc_ms=to_utc_ms(report["first_utc"]), last_utc_ms=to_utc_ms(report["last_utc"]),
            report_json=_json(report, "the file report")))

    def add_block(self, file_id: int, line_id: str, frame: pd.DataFrame) -> None:
        """Store accepted samples of one line (sorted by time; no timestamps already stored)."""
        if frame.empty:
            return
        frame = frame.assign(timestamp_utc=pd.DatetimeIndex(frame["timestamp_utc"]).as_unit("ms"))
        ms = np.asarray(pd.DatetimeIndex(frame["timestamp_utc"]).asi8)
        meta = {"file_id": file_id, "line_id": line_id, "first_utc_ms": int(ms.min()), "last_utc_ms": int(ms.max()),
                "row_count": len(frame), "format": BLOCK_FORMAT}
        if self._pool is None:
            self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="beltwave-encode")
        self._pending.append((meta, self._pool.submit(encode_block, frame)))
        while len(self._pending) > self.MAX_PENDING:
            self._insert_oldest()

    def flush(self) -> None:
        """Insert every block still being encoded (called before the commit)."""
        while self._pending:
            self._insert_oldest()

    def discard(self) -> None:
        """Drop blocks not inserted yet and stop the helper thread (the transaction is rolled back)."""
        self._pending.clear()
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None

    def _insert_oldest(self) -> None:
        meta, payload = self._pending.pop(0)
        self.conn.execute(insert(s.sample_blocks).values(**meta, payload=payload.result()))

    def stored_samples(self, line_id: str, start_ms: int, end_ms: int) -> pd.DataFrame | None:
        """Stored samples of a line within [start, end] (including this transaction's); None when no
        block overlaps the span."""
        if any(m["line_id"] == line_id and m["last_utc_ms"] >= start_ms and m["first_utc_ms"] <= end_ms
               for m, _ in self._pending):
            self.flush()
        t = s.sample_blocks
        overlap = self.conn.execute(select(t.c.id).where(t.c.line_id == line_id, t.c.last_utc_ms >= start_ms,
                                                         t.c.first_utc_ms <= end_ms).limit(1)).first()
        if overlap is None:
            return None
        return _sample_frame(_stored_blocks(self.conn, line_id, start_ms, end_ms), line_id)

    def add_quarantine(self, file_id: int, rows: pd.DataFrame) -> None:
        """Rows with row_number, line_id, reason, detail, raw_text."""
        if rows.empty:
            return
        records = rows[["row_number", "line_id", "reason", "detail", "raw_text"]].astype(object) \
            .where(rows[["row_number", "line_id", "reason", "detail", "raw_text"]].notna(), None).to_dict("records")
        for r in records:
            r["file_id"] = file_id
            r["row_number"] = int(r["row_number"])
        self.conn.execute(insert(s.quarantine), records)

    def stored_qa(self, line_id: str, start_ms: int, end_ms: int) -> pd.DataFrame:
        t = s.qa_samples
        rows = self.conn.execute(select(t.c.timestamp_utc_ms, t.c.lot_id, t.c.position, t.c.temp_c,
                                        t.c.moisture_pct_wb, t.c.product_id)
                                 .where(t.c.line_id == line_id, t.c.timestamp_utc_ms.between(start_ms, end_ms)))
        return _frame(rows, ["timestamp_utc_ms", "lot_id", "position", "temp_c", "moisture_pct_wb", "product_id"])

    def add_qa(self, file_id: int, frame: pd.DataFrame) -> None:
        if frame.empty:
            return
        cols = ["row_number", "line_id", "timestamp_utc_ms", "utc_offset_min", "product_id", "lot_id", "position",
                "temp_c", "moisture_pct_wb"]
        records = frame[cols].astype(object).where(frame[cols].notna(), None).to_dict("records")
        for r in records:
            r["file_id"] = file_id
        self.conn.execute(insert(s.qa_samples), records)

    def merge_lots(self, found: pd.DataFrame) -> None:
        """Fold lots seen in newly stored samples (line_id, lot_id, product_id, first_utc_ms,
        last_utc_ms, sample_count) into the lots table."""
        t = s.lots
        for line_id, part in found.groupby("line_id"):
            ids = part["lot_id"].tolist()
            existing = {}
            for batch in _chunks(ids):
                for r in self.conn.execute(select(t).where(t.c.line_id == line_id, t.c.lot_id.in_(batch))).mappings():
                    existing[r["lot_id"]] = dict(r)
            new_rows = []
            for r in part.to_dict("records"):
                old = existing.get(r["lot_id"])
                if old is None:
                    new_rows.append({"line_id": line_id, "lot_id": r["lot_id"], "product_id": _str(r["product_id"]),
                                     "first_utc_ms": int(r["first_utc_ms"]), "last_utc_ms": int(r["last_utc_ms"]),
                                     "sample_count": int(r["sample_count"]), "windows_sample_count": None})
                else:
                    self.conn.execute(update(t).where(t.c.line_id == line_id, t.c.lot_id == r["lot_id"]).values(
                        product_id=old["product_id"] or _str(r["product_id"]),
                        first_utc_ms=min(old["first_utc_ms"], int(r["first_utc_ms"])),
                        last_utc_ms=max(old["last_utc_ms"], int(r["last_utc_ms"])),
                        sample_count=old["sample_count"] + int(r["sample_count"])))
            if new_rows:
                self.conn.execute(insert(t), new_rows)


# ----------------------------------------------------------------------------- internals

def _sqlite_engine(parsed, readonly: bool) -> Engine:
    database = parsed.database or ""
    memory = database in ("", ":memory:") or "mode=memory" in str(parsed)
    if readonly and not memory:
        path = Path(database).resolve()
        if not path.exists():
            raise StoreError(f"there is no store at {path}; create it with `beltwave ingest` first")
        engine = create_engine(f"sqlite:///file:{urllib.parse.quote(str(path))}?mode=ro&uri=true")
    elif memory:
        engine = create_engine("sqlite://", poolclass=StaticPool, connect_args={"check_same_thread": False})
    else:
        Path(database).resolve().parent.mkdir(parents=True, exist_ok=True)
        engine = create_engine(parsed)

    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_conn, _record):
        dbapi_conn.isolation_level = None  # we issue BEGIN ourselves (below)
        cur = dbapi_conn.cursor()
        cur.execute("PRAGMA busy_timeout = 60000")
        cur.execute("PRAGMA foreign_keys = ON")
        if readonly:
            cur.execute("PRAGMA query_only = ON")
        elif not memory:
            cur.execute("PRAGMA journal_mode = WAL")
            cur.execute("PRAGMA synchronous = NORMAL")  # durable across a killed process; WAL keeps it consistent
        cur.close()

    @event.listens_for(engine, "begin")
    def _on_begin(conn):
        reading = readonly or conn.get_execution_options().get("beltwave_read", False)
        conn.exec_driver_sql("BEGIN" if reading else "BEGIN IMMEDIATE")

    return engine


def _schema_version(conn) -> int | None:
    if not inspect(conn).has_table("schema_version"):
        return None
    return conn.execute(select(func.max(s.schema_version.c.version))).scalar()


def _stored_blocks(conn, line_id: str, start_ms: int | None, end_ms: int | None) -> pa.Table:
    t = s.sample_blocks
    q = select(t.c.id, t.c.file_id, t.c.payload).where(t.c.line_id == line_id)
    if start_ms is not None:
        q = q.where(t.c.last_utc_ms >= start_ms)
    if end_ms is not None:
        q = q.where(t.c.first_utc_ms <= end_ms)
    tables = []
    for _id, file_id, payload in conn.execute(q.order_by(t.c.first_utc_ms, t.c.id)):
        block = decode_block(payload)
        tables.append(block.append_column("file_id", pa.array(np.full(block.num_rows, file_id, np.int64))))
    if not tables:
        return pa.table({"timestamp_utc": pa.array([], pa.timestamp("ms", tz="UTC"))})
    table = pa.concat_tables(tables, promote_options="permissive")
    ts = table.column("timestamp_utc").cast(pa.timestamp("ms", tz="UTC")).cast(pa.int64())
    keep = None
    if start_ms is not None:
        keep = pc.greater_equal(ts, start_ms)
    if end_ms is not None:
        upper = pc.less_equal(ts, end_ms)
        keep = upper if keep is None else pc.and_(keep, upper)
    return table if keep is None else table.filter(keep)


def _latest_readings():
    """Ids of each content's latest reading (a file re-read with a fixed layout supersedes the old one)."""
    f = s.ingested_files
    return select(func.max(f.c.id)).group_by(f.c.sha256)


def _active_versions():
    a = s.model_activations
    latest = select(func.max(a.c.id).label("id")).group_by(a.c.line_id, a.c.product_id).subquery()
    return select(a.c.version_id).join(latest, latest.c.id == a.c.id).subquery()


def _activate(conn, version_id: int, line_id: str, product_id: str, reason: str) -> None:
    if not reason:
        raise StoreError("activating a model needs a reason (it is kept with the activation)")
    conn.execute(insert(s.model_activations).values(version_id=version_id, line_id=line_id, product_id=product_id,
                                                    activated_utc=s.utc_now(), reason=reason))


def _aware(value) -> datetime | None:
    if value is None:
        return None
    ts = pd.Timestamp(value)
    if ts.tzinfo is None:
        ts = ts.tz_localize("UTC")
    return ts.to_pydatetime().astimezone(timezone.utc)


def _plan_date(value) -> str:
    if value is None:
        return datetime.now(timezone.utc).date().isoformat()
    if isinstance(value, (date, datetime)):
        return value.isoformat()[:10]
    try:
        return date.fromisoformat(str(value)).isoformat()
    except ValueError:
        raise StoreError(f"plan date '{value}' is not YYYY-MM-DD") from None


def _num(x) -> float | None:
    return None if x is None or (isinstance(x, float) and not math.isfinite(x)) else float(x)


def _str(x) -> str | None:
    return None if x is None or (isinstance(x, float) and math.isnan(x)) else str(x)


__all__ = ["Store", "Writer", "to_utc_ms", "ms_to_utc", "encode_block", "decode_block", "BLOCK_FORMAT"]
