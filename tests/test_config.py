"""The plant description: the shipped configs load, broken ones fail with useful messages."""
from __future__ import annotations

import json
import re
import tomllib
from pathlib import Path

import pytest

from optimizer.config import load_plant, parse_plant
from optimizer.errors import ConfigError

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "configs" / "demo.toml"
SAMPLE = ROOT / "configs" / "sample-plant.toml"
SHARED_SAMPLE = ROOT.parent / "shared" / "data" / "sample-plant"


def demo_data() -> dict:
    return tomllib.loads(DEMO.read_text())


def problems_of(data: dict) -> list[str]:
    with pytest.raises(ConfigError) as info:
        parse_plant(data, DEMO)
    return info.value.problems


def test_demo_plant_loads_with_its_lines_and_products():
    plant, warnings = load_plant(DEMO)
    assert warnings == []
    assert {l.kind for l in plant.lines.values()} == {"tempering", "drying"}
    assert {l.frequency_hz for l in plant.lines.values()} == {915e6, 2450e6}
    assert len(plant.lines) >= 3 and len(plant.products) >= 8
    tmp1 = plant.line("TMP-1")
    assert tmp1.zone_count == 5
    assert tmp1.tunnel_length_m == pytest.approx(0.6 + 5 * 1.0 + 0.6)
    assert plant.store_url.startswith("sqlite:///") and plant.store_url.endswith("data/demo/beltwave.sqlite")
    assert plant.line("TMP-2").source_column("belt_speed_m_per_min") == "BeltSpeed"


def test_unknown_line_or_product_is_named():
    plant, _ = load_plant(DEMO)
    with pytest.raises(ConfigError, match="unknown line 'NOPE'; lines here: DRY-1, TMP-1, TMP-2"):
        plant.line("NOPE")
    with pytest.raises(ConfigError, match="unknown product 'X'"):
        plant.product("X")


@pytest.mark.parametrize("edit, expected", [
    (lambda d: d["products"]["PORK-SHLDR-BLK"]["composition"].update(water=0.80),
     r"products\.PORK-SHLDR-BLK\.composition: fractions sum to 1\.0800, not 1"),
    (lambda d: d["products"]["PORK-SHLDR-BLK"]["composition"].update(fat=-0.1),
     r"products\.PORK-SHLDR-BLK\.composition\.fat: -0\.1 is out of range"),
    (lambda d: d["products"]["PORK-SHLDR-BLK"].update(initial_freezing_point_c=1.5),
     r"products\.PORK-SHLDR-BLK\.initial_freezing_point_c: 1\.5 is out of range; it must be ≤ 0"),
    (lambda d: d["lines"]["TMP-1"].update(zone_length_m=[1.0, 0.0, 1.0, 1.0, 1.0]),
     r"lines\.TMP-1\.zone_length_m\[1\]: 0 must be > 0"),
    (lambda d: d["lines"]["TMP-1"].update(zone_max_kw=[25, 25]),
     r"lines\.TMP-1\.zone_max_kw: has 2 entries but zone_length_m has 5"),
    (lambda d: d["lines"]["TMP-1"].update(kind="thawing"),
     r"lines\.TMP-1\.kind: 'thawing' is not allowed; use one of: tempering, drying"),
    (lambda d: d["products"]["PORK-SHLDR-BLK"]["targets"].update(min_temp_c=0.0),
     r"min_temp_c: 0 °C is not below max_temp_c \(-1\.5 °C\): the targets contradict each other"),
    (lambda d: d["lines"]["TMP-1"].update(belt_speed_max_m_per_min=0.1),
     r"belt_speed_max_m_per_min: 0\.1 must be above belt_speed_min_m_per_min"),
    (lambda d: d["lines"]["TMP-1"]["products"].append("GHOST"),
     r"lines\.TMP-1\.products\[3\]: 'GHOST' is not described"),
    (lambda d: d["lines"]["TMP-2"]["columns"].update(belt_sped="Speed"),
     r"lines\.TMP-2\.columns\.belt_sped: is not a canonical column name"),
    (lambda d: d["lines"]["TMP-1"].update(zone_power_kw=[1]),
     r"lines\.TMP-1\.zone_power_kw: unknown key"),
    (lambda d: d["lines"]["TMP-1"].update(qa_positions={"centre": "Kern"}),
     r"lines\.TMP-1\.qa_positions\.centre: is not a QA position; the keys are core, surface, edge, lab"),
    (lambda d: d["lines"]["TMP-1"].update(qa_positions={"core": "K", "edge": "k"}),
     r"lines\.TMP-1\.qa_positions\.edge: 'k' is also given for core"),
    (lambda d: d["lines"]["TMP-1"].update(power_follows_load="yes"),
     r"lines\.TMP-1\.power_follows_load: must be true or false, not 'yes'"),
    (lambda d: d["lines"]["TMP-2"].setdefault("units", {}).update(position="F"),
     r"lines\.TMP-2\.units\.position: is not a numeric canonical column"),
])
def test_broken_description_names_the_key_and_the_fix(edit, expected):
    data = demo_data()
    edit(data)
    problems = problems_of(data)
    assert any(re.search(expected, p) for p in problems), problems


def test_qa_columns_units_and_position_words_can_be_mapped():
    data = demo_data()
    line = data["lines"]["TMP-1"]
    line.setdefault("columns", {}).update(position="ProbePos", temp_c="ProbeTemp")
    line.setdefault("units", {}).update(temp_c="F")
    line["qa_positions"] = {"core": "Kern", "edge": " Rand "}
    plant, _ = parse_plant(data, DEMO)
    tmp1 = plant.line("TMP-1")
    assert tmp1.source_column("position") == "ProbePos" and tmp1.units["temp_c"] == "F"
    assert tmp1.qa_positions == {"core": "Kern", "edge": "Rand"}


def test_every_problem_is_reported_at_once():
    data = demo_data()
    data["products"]["PORK-SHLDR-BLK"]["composition"]["water"] = 72  # percent instead of fraction
    data["lines"]["DRY-1"]["zone_max_kw"][0] = -8
    problems = problems_of(data)
    assert any("composition.water" in p and "not percent" in p for p in problems)
    assert any("DRY-1.zone_max_kw[0]" in p for p in problems)


def test_frequency_outside_industrial_bands_warns():
    data = demo_data()
    data["lines"]["TMP-1"]["frequency_mhz"] = 1000
    plant, warnings = parse_plant(data, DEMO)
    assert plant.line("TMP-1").frequency_hz == 1e9
    assert any("lines.TMP-1.frequency_mhz" in w for w in warnings)


def test_unreadable_or_invalid_toml_is_reported_with_the_file(tmp_path):
    bad = tmp_path / "plant.toml"
    bad.write_text("[lines\nkind = 1")
    with pytest.raises(ConfigError, match=r"(?s)plant\.toml.*not valid TOML"):
        load_plant(bad)
    with pytest.raises(ConfigError, match="cannot read the file"):
        load_plant(tmp_path / "missing.toml")


def test_sample_plant_description_matches_its_public_data():
    # The format must describe the example plant; its plant-public.json is the reference.
    if not (SHARED_SAMPLE / "plant-public.json").exists():
        pytest.skip("../shared/data/sample-plant is not beside this checkout (only CI and developers have it)")
    public = json.loads((SHARED_SAMPLE / "plant-public.json").read_text())
    plant, _ = load_plant(SAMPLE)
    for line_id, ref in public["lines"].items():
        line = plant.line(line_id)
        assert line.kind == ref["type"]
        assert line.frequency_hz == ref["frequency_hz"]
        assert list(line.zone_length_m) == ref["zone_lengths_m"]
        assert list(line.zone_max_kw) == ref["zone_max_kw"]
        assert line.total_power_cap_kw == ref["total_power_cap_kw"]
        assert line.tunnel_length_m == pytest.approx(ref["tunnel_length_m"])
        assert line.outfeed_array.count == ref["outfeed_array"]["count"]
        assert line.outfeed_array.depth_m == ref["outfeed_array"]["depth_m"]
        assert list(line.products) == ref["products"]
    for product_id, ref in public["products"].items():
        product = plant.product(product_id)
        for name, value in ref["composition"].items():
            assert getattr(product.composition, name) == pytest.approx(value)
        assert product.piece_thickness_m == ref["piece_thickness_m"]
        assert product.initial_freezing_point_c == ref.get("initial_freezing_point_c")
        for name, value in ref["targets"].items():
            assert getattr(product.targets, name) == value
