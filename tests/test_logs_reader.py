"""The log reader: layouts, encodings, compression, units, timestamps and row numbers.

Expected values follow from the run-log format (shared/spec/run-log-format.md) and the
definitions of the units (°F → °C: (F − 32)·5/9; 1 kW = 1000 W); time-zone rules of
Europe/Berlin from the IANA database (CET +01:00, CEST +02:00, changes at 01:00 UTC on the
last Sundays of March and October).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from optimizer.config import CsvLayout
from optimizer.errors import LogFileError
from optimizer.logs.reader import Layout, _row_numbers, open_log, parse_numbers, read_log
from optimizer.logs.validate import Verdict, check_qa

from logfiles import csv_text, plant, tl1_frame, with_line, write, write_frame


@pytest.fixture(scope="module")
def base():
    return plant()


def test_canonical_file_is_read_in_utc_with_row_numbers(tmp_path, base):
    df = tl1_frame(4)
    data, bad, log = read_log(write_frame(tmp_path / "TL-1_day.csv", df), base)
    assert log.kind == "process" and log.layout.line_id == "TL-1" and bad.empty
    assert data["row_number"].tolist() == [2, 3, 4, 5]  # header is line 1
    # 06:00 at +01:00 is 05:00 UTC
    assert data["timestamp_utc"].iloc[0] == pd.Timestamp("2026-03-16T05:00:00Z")
    assert data["utc_offset_min"].tolist() == [60.0] * 4
    assert data["zone3_forward_kw"].tolist() == df["zone3_forward_kw"].astype(float).tolist()
    assert data["lot_id"].tolist() == ["TL1-BEEF-0001"] * 4


def test_bom_and_gzip_and_a_gzip_named_csv_read_the_same(tmp_path, base):
    df = tl1_frame(5)
    plain, _, _ = read_log(write_frame(tmp_path / "a.csv", df), base)
    with_bom, _, log_bom = read_log(write_frame(tmp_path / "b.csv", df, bom=True), base)
    gz, _, log_gz = read_log(write_frame(tmp_path / "c.csv.gz", df, bom=True, gz=True), base)
    disguised, _, _ = read_log(write_frame(tmp_path / "d.csv", df, gz=True), base)
    assert "timestamp" in log_bom.columns and log_gz.compressed
    for other in (with_bom, gz, disguised):
        pd.testing.assert_frame_equal(plain, other)


def test_mapping_decimal_comma_and_semicolon(tmp_path, base):
    mapped = with_line(base, "TL-1", csv=CsvLayout(separator=";", decimal=","),
                       columns={"timestamp": "Time", "belt_speed_m_per_min": "BeltSpeed"})
    df = tl1_frame(3).rename(columns={"timestamp": "Time", "belt_speed_m_per_min": "BeltSpeed"})
    df["BeltSpeed"] = ["0,75", "0,5", "1,125"]
    df["zone1_forward_kw"] = ["20,5", "21", "19,25"]
    data, bad, log = read_log(write_frame(tmp_path / "TL-1.csv", df, sep=";"), mapped)
    assert bad.empty and log.canonical["Time"] == "timestamp"
    assert data["belt_speed_m_per_min"].tolist() == [0.75, 0.5, 1.125]
    assert data["zone1_forward_kw"].tolist() == [20.5, 21.0, 19.25]


def test_declared_units_are_converted(tmp_path, base):
    fahrenheit_watts = with_line(base, "TL-1", units={"infeed_temp_c": "F", "zone1_forward_kw": "W",
                                                      "belt_speed_m_per_min": "m/s"})
    df = tl1_frame(3)
    df["infeed_temp_c"] = ["32", "-4", "14"]
    df["zone1_forward_kw"] = ["20000", "12500", "0"]
    df["belt_speed_m_per_min"] = ["0.01", "0.02", "0"]
    data, bad, _ = read_log(write_frame(tmp_path / "TL-1.csv", df), fahrenheit_watts)
    assert bad.empty
    assert data["infeed_temp_c"].tolist() == pytest.approx([0.0, -20.0, -10.0], abs=1e-12)
    assert data["zone1_forward_kw"].tolist() == [20.0, 12.5, 0.0]
    assert data["belt_speed_m_per_min"].tolist() == pytest.approx([0.6, 1.2, 0.0])


def test_empty_cells_are_missing_values_not_errors(tmp_path, base):
    df = tl1_frame(3)
    df.loc[1, ["infeed_temp_c", "zone2_reflected_kw", "lot_id"]] = ""
    data, bad, _ = read_log(write_frame(tmp_path / "TL-1.csv", df), base)
    assert bad.empty
    assert np.isnan(data["infeed_temp_c"].iloc[1]) and np.isnan(data["zone2_reflected_kw"].iloc[1])
    assert pd.isna(data["lot_id"].iloc[1]) and data["lot_id"].iloc[0] == "TL1-BEEF-0001"


def test_missing_required_column_rejects_the_file(tmp_path, base):
    path = write_frame(tmp_path / "TL-1.csv", tl1_frame(3).drop(columns=["timestamp"]))
    with pytest.raises(LogFileError, match=r"missing required column\(s\) timestamp; the header has: line_id, "
                                           r"product_id.*map them in \[lines\.TL-1\.columns\]"):
        open_log(path, base)


def test_wrong_separator_is_named_with_the_fix(tmp_path, base):
    path = write_frame(tmp_path / "TL-1.csv", tl1_frame(3), sep=";")
    with pytest.raises(LogFileError, match=r"looks ';'-separated but the layout expects ','; "
                                           r"set \[lines\.TL-1\.csv\] separator = ';'"):
        open_log(path, base)


def test_binary_and_empty_files_are_rejected(tmp_path, base):
    binary = write(tmp_path / "TL-1.csv", bytes(range(256)) * 8)
    with pytest.raises(LogFileError, match="is not CSV text"):
        open_log(binary, base)
    with pytest.raises(LogFileError, match=r"the file is empty \(0 bytes\)"):
        open_log(write(tmp_path / "empty.csv", b""), base)
    with pytest.raises(LogFileError, match="holds no text"):
        open_log(write(tmp_path / "blank.csv.gz", b"\n\n", gz=True), base)


def test_truncated_last_line_blank_lines_and_bad_cells_get_row_reasons(tmp_path, base):
    text = csv_text(tl1_frame(6))
    lines = text.splitlines()
    lines.insert(3, "")  # a blank line in the middle becomes line 4
    lines[5] = lines[5].replace("TL1-BEEF-0001,0.", "TL1-BEEF-0001,x.", 1)  # a non-number belt speed on line 6
    lines[6] = "2026-13-45T99:00:00+01:00" + lines[6][25:]  # an impossible timestamp on line 7
    lines.append(lines[2][:40])  # the export stopped in the middle of the last line (line 9)
    data, bad, _ = read_log(write(tmp_path / "TL-1.csv", "\n".join(lines)), base, block_size=1024)
    assert data["row_number"].tolist() == [2, 3, 5, 8]
    assert bad["row_number"].tolist() == [4, 6, 7, 9]
    assert bad["reason"].tolist() == ["empty_row", "bad_number", "bad_timestamp", "malformed_row"]
    assert bad["detail"].iloc[1].startswith("belt_speed_m_per_min: 'x.")
    assert "is not ISO 8601 with a UTC offset" in bad["detail"].iloc[2]
    assert bad["raw_text"].iloc[3] == lines[2][:40]
    assert bad["detail"].iloc[3].startswith("the line has 3 field(s) where the header has 20")


def test_decimal_comma_where_a_point_is_configured_is_hinted(tmp_path, base):
    semicolon = with_line(base, "TL-1", csv=CsvLayout(separator=";"))
    df = tl1_frame(3)
    df["air_temp_c"] = ["-2,5", "-2,25", "-1,75"]
    data, bad, log = read_log(write_frame(tmp_path / "TL-1.csv", df, sep=";"), semicolon)
    assert bad["reason"].tolist() == ["bad_number"] * 3
    assert any("decimal comma" in w and "decimal = ','" in w for w in log.warnings)


def test_naive_timestamps_need_a_zone(tmp_path, base):
    df = tl1_frame(3)
    df["timestamp"] = df["timestamp"].str[:19]
    data, bad, _ = read_log(write_frame(tmp_path / "TL-1.csv", df), base)
    assert data.empty and bad["reason"].tolist() == ["naive_timestamp"] * 3
    assert "set [lines.TL-1.csv] naive_timezone" in bad["detail"].iloc[0]
    berlin = with_line(base, "TL-1", csv=CsvLayout(naive_timezone="Europe/Berlin"))
    data, bad, _ = read_log(write_frame(tmp_path / "TL-1.csv", df), berlin)
    assert bad.empty
    assert data["timestamp_utc"].iloc[0] == pd.Timestamp("2026-03-16T05:00:00Z")
    assert data["utc_offset_min"].tolist() == [60.0] * 3


def _local_series(times: list[str]) -> pd.DataFrame:
    df = tl1_frame(len(times))
    df["timestamp"] = times
    return df


def test_dst_fall_back_hour_repeated_in_file_order_is_placed_in_both_passes(tmp_path, base):
    berlin = with_line(base, "TL-1", csv=CsvLayout(naive_timezone="Europe/Berlin"))
    # 25 Oct 2026: 03:00 CEST falls back to 02:00 CET, so 02:00-02:59 local happens twice
    first = ["2026-10-25T01:40:00", "2026-10-25T02:00:00", "2026-10-25T02:20:00", "2026-10-25T02:40:00"]
    second = ["2026-10-25T02:00:00", "2026-10-25T02:20:00", "2026-10-25T02:40:00", "2026-10-25T03:00:00"]
    data, bad, log = read_log(write_frame(tmp_path / "TL-1.csv", _local_series(first + second)), berlin,
                              block_size=600)  # several blocks: the fall-back state carries over
    assert bad.empty and not log.warnings
    expected = pd.to_datetime(["2026-10-24T23:40Z", "2026-10-25T00:00Z", "2026-10-25T00:20Z", "2026-10-25T00:40Z",
                               "2026-10-25T01:00Z", "2026-10-25T01:20Z", "2026-10-25T01:40Z", "2026-10-25T02:00Z"])
    assert data["timestamp_utc"].tolist() == list(expected)
    assert data["utc_offset_min"].tolist() == [120.0] * 4 + [60.0] * 4


def test_a_fall_back_hour_seen_once_is_read_as_summer_time_with_a_warning(tmp_path, base):
    berlin = with_line(base, "TL-1", csv=CsvLayout(naive_timezone="Europe/Berlin"))
    data, bad, log = read_log(write_frame(tmp_path / "TL-1.csv", _local_series(["2026-10-25T02:10:00"])), berlin)
    assert data["timestamp_utc"].tolist() == [pd.Timestamp("2026-10-25T00:10Z")]
    assert log.warnings == ["1 naive timestamp(s) fall in a daylight-saving fall-back hour whose two passes could "
                            "not be told apart by their order in the file; they were read as summer time"]


def test_nonexistent_spring_forward_time_is_quarantined(tmp_path, base):
    berlin = with_line(base, "TL-1", csv=CsvLayout(naive_timezone="Europe/Berlin"))
    times = ["2026-03-29T01:50:00", "2026-03-29T02:30:00", "2026-03-29T03:10:00"]
    data, bad, _ = read_log(write_frame(tmp_path / "TL-1.csv", _local_series(times)), berlin)
    assert bad["row_number"].tolist() == [3] and bad["reason"].tolist() == ["nonexistent_local_time"]
    assert data["timestamp_utc"].tolist() == [pd.Timestamp("2026-03-29T00:50Z"), pd.Timestamp("2026-03-29T01:10Z")]


def test_offsets_mixed_with_z_and_a_custom_format(tmp_path, base):
    df = _local_series(["2026-03-29T01:59:30+01:00", "2026-03-29T01:00:00Z", "2026-03-29T03:00:30+02:00"])
    data, bad, _ = read_log(write_frame(tmp_path / "TL-1.csv", df), base)
    assert bad.empty
    assert data["timestamp_utc"].tolist() == [pd.Timestamp("2026-03-29T00:59:30Z"), pd.Timestamp("2026-03-29T01:00Z"),
                                              pd.Timestamp("2026-03-29T01:00:30Z")]
    assert data["utc_offset_min"].tolist() == [60.0, 0.0, 120.0]
    custom = with_line(base, "TL-1", csv=CsvLayout(timestamp_format="%d.%m.%Y %H:%M:%S",
                                                   naive_timezone="Europe/Berlin"))
    df = _local_series(["16.03.2026 06:00:00", "16.03.2026 06:00:30"])
    data, bad, _ = read_log(write_frame(tmp_path / "TL-1.csv", df), custom)
    assert bad.empty and data["timestamp_utc"].iloc[1] == pd.Timestamp("2026-03-16T05:00:30Z")


def test_encodings(tmp_path, base):
    df = tl1_frame(2)
    df["product_id"] = "BŒUF-É"
    latin = write(tmp_path / "TL-1.csv", csv_text(df).replace("Œ", "OE").encode("latin-1"))
    with pytest.raises(LogFileError, match=r"is not valid utf-8 text .*set \[lines\.TL-1\.csv\] encoding"):
        read_log(latin, base)
    data, bad, _ = read_log(latin, with_line(base, "TL-1", csv=CsvLayout(encoding="latin-1")))
    assert bad.empty and data["product_id"].tolist() == ["BOEUF-É"] * 2


def test_a_clock_that_was_never_set(tmp_path, base):
    df = _local_series(["1970-01-01T00:00:10+00:00", "2026-03-16T06:00:00+01:00"])
    data, bad, _ = read_log(write_frame(tmp_path / "TL-1.csv", df), base)
    assert bad["reason"].tolist() == ["bad_timestamp"] and "clock was not set" in bad["detail"].iloc[0]
    assert len(data) == 1


def test_qa_file_is_recognised(tmp_path, base):
    text = ("timestamp,line_id,product_id,lot_id,position,temp_c,moisture_pct_wb\n"
            "2026-03-16T06:42:31+01:00,TL-1,BEEF-TRIM-90,TL1-BEEF-0001,core,-4.6,\n")
    data, bad, log = read_log(write(tmp_path / "TL-1_qa.csv", text), base)
    assert log.kind == "qa" and bad.empty and data["temp_c"].tolist() == [-4.6]


def test_a_qa_export_with_its_own_names_units_and_position_words(tmp_path, base):
    # a plant whose QA system writes its own header, °F and its own words for the positions;
    # °F to °C by the definition of the Fahrenheit scale: (24.8 − 32) / 1.8 = −4.0 exactly
    plant = with_line(base, "TL-1", columns={"position": "Where", "temp_c": "ProbeF"}, units={"temp_c": "F"},
                      qa_positions={"core": "Kern", "edge": "Rand"})
    text = ("timestamp,line_id,product_id,lot_id,Where,ProbeF,moisture_pct_wb\n"
            "2026-03-16T06:42:31+01:00,TL-1,BEEF-TRIM-90,TL1-BEEF-0001,Kern,24.8,\n"
            "2026-03-16T06:42:31+01:00,TL-1,BEEF-TRIM-90,TL1-BEEF-0001,rand,30.2,\n"
            "2026-03-16T06:42:31+01:00,TL-1,BEEF-TRIM-90,TL1-BEEF-0001,SURFACE,28.4,\n"
            "2026-03-16T06:42:31+01:00,TL-1,BEEF-TRIM-90,TL1-BEEF-0001,Mitte,26.6,\n")
    data, bad, log = read_log(write(tmp_path / "TL-1_qa.csv", text), plant)
    assert log.kind == "qa"
    assert log.layout.key != Layout.of_line(base.line("TL-1")).key  # the words change how the file reads
    assert bad.empty and data["position"].tolist() == ["core", "edge", "surface", "Mitte"]
    assert data["temp_c"].tolist() == pytest.approx([-4.0, -1.0, -2.0, -3.0], abs=1e-12)
    # a word neither the format nor the line knows stays as written, and validation sets it aside
    verdict = Verdict(len(data))
    check_qa(data, np.ones(len(data), bool), verdict, plant.lines["TL-1"])
    assert verdict.reason.tolist() == [None, None, None, "bad_position"] and "'Mitte'" in verdict.detail[3]


def test_layout_keys_of_earlier_versions_stay():
    # the store tells an ingested file by content hash and layout key: a key that changed with an
    # upgrade would read every file again. The canonical layout's key, as computed before QA
    # position words existed (sha256 of the JSON of its csv, columns and units), must not move.
    import hashlib
    import json

    spec = {"csv": [",", ".", "utf-8", None, None], "columns": [], "units": []}
    csv = CsvLayout()
    assert [csv.separator, csv.decimal, csv.encoding, csv.timestamp_format, csv.naive_timezone] == spec["csv"]
    assert Layout(None, csv, {}, {}).key == hashlib.sha256(json.dumps(spec).encode()).hexdigest()[:16]


def test_unknown_columns_are_ignored_with_a_warning(tmp_path, base):
    df = tl1_frame(2)
    df["operator"] = "anna"
    _, _, log = read_log(write_frame(tmp_path / "TL-1.csv", df), base)
    assert log.ignored == ("operator",)
    assert log.warnings == ["column(s) operator are neither canonical nor mapped in [lines.TL-1.columns]; ignored"]


def test_parse_numbers_marks_text_and_infinity():
    values, bad = parse_numbers(pa.array(["1.5", None, " 2 ", "abc", "inf", "-3e2"]))
    assert bad.tolist() == [False, False, False, True, True, False]
    assert values[[0, 2, 5]].tolist() == [1.5, 2.0, -300.0] and np.isnan(values[[1, 3, 4]]).all()


@settings(max_examples=200, deadline=None)
@given(st.sets(st.integers(min_value=2, max_value=60), max_size=20), st.integers(min_value=0, max_value=5))
def test_row_numbers_are_the_lines_pyarrow_did_not_reject(rejected, split):
    # property: parsed rows take, in order, exactly the line numbers ≥ 2 that were not rejected
    total = 60
    parsed_lines = [n for n in range(2, total + 1) if n not in rejected]
    head = min(split, len(parsed_lines))
    bad = np.array(sorted(rejected), dtype=np.int64)
    got = np.concatenate([_row_numbers(0, head, bad), _row_numbers(head, len(parsed_lines) - head, bad)])
    assert got.tolist() == parsed_lines
