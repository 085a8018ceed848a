"""The demo generator: files, layout, calendar, faults where the manifest says, physics behind the readings.

Three local days (Friday 23 – Sunday 25 October 2026, the end of British summer time on the
Sunday) at 30 s keep the suite fast. The same window is generated with and without faults:
the random streams of the plant's history do not depend on the faults, so the clean files
are the reference against which each injected fault is located.
"""
from __future__ import annotations

import gzip
import io
import json
import math
import re
from functools import lru_cache
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optimizer.config import load_plant
from optimizer.demo import DEMO_DEFAULTS, DemoManifest, demo_manifest_path, generate_demo_logs
from optimizer.errors import InputError
from optimizer.line import ModelParameters

ROOT = Path(__file__).resolve().parents[1]
PLANT, _ = load_plant(ROOT / "configs" / "demo.toml")
START, DAYS, INTERVAL_S, SEED = "2026-10-23", 3, 30, 2026
DATES = ("2026-10-23", "2026-10-24", "2026-10-25")
TEXT = ["timestamp", "line_id", "product_id", "lot_id"]
EPOCH = pd.Timestamp("1970-01-01", tz="UTC")
ISO_WITH_OFFSET = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d$")
#: Sensor noise of the scenario (module docstring of optimizer.demo): outfeed array σ 0.15 K,
#: NIR σ 0.15 % wb, laboratory moisture σ 0.1 % wb.
OUTFEED_SD_K, NIR_SD_PCT, LAB_SD_PCT = 0.15, 0.15, 0.1


def expected_columns(line) -> list[str]:
    """The canonical process-log columns of shared/spec/run-log-format.md, in our file order."""
    zones = range(1, line.zone_count + 1)
    cols = TEXT + ["belt_speed_m_per_min", "belt_load_kg_per_m", "infeed_temp_c"]
    cols += [f"zone{i}_forward_kw" for i in zones] + [f"zone{i}_reflected_kw" for i in zones]
    cols += ["air_temp_c", "outfeed_temp_mean_c", "outfeed_temp_min_c", "outfeed_temp_max_c", "energy_kwh"]
    if line.kind == "drying":
        cols += ["infeed_moisture_pct_wb", "outfeed_moisture_pct_wb", "air_rh_pct"]
    return cols


@pytest.fixture(scope="module")
def faulted(tmp_path_factory):
    out = tmp_path_factory.mktemp("faulted")
    return out, generate_demo_logs(PLANT, out, start=START, days=DAYS, interval_s=INTERVAL_S, seed=SEED,
                                   faults=True, workers=1)


@pytest.fixture(scope="module")
def clean(tmp_path_factory):
    out = tmp_path_factory.mktemp("clean")
    return out, generate_demo_logs(PLANT, out, start=START, days=DAYS, interval_s=INTERVAL_S, seed=SEED,
                                   faults=False, workers=1)


# ------------------------------------------------------------------ reading the files back
@lru_cache(maxsize=None)
def raw_text(path: Path) -> str:
    return gzip.decompress(path.read_bytes()).decode("utf-8")


def read_table(path: Path, line_id: str) -> pd.DataFrame:
    """A log or QA file in the line's layout, back in canonical names and numbers."""
    line = PLANT.line(line_id)
    text = raw_text(path).lstrip("\ufeff")
    df = pd.read_csv(io.StringIO(text), sep=line.csv.separator, dtype=str, keep_default_na=False)
    df = df.rename(columns={v: k for k, v in line.columns.items()})
    for col in df.columns:
        if col not in TEXT and col != "position":
            df[col] = df[col].replace("", np.nan).str.replace(line.csv.decimal, ".", regex=False).astype(float)
    df["t_s"] = (pd.to_datetime(df["timestamp"], utc=True) - EPOCH) // pd.Timedelta(seconds=1)
    return df


@lru_cache(maxsize=None)
def day_frame(folder: Path, line_id: str, day: str) -> pd.DataFrame:
    return read_table(folder / f"{line_id}_{day}.csv.gz", line_id)


def own_rows(df: pd.DataFrame, line_id: str) -> pd.DataFrame:
    """Rows of the line itself, injected duplicates dropped, in time order."""
    return df[df["line_id"] == line_id].drop_duplicates(subset=TEXT).sort_values("t_s").reset_index(drop=True)


def utc_s(iso: str) -> int:
    return (pd.Timestamp(iso) - EPOCH) // pd.Timedelta(seconds=1)


def rows_per_day(day: str) -> int:
    start = pd.Timestamp(day, tz="Europe/London")
    return int((start + pd.offsets.Day(1) - start).total_seconds()) // INTERVAL_S


# ------------------------------------------------------------------ files and layout
def test_one_process_file_and_one_qa_file_per_line_per_day(faulted):
    out, manifest = faulted
    names = {p.name for p in out.iterdir()} - {"manifest.json"}
    for line_id in PLANT.lines:
        for day in DATES:
            assert f"{line_id}_{day}.csv.gz" in names
        # a QA file for each local day with readings (in day order), holding that day's only
        qa_files = manifest.lines[line_id].qa_files
        days = [name.removeprefix(f"{line_id}_qa_").removesuffix(".csv.gz") for name in qa_files]
        assert qa_files and days == sorted(set(days)) and set(days) <= set(DATES)
        for day, name in zip(days, qa_files):
            stamps = read_table(out / name, line_id)["timestamp"]
            assert len(stamps) > 0 and stamps.str.startswith(day).all(), name
    assert names == set(manifest.files)
    assert demo_manifest_path(out) == out / "manifest.json"
    assert DemoManifest.read(out) == manifest


@pytest.mark.parametrize("line_id", list(PLANT.lines))
def test_header_is_the_canonical_layout_or_the_lines_mapping(faulted, line_id):
    out, _ = faulted
    line = PLANT.line(line_id)
    header = raw_text(out / f"{line_id}_{DATES[0]}.csv.gz").lstrip("\ufeff").split("\n", 1)[0]
    expected = [line.columns.get(c, c) for c in expected_columns(line)]
    assert header.split(line.csv.separator) == expected


def test_tmp2_writes_its_own_names_semicolons_and_decimal_commas(faulted):
    out, _ = faulted
    text = raw_text(out / f"TMP-2_{DATES[0]}.csv.gz").lstrip("\ufeff")
    header, first_production = text.split("\n")[0], next(r for r in text.split("\n") if "HAKE" in r or
                                                           "SALMON" in r or "PRAWN" in r)
    # configs/demo.toml [lines.TMP-2.columns] and [lines.TMP-2.csv]
    assert header.startswith("Time;line_id;product_id;lot_id;BeltSpeed;belt_load_kg_per_m;InfeedTemp;")
    assert "." not in text  # no decimal points anywhere: ids and timestamps have none either
    assert re.search(r";-?\d+,\d{3};", first_production)  # belt speed with three decimals after a comma


def test_rows_per_day_follow_the_interval_plus_injected_duplicates(faulted):
    out, manifest = faulted
    duplicates = {f.file: f.details["rows"] for f in manifest.faults if f.kind == "duplicates"}
    assert rows_per_day("2026-10-25") == 25 * 3600 // INTERVAL_S  # the clock goes back: a 25-hour day
    for line_id in PLANT.lines:
        for day in DATES:
            name = f"{line_id}_{day}.csv.gz"
            df = day_frame(out, line_id, day)
            assert (df["line_id"] == line_id).sum() == rows_per_day(day) + duplicates.get(name, 0)


def test_timestamps_carry_offsets_and_are_unique_per_line(faulted):
    out, _ = faulted
    for line_id in PLANT.lines:
        frames = [own_rows(day_frame(out, line_id, day), line_id) for day in DATES]
        stamps = pd.concat(frames)["timestamp"]
        assert stamps.map(lambda s: bool(ISO_WITH_OFFSET.match(s))).all()
        assert stamps.is_unique
        t = np.sort(pd.concat(frames)["t_s"].to_numpy())
        assert np.all(np.diff(t) == INTERVAL_S)  # one sample every 30 s of real time, no gap, no repeat
    sunday = own_rows(day_frame(out, "TMP-1", "2026-10-25"), "TMP-1")["timestamp"]
    assert {"2026-10-25T01:30:00+01:00", "2026-10-25T01:30:00+00:00"} <= set(sunday)


# ------------------------------------------------------------------ calendar and idle rows
def test_lots_lie_in_shifts_and_idle_rows_are_empty(clean):
    out, manifest = clean
    for lot in manifest.lots:
        start, end = pd.Timestamp(lot.start), pd.Timestamp(lot.end)
        assert start.date() == end.date() and start.weekday() < 6  # no production on Sunday
        assert start.hour >= 6 and (end.hour, end.minute) <= (22, 0)
        assert 44 * 60 <= (end - start).total_seconds() <= 4 * 3600
    for line_id in PLANT.lines:
        line = PLANT.line(line_id)
        for day in DATES:
            df = day_frame(out, line_id, day)
            idle = df[df["lot_id"] == ""]
            assert (idle["product_id"] == "").all()
            assert (idle["belt_speed_m_per_min"] == 0).all()
            for i in range(1, line.zone_count + 1):
                assert (idle[f"zone{i}_forward_kw"] == 0).all()
            assert idle[["outfeed_temp_mean_c", "outfeed_temp_min_c", "outfeed_temp_max_c"]].isna().all().all()
            busy = df[df["lot_id"] != ""]
            assert (busy["belt_speed_m_per_min"] > 0).all()
    assert not any(pd.Timestamp(lot.start).date().isoformat() == "2026-10-25" for lot in manifest.lots)


# ------------------------------------------------------------------ faults
EXPECTED_FAULT_KINDS = {"dropouts", "duplicates", "out_of_order", "reexport", "stuck_sensor", "spike",
                        "belt_stop", "generator_trip", "unknown_line", "utf8_bom"}


def test_every_kind_of_fault_is_injected_and_recorded(faulted):
    _, manifest = faulted
    assert {f.kind for f in manifest.faults} == EXPECTED_FAULT_KINDS


def in_range(df, fault):
    return df[(df["t_s"] >= utc_s(fault.start)) & (df["t_s"] <= utc_s(fault.end))]


def check_dropouts(fault, out, clean_out):
    line_id = fault.line_id
    day = fault.file.split("_")[1][:10]
    a = own_rows(day_frame(out, line_id, day), line_id).set_index("t_s")
    b = own_rows(day_frame(clean_out, line_id, day), line_id).set_index("t_s")
    counted = {c: int((a[c].isna() & b[c].notna()).sum()) for c in fault.details["cells"]}
    assert counted == fault.details["cells"]
    others = [c for c in a.columns if c not in fault.details["cells"] and c not in TEXT + ["timestamp"]]
    assert all(int((a[c].isna() & b[c].notna()).sum()) == 0 for c in others)


def check_duplicates(fault, out, clean_out):
    df = read_table(out / fault.file, fault.line_id)
    df = df[df["line_id"] == fault.line_id]
    counts = df.groupby("timestamp").size()
    block = in_range(df, fault)["timestamp"].unique()
    assert len(block) == fault.details["rows"]
    assert (counts[block] == 2).all() and counts.drop(block).eq(1).all()


def check_out_of_order(fault, out, clean_out):
    df = read_table(out / fault.file, fault.line_id)
    df = df[df["line_id"] == fault.line_id].reset_index(drop=True)
    t = df["t_s"].to_numpy()
    starts = np.flatnonzero(df["timestamp"].to_numpy() == fault.start)
    # the block comes right after a row later than itself
    assert any(df["timestamp"].iloc[i - 1] == fault.details["moved_after"] and t[i - 1] > t[i] for i in starts)
    block = df[(df["t_s"] >= utc_s(fault.start)) & (df["t_s"] <= utc_s(fault.end))]
    assert block["timestamp"].nunique() == fault.details["rows"]


def check_reexport(fault, out, clean_out):
    body = set(raw_text(out / fault.file).split("\n")[1:]) - {""}
    assert len(body) == fault.details["rows"]
    t0, t1 = utc_s(fault.start), utc_s(fault.end)
    expected = set()
    for day in DATES:
        path = out / f"{fault.line_id}_{day}.csv.gz"
        lines = raw_text(path).lstrip("\ufeff").split("\n")[1:]
        df = day_frame(out, fault.line_id, day)
        for text, lid, t in zip(lines, df["line_id"], df["t_s"]):
            if lid == fault.line_id and t0 <= t <= t1:
                expected.add(text)
    assert body == expected and (t1 - t0) >= 23 * 3600  # overlaps two days


def check_stuck_sensor(fault, out, clean_out):
    column = fault.details["column"]
    a = in_range(own_rows(read_table(out / fault.file, fault.line_id), fault.line_id), fault)
    b = in_range(own_rows(read_table(clean_out / fault.file, fault.line_id), fault.line_id), fault)
    values = a[column].dropna()
    assert len(values) > 0.99 * len(a) and (values == fault.details["value"]).all()
    assert 2.5 * 3600 <= utc_s(fault.end) - utc_s(fault.start) <= 3.5 * 3600
    assert b[column].dropna().std() > 0.05  # the real signal moved meanwhile


def check_spike(fault, out, clean_out):
    column = fault.details["column"]
    a = in_range(own_rows(read_table(out / fault.file, fault.line_id), fault.line_id), fault)
    b = in_range(own_rows(read_table(clean_out / fault.file, fault.line_id), fault.line_id), fault)
    assert len(a) == 1 and a[column].iloc[0] == pytest.approx(fault.details["value"], abs=1e-9)
    assert abs(a[column].iloc[0] - b[column].iloc[0]) >= 8.0  # scenario: spikes of 8–25 K


def check_belt_stop(fault, out, clean_out):
    line = PLANT.line(fault.line_id)
    df = own_rows(read_table(out / fault.file, fault.line_id), fault.line_id)
    stop = in_range(df, fault)
    assert (stop["lot_id"] == fault.details["lot_id"]).all() and len(stop) >= 8 * 60 // INTERVAL_S
    assert (stop["belt_speed_m_per_min"].dropna() == 0).all()
    for i in range(1, line.zone_count + 1):
        assert (stop[f"zone{i}_forward_kw"].dropna() == 0).all()
    before = df[(df["t_s"] < utc_s(fault.start)) & (df["lot_id"] == fault.details["lot_id"])]
    after = df[(df["t_s"] > utc_s(fault.end)) & (df["lot_id"] == fault.details["lot_id"])]
    assert before["belt_speed_m_per_min"].iloc[-1] > 0 and after["belt_speed_m_per_min"].iloc[0] > 0


def check_generator_trip(fault, out, clean_out):
    line = PLANT.line(fault.line_id)
    zone = fault.details["zone"]
    trip = in_range(own_rows(read_table(out / fault.file, fault.line_id), fault.line_id), fault)
    reference = in_range(own_rows(read_table(clean_out / fault.file, fault.line_id), fault.line_id), fault)
    assert (trip["lot_id"] == fault.details["lot_id"]).all() and len(trip) >= 8 * 60 // INTERVAL_S
    assert (trip[f"zone{zone}_forward_kw"].dropna() == 0).all()
    assert (reference[f"zone{zone}_forward_kw"].dropna() > 0).all()
    for i in set(range(1, line.zone_count + 1)) - {zone}:
        assert (trip[f"zone{i}_forward_kw"].dropna() > 0).all()


def check_unknown_line(fault, out, clean_out):
    for name in (p.name for p in out.glob(f"{fault.line_id}_20*.csv.gz")):
        df = read_table(out / name, fault.line_id)
        n = (df["line_id"] == fault.details["line_id"]).sum()
        assert n == (fault.details["rows"] if name == fault.file else 0)
    assert fault.details["line_id"] not in PLANT.lines


def check_utf8_bom(fault, out, clean_out):
    boms = {p.name for p in out.glob("*.csv.gz") if gzip.decompress(p.read_bytes()).startswith(b"\xef\xbb\xbf")}
    assert boms == {fault.file}


CHECKS = {name[len("check_"):]: fn for name, fn in globals().items() if name.startswith("check_")}


def test_every_fault_is_in_the_file_where_the_manifest_says(faulted, clean):
    out, manifest = faulted
    assert set(CHECKS) == EXPECTED_FAULT_KINDS
    for fault in manifest.faults:
        CHECKS[fault.kind](fault, out, clean[0])


def test_without_faults_the_same_history_is_written_plainly(faulted, clean):
    out, manifest = clean
    assert manifest.faults == []
    assert manifest.lots == faulted[1].lots  # the plant's history does not depend on the faults
    assert not list(out.glob("*reexport*"))
    for line_id in PLANT.lines:
        for day in DATES:
            raw = gzip.decompress((out / f"{line_id}_{day}.csv.gz").read_bytes())
            assert not raw.startswith(b"\xef\xbb\xbf")
            df = day_frame(out, line_id, day)
            assert (df["line_id"] == line_id).all() and (np.diff(df["t_s"]) == INTERVAL_S).all()


# ------------------------------------------------------------------ physics behind the readings
def lot_frame(folder, lot):
    df = own_rows(day_frame(folder, lot.line_id, lot.start[:10]), lot.line_id)
    return df[df["lot_id"] == lot.lot_id].reset_index(drop=True)


def efficiency_at(manifest, line_id, t_s):
    """Linear ageing between the window's start and end (manifest)."""
    truth = manifest.lines[line_id]
    share = (t_s - utc_s(manifest.window_start)) / (utc_s(manifest.window_end) - utc_s(manifest.window_start))
    return truth.efficiency_start + (truth.efficiency_end - truth.efficiency_start) * share


def test_energy_meter_never_decreases(faulted):
    out, _ = faulted
    for line_id in PLANT.lines:
        df = pd.concat([own_rows(day_frame(out, line_id, day), line_id) for day in DATES]).sort_values("t_s")
        energy = df["energy_kwh"].dropna().to_numpy()
        assert energy.size > 0.99 * len(df) and np.all(np.diff(energy) >= 0)


def test_energy_meter_integrates_mains_power_of_each_lot(clean):
    # Mains power = Σ forward / efficiency + auxiliaries + air heater × (air − ambient), each
    # sample's power held until the next (the run-log spec's sample-and-hold reading). The two
    # meter readings are each rounded to 0.1 kWh, hence ±0.1 kWh.
    out, manifest = clean
    for lot in manifest.lots:
        line = PLANT.line(lot.line_id)
        values = manifest.model_truth(lot.line_id, lot.product_id).values
        df = lot_frame(out, lot)
        fwd = df[[f"zone{i}_forward_kw" for i in range(1, line.zone_count + 1)]].sum(axis=1).to_numpy()
        heater = values.get("air_heater_kw_per_k", 0.0) * np.maximum(df["air_temp_c"] - line.ambient_temp_c, 0)
        mains = fwd / efficiency_at(manifest, lot.line_id, df["t_s"].to_numpy()) + values["aux_power_kw"] + heater
        integral = float(np.sum(mains[:-1]) * INTERVAL_S / 3600.0)
        metered = df["energy_kwh"].iloc[-1] - df["energy_kwh"].iloc[0]
        assert metered == pytest.approx(integral, abs=0.1 + 1e-6), lot.lot_id


def steady_windows(lot, line, df):
    """Rows whose parcel met one set point all the way (two residence times into a segment)."""
    starts = [utc_s(s["start"]) for s in lot.setpoints] + [int(df["t_s"].iloc[-1]) + 1]
    for k, sp in enumerate(lot.setpoints):
        residence_s = line.tunnel_length_m / (sp["belt_speed_m_per_min"] / 60.0)
        rows = df[(df["t_s"] >= starts[k] + 2 * residence_s) & (df["t_s"] < starts[k + 1])]
        if len(rows):
            yield sp, residence_s, rows


def passage_mean(values, entry_rows, exit_rows):
    """Mean of a logged input over each parcel's passage (what the parcel met on average)."""
    csum = np.concatenate([[0.0], np.cumsum(values)])
    return (csum[exit_rows + 1] - csum[entry_rows]) / (exit_rows + 1 - entry_rows)


def test_outfeed_readings_agree_with_the_steady_model_plus_the_offset(clean):
    # In a steady window each parcel met the lot's set points; the model's steady state with the
    # parcel's own infeed temperature, load and moisture (read at its entry time) and the air it
    # met (mean over its passage) predicts what the array reads, less the recorded calibration
    # offset. Readings carry σ = 0.15 K noise (scenario); the logged inputs' ripple and slow air
    # wander, which a steady state cannot follow, add a few hundredths of a kelvin (more on the
    # dryer, whose product temperature follows the air humidity), so each reading lies within
    # 5 σ. Pooled over a line, the residual's mean lies within 0.1 K of zero, half the smallest
    # offset drawn (0.2 K), so a missing or doubled offset would show.
    out, manifest = clean
    pooled = {line_id: [] for line_id in PLANT.lines}
    for lot in manifest.lots:
        line, product = PLANT.line(lot.line_id), PLANT.product(lot.product_id)
        model = manifest.true_model(lot.line_id, lot.product_id).build(line, product)
        offsets = manifest.lines[lot.line_id].sensor_offsets
        df = lot_frame(out, lot)
        t = df["t_s"].to_numpy()
        drying = line.kind == "drying"
        for sp, residence_s, rows in steady_windows(lot, line, df):
            rows = rows.iloc[::2]
            entry = np.searchsorted(t, rows["t_s"].to_numpy() - residence_s, side="right") - 1
            exit_ = rows.index.to_numpy()
            pred = model.steady(
                belt_speed_m_per_min=sp["belt_speed_m_per_min"], zone_forward_kw=sp["zone_forward_kw"],
                infeed_temp_c=df["infeed_temp_c"].to_numpy()[entry],
                belt_load_kg_per_m=df["belt_load_kg_per_m"].to_numpy()[entry],
                air_temp_c=passage_mean(df["air_temp_c"].to_numpy(), entry, exit_),
                infeed_moisture_pct_wb=df["infeed_moisture_pct_wb"].to_numpy()[entry] if drying else None,
                air_rh_pct=passage_mean(df["air_rh_pct"].to_numpy(), entry, exit_) if drying else None)
            residual = rows["outfeed_temp_mean_c"].to_numpy() - offsets["outfeed_temp_c"] - pred.outfeed_temp_mean_c
            assert np.all(np.abs(residual) < 5 * OUTFEED_SD_K), lot.lot_id
            pooled[lot.line_id].extend(residual)
            if drying:
                nir = (rows["outfeed_moisture_pct_wb"].to_numpy() - offsets["outfeed_moisture_pct_wb"]
                       - pred.outfeed_moisture_pct_wb)
                assert np.all(np.abs(nir) < 5 * NIR_SD_PCT), lot.lot_id
    for line_id, residuals in pooled.items():
        assert len(residuals) >= 20 and abs(np.mean(residuals)) < 0.1, line_id


def test_outfeed_readings_are_empty_until_the_first_parcel_has_passed(clean):
    # The belt travel since the lot started, from the logged speeds held from sample to sample
    # (shared/spec/run-log-format.md), tells when the first parcel reached the outfeed; a
    # sample's worth of travel either side is left out.
    out, manifest = clean
    for lot in manifest.lots:
        line = PLANT.line(lot.line_id)
        df = lot_frame(out, lot)
        step_m = df["belt_speed_m_per_min"].to_numpy() * INTERVAL_S / 60.0
        travel = np.concatenate([[0.0], np.cumsum(step_m[:-1])])
        early = df[travel < line.tunnel_length_m - step_m.max()]
        late = df[travel > line.tunnel_length_m + step_m.max()]
        assert len(early) and len(late), lot.lot_id
        assert early["outfeed_temp_mean_c"].isna().all() and late["outfeed_temp_mean_c"].notna().all(), lot.lot_id


def test_qa_samples_belong_to_lots_and_lab_moisture_agrees_with_the_nir(clean):
    out, manifest = clean
    lots = {lot.lot_id: lot for lot in manifest.lots}
    for line_id, truth in manifest.lines.items():
        line = PLANT.line(line_id)
        qa = pd.concat([read_table(out / name, line_id) for name in truth.qa_files], ignore_index=True)
        assert len(qa) > 0 and set(qa["lot_id"]) <= set(lots)
        for _, row in qa.iterrows():
            lot = lots[row["lot_id"]]
            assert utc_s(lot.start) <= row["t_s"] <= utc_s(lot.end) and row["product_id"] == lot.product_id
        if line.kind == "tempering":
            assert set(qa["position"]) == {"core", "surface", "edge"}
            assert qa.groupby("timestamp")["position"].apply(lambda p: sorted(p) == ["core", "edge", "surface"]).all()
            assert qa["temp_c"].notna().all() and qa["moisture_pct_wb"].isna().all()
        else:
            # the grab sample and the NIR see the same product: their difference has
            # σ = √(0.1² + 0.15²) % wb once the NIR's offset is removed; 5 σ
            assert set(qa["position"]) == {"lab"} and qa["temp_c"].isna().all()
            logs = pd.concat([own_rows(day_frame(out, line_id, d), line_id) for d in DATES]).set_index("t_s")
            nir = logs.loc[qa["t_s"], "outfeed_moisture_pct_wb"].to_numpy()
            diff = qa["moisture_pct_wb"].to_numpy() - (nir - truth.sensor_offsets["outfeed_moisture_pct_wb"])
            assert np.all(np.abs(diff) < 5 * math.hypot(LAB_SD_PCT, NIR_SD_PCT))
    assert raw_text(out / manifest.lines["TMP-2"].qa_files[0]).startswith("Time;line_id;product_id;lot_id;position;")


# ------------------------------------------------------------------ the truth in the manifest
def test_true_parameters_are_the_documented_perturbations_of_the_defaults(faulted):
    _, manifest = faulted
    for m in manifest.models:
        line, product = PLANT.line(m.line_id), PLANT.product(m.product_id)
        default = ModelParameters.defaults(line, product)
        v = m.values
        assert set(v) == set(default.values)
        assert 0.95 * line.generator_efficiency <= v["mains_to_rf_efficiency"] <= 0.98 * line.generator_efficiency
        assert 0.8 <= v["loss_factor_scale"] <= 1.25 and 0.15 <= v["field_nonuniformity"] <= 0.35
        if line.kind == "tempering":
            assert abs(v["freezing_point_shift_k"]) <= 0.5
        else:
            assert 0.7 <= v["drying_rate_per_s"] / default["drying_rate_per_s"] <= 1.4
        assert v["mains_to_rf_efficiency"] == manifest.lines[m.line_id].efficiency_start
    ageing = {lid: 1 - t.efficiency_end / t.efficiency_start for lid, t in manifest.lines.items()}
    assert sorted(ageing.values())[:-1] == [0.0] * (len(ageing) - 1)
    assert 0.014 <= max(ageing.values()) <= 0.026  # 1.5–2.5 %, less the 4-decimal rounding
    for lid, truth in manifest.lines.items():
        assert 0.2 <= truth.sensor_offsets["outfeed_temp_c"] <= 0.5
        if PLANT.line(lid).kind == "drying":
            assert -0.3 <= truth.sensor_offsets["outfeed_moisture_pct_wb"] <= 0.3
    assert DemoManifest.from_json(json.loads(json.dumps(manifest.to_json()))) == manifest


# ------------------------------------------------------------------ reproducibility
def test_same_seed_gives_byte_identical_files_whatever_the_workers(faulted, tmp_path):
    out, _ = faulted
    generate_demo_logs(PLANT, tmp_path, start=START, days=DAYS, interval_s=INTERVAL_S, seed=SEED, workers=2)
    names = sorted(p.name for p in out.iterdir())
    assert names == sorted(p.name for p in tmp_path.iterdir())
    for name in names:
        assert (out / name).read_bytes() == (tmp_path / name).read_bytes(), name


def test_different_seeds_differ(faulted, tmp_path):
    out, manifest = faulted
    other = generate_demo_logs(PLANT, tmp_path, start=START, days=1, interval_s=INTERVAL_S, seed=SEED + 1)
    for line_id in PLANT.lines:
        name = f"{line_id}_{DATES[0]}.csv.gz"
        assert (out / name).read_bytes() != (tmp_path / name).read_bytes()
    assert [m.values for m in other.models] != [m.values for m in manifest.models]


def test_defaults_cover_the_end_of_summer_time():
    start = pd.Timestamp(DEMO_DEFAULTS["start"])
    end = start + pd.Timedelta(days=DEMO_DEFAULTS["days"])
    assert start <= pd.Timestamp("2026-10-25") < end  # last Sunday of October 2026


@pytest.mark.parametrize("kwargs, message", [
    ({"interval_s": 7}, "divides an hour"),
    ({"days": 0}, "days 0"),
    ({"start": "next Monday"}, "YYYY-MM-DD"),
])
def test_bad_arguments_say_what_to_give(tmp_path, kwargs, message):
    with pytest.raises(InputError, match=message):
        generate_demo_logs(PLANT, tmp_path, **{"start": START, "days": 1, **kwargs})


def test_on_a_line_that_follows_the_load_the_applied_powers_scale_with_the_lot_load(clean, tmp_path):
    # The demo lines are described with power_follows_load = true: a lot's applied zone powers
    # are the operators' habit (times its small lot-to-lot noise) scaled by load / typical load.
    # Regressing log(applied / habit) on log(load / typical) over the lots, zones near their
    # rating left out (clipped there), gives a slope of 1 when the powers follow the load and 0
    # when they do not; ±0.35 absorbs the 2 % lot and 1 % zone noise and the power step.
    def slopes(manifest):
        out = {}
        for line_id, line in PLANT.lines.items():
            xs, ys = [], []
            for lot in (x for x in manifest.lots if x.line_id == line_id):
                habit = np.array(manifest.model_truth(line_id, lot.product_id).habit["zone_forward_kw"])
                applied = np.array(lot.setpoints[0]["zone_forward_kw"])
                free = (applied < 0.95 * np.array(line.zone_max_kw)) & (habit > 0)
                typical = PLANT.product(lot.product_id).typical.belt_load_kg_per_m
                xs += [math.log(lot.belt_load_kg_per_m / typical)] * int(free.sum())
                ys += list(np.log(applied[free] / habit[free]))
            out[line_id] = float(np.polyfit(xs, ys, 1)[0])
        return out

    _, manifest = clean
    for line_id, slope in slopes(manifest).items():
        assert slope == pytest.approx(1.0, abs=0.35), (line_id, slope)
    import dataclasses

    fixed = dataclasses.replace(PLANT, lines={k: dataclasses.replace(v, power_follows_load=False)
                                              for k, v in PLANT.lines.items()})
    manifest = generate_demo_logs(fixed, tmp_path, start=START, days=DAYS, interval_s=INTERVAL_S, seed=SEED,
                                  faults=False, workers=1)
    for line_id, slope in slopes(manifest).items():
        assert slope == pytest.approx(0.0, abs=0.35), (line_id, slope)
