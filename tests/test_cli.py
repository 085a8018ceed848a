"""The command line: exit codes, messages without tracebacks, JSON keys."""
from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from optimizer.cli import main

ROOT = Path(__file__).resolve().parents[1]
DEMO = str(ROOT / "configs" / "demo.toml")


def run_cli(*args):
    """Run the installed entry point in a subprocess (what a user types)."""
    exe = shutil.which("beltwave") or None
    cmd = [exe, *args] if exe else [sys.executable, "-m", "optimizer.cli", *args]
    return subprocess.run(cmd, capture_output=True, text=True, cwd=ROOT, timeout=120)


def test_config_check_passes_on_demo_and_fails_on_a_broken_copy(tmp_path, capsys):
    assert main(["config", "check", DEMO]) == 0
    assert "OK" in capsys.readouterr().out
    broken = tmp_path / "broken.toml"
    broken.write_text(Path(DEMO).read_text().replace("water = 0.72, protein = 0.17", "water = 0.92, protein = 0.17"))
    assert main(["config", "check", str(broken)]) == 1
    err = capsys.readouterr().err
    assert "products.PORK-SHLDR-BLK.composition: fractions sum to 1.2000" in err


def test_simulate_json_has_the_documented_keys(capsys):
    code = main(["simulate", "--config", DEMO, "--line", "DRY-1", "--product", "FUSILLI-DRY", "--belt-speed",
                 "0.5", "--zone-power", "6,6,5,4,3,2", "--json"])
    assert code == 0
    record = json.loads(capsys.readouterr().out)
    for key in ("line_id", "product_id", "belt_speed_m_per_min", "zone_forward_kw", "predicted",
                "specific_energy_kwh_per_t", "throughput_kg_per_h", "targets_met"):
        assert key in record
    for key in ("outfeed_temp_mean_c", "outfeed_temp_min_c", "outfeed_temp_max_c", "core_temp_c",
                "hottest_temp_c", "coldest_temp_c", "outfeed_moisture_pct_wb"):
        assert isinstance(record["predicted"][key], float)
    assert record["zone_forward_kw"] == [6, 6, 5, 4, 3, 2]
    assert record["belt_speed_m_per_min"] == 0.5
    assert set(record["targets_met"]) == {"outfeed_moisture_pct_wb", "max_temp_c"}
    # throughput is belt load × speed (definition): 8 kg/m × 0.5 m/min × 60
    assert record["throughput_kg_per_h"] == pytest.approx(240.0)


def test_simulate_prints_a_table_profile_and_the_caution(capsys):
    assert main(["simulate", "--config", DEMO, "--line", "TMP-1", "--product", "PORK-SHLDR-BLK",
                 "--belt-speed", "0.6", "--zone-power", "12,12,10,8,6"]) == 0
    out = capsys.readouterr().out
    assert "core (mid-thickness) [°C]" in out
    assert "Temperature along the tunnel" in out
    assert "verify predicted temperatures with a probe" in out


@pytest.mark.parametrize("args, message", [
    (["--belt-speed", "-1", "--zone-power", "1,1,1,1,1"], "--belt-speed -1: the belt speed must be a positive"),
    (["--belt-speed", "5", "--zone-power", "1,1,1,1,1"], "outside line TMP-1's range 0.2…3 m/min"),
    (["--belt-speed", "1", "--zone-power", "30,1,1,1,1"], "zone 1 power 30 kW is outside 0…25 kW"),
    (["--belt-speed", "1", "--zone-power", "1,1,1"], "3 value(s) given, but line TMP-1 has 5 zones"),
    (["--belt-speed", "1", "--zone-power", "25,25,25,25,25"], "exceeds line TMP-1's total power cap of 100 kW"),
])
def test_simulate_rejects_bad_settings_with_the_option_and_range(args, message):
    res = run_cli("simulate", "--config", DEMO, "--line", "TMP-1", "--product", "PORK-SHLDR-BLK", *args)
    assert res.returncode == 2
    assert message in res.stderr
    assert "Traceback" not in res.stderr


def test_simulate_unknown_line_and_product():
    res = run_cli("simulate", "--config", DEMO, "--line", "TMP-9", "--product", "PORK-SHLDR-BLK",
                  "--belt-speed", "1", "--zone-power", "1,1,1,1,1")
    assert res.returncode == 2 and "unknown line 'TMP-9'" in res.stderr and "Traceback" not in res.stderr
    res = run_cli("simulate", "--config", DEMO, "--line", "TMP-1", "--product", "HAKE-FLT-BLK",
                  "--belt-speed", "1", "--zone-power", "1,1,1,1,1")
    assert res.returncode == 2 and "does not run on line TMP-1" in res.stderr


def _demo_copy(tmp_path: Path) -> Path:
    """The demo description with its store, logs and exports under tmp_path/data/demo."""
    text = Path(DEMO).read_text()
    cfg = tmp_path / "configs" / "demo.toml"
    cfg.parent.mkdir(parents=True)
    cfg.write_text(text)  # relative paths (../data/demo/...) now point under tmp_path
    return cfg


def test_demo_runs_end_to_end_and_fresh_sets_the_last_one_aside(tmp_path, capsys):
    from optimizer.store import Store

    cfg = _demo_copy(tmp_path)
    demo = tmp_path / "data" / "demo"
    small = ["demo", "--config", str(cfg), "--days", "1", "--interval-s", "600"]
    assert main([*small, "--seed", "1"]) == 0
    out = capsys.readouterr().out
    assert f"store: sqlite:///{demo / 'beltwave.sqlite'}" in out and "nightly:" in out
    first = sorted(p.name for p in (demo / "incoming").iterdir())
    with Store.open(f"sqlite:///{demo / 'beltwave.sqlite'}", readonly=True) as s:
        first_samples = s.sample_count()
    assert first_samples > 0

    # again without --fresh: the logs are kept and nothing new is stored
    assert main([*small, "--seed", "1"]) == 0
    assert "demo logs already in" in capsys.readouterr().out
    with Store.open(f"sqlite:///{demo / 'beltwave.sqlite'}", readonly=True) as s:
        assert s.sample_count() == first_samples

    # --fresh with another seed: the old store, logs and exports move aside, untouched, and
    # the new logs fill a new store (else they would be dropped as duplicates of the old samples)
    assert main([*small, "--seed", "2", "--fresh"]) == 0
    out = capsys.readouterr().out
    kept = sorted(demo.glob("previous-demo-*"))
    assert len(kept) == 1 and f"kept in {kept[0]}" in out
    assert sorted(p.name for p in (kept[0] / "incoming").iterdir()) == first
    assert (kept[0] / "store" / "beltwave.sqlite").exists() and any((kept[0] / "exports").iterdir())
    with Store.open(f"sqlite:///{kept[0] / 'store' / 'beltwave.sqlite'}", readonly=True) as s:
        assert s.sample_count() == first_samples and len(s.job_runs()) == 2
    with Store.open(f"sqlite:///{demo / 'beltwave.sqlite'}", readonly=True) as s:
        assert s.sample_count() > 0 and len(s.job_runs()) == 1
