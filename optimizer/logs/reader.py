"""Reading historian CSV exports into canonical columns, canonical units and UTC.

A file is sniffed (gzip or plain, text or binary), matched to the layout of one of the
plant's lines (column mapping, units, separator, decimal mark, timestamp format and zone of
naive timestamps) and streamed in blocks through pyarrow's CSV reader. Every cell is read as
text and then converted column by column — vectorised, never row by row — to the canonical
names and trade units of the run-log format (°C, kW, m/min, kg/m, kWh, %), timestamps to UTC.

The reader decides nothing about plausibility (``validate`` does); it records, row by row,
what it could not decode: rows that do not split into the header's fields, empty rows,
timestamps it cannot parse or place in time, cells that are not numbers.
"""
from __future__ import annotations

import csv as _csv
import gzip
import hashlib
import json
import re
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, Mapping

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pa_csv

from ..config import QA_POSITIONS, CsvLayout, Line, Plant, is_canonical_column, unit_kind
from ..errors import LogFileError
from ..units import SOURCE_UNITS
from .validate import Verdict

#: Columns every log file must have (process log and QA samples alike).
REQUIRED_COLUMNS = ("timestamp", "line_id")
#: QA probe sample columns (shared run-log format, "QA probe samples").
QA_COLUMNS = ("timestamp", "line_id", "product_id", "lot_id", "position", "temp_c", "moisture_pct_wb")
TEXT_COLUMNS = ("line_id", "product_id", "lot_id", "position")

DEFAULT_BLOCK_BYTES = 4 << 20  # pyarrow parse block (~30 k rows of a 5-zone line); parsed fastest
SNIFF_BYTES = 1 << 16
_SEPARATORS = (",", ";", "\t", "|")
_NUMBER_RE = r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$"
_ZONE_RE = r":\d\d(\.\d+)?\s?([Zz]|[+-]\d\d(:?\d\d)?)$"
_OFFSET_RE = re.compile(r"([+-])(\d\d)(?::?(\d\d))?$")
_FALL_BACK_JUMP_MS = 30 * 60 * 1000  # a backward step of the wall clock this large is the fall-back
_HOUR_MS = 3_600_000
EARLIEST_UTC_MS = 946_684_800_000  # 2000-01-01T00:00Z: anything earlier is a clock that was never set


class SerialReadNeeded(Exception):
    """A threaded read met a line it cannot split: read the file again with ``serial=True``.

    pyarrow numbers rejected lines only when it parses serially; threaded parsing is faster,
    so files are read threaded first and again serially only when a malformed line appears.
    """


@dataclass(frozen=True)
class Layout:
    """How a file is written: separator, decimal mark, encoding, timestamps, names and units.

    ``line_id`` names the line whose description supplied the layout (None: the canonical
    layout of the run-log format). Lines with identical layouts share a ``key``.
    """

    line_id: str | None
    csv: CsvLayout
    columns: Mapping[str, str]  # canonical -> source column
    units: Mapping[str, str]  # canonical -> source unit
    positions: Mapping[str, str] = field(default_factory=dict)  # canonical QA position -> source word

    @property
    def key(self) -> str:
        """A fingerprint of everything that changes how the file's text is read."""
        spec = {"csv": [self.csv.separator, self.csv.decimal, self.csv.encoding,
                        self.csv.timestamp_format, self.csv.naive_timezone],
                "columns": sorted(self.columns.items()), "units": sorted(self.units.items())}
        if self.positions:  # only then: the keys of files read before QA position words existed stay
            spec["positions"] = sorted(self.positions.items())
        return hashlib.sha256(json.dumps(spec).encode()).hexdigest()[:16]

    def where(self, table: str = "") -> str:
        """Where to change this layout in the plant description, e.g. ``[lines.TL-1.csv]``."""
        head = f"lines.{self.line_id}" if self.line_id else "lines.<line>"
        return f"[{head}.{table}]" if table else f"[{head}]"

    @classmethod
    def of_line(cls, line: Line) -> "Layout":
        return cls(line.line_id, line.csv, dict(line.columns), dict(line.units), dict(line.qa_positions))


CANONICAL_LAYOUT = Layout(None, CsvLayout(), {}, {})


@dataclass
class Chunk:
    """One parsed block of a file.

    ``data`` holds the canonical columns (``row_number`` is the line number in the file,
    header = 1; ``timestamp_utc`` is NaT where the reader could not place the row in time);
    ``verdict`` the first decoding problem of each row; ``text`` the same rows as read (source
    names, text), to quote quarantined rows; ``bad_rows`` the lines pyarrow could not split
    into the header's fields (row_number, raw_text, reason, detail).
    """

    data: pd.DataFrame
    verdict: Verdict
    text: pa.Table
    bad_rows: pd.DataFrame
    bytes_read: int

    def raw_text(self, positions: np.ndarray, separator: str) -> list[str]:
        """The rows at ``positions`` as text: their fields joined with the file's separator."""
        if len(positions) == 0:
            return []
        sub = self.text.take(pa.array(positions, pa.int64()))
        cols = [pc.fill_null(sub.column(i), "") for i in range(sub.num_columns)]
        return pc.binary_join_element_wise(*cols, separator).to_pylist()


@dataclass
class LogFile:
    """A log file whose layout is known: what it holds and how to stream it."""

    path: Path
    kind: str  # process | qa
    layout: Layout
    source_names: tuple[str, ...]  # the header as written
    canonical: dict[str, str]  # source name -> canonical name, for the columns read
    ignored: tuple[str, ...]  # header columns that are neither canonical nor mapped
    compressed: bool
    size_bytes: int
    warnings: list[str] = field(default_factory=list)
    longest_line: int = 0  # bytes, among the first lines: a parse block must hold whole lines

    @property
    def columns(self) -> list[str]:
        return list(self.canonical.values())

    def chunks(self, block_size: int = DEFAULT_BLOCK_BYTES, serial: bool = False) -> Iterator[Chunk]:
        """Parse the file block by block (memory stays near ``block_size`` × a small factor).

        Raises
        ------
        SerialReadNeeded
            When not ``serial`` and a line does not split into the header's fields (its line
            number is known only to a serial read): start again with ``serial=True``.
        LogFileError
            When the stream cannot be read on (damaged compression, wrong encoding).
        """
        block_size = max(block_size, 4 * self.longest_line, 1024)
        bad: list[tuple[int, str, int]] = []

        def on_invalid(row) -> str:
            bad.append((row.number, row.text, row.actual_columns))
            return "skip"

        raw = pa.OSFile(str(self.path), "rb")
        stream = pa.CompressedInputStream(raw, "gzip") if self.compressed else raw
        encoding = self.layout.csv.encoding
        read = pa_csv.ReadOptions(
            use_threads=not serial,  # only serial parsing numbers the rejected lines
            block_size=block_size,
            encoding="utf8" if encoding.lower().replace("-", "").replace("_", "") in ("utf8", "utf8sig")
            else encoding)
        parse = pa_csv.ParseOptions(delimiter=self.layout.csv.separator, ignore_empty_lines=False,
                                    invalid_row_handler=on_invalid)
        convert = pa_csv.ConvertOptions(
            column_types={n: pa.string() for n in self.source_names}, include_columns=list(self.canonical),
            strings_can_be_null=True, quoted_strings_can_be_null=True, null_values=[""])
        clock = _ClockState()
        parsed_before = 0
        handed_out = 0  # how many entries of ``bad`` were already attributed to a chunk
        try:
            reader = pa_csv.open_csv(stream, read_options=read, parse_options=parse, convert_options=convert)
            while True:
                try:
                    batch = reader.read_next_batch()
                except StopIteration:
                    break
                if bad and not serial:
                    raise SerialReadNeeded(self.path)
                n = batch.num_rows
                bad_numbers = np.array([b[0] for b in bad], dtype=np.int64)
                rows = _row_numbers(parsed_before, n, bad_numbers)
                parsed_before += n
                last = rows[-1] if n else (bad_numbers.max() if len(bad_numbers) else 0)
                take = handed_out + int(np.searchsorted(bad_numbers[handed_out:], last, side="right"))
                chunk_bad, handed_out = bad[handed_out:take], take
                yield self._chunk(pa.Table.from_batches([batch]), rows, chunk_bad, clock, raw.tell())
            if bad and not serial:
                raise SerialReadNeeded(self.path)
            if handed_out < len(bad):
                yield self._chunk(None, np.zeros(0, np.int64), bad[handed_out:], clock, raw.tell())
        except (pa.ArrowInvalid, OSError, EOFError, zlib.error) as exc:
            raise LogFileError(self.path, _stream_problem(exc, parsed_before + len(bad), self.layout)) from None
        finally:
            raw.close()
        if clock.unresolved:
            self.warnings.append(
                f"{clock.unresolved} naive timestamp(s) fall in a daylight-saving fall-back hour whose two "
                "passes could not be told apart by their order in the file; they were read as summer time")

    def _chunk(self, table: pa.Table | None, rows: np.ndarray, bad: list, clock: "_ClockState",
               bytes_read: int) -> Chunk:
        if table is None:
            table = pa.table({n: pa.array([], pa.string()) for n in self.canonical})
        n = table.num_rows
        verdict = Verdict(n)
        data = {"row_number": rows}
        all_empty = np.ones(n, dtype=bool)
        for source in self.canonical:
            all_empty &= table.column(source).is_null().to_numpy(zero_copy_only=False)
        verdict.add(all_empty, "empty_row", "the row is empty")
        for source, canonical in self.canonical.items():
            col = table.column(source)
            if canonical == "timestamp":
                continue
            if canonical == "position":
                data[canonical] = self._positions(_text(col))
            elif canonical in TEXT_COLUMNS:
                data[canonical] = _text(col)
            else:
                data[canonical] = self._number(col, source, canonical, verdict)
        ts_source = next(s for s, c in self.canonical.items() if c == "timestamp")
        utc_ms, offset_min = _timestamps(table.column(ts_source), self.layout, clock, verdict)
        data["timestamp_utc"] = pd.to_datetime(utc_ms, unit="ms", utc=True).as_unit("ms")
        data["utc_offset_min"] = offset_min
        frame = pd.DataFrame(data)
        front = ["row_number", "timestamp_utc", "utc_offset_min"]
        frame = frame[front + [c for c in frame.columns if c not in front]]
        ncols = len(self.source_names)
        bad_rows = pd.DataFrame({
            "row_number": np.array([b[0] for b in bad], dtype=np.int64),
            "raw_text": [b[1] for b in bad],
            "reason": "malformed_row",
            "detail": [f"the line has {b[2]} field(s) where the header has {ncols}: it is truncated, or a "
                       f"value holds the separator '{self.layout.csv.separator}' unquoted" for b in bad],
        })
        return Chunk(frame, verdict, table, bad_rows, bytes_read)

    def _number(self, col: pa.ChunkedArray, source: str, canonical: str, verdict: Verdict) -> np.ndarray:
        decimal = self.layout.csv.decimal
        values, bad = parse_numbers(col, decimal)
        if bad.any():
            idx = np.flatnonzero(bad)
            texts = col.take(pa.array(idx)).to_pylist()
            named = canonical if source == canonical else f"{canonical} (source column '{source}')"
            verdict.add(bad, "bad_number", lambda where, t=dict(zip(idx, texts)):
                        [f"{named}: '{t[i]}' is not a number" for i in where])
            if decimal == "." and _decimal_comma_would_fix(col.take(pa.array(idx))):
                self._warn_once(f"{named} holds numbers with a decimal comma (e.g. '{texts[0]}'); if the export "
                                f"writes them so, set {self.layout.where('csv')} decimal = ','")
        unit = self.layout.units.get(canonical)
        return values if unit is None else to_canonical(values, canonical, unit)

    def _positions(self, words: pd.Series) -> pd.Series:
        """QA positions in the run-log format's words: the line's own words (``qa_positions``) and
        the format's words in any letter case; anything else stays as written (and is quarantined)."""
        known = {w.lower(): w for w in QA_POSITIONS}
        known.update({word.lower(): canonical for canonical, word in self.layout.positions.items()})
        lowered = words.str.lower()
        return lowered.map(known).where(lowered.isin(list(known)), words)

    def _warn_once(self, text: str):
        if text not in self.warnings:
            self.warnings.append(text)


def file_sha256(path: str | Path) -> tuple[str, int]:
    """Content hash (of the bytes on disk) and size [bytes] of a file."""
    h = hashlib.sha256()
    size = 0
    with open(path, "rb") as f:
        while block := f.read(1 << 20):
            h.update(block)
            size += len(block)
    return h.hexdigest(), size


def open_log(path: str | Path, plant: Plant) -> LogFile:
    """Sniff a log file and match its header to a layout of the plant.

    Raises
    ------
    LogFileError
        When the file as a whole cannot be read: empty, binary, not CSV text, a header without
        the required columns (the message lists what the header holds and how to map it).
    """
    path = Path(path)
    try:
        size = path.stat().st_size
        with open(path, "rb") as f:
            compressed = f.read(2) == b"\x1f\x8b"
    except OSError as exc:
        raise LogFileError(path, f"cannot be read: {exc.strerror}") from None
    if size == 0:
        raise LogFileError(path, "the file is empty (0 bytes); export it again")
    head = _head_bytes(path, compressed)
    if not head.strip():
        raise LogFileError(path, "the file holds no text (only whitespace or an empty compressed stream); "
                                 "export it again")
    if b"\x00" in head or _looks_binary(head):
        raise LogFileError(path, "is not CSV text (binary content in the first bytes); check that the "
                                 "historian export, not another file, was copied here")
    layouts = _candidate_layouts(plant)
    best = None
    for layout in layouts:
        header = _header(path, head, layout)
        if header is None:
            continue
        canonical, ignored = _map_header(header, layout)
        score = (all(c in canonical.values() for c in REQUIRED_COLUMNS), len(canonical),
                 layout.line_id is not None and path.name.startswith(layout.line_id))
        if best is None or score > best[0]:
            best = (score, layout, header, canonical, ignored)
    if best is None:
        raise LogFileError(path, "the first line is not text in the configured encoding; set "
                                 "[lines.<line>.csv] encoding (e.g. 'latin-1')")
    _, layout, header, canonical, ignored = best
    missing = [c for c in REQUIRED_COLUMNS if c not in canonical.values()]
    if missing:
        raise LogFileError(path, _missing_columns_message(missing, header, layout, head, plant, path))
    duplicated = sorted({n for n in header if header.count(n) > 1})
    if duplicated:
        raise LogFileError(path, f"the header names column(s) {', '.join(duplicated)} more than once; "
                                 "fix the export so every column has one name")
    kind = "qa" if "position" in canonical.values() else "process"
    warnings = []
    if ignored:
        warnings.append(f"column(s) {', '.join(ignored)} are neither canonical nor mapped in "
                        f"{layout.where('columns')}; ignored")
    longest = max(len(x) for x in head.split(b"\n"))
    return LogFile(path, kind, layout, tuple(header), canonical, tuple(ignored), compressed, size, warnings, longest)


def read_log(path: str | Path, plant: Plant, block_size: int = DEFAULT_BLOCK_BYTES
             ) -> tuple[pd.DataFrame, pd.DataFrame, LogFile]:
    """Read a whole file into memory: (rows decoded, rows the reader rejected with reasons, file info).

    For notebooks and tests; the ingest streams with :meth:`LogFile.chunks` instead. Rows in the
    first frame have passed decoding only, not the plausibility checks of ``validate``.
    """
    log = open_log(path, plant)
    try:
        return _read_all(log, block_size, serial=False)
    except SerialReadNeeded:
        return _read_all(open_log(path, plant), block_size, serial=True)


def _read_all(log: LogFile, block_size: int, serial: bool):
    good, rejected = [], []
    sep = log.layout.csv.separator
    for chunk in log.chunks(block_size, serial=serial):
        ok = chunk.verdict.ok
        good.append(chunk.data[ok])
        where = np.flatnonzero(~ok)
        rejected.append(pd.DataFrame({"row_number": chunk.data["row_number"].to_numpy()[where],
                                      "raw_text": chunk.raw_text(where, sep),
                                      "reason": chunk.verdict.reason[where],
                                      "detail": chunk.verdict.detail[where]}))
        rejected.append(chunk.bad_rows)
    rejected = [r for r in rejected if len(r)]
    bad = (pd.concat(rejected, ignore_index=True).sort_values("row_number", ignore_index=True) if rejected
           else pd.DataFrame(columns=["row_number", "raw_text", "reason", "detail"]))
    data = pd.concat(good, ignore_index=True) if good else pd.DataFrame()
    return data, bad, log


# ----------------------------------------------------------------------------- conversions

def parse_numbers(col: pa.Array | pa.ChunkedArray, decimal: str = ".") -> tuple[np.ndarray, np.ndarray]:
    """Text cells to float64 (NaN where empty) and a mask of cells that are not numbers.

    >>> v, bad = parse_numbers(pa.array(["1,5", None, "x"]), decimal=",")
    >>> v[0], bool(bad[1]), bool(bad[2])
    (1.5, False, True)
    """
    if decimal == ",":
        col = pc.replace_substring(col, ",", ".")
    try:
        values = pc.cast(col, pa.float64())
        bad = np.zeros(len(col), dtype=bool)
    except pa.ArrowInvalid:
        trimmed = pc.utf8_trim_whitespace(col)
        ok = pc.match_substring_regex(trimmed, _NUMBER_RE)
        values = pc.cast(pc.if_else(ok, trimmed, pa.scalar(None, pa.string())), pa.float64())
        bad = (pc.invert(pc.fill_null(ok, True))).to_numpy(zero_copy_only=False)
    out = values.to_numpy(zero_copy_only=False).astype(np.float64, copy=False)
    inf = np.isinf(out)
    if inf.any():
        bad = bad | inf
        out = np.where(inf, np.nan, out)
    return out, bad


def timestamps_ms(values) -> np.ndarray:
    """int64 milliseconds since 1970 UTC of timezone-aware times (a Series, Index or array)."""
    return np.asarray(pd.DatetimeIndex(values).as_unit("ms").asi8, dtype=np.int64)


def to_canonical(values: np.ndarray, canonical: str, unit: str) -> np.ndarray:
    """Convert a column from a source unit to the canonical unit of its kind."""
    return SOURCE_UNITS[unit_kind(canonical)][unit](values)


def localize_wall_times(wall_ms: np.ndarray, zone: str, second_pass: np.ndarray | None = None):
    """Place local wall-clock times [ms] of an IANA zone in UTC.

    Returns (utc_ms, ambiguous, nonexistent): times in a fall-back hour are ambiguous and read
    as summer time unless ``second_pass`` marks them as the repeated (standard-time) pass;
    times in a spring-forward gap do not exist (utc_ms is meaningless there).
    """
    idx = pd.DatetimeIndex(wall_ms.astype("datetime64[ms]"))
    n = len(idx)
    summer = idx.tz_localize(zone, ambiguous=np.ones(n, dtype=bool), nonexistent="NaT")
    winter = idx.tz_localize(zone, ambiguous=np.zeros(n, dtype=bool), nonexistent="NaT")
    nonexistent = np.asarray(summer.isna())
    ambiguous = ~nonexistent & np.asarray(summer != winter)
    pick_winter = ambiguous & (second_pass if second_pass is not None else False)
    chosen = np.where(pick_winter, _ms(winter), _ms(summer))
    return chosen, ambiguous, nonexistent


# ----------------------------------------------------------------------------- internals

@dataclass
class _ClockState:
    """What the timestamp reader carries from one block to the next (naive local times)."""

    prev_wall_ms: int | None = None
    jumped_hours: set = field(default_factory=set)
    ambiguous_hours: dict = field(default_factory=dict)  # hour -> ambiguous rows read as the first pass

    @property
    def unresolved(self) -> int:
        """Ambiguous rows of fall-back hours in which no second pass was seen (read as summer time)."""
        return sum(n for hour, n in self.ambiguous_hours.items() if hour not in self.jumped_hours)


def _ms(idx) -> np.ndarray:
    """int64 milliseconds of a DatetimeIndex (NaT → INT64 min)."""
    return np.asarray(idx.as_unit("ms").asi8, dtype=np.int64)


def _text(col: pa.ChunkedArray) -> pd.Series:
    trimmed = pc.utf8_trim_whitespace(col)
    trimmed = pc.if_else(pc.equal(trimmed, ""), pa.scalar(None, pa.string()), trimmed)
    return trimmed.to_pandas()


def _timestamps(col: pa.ChunkedArray, layout: Layout, clock: _ClockState, verdict: Verdict):
    """Timestamps to UTC [ms] and the UTC offset as written [min] (NaN when not known)."""
    n = len(col)
    utc = np.zeros(n, dtype=np.int64)
    offset = np.full(n, np.nan)
    missing = col.is_null().to_numpy(zero_copy_only=False)
    verdict.add(missing, "missing_timestamp", "the timestamp is empty")
    fmt = layout.csv.timestamp_format
    if fmt:
        parsed = pc.strptime(col, format=fmt, unit="ms", error_is_null=True)
        good = ~parsed.is_null().to_numpy(zero_copy_only=False)
        values = parsed.cast(pa.int64()).to_numpy(zero_copy_only=False)
        aware = good & ("%z" in fmt)
        naive = good & ("%z" not in fmt)
        utc[aware] = values[aware]
        example = f"in the format '{fmt}' of {layout.where('csv')} timestamp_format"
    else:
        aware, naive, values_aware, values_naive = _iso(col)
        utc[aware] = values_aware[aware]
        offset[aware] = _offsets_min(col, aware)
        values = values_naive
        good = aware | naive
        example = "ISO 8601 with a UTC offset (e.g. 2026-03-02T06:00:10+01:00)"
    unset = good & (utc < EARLIEST_UTC_MS) & ~naive
    if unset.any():
        verdict.add(unset, "bad_timestamp", "the timestamp is before 2000-01-01: the historian clock was not set")
    unparsed = ~good & ~missing
    if unparsed.any():
        idx = np.flatnonzero(unparsed)
        texts = dict(zip(idx, col.take(pa.array(idx)).to_pylist()))
        verdict.add(unparsed, "bad_timestamp", lambda where: [f"timestamp '{texts[i]}' is not {example}" for i in where])
    if naive.any():
        zone = layout.csv.naive_timezone
        if zone is None:
            verdict.add(naive, "naive_timestamp",
                        f"the timestamp has no UTC offset; write offsets in the export or set "
                        f"{layout.where('csv')} naive_timezone (e.g. 'Europe/Berlin')")
        else:
            where = np.flatnonzero(naive)
            wall = values[where]
            second = _second_pass(wall, clock)
            local_utc, ambiguous, nonexistent = localize_wall_times(wall, zone, second)
            hours, counts = np.unique(wall[ambiguous & ~second] // _HOUR_MS, return_counts=True)
            for hour, count in zip(hours.tolist(), counts.tolist()):
                clock.ambiguous_hours[hour] = clock.ambiguous_hours.get(hour, 0) + count
            utc[where] = local_utc
            offset[where] = (wall - local_utc) / 60000.0
            early = np.zeros(n, dtype=bool)
            early[where[~nonexistent & (local_utc < EARLIEST_UTC_MS)]] = True
            verdict.add(early, "bad_timestamp", "the timestamp is before 2000-01-01: the historian clock was not set")
            gap = np.zeros(n, dtype=bool)
            gap[where[nonexistent]] = True
            verdict.add(gap, "nonexistent_local_time",
                        f"the local time does not exist in {zone} (skipped by the spring-forward clock change); "
                        "the historian clock was wrong or the zone is not the one in naive_timezone")
    return utc, offset


def _iso(col: pa.ChunkedArray):
    """Split ISO 8601 text into times with an offset and naive times, parsed to ms."""
    n = len(col)
    try:  # fast path: every timestamp carries an offset
        aware_vals = pc.cast(col, pa.timestamp("ms", tz="UTC")).cast(pa.int64())
        good = ~aware_vals.is_null().to_numpy(zero_copy_only=False)
        return good, np.zeros(n, dtype=bool), aware_vals.to_numpy(zero_copy_only=False), np.zeros(n, np.int64)
    except pa.ArrowInvalid:
        pass
    text = pc.utf8_trim_whitespace(col)
    has_zone = pc.fill_null(pc.match_substring_regex(text, _ZONE_RE), False).to_numpy(zero_copy_only=False)
    none = pa.scalar(None, pa.string())
    aware_vals = _coerce(pc.if_else(pa.array(has_zone), text, none), utc=True)
    naive_vals = _coerce(pc.if_else(pa.array(~has_zone), text, none), utc=False)
    aware = has_zone & (aware_vals != np.iinfo(np.int64).min)
    naive = ~has_zone & (naive_vals != np.iinfo(np.int64).min)
    return aware, naive, aware_vals, naive_vals


def _coerce(text: pa.ChunkedArray, utc: bool) -> np.ndarray:
    """Parse text to ms (INT64 min where not a time): Arrow's cast, else pandas' ISO parser."""
    target = pa.timestamp("ms", tz="UTC") if utc else pa.timestamp("ms")
    try:
        return pc.fill_null(pc.cast(text, target).cast(pa.int64()), np.iinfo(np.int64).min) \
            .to_numpy(zero_copy_only=False)
    except pa.ArrowInvalid:
        s = pd.Series(text.to_pandas(), dtype=object)
        parsed = pd.to_datetime(s, errors="coerce", utc=utc, format="ISO8601")
        return _ms(pd.DatetimeIndex(parsed))


def _offsets_min(col: pa.ChunkedArray, aware: np.ndarray) -> np.ndarray:
    """The UTC offset written at the end of each timestamp [min], from its few distinct suffixes."""
    tail = pc.utf8_slice_codeunits(pc.utf8_trim_whitespace(col), -6).dictionary_encode().combine_chunks()
    minutes = []
    for suffix in tail.dictionary.to_pylist():
        m = _OFFSET_RE.search(suffix or "")
        if suffix and suffix.upper().endswith("Z"):
            minutes.append(0.0)
        elif m:
            sign = -1.0 if m.group(1) == "-" else 1.0
            minutes.append(sign * (int(m.group(2)) * 60 + int(m.group(3) or 0)))
        else:
            minutes.append(np.nan)
    codes = pc.fill_null(tail.indices, 0).to_numpy(zero_copy_only=False)
    out = np.asarray(minutes, dtype=float)[codes] if minutes else np.full(len(col), np.nan)
    return np.where(aware, out, np.nan)[aware]


def _hours_in(wall: np.ndarray, hours: set) -> np.ndarray:
    return np.isin(wall // _HOUR_MS, np.fromiter(hours, dtype=np.int64, count=len(hours)))


def _second_pass(wall: np.ndarray, clock: _ClockState) -> np.ndarray:
    """Which local times come after the wall clock fell back (the repeated hour's second pass).

    In file order the fall-back shows as a backward step of the wall clock of about an hour;
    a row is in the second pass when such a step into its hour came at or before it.
    """
    if len(wall) == 0:
        return np.zeros(0, dtype=bool)
    prev = np.empty_like(wall)
    prev[0] = clock.prev_wall_ms if clock.prev_wall_ms is not None else wall[0]
    prev[1:] = wall[:-1]
    jump = wall < prev - _FALL_BACK_JUMP_MS
    hour = wall // _HOUR_MS
    first_jump = pd.Series(np.flatnonzero(jump), index=hour[jump]).groupby(level=0).min()
    pos = np.arange(len(wall))
    jump_pos = pd.Series(hour).map(first_jump).to_numpy(dtype=float, na_value=np.nan)
    second = (~np.isnan(jump_pos) & (pos >= jump_pos)) | _hours_in(wall, clock.jumped_hours)
    clock.jumped_hours.update(int(h) for h in first_jump.index)
    clock.prev_wall_ms = int(wall[-1])
    return second


def _row_numbers(parsed_before: int, n: int, bad_numbers: np.ndarray) -> np.ndarray:
    """Line numbers (header = 1) of parsed rows, given the line numbers pyarrow rejected so far.

    Every line after the header is either a parsed row or a rejected one, so the j-th parsed
    row sits on line j + 2 + (rejected lines before it).
    """
    j = np.arange(parsed_before, parsed_before + n, dtype=np.int64)
    bad = np.sort(bad_numbers)
    slots = bad - np.arange(len(bad)) - 2  # parsed index before which each rejected line sits
    return j + 2 + np.searchsorted(slots, j, side="right")


def _decimal_comma_would_fix(col: pa.ChunkedArray) -> bool:
    fixed = pc.match_substring_regex(pc.replace_substring(pc.utf8_trim_whitespace(col), ",", "."), _NUMBER_RE)
    return bool(pc.all(pc.fill_null(fixed, False)).as_py())


def _head_bytes(path: Path, compressed: bool) -> bytes:
    try:
        if compressed:
            with gzip.open(path, "rb") as f:
                return f.read(SNIFF_BYTES)
        with open(path, "rb") as f:
            return f.read(SNIFF_BYTES)
    except (OSError, EOFError, zlib.error) as exc:
        raise LogFileError(path, f"the compressed stream cannot be read ({exc}); copy or export the file "
                                 "again") from None


def _looks_binary(head: bytes) -> bool:
    sample = head[:4096]
    control = sum(1 for b in sample if b < 32 and b not in (9, 10, 13))
    return control > len(sample) * 0.01


def _header(path: Path, head: bytes, layout: Layout) -> list[str] | None:
    encoding = layout.csv.encoding
    if encoding.lower().replace("-", "").replace("_", "") == "utf8":
        encoding = "utf-8-sig"  # a byte-order mark is not part of the first column's name
    first = head.split(b"\n", 1)[0].rstrip(b"\r")
    try:
        text = first.decode(encoding)
    except (UnicodeDecodeError, LookupError):
        return None
    return [name.strip() for name in next(_csv.reader([text], delimiter=layout.csv.separator))]


def _map_header(header: list[str], layout: Layout) -> tuple[dict[str, str], list[str]]:
    """Source name -> canonical name for the columns this layout reads, and the ignored ones."""
    inverse = {source: canonical for canonical, source in layout.columns.items()}
    mapped, ignored = {}, []
    for name in header:
        canonical = inverse.get(name)
        if canonical is None and (is_canonical_column(name) or name in QA_COLUMNS) and name not in layout.columns:
            canonical = name
        if canonical is None or canonical in mapped.values():
            ignored.append(name)
        else:
            mapped[name] = canonical
    return mapped, ignored


def _candidate_layouts(plant: Plant) -> list[Layout]:
    seen, out = set(), []
    for layout in [Layout.of_line(line) for line in plant.lines.values()] + [CANONICAL_LAYOUT]:
        if layout.key not in seen:
            seen.add(layout.key)
            out.append(layout)
    return out


def _missing_columns_message(missing, header, layout, head, plant, path) -> str:
    shown = ", ".join(header[:12]) + (", …" if len(header) > 12 else "")
    if len(header) == 1:
        text = head.split(b"\n", 1)[0].decode("utf-8", "replace")
        for sep in _SEPARATORS:
            if sep != layout.csv.separator and sep in text:
                hint = next((line_id for line_id in plant.lines if path.name.startswith(line_id)), "<line>")
                return (f"the header reads as one column '{shown[:60]}': the file looks '{sep}'-separated "
                        f"but the layout expects '{layout.csv.separator}'; set [lines.{hint}.csv] "
                        f"separator = '{sep}'")
    return (f"missing required column(s) {', '.join(missing)}; the header has: {shown}. If the export names "
            f"them differently, map them in {layout.where('columns')} (e.g. timestamp = \"Time\")")


def _stream_problem(exc: Exception, rows_seen: int, layout: Layout) -> str:
    text = str(exc)
    if "UTF8" in text or "UTF-8" in text or isinstance(exc, UnicodeDecodeError):
        return (f"is not valid {layout.csv.encoding} text (near row {rows_seen + 1}); if the export uses "
                f"another encoding, set {layout.where('csv')} encoding (e.g. 'latin-1')")
    if isinstance(exc, (EOFError, zlib.error)) or "gzip" in text.lower() or "compressed" in text.lower() \
            or "zlib" in text.lower():
        return (f"the compressed stream ends early or is damaged after about {rows_seen} rows ({text}); copy "
                "or export the file again — nothing of it was stored")
    return f"cannot be parsed as CSV after about {rows_seen} rows: {text}"


__all__ = ["Chunk", "LogFile", "Layout", "SerialReadNeeded", "CANONICAL_LAYOUT", "open_log", "read_log", "file_sha256",
           "parse_numbers", "to_canonical", "timestamps_ms", "localize_wall_times", "REQUIRED_COLUMNS", "QA_COLUMNS",
           "TEXT_COLUMNS", "DEFAULT_BLOCK_BYTES"]
