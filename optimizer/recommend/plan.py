"""The daily plan that drives recommendations, and the per-day export for the lines' recipe systems.

A plan file is CSV with a header row::

    date,line_id,product_id,planned_tonnes,planned_hours,expected_infeed_temp_c,expected_belt_load_kg_per_m
    2024-03-05,TMP-1,PORK-SHLDR-BLK,18,,-19.5,
    2024-03-05,TMP-2,HAKE-FLT-BLK,,6,,28

``planned_tonnes`` or ``planned_hours`` (at least one) says the volume; the expected
infeed temperature and belt load, when given, replace the recent lots' values. Row
numbers in messages count the header as row 1, as a spreadsheet shows them.

Exports are written to a temporary file in the target folder and renamed into place, so
a recipe system polling the folder never reads half a file.
"""
from __future__ import annotations

import csv
import datetime as dt
import json
import math
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

from ..config import Plant
from ..errors import InputError

PLAN_COLUMNS = ("date", "line_id", "product_id", "planned_tonnes", "planned_hours",
                "expected_infeed_temp_c", "expected_belt_load_kg_per_m")
REQUIRED_PLAN_COLUMNS = ("date", "line_id", "product_id")
#: Plausible ranges of the plan's numbers (a day has 24 h; infeed temperatures as in ``simulate``).
_NUMBER_RANGES = {
    "planned_tonnes": (0.0, 1e4, "t"),
    "planned_hours": (0.0, 24.0, "h"),
    "expected_infeed_temp_c": (-60.0, 120.0, "°C"),
    "expected_belt_load_kg_per_m": (0.0, 1e4, "kg/m"),
}


@dataclass(frozen=True)
class PlanEntry:
    """One planned run: a product on a line on a day, and how much of it."""

    date: dt.date
    line_id: str
    product_id: str
    planned_tonnes: float | None = None
    planned_hours: float | None = None
    expected_infeed_temp_c: float | None = None
    expected_belt_load_kg_per_m: float | None = None
    row: int = 0  # in the plan file (header = row 1)

    def tonnes_per_day(self, throughput_kg_per_h: float | None = None) -> float | None:
        """Planned tonnes, or planned hours at a throughput [kg h⁻¹]; None when neither is known."""
        if self.planned_tonnes is not None:
            return self.planned_tonnes
        if self.planned_hours is not None and throughput_kg_per_h is not None:
            return self.planned_hours * throughput_kg_per_h / 1000.0
        return None


def read_plan(path: str | Path, plant: Plant) -> list[PlanEntry]:
    """Read and validate a plan file; every problem is reported at once with file, row and column.

    Raises
    ------
    InputError
        The file cannot be read, a required column is missing or unknown, or a row holds a
        date, id or number that is wrong (each named ``plan.csv, row 3, column planned_tonnes``).
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read the plan file: {exc}") from None
    reader = csv.DictReader(text.splitlines())
    header = [h.strip() for h in (reader.fieldnames or [])]
    problems = []
    missing = [c for c in REQUIRED_PLAN_COLUMNS if c not in header]
    unknown = [c for c in header if c not in PLAN_COLUMNS]
    if missing:
        problems.append(f"{path}, row 1: column(s) {', '.join(missing)} missing; a plan has "
                        f"{', '.join(REQUIRED_PLAN_COLUMNS)} and planned_tonnes or planned_hours")
    if unknown:
        problems.append(f"{path}, row 1: unknown column(s) {', '.join(unknown)}; allowed: {', '.join(PLAN_COLUMNS)}")
    if "planned_tonnes" not in header and "planned_hours" not in header:
        problems.append(f"{path}, row 1: give a planned_tonnes or a planned_hours column")
    if problems:
        raise InputError("\n".join(problems))
    entries = []
    for row_number, raw in enumerate(reader, start=2):
        row = {(k or "").strip(): (v or "").strip() for k, v in raw.items()}
        if not any(row.values()):
            continue
        entry, row_problems = _plan_entry(row, row_number, plant)
        problems += [f"{path}, row {row_number}, column {col}: {text}" for col, text in row_problems]
        if entry is not None:
            entries.append(entry)
    if problems:
        raise InputError(f"{path}: {len(problems)} problem(s) in the plan:\n" + "\n".join(f"  - {p}" for p in problems))
    return entries


def _plan_entry(row: dict, row_number: int, plant: Plant):
    problems = []
    try:
        date = dt.date.fromisoformat(row.get("date", ""))
    except ValueError:
        problems.append(("date", f"'{row.get('date', '')}' is not a date; write YYYY-MM-DD"))
        date = None
    line_id, product_id = row.get("line_id", ""), row.get("product_id", "")
    if line_id not in plant.lines:
        problems.append(("line_id", f"unknown line '{line_id}'; lines: {', '.join(sorted(plant.lines))}"))
    elif product_id not in plant.lines[line_id].products:
        problems.append(("product_id", f"'{product_id}' does not run on line {line_id}; its products: "
                         f"{', '.join(plant.lines[line_id].products)}"))
    numbers = {}
    for col, (lo, hi, unit) in _NUMBER_RANGES.items():
        text = row.get(col, "")
        if text == "":
            numbers[col] = None
            continue
        try:
            value = float(text)
        except ValueError:
            problems.append((col, f"'{text}' is not a number [{unit}]"))
            continue
        low_open = lo == 0.0  # volumes and loads must be positive
        if not math.isfinite(value) or value > hi or (value <= lo if low_open else value < lo):
            problems.append((col, f"{value:g} is outside the allowed range "
                             f"{'>' if low_open else '≥'} {lo:g} and ≤ {hi:g} {unit}"))
            continue
        numbers[col] = value
    if numbers.get("planned_tonnes") is None and numbers.get("planned_hours") is None \
            and not any(c in ("planned_tonnes", "planned_hours") for c, _ in problems):
        problems.append(("planned_tonnes", "neither planned_tonnes nor planned_hours is given; give one"))
    if problems:
        return None, problems
    return PlanEntry(date, line_id, product_id, numbers.get("planned_tonnes"), numbers.get("planned_hours"),
                     numbers.get("expected_infeed_temp_c"), numbers.get("expected_belt_load_kg_per_m"),
                     row_number), []


def export_recommendations(recs, export_dir: str | Path, date: dt.date | str) -> tuple[Path, Path]:
    """Write ``recommendations_<date>.csv`` and ``.json`` into ``export_dir`` atomically.

    The CSV has one row per recommendation with the settings as keyed in (one column per
    zone, blank for zones a line lacks), the belt load the zone powers are for and whether the
    line scales them with the measured load; the JSON holds the full records. Returns the two paths.
    """
    day = date.isoformat() if isinstance(date, dt.date) else str(dt.date.fromisoformat(str(date)))
    folder = Path(export_dir)
    folder.mkdir(parents=True, exist_ok=True)
    records = [r.to_json() if hasattr(r, "to_json") else dict(r) for r in recs]
    zones = max((len(r.get("zone_forward_kw") or []) for r in records), default=0)
    columns = ["date", "line_id", "product_id", "feasible", "belt_speed_m_per_min",
               *[f"zone{i}_forward_kw" for i in range(1, zones + 1)], "specific_energy_kwh_per_t",
               "throughput_kg_per_h", "probability_in_spec", "binding_constraints", "model_version",
               "belt_load_kg_per_m", "power_follows_load"]
    rows = []
    for r in records:
        powers = list(r.get("zone_forward_kw") or [])
        row = {"date": day, "line_id": r["line_id"], "product_id": r["product_id"], "feasible": r["feasible"],
               "belt_speed_m_per_min": r.get("belt_speed_m_per_min"),
               "specific_energy_kwh_per_t": r.get("specific_energy_kwh_per_t"),
               "throughput_kg_per_h": r.get("throughput_kg_per_h"),
               "probability_in_spec": r.get("probability_in_spec"),
               "binding_constraints": "; ".join(b["name"] for b in r.get("binding_constraints") or []),
               "model_version": r.get("model_version"),
               # the load the zone powers are for; scaled with the measured load where the line follows it
               "belt_load_kg_per_m": ((r.get("inputs") or {}).get("conditions") or {}).get("belt_load_kg_per_m"),
               "power_follows_load": bool((r.get("inputs") or {}).get("power_follows_load", False))}
        row.update({f"zone{i}_forward_kw": (powers[i - 1] if i <= len(powers) else None) for i in range(1, zones + 1)})
        rows.append(row)
    base = folder / f"recommendations_{day}"

    def write_csv(f):
        w = csv.DictWriter(f, fieldnames=columns)
        w.writeheader()
        for row in rows:
            w.writerow({k: ("" if v is None else v) for k, v in row.items()})

    csv_path = _write_atomic(base.with_suffix(".csv"), write_csv)
    json_path = _write_atomic(base.with_suffix(".json"), lambda f: json.dump(
        {"date": day, "recommendations": records}, f, indent=2, ensure_ascii=False))
    return csv_path, json_path


def _write_atomic(path: Path, write) -> Path:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as f:
            write(f)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path
