"""Quality flags on samples: stuck sensors, spikes, gaps, clock jumps, belt stops, power trips.

Synthetic series with known faults; the expected flags are the faults placed (exact indices).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from optimizer.logs import quality

from logfiles import plant


@pytest.fixture(scope="module")
def tl1():
    return plant().lines["TL-1"]


def _samples(n=600, step_s=30, seed=3):
    rng = np.random.default_rng(seed)
    t = pd.Timestamp("2026-03-16T05:00Z") + pd.to_timedelta(np.arange(n) * step_s, unit="s")
    df = pd.DataFrame({"timestamp_utc": t, "line_id": "TL-1", "lot_id": "L1", "product_id": "BEEF-TRIM-90",
                       "belt_speed_m_per_min": np.round(0.6 + rng.normal(0, 0.002, n), 3),
                       "belt_load_kg_per_m": np.round(rng.normal(58, 1.5, n), 2),
                       "infeed_temp_c": np.round(rng.normal(-18, 0.3, n), 2),
                       "air_temp_c": np.round(rng.normal(-2, 0.2, n), 2),
                       "utc_offset_min": 60.0})
    for i, level in enumerate((21.0, 20.0, 17.0, 14.0), start=1):
        df[f"zone{i}_forward_kw"] = np.round(rng.normal(level, 0.15, n), 2)
    return df


def test_a_frozen_sensor_is_flagged_exactly_and_idle_zeros_are_not(tl1):
    df = _samples()
    df.loc[100:219, "belt_load_kg_per_m"] = 57.31  # frozen for 1 h (120 samples at 30 s)
    df.loc[300:399, "infeed_temp_c"] = 0.0  # zeros: the reading of an idle sensor, not a frozen one
    df.loc[450:455, "air_temp_c"] = -2.1  # 6 repeats in 2.5 min: within what noise allows
    stuck = quality.stuck_cells(df)
    assert np.flatnonzero(stuck["belt_load_kg_per_m"]).tolist() == list(range(100, 220))
    assert not stuck["infeed_temp_c"].any() and not stuck["air_temp_c"].any()


def test_a_spike_is_flagged_but_a_step_is_not(tl1):
    df = _samples()
    df.loc[250, "infeed_temp_c"] = -3.0  # 15 K above both neighbours
    df.loc[400:, "zone1_forward_kw"] = df.loc[400:, "zone1_forward_kw"] + 4.0  # a setpoint change
    spikes = quality.spike_cells(df)
    assert np.flatnonzero(spikes["infeed_temp_c"]).tolist() == [250]
    assert not spikes["zone1_forward_kw"].any()


def test_gap_clock_change_belt_stop_and_trip(tl1):
    df = _samples()
    df = df.drop(index=range(50, 60)).reset_index(drop=True)  # five minutes missing before row 50
    df.loc[200:, "utc_offset_min"] = 120.0
    df.loc[300:309, "belt_speed_m_per_min"] = 0.0
    df.loc[300:309, [f"zone{i}_forward_kw" for i in range(1, 5)]] = 0.0  # interlocked off with the belt
    df.loc[400:404, "zone3_forward_kw"] = 0.0  # one generator trips on a moving belt
    flags = quality.flag_samples(df, tl1)
    assert np.flatnonzero(flags["flag_gap"]).tolist() == [50]
    assert np.flatnonzero(flags["flag_clock_jump"]).tolist() == [200]
    assert np.flatnonzero(flags["flag_belt_stop"]).tolist() == list(range(300, 310))
    assert np.flatnonzero(flags["flag_power_trip"]).tolist() == list(range(400, 405))
    assert quality.summarize(flags)["power_trip"] == 5


def test_a_lot_that_runs_a_zone_at_zero_is_not_a_trip(tl1):
    df = _samples()
    df["zone4_forward_kw"] = 0.0  # this product runs with zone 4 off
    assert not quality.power_trips(df, tl1)["zone4_forward_kw"].any()


def test_empty_input_gives_empty_flags(tl1):
    flags = quality.flag_samples(_samples().iloc[:0], tl1)
    assert list(flags.columns) == list(quality.FLAG_COLUMNS) and len(flags) == 0
