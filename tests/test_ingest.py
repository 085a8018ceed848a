"""Ingest end to end: every kind of broken file, idempotence, overlaps, a killed ingest, the
example plant, and the ``ingest`` / ``quarantine`` commands."""
from __future__ import annotations

import argparse
import functools
import gzip
import hashlib
import json
import signal
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optimizer.cli_ingest import add_ingest_parsers
from optimizer.config import CsvLayout
from optimizer.ingest import find_log_files, ingest_paths, quarantine_rows
from optimizer.store import Store

from logfiles import ROOT, SAMPLE_CONFIG, csv_text, plant, tl1_frame, with_line, write, write_frame

SHARED = Path(__file__).resolve().parents[2] / "shared"
SAMPLE_PLANT = SHARED / "data" / "sample-plant"


@pytest.fixture(scope="module")
def base():
    return plant()


@pytest.fixture
def store(tmp_path):
    with Store.open(f"sqlite:///{tmp_path / 'beltwave.sqlite'}") as s:
        yield s


def _one(the_plant, store, path, **kw):
    (report,) = ingest_paths(the_plant, store, [path], **kw)
    assert report.rows_read == report.accepted + report.duplicates + report.quarantined_total
    return report


def digest(db: Path) -> dict[str, str]:
    """sha256 of every table's rows in id order (what 'the same content' means)."""
    con = sqlite3.connect(db)
    out = {}
    for (name,) in con.execute("SELECT name FROM sqlite_master WHERE type='table' ORDER BY name"):
        h = hashlib.sha256()
        for row in con.execute(f'SELECT * FROM "{name}" ORDER BY rowid'):
            h.update(repr(row).encode())
        out[name] = h.hexdigest()
    con.close()
    return out


# ----------------------------------------------------------------------------- broken files, one by one

def test_a_clean_file(tmp_path, base, store):
    r = _one(base, store, write_frame(tmp_path / "TL-1.csv", tl1_frame(40)))
    assert (r.status, r.kind, r.line_ids, r.rows_read, r.accepted, r.quarantined) == \
        ("ingested", "process", ["TL-1"], 40, 40, {})
    assert (r.lots, r.first_utc, r.last_utc) == (["TL1-BEEF-0001"], "2026-03-16T05:00:00Z", "2026-03-16T05:19:30Z")
    assert store.sample_count("TL-1") == 40
    assert store.lots()[["lot_id", "sample_count"]].values.tolist() == [["TL1-BEEF-0001", 40]]


def test_missing_required_column_wrong_separator_binary_and_empty_are_rejected(tmp_path, base, store):
    files = [write_frame(tmp_path / "a_TL-1.csv", tl1_frame(5).drop(columns=["line_id"])),
             write_frame(tmp_path / "b_TL-1.csv", tl1_frame(5), sep=";"),
             write(tmp_path / "c.csv", bytes(range(256)) * 4),
             write(tmp_path / "d.csv", b"")]
    reports = ingest_paths(base, store, files)
    assert [r.status for r in reports] == ["rejected"] * 4
    assert reports[0].error.startswith("missing required column(s) line_id")
    assert "looks ';'-separated" in reports[1].error
    assert reports[2].error.startswith("is not CSV text")
    assert reports[3].error == "the file is empty (0 bytes); export it again"
    assert store.table_counts()["ingested_files"] == 0 and store.sample_count() == 0


def test_bom_gzip_and_decimal_comma_are_read_fully(tmp_path, base, store):
    semi = with_line(base, "TL-1", csv=CsvLayout(separator=";", decimal=","))
    df = tl1_frame(10, start="2026-03-17T06:00:00+01:00")
    df_comma = df.apply(lambda c: c.str.replace(".", ",", regex=False) if c.name not in ("timestamp", "lot_id") else c)
    r1 = _one(base, store, write_frame(tmp_path / "TL-1_a.csv.gz", tl1_frame(10), bom=True, gz=True))
    r2 = _one(semi, store, write_frame(tmp_path / "TL-1_b.csv", df_comma, sep=";"))
    assert (r1.accepted, r2.accepted) == (10, 10)
    stored = store.samples("TL-1", start="2026-03-17")
    assert stored["zone2_forward_kw"].tolist() == df["zone2_forward_kw"].astype(float).tolist()


def test_naive_timestamps_are_quarantined_then_recovered_after_the_fix(tmp_path, base, store):
    df = tl1_frame(8)
    df["timestamp"] = df["timestamp"].str[:19]
    path = write_frame(tmp_path / "TL-1.csv", df)
    r = _one(base, store, path)
    assert (r.accepted, r.quarantined) == (0, {"naive_timestamp": 8})
    assert store.quarantine_summary()["rows"].tolist() == [8]
    assert _one(base, store, path).status == "already_ingested"  # same content, same layout: skipped
    fixed = with_line(base, "TL-1", csv=CsvLayout(naive_timezone="Europe/Berlin"))
    r = _one(fixed, store, path)  # the layout changed, so the file is read again
    assert (r.status, r.accepted, r.quarantined) == ("ingested", 8, {})
    assert store.quarantine_summary().empty  # the latest reading of the file has no quarantine
    assert store.table_counts()["quarantine"] == 8  # the earlier reading stays as history


def test_fahrenheit_and_watts_undeclared_are_quarantined_and_declared_are_converted(tmp_path, base, store):
    df = tl1_frame(20)
    df["infeed_temp_c"] = (df["infeed_temp_c"].astype(float) * 9 / 5 + 32).round(2).astype(str)
    df["zone1_forward_kw"] = (df["zone1_forward_kw"].astype(float) * 1000).round(0).astype(str)
    path = write_frame(tmp_path / "TL-1.csv", df)
    r = _one(base, store, path)
    assert (r.accepted, r.quarantined) == (0, {"unit_mistake": 20})
    assert any("infeed_temp_c: values look like °F" in w for w in r.warnings)
    assert any("zone1_forward_kw: values look like W" in w for w in r.warnings)
    declared = with_line(base, "TL-1", units={"infeed_temp_c": "F", "zone1_forward_kw": "W"})
    r = _one(declared, store, path)
    assert (r.accepted, r.quarantined, r.warnings) == (20, {}, [])
    stored = store.samples("TL-1")
    expected = (df["infeed_temp_c"].astype(float) - 32) * 5 / 9
    assert np.allclose(stored["infeed_temp_c"], expected, atol=1e-9)


def test_empty_cells_stuck_value_and_spike_are_stored_and_flagged(tmp_path, base, store):
    df = tl1_frame(200)
    df.loc[5, ["infeed_temp_c", "outfeed_temp_mean_c"]] = ""
    df.loc[50:120, "belt_load_kg_per_m"] = "57.31"  # frozen for 35 min
    df.loc[150, "infeed_temp_c"] = "-2.0"  # a 16 K spike
    (r,) = ingest_paths(base, store, [write_frame(tmp_path / "TL-1.csv", df)], segment=False)
    assert (r.accepted, r.quarantined) == (200, {})
    from optimizer.ingest import update_windows
    done = update_windows(base, store)
    assert done["TL-1"]["flags"]["stuck"] == 71 and done["TL-1"]["flags"]["spike"] == 1
    stored = store.samples("TL-1")
    assert np.isnan(stored["infeed_temp_c"].iloc[5]) and stored["belt_load_kg_per_m"].iloc[50] == 57.31


def test_dst_fall_back_hour_with_repeated_local_times(tmp_path, base, store):
    berlin = with_line(base, "TL-1", csv=CsvLayout(naive_timezone="Europe/Berlin"))
    local = pd.date_range("2026-10-25T01:00", "2026-10-25T02:59:30", freq="30s")
    times = list(local.strftime("%Y-%m-%dT%H:%M:%S")) + \
        list(pd.date_range("2026-10-25T02:00", "2026-10-25T03:30", freq="30s").strftime("%Y-%m-%dT%H:%M:%S"))
    df = tl1_frame(len(times))
    df["timestamp"] = times
    r = _one(berlin, store, write_frame(tmp_path / "TL-1.csv", df))
    assert (r.accepted, r.duplicates, r.quarantined) == (len(times), 0, {})
    stored = store.samples("TL-1")["timestamp_utc"]
    assert stored.is_unique and stored.is_monotonic_increasing
    assert (stored.iloc[0], stored.iloc[-1]) == (pd.Timestamp("2026-10-24T23:00Z"), pd.Timestamp("2026-10-25T02:30Z"))
    assert stored.diff().dropna().unique().tolist() == [pd.Timedelta(seconds=30)]  # no hole, no overlap


def test_truncated_last_line_and_unknown_lines(tmp_path, base, store):
    df = tl1_frame(10)
    df.loc[3, "line_id"] = "TL-9"
    text = csv_text(df) + "2026-03-16T06:05:00+01:00,TL-1,BEEF"
    r = _one(base, store, write(tmp_path / "TL-1.csv", text))
    assert (r.rows_read, r.accepted, r.quarantined) == (11, 9, {"unknown_line": 1, "malformed_row": 1})
    rows = quarantine_rows(store)
    assert rows[["row_number", "reason"]].values.tolist() == [[12, "malformed_row"], [5, "unknown_line"]]
    assert rows["raw_text"].iloc[0] == "2026-03-16T06:05:00+01:00,TL-1,BEEF"
    assert rows["raw_text"].iloc[1].split(",")[1] == "TL-9"


# ----------------------------------------------------------------------------- duplicates and overlaps

def test_overlapping_reexport_is_stored_once_and_a_conflict_is_kept_out(tmp_path, base, store):
    day = tl1_frame(100)
    day_path = write_frame(tmp_path / "TL-1_day.csv", pd.concat([day.iloc[:60], day.iloc[[10, 11]]]))
    r = _one(base, store, day_path)
    assert (r.accepted, r.duplicates) == (60, 2)  # two rows repeated inside the file
    reexport = day.iloc[40:].copy()
    reexport.loc[45, "zone2_forward_kw"] = "12.5"  # the re-export disagrees about one stored row
    r = _one(base, store, write_frame(tmp_path / "TL-1_reexport.csv", reexport))
    assert (r.rows_read, r.accepted, r.duplicates, r.conflicts) == (60, 40, 19, 1)
    assert r.quarantined == {"conflicting_duplicate": 1}
    stored = store.samples("TL-1")
    assert len(stored) == 100 and stored["timestamp_utc"].is_unique
    assert stored["zone2_forward_kw"].iloc[45] == float(day.loc[45, "zone2_forward_kw"])  # never overwritten
    detail = quarantine_rows(store)["detail"].iloc[0]
    assert "is already stored with another zone2_forward_kw; the stored reading is kept" in detail


def test_overlapping_qa_exports(tmp_path, base, store):
    head = "timestamp,line_id,product_id,lot_id,position,temp_c,moisture_pct_wb\n"
    rows = [f"2026-03-16T06:{m:02d}:00+01:00,TL-1,BEEF-TRIM-90,L1,{p},{t},\n"
            for m, p, t in [(10, "core", -4.5), (10, "surface", -2.0), (40, "core", -4.1), (40, "edge", -1.5)]]
    a = _one(base, store, write(tmp_path / "TL-1_qa_a.csv", head + "".join(rows[:3])))
    b = _one(base, store, write(tmp_path / "TL-1_qa_b.csv", head + "".join(rows[1:]) +
                                "2026-03-16T06:50:00+01:00,TL-1,BEEF-TRIM-90,L1,lab,,\n"))
    assert (a.accepted, b.accepted, b.duplicates, b.quarantined) == (3, 1, 2, {"missing_value": 1})
    qa = store.qa_samples("TL-1")
    assert qa["position"].tolist() == ["core", "surface", "core", "edge"]
    assert qa["timestamp_utc"].iloc[0] == pd.Timestamp("2026-03-16T05:10Z")


def test_two_runs_ingesting_one_file_store_it_once(tmp_path, base, store, monkeypatch):
    path = write_frame(tmp_path / "TL-1.csv", tl1_frame(40))
    _one(base, store, path)
    monkeypatch.setattr(store, "find_file", lambda *args: None)  # as if the other run committed just after our check
    r = _one(base, store, path)
    assert (r.status, store.sample_count(), store.table_counts()["ingested_files"]) == ("already_ingested", 40, 1)


def test_ingesting_the_same_folder_twice_changes_nothing(tmp_path, base):
    folder = tmp_path / "logs"
    (folder / "sub").mkdir(parents=True)
    day = tl1_frame(100)
    write_frame(folder / "TL-1_a.csv", day.iloc[:50])
    write_frame(folder / "sub" / "TL-1_b.csv.gz", day.iloc[40:], gz=True)  # overlaps a by ten rows
    write(folder / "README.txt", "not a log")
    assert [p.name for p in find_log_files([folder])[0]] == ["TL-1_a.csv", "TL-1_b.csv.gz"]
    db = tmp_path / "s.sqlite"
    with Store.open(f"sqlite:///{db}") as s:
        first = ingest_paths(base, s, [folder])
        assert [r.status for r in first] == ["ingested", "ingested"] and first[1].duplicates == 10
        before = (s.table_counts(), digest(db))
        second = ingest_paths(base, s, [folder])
        assert [r.status for r in second] == ["already_ingested"] * 2
        assert (s.table_counts(), digest(db)) == before


# ----------------------------------------------------------------------------- a killed ingest

KILLER = """
import os, signal, sys
sys.path[:0] = [{root!r}, {tests!r}]
from optimizer.config import load_plant
from optimizer.ingest import ingest_paths
from optimizer.store import Store, database
plant, _ = load_plant({config!r})
store = Store.open({url!r})
ingest_paths(plant, store, [{first!r}])
real_add_block, calls = database.Writer.add_block, []

def add_block_then_die(self, *args, **kwargs):
    real_add_block(self, *args, **kwargs)
    calls.append(1)
    if len(calls) == 3:  # mid-file: three blocks of the second file are written, not committed
        os.kill(os.getpid(), signal.SIGKILL)

database.Writer.add_block = add_block_then_die
ingest_paths(plant, store, [{second!r}], block_size=16384)
"""


def test_an_ingest_killed_mid_file_leaves_the_store_as_before_that_file(tmp_path, base):
    first = write_frame(tmp_path / "TL-1_first.csv", tl1_frame(30))
    second = write_frame(tmp_path / "TL-1_second.csv", tl1_frame(1500, start="2026-03-17T06:00:00+01:00"))
    bad = write(tmp_path / "TL-1_second_bad.csv", csv_text(tl1_frame(3, start="2026-03-18T06:00:00+01:00")) + "x,y")
    db = tmp_path / "killed.sqlite"
    url = f"sqlite:///{db}"
    code = KILLER.format(root=str(ROOT), tests=str(ROOT / "tests"), config=str(SAMPLE_CONFIG), url=url,
                         first=str(first), second=str(second))
    proc = subprocess.run([sys.executable, "-c", textwrap.dedent(code)], capture_output=True, text=True, timeout=120)
    assert proc.returncode == -signal.SIGKILL, proc.stderr
    assert sqlite3.connect(db).execute("PRAGMA integrity_check").fetchone() == ("ok",)
    with Store.open(url) as s:
        assert s.ingested_files()["path"].tolist() == [str(first)]
        counts = s.table_counts()
        assert (counts["samples"], counts["sample_blocks"], counts["quarantine"]) == (30, 1, 0)
        reports = ingest_paths(base, s, [first, second, bad])
        assert [r.status for r in reports] == ["already_ingested", "ingested", "ingested"]
        after = s.table_counts()
    clean_db = tmp_path / "clean.sqlite"
    with Store.open(f"sqlite:///{clean_db}") as clean:
        ingest_paths(base, clean, [first, second, bad])
        expected = clean.table_counts()
    assert after == expected and after["samples"] == 1533 and after["quarantine"] == 1


# ----------------------------------------------------------------------------- the example plant

@pytest.fixture(scope="module")
def sample_ingest(tmp_path_factory, base):
    if not SAMPLE_PLANT.is_dir():
        pytest.skip(f"the example plant's export is not at {SAMPLE_PLANT} (shared/ beside the checkout)")
    db = tmp_path_factory.mktemp("sample") / "beltwave.sqlite"
    store = Store.open(f"sqlite:///{db}")
    reports = ingest_paths(base, store, [SAMPLE_PLANT / "logs", SAMPLE_PLANT / "qa"])
    yield store, reports, db
    store.close()


@functools.lru_cache(maxsize=None)
def _read_sample_files(folder: str) -> pd.DataFrame:
    """The export read independently of the reader under test (pandas, all text)."""
    frames = []
    for path in sorted((SAMPLE_PLANT / folder).glob("*.csv.gz")):
        df = pd.read_csv(path, encoding="utf-8-sig", dtype=str, keep_default_na=False)
        frames.append(df.assign(path=str(path), row_number=np.arange(len(df)) + 2))
    return pd.concat(frames, ignore_index=True)


def test_example_plant_every_row_is_stored_or_quarantined(sample_ingest):
    store, reports, _ = sample_ingest
    assert len(reports) == 37 and all(r.status == "ingested" for r in reports)
    rows_in_files = sum(len(gzip.open(SAMPLE_PLANT / "logs" / Path(r.path).name).read().splitlines()) - 1
                        for r in reports if r.kind == "process")
    logs = _read_sample_files("logs")
    assert rows_in_files == len(logs) == sum(r.rows_read for r in reports if r.kind == "process")
    for r in reports:
        assert r.rows_read == r.accepted + r.duplicates + r.quarantined_total, r.path
    q = store.quarantine()
    quarantined = set(zip(q["path"], q["row_number"]))
    keep = logs[[(p, n) not in quarantined for p, n in zip(logs["path"], logs["row_number"])]]
    # unknown line ids are exactly the rows of lines the plant does not describe
    unknown = logs[~logs["line_id"].isin(["TL-1", "DR-1"])]
    assert set(zip(unknown["path"], unknown["row_number"])) == set(zip(*q[q["reason"] == "unknown_line"][
        ["path", "row_number"]].values.T))
    for line_id in ("TL-1", "DR-1"):
        stamps = pd.to_datetime(keep.loc[keep["line_id"] == line_id, "timestamp"], utc=True, format="ISO8601")
        stored = store.samples(line_id)
        assert stored["timestamp_utc"].is_unique and len(stored) == stamps.nunique()
        assert set(stored["timestamp_utc"]) == set(stamps)
    # duplicated and overlapping rows are stored once: the duplicates are all the repeats
    total_dups = sum(r.duplicates for r in reports if r.kind == "process")
    assert total_dups == len(keep) - store.sample_count()


def test_example_plant_lots_match_the_lot_ids_present(sample_ingest):
    store, reports, _ = sample_ingest
    logs = _read_sample_files("logs")
    q = store.quarantine()
    quarantined = set(zip(q["path"], q["row_number"]))
    keep = logs[[(p, n) not in quarantined for p, n in zip(logs["path"], logs["row_number"])]]
    present = keep[keep["lot_id"] != ""]
    lots = store.lots()
    assert set(zip(lots["line_id"], lots["lot_id"])) == set(zip(present["line_id"], present["lot_id"]))
    assert lots["sample_count"].sum() == store.samples("TL-1")["lot_id"].notna().sum() \
        + store.samples("DR-1")["lot_id"].notna().sum()
    assert set().union(*(r.lots for r in reports if r.kind == "process")) == set(present["lot_id"])
    assert len(store.windows()) > 0 and store.stale_lots().empty


def test_example_plant_qa_samples_and_a_second_pass(sample_ingest):
    store, reports, db = sample_ingest
    qa = _read_sample_files("qa")
    assert len(store.qa_samples()) + sum(r.quarantined_total for r in reports if r.kind == "qa") == len(qa)
    assert set(store.qa_samples()["position"]) == {"core", "surface", "edge", "lab"}
    before = (store.table_counts(), digest(db))
    again = ingest_paths(plant(), store, [SAMPLE_PLANT / "logs", SAMPLE_PLANT / "qa"])
    assert {r.status for r in again} == {"already_ingested"}
    assert (store.table_counts(), digest(db)) == before


# ----------------------------------------------------------------------------- the commands

def _cli(argv):
    parser = argparse.ArgumentParser(prog="beltwave")
    add_ingest_parsers(parser.add_subparsers(dest="command", required=True))
    args = parser.parse_args(argv)
    return args.func(args)


@pytest.fixture
def config(tmp_path):
    text = SAMPLE_CONFIG.read_text().replace('url = "sqlite:///../data/sample-plant/beltwave.sqlite"',
                                             f'url = "sqlite:///{tmp_path / "cli.sqlite"}"')
    path = tmp_path / "plant.toml"
    path.write_text(text)
    return path


def test_ingest_command_json_and_exit_codes(tmp_path, config, capsys):
    good = write_frame(tmp_path / "TL-1.csv", tl1_frame(20))
    binary = write(tmp_path / "junk.csv", bytes(range(256)) * 4)
    assert _cli(["ingest", "--config", str(config), str(good), str(binary), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert [f["status"] for f in out["files"]] == ["ingested", "rejected"]
    assert out["totals"]["accepted"] == 20 and out["files"][0]["lots"] == ["TL1-BEEF-0001"]
    assert out["segmented"]["TL-1"]["lots"] == 1
    assert _cli(["ingest", "--config", str(config), str(binary)]) == 1  # nothing could be read
    text = capsys.readouterr().out
    assert "junk.csv — rejected" in text and "not read: is not CSV text" in text
    assert _cli(["ingest", "--config", str(config), str(good)]) == 0  # already ingested still counts as read
    assert "already ingested" in capsys.readouterr().out


def test_quarantine_command_lists_rows_by_reason(tmp_path, config, capsys):
    df = tl1_frame(10)
    df.loc[2, "line_id"] = "tl1"
    df.loc[4, "zone1_forward_kw"] = "40"
    _cli(["ingest", "--config", str(config), str(write_frame(tmp_path / "TL-1.csv", df))])
    capsys.readouterr()
    assert _cli(["quarantine", "--config", str(config), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert [(s["reason"], s["rows"]) for s in out["summary"]] == [("out_of_range", 1), ("unknown_line", 1)]
    assert sorted(r["row_number"] for r in out["rows"]) == [4, 6]
    assert _cli(["quarantine", "--config", str(config), "--reason", "unknown_line", "--limit", "1"]) == 0
    text = capsys.readouterr().out
    assert "TL-1.csv:4  line_id 'tl1' is not a line of this plant" in text and "out_of_range" not in text
