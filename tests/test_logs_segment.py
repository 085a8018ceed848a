"""Segmentation: lots, steady windows, and the parcel table with the transport delay.

TL-1 (plant description): infeed choke 0.5 m, four 1.2 m zones, outfeed choke 0.5 m, so the
tunnel is 5.8 m and zone i spans 0.5 + 1.2·(i−1) … 0.5 + 1.2·i m. At a constant belt speed v
the residence time is L/v (definition), e.g. 600 s at 0.58 m/min. Expected passage means are
the time averages of step-held signals, computed by hand from those geometry numbers.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from optimizer.logs import segment

from logfiles import plant

STEP_S = 30.0


@pytest.fixture(scope="module")
def tl1():
    return plant().lines["TL-1"]


def _run(n: int, speed, lot="L1"):
    t = pd.Timestamp("2026-03-16T05:00Z") + pd.to_timedelta(np.arange(n) * STEP_S, unit="s")
    df = pd.DataFrame({"timestamp_utc": t, "line_id": "TL-1", "product_id": "BEEF-TRIM-90", "lot_id": lot,
                       "belt_speed_m_per_min": speed, "belt_load_kg_per_m": 58.0,
                       "infeed_temp_c": -20.0 + 0.01 * np.arange(n), "air_temp_c": -2.0,
                       "outfeed_temp_mean_c": -4.0, "outfeed_temp_min_c": -4.5, "outfeed_temp_max_c": -3.5})
    for i, p in enumerate((10.0, 20.0, 17.0, 14.0), start=1):
        df[f"zone{i}_forward_kw"] = p
        df[f"zone{i}_reflected_kw"] = 0.5
    return df


def test_residence_and_zone_means_follow_the_transport_delay(tl1):
    df = _run(200, 0.58)
    step_at = 150  # zone 1 power goes 10 → 20 kW at sample 150 (held from there on)
    df.loc[step_at:, "zone1_forward_kw"] = 20.0
    table = segment.parcel_table(df, tl1)
    assert len(table) == 200
    early = table.iloc[:20]  # entered before the record began
    assert early["infeed_time_utc"].isna().all() and not early["usable"].any()
    row = table.iloc[100]
    assert row["residence_time_s"] == pytest.approx(600.0, abs=1e-6)
    assert row["infeed_time_utc"] == df["timestamp_utc"].iloc[80]
    assert row["infeed_temp_c"] == pytest.approx(-20.0 + 0.01 * 80)
    assert row["zone1_time_s"] == pytest.approx(1.2 / 0.58 * 60)
    assert row["zone1_forward_kw"] == pytest.approx(10.0) and row["zone2_forward_kw"] == pytest.approx(20.0)
    assert row["usable"] and row["same_lot"]
    # a parcel leaving at sample 165 entered at 145; it was in zone 1 from 51.72 s to 175.86 s after entry,
    # and the step came 150 s after entry: mean = (10·(150 − 51.72) + 20·(175.86 − 150)) / 124.14
    a, b = 0.5 / 0.58 * 60, 1.7 / 0.58 * 60
    expected = (10.0 * (150.0 - a) + 20.0 * (b - 150.0)) / (b - a)
    assert table.iloc[165]["zone1_forward_kw"] == pytest.approx(expected, rel=1e-9)


def test_a_belt_stop_lengthens_the_passage_and_is_flagged(tl1):
    speed = np.full(200, 0.58)
    speed[100:120] = 0.0  # ten minutes standing
    df = _run(200, speed)
    df.loc[100:119, [f"zone{i}_forward_kw" for i in range(1, 5)]] = 0.0
    table = segment.parcel_table(df, tl1)
    row = table.iloc[130]  # left at 65 min: ran 60-65 min, stood 50-60, ran 45-50 -> entered at sample 90
    assert row["residence_time_s"] == pytest.approx(1200.0, abs=1e-6)
    assert row["infeed_time_utc"] == df["timestamp_utc"].iloc[90]
    assert row["belt_stop_during_passage"] and not table.iloc[60]["belt_stop_during_passage"]


def test_steady_windows_start_one_residence_time_after_the_settings_settle(tl1):
    speed = np.where(np.arange(480) < 240, 0.58, 0.87)  # 2 h at 0.58 m/min, then 2 h at 0.87 m/min
    df = _run(480, speed)
    windows = segment.steady_windows(df, tl1)
    assert windows["window_id"].tolist() == [1, 2]
    first, second = windows.iloc[0], windows.iloc[1]
    t = df["timestamp_utc"]
    assert first["residence_time_s"] == pytest.approx(600.0) and second["residence_time_s"] == pytest.approx(400.0)
    assert (first["settled_utc"], first["start_utc"], first["end_utc"]) == (t[0], t[20], t[239])
    assert (second["settled_utc"], second["start_utc"], second["end_utc"]) == (t[240], t[254], t[479])
    assert (first["sample_count"], second["sample_count"]) == (220, 226)
    assert first["zone2_forward_kw"] == pytest.approx(20.0)
    table = segment.parcel_table(df, tl1)
    assert table["window_id"].iloc[[100, 245, 300]].tolist() == [1, 0, 2]


def test_windows_need_one_residence_time_and_break_at_lot_changes(tl1):
    df = pd.concat([_run(15, 0.58, "L1"), _run(60, 0.58, "L2")], ignore_index=True)
    df["timestamp_utc"] = pd.Timestamp("2026-03-16T05:00Z") + pd.to_timedelta(np.arange(75) * STEP_S, unit="s")
    windows = segment.steady_windows(df, tl1)
    assert windows["lot_id"].tolist() == ["L2"]  # L1 lasted 7.5 min, less than the 10 min residence time
    assert windows["start_utc"].iloc[0] == df["timestamp_utc"].iloc[15 + 20]
    table = segment.parcel_table(df, tl1)
    assert not table["same_lot"].iloc[15:35].any() and table["same_lot"].iloc[35:].all()


def test_lot_table(tl1):
    df = pd.concat([_run(5, 0.58, "L1"), _run(3, 0.58, None)], ignore_index=True)
    lots = segment.lot_table(df)
    assert lots[["lot_id", "product_id", "sample_count"]].values.tolist() == [["L1", "BEEF-TRIM-90", 5]]


def test_residence_time_definition():
    assert segment.residence_time_s(np.array([0.6, 0.0]), 6.0).tolist() == [600.0, np.inf]
