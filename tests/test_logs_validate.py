"""Row validation: physical ranges, line ids, zone columns, likely unit mistakes.

The ranges are the issue's definitions (belt speed not negative, zone power at most 150 % of
its rating, temperatures within −60…250 °C); TL-1's zones are rated 25 kW (plant description).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from optimizer.logs import validate
from optimizer.logs.reader import Layout, read_log
from optimizer.logs.validate import Verdict, suggest_line

from logfiles import plant, tl1_frame, with_line, write_frame


@pytest.fixture(scope="module")
def base():
    return plant()


def _judge(tmp_path, df, the_plant, name="TL-1.csv"):
    """Decode a frame's file and run the ingest's checks; returns (data, verdict, suspicions)."""
    data, bad, log = read_log(write_frame(tmp_path / name, df), the_plant)
    assert bad.empty
    verdict = Verdict(len(data))
    keys = {k: Layout.of_line(v).key for k, v in the_plant.lines.items()}
    validate.check_lines(data, verdict, the_plant, log.layout.key, keys)
    line = the_plant.lines["TL-1"]
    rows = (data["line_id"] == "TL-1").to_numpy()
    validate.check_zones(data, rows, verdict, line)
    found = validate.unit_suspicions(data, rows & verdict.ok, line, the_plant, dict(line.units)) or []
    validate.check_units(data, rows, verdict, found)
    validate.check_ranges(data, rows, verdict, line)
    return data, verdict, found


def test_clean_rows_pass(tmp_path, base):
    _, verdict, found = _judge(tmp_path, tl1_frame(20), base)
    assert verdict.ok.all() and found == []


def test_physical_ranges(tmp_path, base):
    df = tl1_frame(20)
    df.loc[2, "belt_speed_m_per_min"] = "-0.1"
    df.loc[4, "zone2_forward_kw"] = "37.6"  # above 1.5 × 25 kW
    df.loc[5, "zone2_forward_kw"] = "37.5"  # exactly 150 %: allowed
    df.loc[6, "outfeed_temp_max_c"] = "-70"
    df.loc[8, "zone4_reflected_kw"] = "-0.5"
    _, verdict, _ = _judge(tmp_path, df, base)
    assert np.flatnonzero(verdict.failed).tolist() == [2, 4, 6, 8]
    assert verdict.detail[[2, 4, 6, 8]].tolist() == [
        "belt_speed_m_per_min = -0.1 is outside [0, 4.5] (150% of the line's maximum speed)",
        "zone2_forward_kw = 37.6 is outside [0, 37.5] (150% of the zone's 25 kW rating)",
        "outfeed_temp_max_c = -70 is outside [-60, 250] (the range of food processing temperatures)",
        "zone4_reflected_kw = -0.5 is outside [0, 37.5] (150% of the zone's 25 kW rating)",
    ]


def test_unknown_and_misspelt_line_ids(tmp_path, base):
    df = tl1_frame(10)
    df.loc[1, "line_id"] = "tl1"
    df.loc[2, "line_id"] = "TL-3"
    df.loc[3, "line_id"] = ""
    _, verdict, _ = _judge(tmp_path, df, base)
    assert verdict.reason[[1, 2, 3]].tolist() == ["unknown_line", "unknown_line", "missing_line_id"]
    assert verdict.detail[1] == ("line_id 'tl1' is not a line of this plant (lines: DR-1, TL-1); it looks like "
                                 "'TL-1' spelled differently: fix the export's line id")
    assert verdict.detail[2].endswith("if it is one of its lines, describe it under [lines]")
    assert suggest_line("dr_1", ["DR-1", "TL-1"]) == "DR-1" and suggest_line("DR-2", ["DR-1"]) is None


def test_values_in_a_zone_the_line_lacks(tmp_path, base):
    df = tl1_frame(6)
    df["zone5_forward_kw"] = ["", "", "3.5", "", "0", ""]
    _, verdict, _ = _judge(tmp_path, df, base)
    assert np.flatnonzero(verdict.failed).tolist() == [2, 4]
    assert verdict.reason[2] == "unknown_zone"
    assert verdict.detail[2].startswith("zone5_forward_kw = 3.5 but line TL-1 has 4 zones")


def test_power_logged_in_watts_is_caught_and_quarantined(tmp_path, base):
    df = tl1_frame(20)
    df["zone1_forward_kw"] = (df["zone1_forward_kw"].astype(float) * 1000).round(0).astype(str)
    _, verdict, found = _judge(tmp_path, df, base)
    assert [(s.column, s.meant, s.declared) for s in found] == [("zone1_forward_kw", "W", False)]
    assert "if so set [lines.TL-1.units] zone1_forward_kw = 'W'" in found[0].message
    assert set(verdict.reason) == {"unit_mistake"}
    # declared explicitly as kW: a warning only; the rows then fail the range check
    declared = with_line(base, "TL-1", units={"zone1_forward_kw": "kW"})
    _, verdict, found = _judge(tmp_path, df, declared)
    assert [s.declared for s in found] == [True] and set(verdict.reason) == {"out_of_range"}


def test_fahrenheit_temperatures_are_caught(tmp_path, base):
    df = tl1_frame(20)
    df["infeed_temp_c"] = (df["infeed_temp_c"].astype(float) * 9 / 5 + 32).round(1).astype(str)
    df["air_temp_c"] = (df["air_temp_c"].astype(float) * 9 / 5 + 32).round(1).astype(str)
    _, verdict, found = _judge(tmp_path, df, base)
    assert sorted((s.column, s.meant) for s in found) == [("air_temp_c", "F"), ("infeed_temp_c", "F")]
    infeed = next(s for s in found if s.column == "infeed_temp_c")
    assert "values look like °F" in infeed.message and "typically read about -18 °C" in infeed.message
    assert set(verdict.reason) == {"unit_mistake"}


def test_belt_speed_in_m_per_s_and_moisture_as_a_fraction(tmp_path, base):
    df = tl1_frame(20)
    df["belt_speed_m_per_min"] = (df["belt_speed_m_per_min"].astype(float) / 60).round(5).astype(str)
    _, _, found = _judge(tmp_path, df, base)
    assert [(s.column, s.meant) for s in found] == [("belt_speed_m_per_min", "m/s")]


def test_idle_rows_are_not_judged_for_units(tmp_path, base):
    df = tl1_frame(20)
    df["lot_id"] = ""
    df["zone1_forward_kw"] = "20000"
    data, bad, _ = read_log(write_frame(tmp_path / "TL-1.csv", df), base)
    line = base.lines["TL-1"]
    assert validate.unit_suspicions(data, np.ones(len(data), bool), line, base, {}) is None


def test_verdict_keeps_the_first_reason():
    v = Verdict(3)
    v.add(np.array([True, False, False]), "bad_number", "first")
    v.add(np.array([True, True, False]), "out_of_range", lambda where: [f"row {i}" for i in where])
    assert v.reason.tolist() == ["bad_number", "out_of_range", None]
    assert v.detail.tolist() == ["first", "row 1", None]
    assert v.counts() == {"bad_number": 1, "out_of_range": 1}
    with pytest.raises(ValueError, match="unknown quarantine reason"):
        v.add(np.array([False, False, True]), "made_up", "x")


def test_qa_rows(tmp_path, base):
    data = pd.DataFrame({"position": ["core", "lab", "lab", "middle", "edge"],
                         "temp_c": [-4.0, np.nan, np.nan, -3.0, np.nan],
                         "moisture_pct_wb": [np.nan, 12.0, np.nan, np.nan, np.nan]})
    v = Verdict(5)
    validate.check_qa(data, np.ones(5, bool), v, base.lines["TL-1"])
    assert v.reason.tolist() == [None, None, "missing_value", "bad_position", "missing_value"]
