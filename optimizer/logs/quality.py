"""Data-quality flags on stored samples: stuck sensors, spikes, gaps, clock jumps, belt stops, trips.

Flags mark samples; they never delete them (only rows that fail validation are kept out of
the store). Every function takes one line's samples sorted by ``timestamp_utc`` (as
``Store.samples`` returns them) and is computed on demand, so a flag always sees the whole
span asked for — a sensor frozen across midnight is one run, not two halves in two files.

A sensor is *stuck* when its reading repeats exactly for longer than its own noise allows:
with p the column's share of consecutive equal readings, a run of n repeats has chance pⁿ,
so runs longer than log(α)/log(p) samples (and at least ``min_duration_s``) are flagged.
A *spike* is a reading that leaves both neighbours in the same direction by more than
``k`` robust standard deviations of the column's sample-to-sample change while the
neighbours agree with each other.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..config import Line, unit_kind
from .reader import timestamps_ms

#: Measured (not set) columns checked for frozen readings. Belt speed and forward power are
#: read back from drives and generators that may hold a setpoint exactly, so they are not.
STUCK_COLUMNS = ("belt_load_kg_per_m", "infeed_temp_c", "air_temp_c", "outfeed_temp_mean_c",
                 "outfeed_temp_min_c", "outfeed_temp_max_c", "infeed_moisture_pct_wb",
                 "outfeed_moisture_pct_wb", "air_rh_pct")
#: Smallest deviation counted as a spike, by unit kind (a floor under k·σ for quiet signals).
SPIKE_FLOOR = {"temp": 2.0, "power": 1.0, "speed": 0.05, "load": 5.0, "moisture": 2.0}
STUCK_ALPHA = 1e-6  # chance a noisy sensor repeats that long by luck
STUCK_MIN_DURATION_S = 600.0
STUCK_MIN_SAMPLES = 10
SPIKE_K = 6.0
SCALE_SAMPLE = 20_000
GAP_FACTOR = 3.0  # a step longer than this many nominal sample intervals is a gap
BELT_STOP_FRACTION = 0.1  # of the line's minimum belt speed
TRIP_OFF_FRACTION = 0.02  # a zone below this share of its rating is off
TRIP_ON_FRACTION = 0.10  # … while its lot ran it above this share
FLAG_COLUMNS = ("flag_gap", "flag_stuck", "flag_spike", "flag_clock_jump", "flag_belt_stop", "flag_power_trip")


def _times_s(samples: pd.DataFrame) -> np.ndarray:
    return timestamps_ms(samples["timestamp_utc"]) / 1000.0


def nominal_interval_s(samples: pd.DataFrame) -> float:
    """The median sample interval [s] (NaN with fewer than two samples)."""
    t = _times_s(samples)
    return float(np.median(np.diff(t))) if len(t) > 1 else float("nan")


def gaps(samples: pd.DataFrame, factor: float = GAP_FACTOR) -> np.ndarray:
    """Samples that follow a pause in the record longer than ``factor`` nominal intervals."""
    t = _times_s(samples)
    out = np.zeros(len(t), dtype=bool)
    if len(t) > 1:
        out[1:] = np.diff(t) > factor * nominal_interval_s(samples)
    return out


def _runs(values: np.ndarray, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Length [samples] and duration [s] of the run of consecutive equal values each sample is in."""
    same = np.zeros(len(values), dtype=bool)
    same[1:] = (values[1:] == values[:-1]) & np.isfinite(values[1:])
    starts = np.flatnonzero(~same)
    ends = np.append(starts[1:] - 1, len(values) - 1)
    run = np.cumsum(~same) - 1
    return (ends - starts + 1)[run], (t[ends] - t[starts])[run]


def stuck_cells(samples: pd.DataFrame, columns=None, alpha: float = STUCK_ALPHA,
                min_duration_s: float = STUCK_MIN_DURATION_S, min_samples: int = STUCK_MIN_SAMPLES) -> pd.DataFrame:
    """Per column, the samples inside a run of identical non-zero readings longer than noise allows.

    Parameters
    ----------
    columns : the columns to check (default: the measured ones of ``STUCK_COLUMNS`` present).
    alpha : chance [-] that a noisy reading repeats that long by luck.
    min_duration_s : shortest run [s] flagged, whatever the noise.
    """
    columns = [c for c in (columns or STUCK_COLUMNS) if c in samples.columns]
    t = _times_s(samples)
    out = {}
    for col in columns:
        v = samples[col].to_numpy(dtype=float)
        length, duration = _runs(v, t)
        valid = np.isfinite(v) & (v != 0)
        pairs = valid[1:] & valid[:-1]
        p = float(np.mean(v[1:][pairs] == v[:-1][pairs])) if pairs.any() else 1.0
        p = min(max(p, 1e-3), 0.999)
        n_needed = max(min_samples, int(np.ceil(np.log(alpha) / np.log(p))))
        out[col] = valid & (length >= n_needed) & (duration >= min_duration_s)
    return pd.DataFrame(out, index=samples.index)


def spike_cells(samples: pd.DataFrame, columns=None, k: float = SPIKE_K) -> pd.DataFrame:
    """Per column, single-sample excursions away from two agreeing neighbours (see module notes)."""
    if columns is None:
        columns = [c for c in samples.columns if unit_kind(c) in SPIKE_FLOOR and c != "energy_kwh"]
    out = {}
    for col in columns:
        v = samples[col].to_numpy(dtype=float)
        flag = np.zeros(len(v), dtype=bool)
        if len(v) >= 3:
            d = np.diff(v)
            d = d[:: max(1, len(d) // SCALE_SAMPLE)]  # the noise scale from ≤ SCALE_SAMPLE steps
            d = d[np.isfinite(d)]
            sigma = 1.4826 * float(np.median(np.abs(d))) if len(d) else 0.0
            threshold = max(k * sigma, SPIKE_FLOOR[unit_kind(col)])
            before, mid, after = v[:-2], v[1:-1], v[2:]
            up, down = mid - before, mid - after
            with np.errstate(invalid="ignore"):
                flag[1:-1] = ((np.sign(up) == np.sign(down)) & (np.abs(up) > threshold)
                              & (np.abs(down) > threshold) & (np.abs(after - before) < threshold))
        out[col] = flag
    return pd.DataFrame(out, index=samples.index)


def clock_jumps(samples: pd.DataFrame) -> np.ndarray:
    """Samples where the UTC offset written by the historian changed (a daylight-saving change)."""
    if "utc_offset_min" not in samples:
        return np.zeros(len(samples), dtype=bool)
    off = samples["utc_offset_min"].to_numpy(dtype=float)
    out = np.zeros(len(off), dtype=bool)
    out[1:] = np.isfinite(off[1:]) & np.isfinite(off[:-1]) & (off[1:] != off[:-1])
    return out


def _column(samples: pd.DataFrame, col: str) -> np.ndarray:
    return samples[col].to_numpy(dtype=float) if col in samples else np.full(len(samples), np.nan)


def _in_lot(samples: pd.DataFrame) -> np.ndarray:
    return samples["lot_id"].notna().to_numpy() if "lot_id" in samples else np.zeros(len(samples), dtype=bool)


def belt_stops(samples: pd.DataFrame, line: Line) -> np.ndarray:
    """Samples of a lot during which the belt stands."""
    v = _column(samples, "belt_speed_m_per_min")
    in_lot = _in_lot(samples)
    with np.errstate(invalid="ignore"):
        return in_lot & (v < BELT_STOP_FRACTION * line.belt_speed_min_m_per_min)


def power_trips(samples: pd.DataFrame, line: Line) -> pd.DataFrame:
    """Per zone, samples where a generator is off on a moving belt in a lot that ran it."""
    with np.errstate(invalid="ignore"):
        moving = ~belt_stops(samples, line) & _in_lot(samples) & (_column(samples, "belt_speed_m_per_min") > 0)
    if not moving.any():
        return pd.DataFrame({f"zone{i}_forward_kw": np.zeros(len(samples), dtype=bool)
                             for i in range(1, line.zone_count + 1)}, index=samples.index)
    lot = samples["lot_id"]
    out = {}
    for i, rating in enumerate(line.zone_max_kw, start=1):
        col = f"zone{i}_forward_kw"
        if col not in samples:
            continue
        p = samples[col]
        typical = p.where(moving).groupby(lot).transform("median").to_numpy(dtype=float)
        with np.errstate(invalid="ignore"):
            out[col] = moving & (p.to_numpy(dtype=float) < TRIP_OFF_FRACTION * rating) \
                & (typical > TRIP_ON_FRACTION * rating)
    return pd.DataFrame(out, index=samples.index)


def flag_samples(samples: pd.DataFrame, line: Line) -> pd.DataFrame:
    """All per-sample flags of one line's samples (sorted by time), as boolean columns ``FLAG_COLUMNS``."""
    if len(samples) == 0:
        return pd.DataFrame({c: np.zeros(0, dtype=bool) for c in FLAG_COLUMNS}, index=samples.index)
    return pd.DataFrame({
        "flag_gap": gaps(samples),
        "flag_stuck": stuck_cells(samples).any(axis=1).to_numpy(),
        "flag_spike": spike_cells(samples).any(axis=1).to_numpy(),
        "flag_clock_jump": clock_jumps(samples),
        "flag_belt_stop": belt_stops(samples, line),
        "flag_power_trip": power_trips(samples, line).any(axis=1).to_numpy(),
    }, index=samples.index)


def summarize(flags: pd.DataFrame) -> dict[str, int]:
    """Count of flagged samples per flag (``flag_`` prefix dropped)."""
    return {c.removeprefix("flag_"): int(flags[c].sum()) for c in flags.columns}
