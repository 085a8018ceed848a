"""Historian logs: read (reader), judge row by row (validate), flag (quality), segment (segment).

Data flow: ``reader.open_log`` → ``LogFile.chunks`` (decoded blocks with decoding verdicts) →
``validate`` (plausibility, quarantine reasons) → the store (``optimizer.ingest`` does the
writing) → ``quality.flag_samples`` and ``segment.parcel_table`` on stored samples for the fit.
"""
from .quality import FLAG_COLUMNS, flag_samples
from .reader import Chunk, Layout, LogFile, open_log, read_log
from .segment import lot_table, parcel_table, residence_time_s, steady_windows
from .validate import REASONS, Verdict

__all__ = ["Chunk", "Layout", "LogFile", "open_log", "read_log", "REASONS", "Verdict", "FLAG_COLUMNS",
           "flag_samples", "lot_table", "parcel_table", "residence_time_s", "steady_windows"]
