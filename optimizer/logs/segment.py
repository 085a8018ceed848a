"""Lots, steady windows and the parcel table: what each outfeed sample's product went through.

A parcel leaving the tunnel at time t entered one residence time earlier and crossed each
zone while the belt carried it there (``optimizer.line.transport.passage_times``, speed
held between samples, stops included). Its settings are the time means of each zone's
forward and reflected power while it was inside that zone; its infeed temperature and belt
load are the readings at the moment it entered. A *steady window* is a stretch of a lot
whose settings held (within tolerance) for at least one residence time: the outfeed samples
from one residence time after the settings settled until they changed saw nothing else.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..config import Line
from ..line.transport import passage_times
from .reader import timestamps_ms
from .quality import FLAG_COLUMNS, flag_samples, spike_cells, stuck_cells

SPEED_TOL_REL = 0.03  # steady belt speed: within 3 % …
SPEED_TOL_MIN_M_PER_MIN = 0.01  # … or this much, whichever is larger
POWER_TOL_REL = 0.05  # steady zone power: within 5 % of the zone rating …
POWER_TOL_MIN_KW = 0.5  # … or this much
SMOOTH_SAMPLES = 5  # rolling median over the meter noise before judging steadiness
MIN_COVERAGE = 0.9  # share of a passage with readings for a zone mean to count
OUTFEED_COLUMNS = ("outfeed_temp_mean_c", "outfeed_temp_min_c", "outfeed_temp_max_c", "outfeed_moisture_pct_wb")


def lot_table(samples: pd.DataFrame) -> pd.DataFrame:
    """One row per (line, lot): product, first and last sample time, sample count.

    The product is the lot's first non-empty ``product_id``.
    """
    cols = ["line_id", "lot_id", "product_id", "first_utc", "last_utc", "sample_count"]
    rows = samples[samples["lot_id"].notna()]
    if rows.empty:
        return pd.DataFrame(columns=cols)
    g = rows.groupby(["line_id", "lot_id"], sort=True)
    out = g.agg(product_id=("product_id", "first"), first_utc=("timestamp_utc", "min"),
                last_utc=("timestamp_utc", "max"), sample_count=("timestamp_utc", "size")).reset_index()
    return out[cols]


def residence_time_s(belt_speed_m_per_min, tunnel_length_m: float):
    """Infeed-to-outfeed time [s] at a constant belt speed [m min⁻¹] (inf when stopped).

    >>> float(residence_time_s(0.6, 6.0))
    600.0
    """
    v = np.asarray(belt_speed_m_per_min, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(v > 0, 60.0 * tunnel_length_m / np.where(v > 0, v, 1.0), np.inf)


def zone_edges_m(line: Line) -> np.ndarray:
    """Positions [m from the infeed] of the zone boundaries: zone i spans edges[i-1]…edges[i]."""
    return line.infeed_choke_m + np.concatenate([[0.0], np.cumsum(line.zone_length_m)])


def _seconds(samples: pd.DataFrame) -> np.ndarray:
    return timestamps_ms(samples["timestamp_utc"]) / 1000.0


def _column(samples: pd.DataFrame, col: str) -> np.ndarray:
    return samples[col].to_numpy(dtype=float) if col in samples else np.full(len(samples), np.nan)


def steady_windows(samples: pd.DataFrame, line: Line, flags: pd.DataFrame | None = None,
                   min_samples: int = 3) -> pd.DataFrame:
    """Stretches of lots whose settings held for at least one residence time.

    Parameters
    ----------
    samples : one line's samples sorted by time (``Store.samples``).
    flags : ``quality.flag_samples`` of the same rows (computed when not given).
    min_samples : fewest outfeed samples a window must hold.

    Returns
    -------
    DataFrame, one row per window: ``window_id``, ``line_id``, ``lot_id``, ``product_id``,
    ``settled_utc`` (settings reached), ``start_utc`` (one residence time later: the first
    outfeed sample that saw only these settings), ``end_utc``, ``sample_count``,
    ``residence_time_s`` and the mean settings (``belt_speed_m_per_min``, ``zone{i}_forward_kw``,
    ``zone{i}_reflected_kw``).
    """
    zones = range(1, line.zone_count + 1)
    out_cols = (["window_id", "line_id", "lot_id", "product_id", "settled_utc", "start_utc", "end_utc",
                 "sample_count", "residence_time_s", "belt_speed_m_per_min"]
                + [f"zone{i}_forward_kw" for i in zones] + [f"zone{i}_reflected_kw" for i in zones])
    if len(samples) == 0:
        return pd.DataFrame(columns=out_cols)
    flags = flag_samples(samples, line) if flags is None else flags
    cols = ["belt_speed_m_per_min"] + [f"zone{i}_forward_kw" for i in zones]
    raw = np.column_stack([_column(samples, c) for c in cols])
    smooth = pd.DataFrame(raw).rolling(SMOOTH_SAMPLES, center=True, min_periods=1).median().to_numpy()
    tol = np.column_stack([np.maximum(SPEED_TOL_REL * np.abs(smooth[:, 0]), SPEED_TOL_MIN_M_PER_MIN)]
                          + [np.full(len(samples), max(POWER_TOL_REL * r, POWER_TOL_MIN_KW))
                             for r in line.zone_max_kw])
    lot = samples["lot_id"]
    running = (lot.notna().to_numpy() & (smooth[:, 0] > 0) & np.isfinite(smooth).all(axis=1)
               & ~flags["flag_belt_stop"].to_numpy() & ~flags["flag_power_trip"].to_numpy())
    step = np.zeros(len(samples), dtype=bool)
    step[1:] = (np.abs(np.diff(smooth, axis=0)) > tol[1:]).any(axis=1)
    lot_change = np.zeros(len(samples), dtype=bool)
    lot_change[1:] = (lot.to_numpy()[1:] != lot.to_numpy()[:-1])
    brk = step | lot_change | flags["flag_gap"].to_numpy() | ~running
    brk[0] = True
    seg = np.cumsum(brk)
    t = _seconds(samples)
    pos = np.flatnonzero(running)
    if len(pos) == 0:
        return pd.DataFrame(columns=out_cols)
    seg_run = pd.Series(seg[pos])
    first_t = pd.Series(t[pos]).groupby(seg_run).min()
    last_t = pd.Series(t[pos]).groupby(seg_run).max()
    # a drift that never made a step still breaks steadiness: every sample near the segment's median
    wobbly = pd.Series(False, index=first_t.index)
    for j in range(len(cols)):
        v = pd.Series(smooth[pos, j])
        dev = (v - v.groupby(seg_run).transform("median")).abs().to_numpy() > 2 * tol[pos, j]
        wobbly |= pd.Series(dev).groupby(seg_run).any()
    speed = pd.Series(smooth[pos, 0]).groupby(seg_run).mean()
    tau = pd.Series(residence_time_s(speed.to_numpy(), line.tunnel_length_m), index=speed.index)
    keep = ~wobbly & (last_t - first_t >= tau)
    seg_all = pd.Series(seg)
    member = running & seg_all.map(keep).fillna(False).to_numpy(dtype=bool) \
        & (t >= seg_all.map(first_t + tau).to_numpy(dtype=float, na_value=np.inf))
    sub = samples[member].assign(_seg=seg[member], _settled=seg_all.map(first_t).to_numpy()[member])
    if sub.empty:
        return pd.DataFrame(columns=out_cols)
    value_cols = ["belt_speed_m_per_min"] + [f"zone{i}_{stem}" for stem in ("forward_kw", "reflected_kw")
                                             for i in zones]
    for c in value_cols:
        if c not in sub:
            sub[c] = np.nan
    g = sub.groupby("_seg", sort=True)
    win = g.agg(line_id=("line_id", "first"), lot_id=("lot_id", "first"), product_id=("product_id", "first"),
                settled_s=("_settled", "first"), start_utc=("timestamp_utc", "min"),
                end_utc=("timestamp_utc", "max"), sample_count=("timestamp_utc", "size"))
    win = win.join(g[value_cols].mean())
    win["residence_time_s"] = tau.reindex(win.index).to_numpy()
    win = win[win["sample_count"] >= min_samples].reset_index(drop=True)
    win["settled_utc"] = pd.to_datetime(win["settled_s"] * 1000.0, unit="ms", utc=True)
    win["window_id"] = np.arange(1, len(win) + 1)
    return win[out_cols]


class _HoldIntegral:
    """∫ x dt of a signal held from each sample to the next, and the time it had a reading."""

    def __init__(self, t: np.ndarray, x: np.ndarray):
        self.t = t
        self.valid = np.isfinite(x)
        self.x = np.where(self.valid, x, 0.0)
        dt = np.diff(t)
        self.cum = np.concatenate([[0.0], np.cumsum(self.x[:-1] * dt)])
        self.cum_valid = np.concatenate([[0.0], np.cumsum(self.valid[:-1] * dt)])

    def _at(self, tq: np.ndarray):
        j = np.clip(np.searchsorted(self.t, tq, side="right") - 1, 0, len(self.t) - 1)
        dt = tq - self.t[j]
        return self.cum[j] + self.x[j] * dt, self.cum_valid[j] + self.valid[j] * dt

    def mean(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """Time mean over [a, b] (NaN where readings cover less than ``MIN_COVERAGE`` of it)."""
        ca, va = self._at(np.nan_to_num(a))
        cb, vb = self._at(np.nan_to_num(b))
        span = b - a
        with np.errstate(invalid="ignore", divide="ignore"):
            covered = (vb - va) / span
            m = (cb - ca) / (vb - va)
        return np.where(np.isfinite(a) & np.isfinite(b) & (span > 0) & (covered >= MIN_COVERAGE), m, np.nan)


def _window_of(windows: pd.DataFrame, t_s: np.ndarray, lot: np.ndarray) -> np.ndarray:
    """The id of the (time-ordered, disjoint) window each time lies in, 0 for none."""
    if windows.empty:
        return np.zeros(len(t_s), dtype=np.int64)
    start = _seconds(windows.rename(columns={"start_utc": "timestamp_utc"}))
    end = _seconds(windows.rename(columns={"end_utc": "timestamp_utc"}))
    k = np.searchsorted(start, t_s, side="right") - 1
    kk = np.clip(k, 0, len(start) - 1)
    inside = (k >= 0) & (t_s <= end[kk]) & (windows["lot_id"].to_numpy()[kk] == lot)
    return np.where(inside, windows["window_id"].to_numpy()[kk], 0)


def parcel_table(samples: pd.DataFrame, line: Line, flags: pd.DataFrame | None = None) -> pd.DataFrame:
    """For every outfeed sample of a lot, the settings its parcel met on the way (the fit's input).

    Parameters
    ----------
    samples : one line's samples sorted by time (``Store.samples``; unique timestamps).
    line : the line (zone lengths, chokes, ratings).
    flags : ``quality.flag_samples`` of the same rows (computed when not given).

    Returns
    -------
    DataFrame, one row per sample with a lot: ``timestamp_utc`` (outfeed time), ``line_id``,
    ``lot_id``, ``product_id``, ``infeed_time_utc``, ``residence_time_s`` [s],
    ``belt_speed_mean_m_per_min``, at the infeed ``infeed_temp_c``, ``belt_load_kg_per_m``
    (and ``infeed_moisture_pct_wb``), per zone the passage means ``zone{i}_forward_kw``,
    ``zone{i}_reflected_kw`` [kW] and the time in the zone ``zone{i}_time_s``, the passage
    means ``air_temp_c`` (and ``air_rh_pct``), the outfeed readings, ``window_id`` of the
    steady window the sample lies in (0: none), ``steady``, ``same_lot`` (the parcel entered
    in the same lot), ``belt_stop_during_passage``, ``power_trip_during_passage``,
    ``gap_during_passage``, ``outfeed_flagged`` (a spike or stuck reading at the outfeed) and
    ``usable`` (complete passage in one lot, no gap, settings and outfeed reading present).
    """
    drying = line.kind == "drying"
    zones = range(1, line.zone_count + 1)
    rows = np.flatnonzero(samples["lot_id"].notna().to_numpy()) if len(samples) else np.zeros(0, int)
    t = _seconds(samples)
    flags = flag_samples(samples, line) if flags is None else flags
    out = {"timestamp_utc": samples["timestamp_utc"].to_numpy()[rows],
           "line_id": samples["line_id"].to_numpy()[rows] if "line_id" in samples else line.line_id,
           "lot_id": samples["lot_id"].to_numpy()[rows],
           "product_id": samples["product_id"].to_numpy()[rows]}
    if len(rows) == 0:
        return pd.DataFrame(out)
    edges = zone_edges_m(line)
    positions = np.concatenate([[0.0], edges, [line.tunnel_length_m]])
    passed = passage_times(t, _column(samples, "belt_speed_m_per_min"), positions, line.tunnel_length_m, rows=rows)
    t_in, t_out = passed[:, 0], t[rows]
    j_in = np.clip(np.searchsorted(t, np.nan_to_num(t_in, nan=t[0]), side="right") - 1, 0, len(t) - 1)
    complete = np.isfinite(t_in)
    out["infeed_time_utc"] = pd.to_datetime(np.where(complete, t_in * 1000.0, np.nan), unit="ms", utc=True)
    out["residence_time_s"] = t_out - t_in
    with np.errstate(invalid="ignore", divide="ignore"):
        out["belt_speed_mean_m_per_min"] = 60.0 * line.tunnel_length_m / (t_out - t_in)
    infeed_cols = ["infeed_temp_c", "belt_load_kg_per_m"] + (["infeed_moisture_pct_wb"] if drying else [])
    for c in infeed_cols:
        out[c] = np.where(complete, _column(samples, c)[j_in], np.nan)
    for i in zones:
        a, b = passed[:, i], passed[:, i + 1]
        for stem in ("forward_kw", "reflected_kw"):
            out[f"zone{i}_{stem}"] = _HoldIntegral(t, _column(samples, f"zone{i}_{stem}")).mean(a, b)
        out[f"zone{i}_time_s"] = b - a
    for c in ["air_temp_c"] + (["air_rh_pct"] if drying else []):
        out[c] = _HoldIntegral(t, _column(samples, c)).mean(t_in, t_out)
    outfeed = [c for c in OUTFEED_COLUMNS if c != "outfeed_moisture_pct_wb" or drying]
    for c in outfeed:
        out[c] = _column(samples, c)[rows]
    lot = samples["lot_id"].to_numpy()
    out["same_lot"] = complete & (lot[j_in] == lot[rows])
    for name, flag in (("belt_stop_during_passage", "flag_belt_stop"),
                       ("power_trip_during_passage", "flag_power_trip"), ("gap_during_passage", "flag_gap")):
        cum = np.cumsum(flags[flag].to_numpy())
        out[name] = complete & (cum[rows] - cum[j_in] > 0)
    present = [c for c in outfeed if c in samples]
    marked = (stuck_cells(samples, present).any(axis=1) | spike_cells(samples, present).any(axis=1)).to_numpy()
    out["outfeed_flagged"] = marked[rows]
    out["window_id"] = _window_of(steady_windows(samples, line, flags), t_out, out["lot_id"])
    out["steady"] = out["window_id"] > 0
    frame = pd.DataFrame(out)
    measured = frame["outfeed_moisture_pct_wb"].notna() if drying else frame["outfeed_temp_mean_c"].notna()
    settings = frame[[f"zone{i}_forward_kw" for i in zones]].notna().all(axis=1)
    frame["usable"] = (frame["same_lot"] & ~frame["gap_during_passage"] & settings & measured
                       & ~frame["outfeed_flagged"] & frame[infeed_cols[0]].notna())
    return frame


__all__ = ["lot_table", "residence_time_s", "zone_edges_m", "steady_windows", "parcel_table", "FLAG_COLUMNS"]
