"""Ingest: historian CSV files → validated, deduplicated rows in the store, and a report per file.

Each file is read in one store transaction: its accepted samples, its quarantined rows (with
reason and raw text), the lots it adds to and its report are committed together or not at
all. A file whose content (sha256) was already read with the same layout is skipped; rows of
an overlapping re-export that equal stored rows are counted as duplicates and not stored
again; rows that share a stored (line, timestamp) but differ are quarantined as
``conflicting_duplicate`` — the stored reading is never overwritten. So for every file
``rows_read == accepted + duplicates + sum(quarantined.values())``.
"""
from __future__ import annotations

import logging
import sys
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Callable, Iterable

import numpy as np
import pandas as pd
from tqdm import tqdm

from .config import Line, Plant
from .errors import LogFileError
from .logs import quality, validate
from .logs.reader import (DEFAULT_BLOCK_BYTES, Chunk, Layout, LogFile, SerialReadNeeded, file_sha256, open_log,
                          timestamps_ms)
from .logs.segment import steady_windows
from .store import Store, Writer

log = logging.getLogger(__name__)

LOG_SUFFIXES = (".csv", ".csv.gz")
SEGMENT_BATCH_SAMPLES = 500_000  # samples segmented at a time (bounds memory: ~0.3 GB)
_SAMPLE_KEYS = ["timestamp_utc"]
_QA_KEYS = ["timestamp_utc", "lot_id", "position"]
_QA_VALUES = ["product_id", "temp_c", "moisture_pct_wb"]
_NOT_VALUES = {"row_number", "timestamp_utc", "utc_offset_min", "line_id", "file_id"}


@dataclass
class FileReport:
    """What happened to one file (every count is rows of the file)."""

    path: str
    status: str  # ingested | already_ingested | rejected
    kind: str | None = None  # process | qa
    sha256: str | None = None
    size_bytes: int = 0
    file_id: int | None = None
    line_ids: list[str] = field(default_factory=list)
    rows_read: int = 0
    accepted: int = 0
    duplicates: int = 0
    conflicts: int = 0  # also counted in quarantined["conflicting_duplicate"]
    quarantined: dict[str, int] = field(default_factory=dict)
    lots: list[str] = field(default_factory=list)
    first_utc: str | None = None
    last_utc: str | None = None
    out_of_order: int = 0  # rows whose time is before the previous row's (file order; harmless)
    warnings: list[str] = field(default_factory=list)
    error: str | None = None

    @property
    def quarantined_total(self) -> int:
        return sum(self.quarantined.values())

    def to_dict(self) -> dict:
        out = asdict(self)
        out["quarantined_total"] = self.quarantined_total
        return out


@dataclass
class _Tally:
    """Counts gathered over a file's chunks."""

    rows_read: int = 0
    accepted: int = 0
    duplicates: int = 0
    conflicts: int = 0
    quarantined: dict = field(default_factory=dict)
    lots: set = field(default_factory=set)
    lines: set = field(default_factory=set)
    first_ms: int | None = None
    last_ms: int | None = None
    out_of_order: int = 0
    warnings: list = field(default_factory=list)
    suspicions: dict = field(default_factory=dict)  # line id -> unit suspicions (None: not judged yet)
    new_lots: dict = field(default_factory=dict)  # (line, lot) -> [product, first ms, last ms, samples stored]

    def warn(self, text: str):
        if text not in self.warnings:
            self.warnings.append(text)

    def span(self, ms: np.ndarray):
        if len(ms):
            lo, hi = int(ms.min()), int(ms.max())
            self.first_ms = lo if self.first_ms is None else min(self.first_ms, lo)
            self.last_ms = hi if self.last_ms is None else max(self.last_ms, hi)

    def add_lot(self, line_id: str, lot_id: str, product_id, first_ms: int, last_ms: int, count: int):
        """Fold newly stored samples of a lot into the file's lot tally (written once per file)."""
        self.lots.add(lot_id)
        old = self.new_lots.get((line_id, lot_id))
        if old is None:
            self.new_lots[(line_id, lot_id)] = [product_id, first_ms, last_ms, count]
        else:
            old[0] = old[0] if isinstance(old[0], str) else product_id
            old[1], old[2], old[3] = min(old[1], first_ms), max(old[2], last_ms), old[3] + count

    def lot_frame(self) -> pd.DataFrame:
        return pd.DataFrame([(line, lot, *v) for (line, lot), v in self.new_lots.items()],
                            columns=["line_id", "lot_id", "product_id", "first_utc_ms", "last_utc_ms", "sample_count"])

    def add(self, target: dict, counts: dict):
        for k, v in counts.items():
            target[k] = target.get(k, 0) + int(v)


def find_log_files(paths: Iterable[str | Path]) -> tuple[list[Path], list[Path]]:
    """Files to read (folders searched recursively for .csv and .csv.gz, sorted) and paths that do not exist."""
    found, missing = [], []
    for p in map(Path, paths):
        if p.is_dir():
            found.extend(sorted(f for f in p.rglob("*") if f.is_file() and f.name.lower().endswith(LOG_SUFFIXES)))
        elif p.is_file():
            found.append(p)
        else:
            missing.append(p)
    return found, missing


def ingest_paths(plant: Plant, store: Store, paths: Iterable[str | Path], progress: bool = False,
                 segment: bool = True, block_size: int = DEFAULT_BLOCK_BYTES) -> list[FileReport]:
    """Ingest files and folders of process logs and QA samples into the store.

    Parameters
    ----------
    plant : the plant description (lines, layouts, ratings).
    store : a writable store.
    paths : files (.csv, .csv.gz, any name) and folders (searched recursively).
    progress : show a progress bar [bytes] on stderr — only when stderr is a terminal.
    segment : afterwards, recompute the steady windows of every lot that gained samples.
    block_size : pyarrow parse block [bytes]; bounds the memory an ingest needs.

    Returns
    -------
    One :class:`FileReport` per file, in the order read (missing paths are reported rejected).
    """
    files, missing = find_log_files(paths)
    reports = [FileReport(str(p), "rejected", error="no such file or folder") for p in missing]
    sizes = [f.stat().st_size for f in files]
    show = progress and sys.stderr.isatty()
    with tqdm(total=sum(sizes), unit="B", unit_scale=True, desc="ingest", disable=not show, file=sys.stderr,
              leave=False) as bar:
        for path, size in zip(files, sizes):
            done = [0]

            def advance(position: int, done=done):
                bar.update(max(position - done[0], 0))
                done[0] = max(position, done[0])

            report = ingest_file(plant, store, path, block_size=block_size, on_progress=advance)
            advance(size)
            log.info("%s: %s (%d read, %d accepted, %d duplicates, %d quarantined)", path, report.status,
                     report.rows_read, report.accepted, report.duplicates, report.quarantined_total)
            reports.append(report)
    if segment and any(r.status == "ingested" for r in reports):
        for line_id, done in update_windows(plant, store).items():
            log.info("%s: steady windows of %d lot(s) recomputed (%d windows); flagged samples %s", line_id,
                     done["lots"], done["windows"], done["flags"])
    return reports


def ingest_file(plant: Plant, store: Store, path: str | Path, block_size: int = DEFAULT_BLOCK_BYTES,
                on_progress: Callable[[int], None] | None = None) -> FileReport:
    """Ingest one file in one transaction (see the module notes); never raises for bad input."""
    path = Path(path)
    report = FileReport(str(path), "rejected")
    try:
        report.sha256, report.size_bytes = file_sha256(path)
        logfile = open_log(path, plant)
    except OSError as exc:
        report.error = f"cannot be read: {exc.strerror}"
        return report
    except LogFileError as exc:
        report.error = exc.reason
        return report
    report.kind = logfile.kind
    previous = store.find_file(report.sha256, logfile.layout.key)
    if previous is not None:
        report.status = "already_ingested"
        report.file_id = previous["id"]
        report.warnings.append(f"same content already ingested as file {previous['id']} ({previous['path']}, "
                               f"{previous['ingested_utc']:%Y-%m-%d %H:%M} UTC) with the same layout; nothing added")
        return report
    first_warnings = list(logfile.warnings)

    def attempt(serial: bool) -> FileReport:
        logfile.warnings = list(first_warnings)
        return _ingest_stream(plant, store, logfile, report, block_size, serial, on_progress)

    try:
        try:
            return attempt(serial=False)  # threaded parsing: fastest
        except SerialReadNeeded:
            log.info("%s: malformed line(s); reading it again serially to number them", path)
            return attempt(serial=True)
    except LogFileError as exc:
        return FileReport(str(path), "rejected", kind=logfile.kind, sha256=report.sha256,
                          size_bytes=report.size_bytes, error=exc.reason, warnings=list(logfile.warnings))


def _ingest_stream(plant: Plant, store: Store, logfile: LogFile, report: FileReport, block_size: int, serial: bool,
                   on_progress: Callable[[int], None] | None) -> FileReport:
    """Read the file's blocks into one transaction (rolled back if anything raises)."""
    tally = _Tally()
    with store.writer() as w:
        file_id = w.add_file(str(logfile.path), report.sha256, report.size_bytes, logfile.kind, logfile.layout.key)
        if file_id is None:
            report.status = "already_ingested"
            report.warnings.append("the same content was ingested by another run meanwhile; nothing added")
            return report
        step = _qa_chunk if logfile.kind == "qa" else _process_chunk
        for chunk in logfile.chunks(block_size, serial=serial):
            step(plant, logfile, chunk, w, file_id, tally)
            if on_progress:
                on_progress(chunk.bytes_read)
        if tally.new_lots:
            w.merge_lots(tally.lot_frame())
        _fill(report, tally, logfile)
        report.status, report.file_id = "ingested", file_id
        w.finish_file(file_id, report.to_dict())
    return report


def update_windows(plant: Plant, store: Store, line_ids: Iterable[str] | None = None,
                   batch_samples: int = SEGMENT_BATCH_SAMPLES) -> dict[str, dict]:
    """Recompute and store the steady windows of every lot whose samples changed (``Store.stale_lots``).

    Lots are taken in time order, in batches of about ``batch_samples`` samples (a window never
    spans two lots, so batching changes nothing but the memory needed).

    Returns, per line touched: ``lots`` recomputed, ``windows`` stored, and ``flags`` — the
    quality-flag counts (``quality.summarize``) over the samples the segmentation looked at.
    """
    stale = store.stale_lots()
    if line_ids is not None:
        stale = stale[stale["line_id"].isin(list(line_ids))]
    out = {}
    for line_id, lots in stale.groupby("line_id"):
        line = plant.lines.get(line_id)
        if line is None:
            continue
        lots = lots.sort_values("first_utc")
        batch = (lots["sample_count"].cumsum() // max(batch_samples, 1)).to_numpy()
        done = {"lots": 0, "windows": 0, "flags": {}}
        for _, part in lots.groupby(batch):
            samples = store.samples(line_id, start=part["first_utc"].min(), end=part["last_utc"].max())
            flags = quality.flag_samples(samples, line)
            windows = steady_windows(samples, line, flags)
            counts = dict(zip(part["lot_id"], part["sample_count"].astype(int)))
            done["windows"] += store.replace_windows(line_id, counts, windows)
            done["lots"] += len(part)
            for k, v in quality.summarize(flags).items():
                done["flags"][k] = done["flags"].get(k, 0) + v
        out[line_id] = done
    return out


def quarantine_rows(store: Store, reason: str | None = None, limit: int | None = None) -> pd.DataFrame:
    """Quarantined rows of each file's latest reading, by reason, at most ``limit`` per reason.

    Columns: path, row_number, line_id, reason, detail, raw_text.
    """
    reasons = [reason] if reason else store.quarantine_summary()["reason"].tolist()
    parts = [store.quarantine(reason=r, limit=limit) for r in reasons]
    parts = [p for p in parts if len(p)]
    if not parts:
        return pd.DataFrame(columns=["path", "row_number", "line_id", "reason", "detail", "raw_text"])
    return pd.concat(parts, ignore_index=True).drop(columns=["file_id"])


# ----------------------------------------------------------------------------- per chunk

def _layout_keys(plant: Plant) -> dict[str, str]:
    return {line_id: Layout.of_line(line).key for line_id, line in plant.lines.items()}


def _lines_in(data: pd.DataFrame, verdict, plant: Plant) -> list[Line]:
    present = set(data["line_id"][verdict.ok].dropna().unique()) if len(data) else set()
    return [plant.lines[x] for x in sorted(present) if x in plant.lines]


def _process_chunk(plant: Plant, logfile: LogFile, chunk: Chunk, w: Writer, file_id: int, tally: _Tally):
    data, verdict = chunk.data, chunk.verdict
    tally.rows_read += len(data) + len(chunk.bad_rows)
    if len(data):
        _ensure_text_columns(data, ("product_id", "lot_id"))
        validate.check_lines(data, verdict, plant, logfile.layout.key, _layout_keys(plant))
        for line in _lines_in(data, verdict, plant):
            rows = (data["line_id"] == line.line_id).to_numpy()
            validate.check_zones(data, rows, verdict, line)
            if tally.suspicions.get(line.line_id) is None:  # judged once per file, on its first running rows
                found = validate.unit_suspicions(data, rows & verdict.ok, line, plant, dict(line.units))
                if found is not None:
                    tally.suspicions[line.line_id] = found
                    for s in found:
                        tally.warn(s.message)
            validate.check_units(data, rows, verdict, tally.suspicions.get(line.line_id) or [])
            validate.check_ranges(data, rows, verdict, line)
        for line in _lines_in(data, verdict, plant):
            _store_samples(data, verdict, line, w, file_id, tally)
    _quarantine(chunk, logfile, w, file_id, tally)


def _store_samples(data: pd.DataFrame, verdict, line: Line, w: Writer, file_id: int, tally: _Tally):
    pos = np.flatnonzero(verdict.ok & (data["line_id"] == line.line_id).to_numpy())
    beyond = set(validate.zone_columns(data.columns, line))
    cols = [c for c in data.columns if c not in beyond and c != "line_id"]
    frame = data[cols] if len(pos) == len(data) else data.iloc[pos][cols]
    ms = _ms(frame["timestamp_utc"])
    tally.out_of_order += int((np.diff(ms) < 0).sum())
    stored = w.stored_samples(line.line_id, int(ms.min()), int(ms.max()))  # None: nothing stored there
    values = [c for c in cols if c not in _NOT_VALUES]
    dup, conflict, detail = _dedupe(frame, stored, _SAMPLE_KEYS, values, line.line_id)
    bad = np.zeros(len(data), dtype=bool)
    bad[pos[conflict]] = True
    details = dict(zip(pos[conflict], detail))
    verdict.add(bad, "conflicting_duplicate", lambda where: [details[i] for i in where])
    keep = ~dup & ~conflict
    fresh = frame if keep.all() else frame[keep]
    if (np.diff(ms[keep]) < 0).any():
        fresh = fresh.sort_values("timestamp_utc", kind="stable")
    w.add_block(file_id, line.line_id, fresh)
    tally.accepted += len(fresh)
    tally.duplicates += int(dup.sum())
    tally.conflicts += int(conflict.sum())
    tally.lines.add(line.line_id)
    tally.span(ms[~conflict])
    if dup.any():
        tally.lots.update(frame["lot_id"][dup].dropna().unique().tolist())
    in_lot = fresh["lot_id"].notna().to_numpy()
    if in_lot.any():
        codes, names = pd.factorize(fresh["lot_id"])
        t = _ms(fresh["timestamp_utc"])[in_lot]
        found = pd.DataFrame({"code": codes[in_lot], "t": t}).groupby("code", sort=False)["t"].agg(["min", "max", "size"])
        first = pd.Series(np.arange(len(codes))[in_lot]).groupby(codes[in_lot], sort=False).first()
        products = fresh["product_id"].to_numpy()[first.reindex(found.index).to_numpy()]
        for (code, row), product in zip(found.iterrows(), products):  # a few lots per block
            tally.add_lot(line.line_id, names[code], product, int(row["min"]), int(row["max"]), int(row["size"]))


def _qa_chunk(plant: Plant, logfile: LogFile, chunk: Chunk, w: Writer, file_id: int, tally: _Tally):
    data, verdict = chunk.data, chunk.verdict
    tally.rows_read += len(data) + len(chunk.bad_rows)
    if len(data):
        _ensure_text_columns(data, ("product_id", "lot_id", "position"))
        for c in ("temp_c", "moisture_pct_wb"):
            if c not in data:
                data[c] = np.nan
        validate.check_lines(data, verdict, plant, logfile.layout.key, _layout_keys(plant))
        for line in _lines_in(data, verdict, plant):
            validate.check_qa(data, (data["line_id"] == line.line_id).to_numpy(), verdict, line)
        for line in _lines_in(data, verdict, plant):
            pos = np.flatnonzero(verdict.ok & (data["line_id"] == line.line_id).to_numpy())
            frame = data.iloc[pos]
            ms = _ms(frame["timestamp_utc"])
            stored = w.stored_qa(line.line_id, int(ms.min()), int(ms.max()))
            stored["timestamp_utc"] = pd.to_datetime(stored.pop("timestamp_utc_ms"), unit="ms", utc=True)
            dup, conflict, detail = _dedupe(frame, stored, _QA_KEYS, _QA_VALUES, line.line_id)
            bad = np.zeros(len(data), dtype=bool)
            bad[pos[conflict]] = True
            details = dict(zip(pos[conflict], detail))
            verdict.add(bad, "conflicting_duplicate", lambda where: [details[i] for i in where])
            fresh = frame[~dup & ~conflict].assign(timestamp_utc_ms=ms[~dup & ~conflict])
            w.add_qa(file_id, fresh)
            valid = frame[~conflict]
            tally.accepted += len(fresh)
            tally.duplicates += int(dup.sum())
            tally.conflicts += int(conflict.sum())
            tally.lines.add(line.line_id)
            tally.lots.update(valid["lot_id"].dropna().unique().tolist())
            tally.span(_ms(valid["timestamp_utc"]))
    _quarantine(chunk, logfile, w, file_id, tally)


def _quarantine(chunk: Chunk, logfile: LogFile, w: Writer, file_id: int, tally: _Tally):
    data, verdict = chunk.data, chunk.verdict
    where = np.flatnonzero(verdict.failed)
    parts = [chunk.bad_rows.assign(line_id=None)] if len(chunk.bad_rows) else []
    if len(where):
        line_ids = data["line_id"].to_numpy()[where] if "line_id" in data else [None] * len(where)
        parts.append(pd.DataFrame({
            "row_number": data["row_number"].to_numpy()[where], "line_id": line_ids,
            "reason": verdict.reason[where], "detail": verdict.detail[where],
            "raw_text": chunk.raw_text(where, logfile.layout.csv.separator)}))
    if parts:
        rows = pd.concat(parts, ignore_index=True)
        w.add_quarantine(file_id, rows)
        tally.add(tally.quarantined, rows["reason"].value_counts().to_dict())


def _ensure_text_columns(data: pd.DataFrame, columns) -> None:
    for c in columns:
        if c not in data:
            data[c] = pd.Series([None] * len(data), dtype=object, index=data.index)


def _dedupe(frame: pd.DataFrame, stored: pd.DataFrame, keys: list[str], values: list[str], line_id: str):
    """Which rows of ``frame`` repeat an earlier row of the file or a stored row (same key).

    Returns (duplicate, conflict, conflict details): a repeat with equal values is a duplicate,
    with other values a conflict; the first reading (stored, else the file's first) is kept.
    """
    n = len(frame)
    dup = np.zeros(n, dtype=bool)
    conflict = np.zeros(n, dtype=bool)
    detail = np.full(n, None, dtype=object)
    if n == 0:
        return dup, conflict, []
    if keys == ["timestamp_utc"]:
        _, first_index, group = np.unique(_ms(frame["timestamp_utc"]), return_index=True, return_inverse=True)
    else:
        group = frame.groupby(keys, sort=False, dropna=False).ngroup().to_numpy()
        _, first_index = np.unique(group, return_index=True)  # groups are numbered 0…G-1
    ref = first_index[group]  # np.unique's return_index is each value's first position
    repeat = ref != np.arange(n)
    if repeat.any():
        same, diff_col = _same_values(frame.iloc[np.flatnonzero(repeat)], frame.iloc[ref[repeat]], values)
        rows = np.flatnonzero(repeat)
        dup[rows[same]] = True
        conflict[rows[~same]] = True
        first_rows = frame["row_number"].to_numpy()[ref]
        for i, col in zip(rows[~same], diff_col[~same]):
            detail[i] = (f"{line_id} {_iso(frame['timestamp_utc'].iloc[i])} already appears in row {first_rows[i]} of "
                         f"this file with another {col}; the first reading is kept")
    firsts = np.flatnonzero(~repeat)
    if stored is not None and len(stored) and len(firsts):
        cand = frame.iloc[firsts].reset_index(drop=True).assign(_pos=firsts)
        st = stored.drop_duplicates(keys).copy()
        for c in values:
            if c not in st:
                st[c] = np.nan
        merged = cand[keys + ["_pos"]].merge(st[keys + values].assign(_hit=True), on=keys, how="left")
        hit = merged["_hit"].fillna(False).to_numpy(dtype=bool)
        if hit.any():
            pos = merged["_pos"].to_numpy()[hit]
            same, diff_col = _same_values(frame.iloc[pos], merged[hit].reset_index(drop=True), values)
            dup[pos[same]] = True
            conflict[pos[~same]] = True
            for i, col in zip(pos[~same], diff_col[~same]):
                detail[i] = (f"{line_id} {_iso(frame['timestamp_utc'].iloc[i])} is already stored with another {col}; "
                             "the stored reading is kept (it is never overwritten)")
            # a repeat of a row that conflicts with the store conflicts too
            inherit = repeat & conflict[ref]
            conflict[inherit], dup[inherit] = True, False
            detail[inherit] = detail[ref[inherit]]
    return dup, conflict, detail[conflict].tolist()


def _same_values(a: pd.DataFrame, b: pd.DataFrame, columns: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Row-wise equality over ``columns`` (missing = missing; floats to 1e-9) and the first differing column."""
    n = len(a)
    same = np.ones(n, dtype=bool)
    first_diff = np.full(n, None, dtype=object)
    for c in columns:
        x = a[c].to_numpy() if c in a else np.full(n, np.nan)
        y = b[c].to_numpy() if c in b else np.full(n, np.nan)
        if x.dtype.kind == "f" or y.dtype.kind == "f":
            x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
            eq = np.isclose(x, y, rtol=1e-9, atol=1e-9) | (np.isnan(x) & np.isnan(y))
        else:
            xn, yn = pd.isna(x), pd.isna(y)
            eq = (xn & yn) | (~xn & ~yn & (x.astype(object) == y.astype(object)))
        first_diff[same & ~eq] = c
        same &= eq
    return same, first_diff


def _fill(report: FileReport, tally: _Tally, logfile: LogFile):
    report.rows_read, report.accepted = tally.rows_read, tally.accepted
    report.duplicates, report.conflicts = tally.duplicates, tally.conflicts
    report.quarantined = dict(sorted(tally.quarantined.items(), key=lambda kv: list(validate.REASONS).index(kv[0])))
    report.lots = sorted(tally.lots)
    report.line_ids = sorted(tally.lines)
    report.first_utc = _iso_ms(tally.first_ms)
    report.last_utc = _iso_ms(tally.last_ms)
    report.out_of_order = tally.out_of_order
    report.warnings = list(logfile.warnings) + tally.warnings


_ms = timestamps_ms


def _iso(ts) -> str:
    return pd.Timestamp(ts).strftime("%Y-%m-%dT%H:%M:%SZ")


def _iso_ms(ms: int | None) -> str | None:
    return None if ms is None else pd.Timestamp(ms, unit="ms", tz="UTC").strftime("%Y-%m-%dT%H:%M:%SZ")
