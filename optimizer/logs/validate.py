"""Row-level validation of decoded log rows: which rows the store may take, and why not the rest.

Each row gets at most one reason — the first check it fails, in the order of ``REASONS`` —
with a detail naming the column, the value and how to fix the export or the plant
description. Checks are physical ranges (belt speed not negative, zone power at most 150 %
of the zone's rating, temperatures within −60…250 °C), line ids the plant knows, zone columns
the line has, and likely unit mistakes (power in W where kW is meant, °F where °C is meant),
which are judged on the running rows of a block as a whole.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
import pandas as pd

from ..config import QA_POSITIONS, Line, Plant, unit_kind
from ..units import KELVIN_OFFSET, f_to_c

#: Quarantine reasons, in the order they are checked (a row carries the first that applies).
REASONS = {
    "malformed_row": "the line does not split into the header's fields (truncated or a stray separator)",
    "empty_row": "every cell of the row is empty",
    "missing_timestamp": "the timestamp cell is empty",
    "bad_timestamp": "the timestamp cannot be parsed",
    "naive_timestamp": "the timestamp has no UTC offset and the line's naive_timezone is not set",
    "nonexistent_local_time": "a naive local time inside the spring-forward gap of the zone",
    "bad_number": "a numeric cell holds text that is not a number",
    "missing_line_id": "the line_id cell is empty",
    "unknown_line": "the line_id is not a line of the plant description",
    "layout_mismatch": "a row of a line whose export layout differs from the file's",
    "unknown_zone": "a value in a zone column the line does not have",
    "bad_position": "a QA position other than core, surface, edge or lab",
    "missing_value": "a QA row without the reading its position needs",
    "unit_mistake": "a column whose values look like another unit than the one configured",
    "out_of_range": "a value outside its physical range",
    "conflicting_duplicate": "same line and timestamp as a stored row, different values",
}

#: The unit each kind of canonical column is in (run-log format); a source may declare others.
CANONICAL_UNIT = {"temp": "C", "power": "kW", "speed": "m/min", "load": "kg/m", "energy": "kWh", "moisture": "%"}
TEMP_RANGE_C = (-60.0, 250.0)
PCT_RANGE = (0.0, 100.0)
#: A zone reading above this multiple of the zone's rating is not a power the generator made.
POWER_RATING_LIMIT = 1.5
#: Belt speed above this multiple of the line's maximum is not a speed the drive made.
SPEED_LIMIT_FACTOR = 1.5
#: Fewest running rows on which a unit mistake is judged.
UNIT_CHECK_MIN_ROWS = 5
UNIT_CHECK_SAMPLE = 20_000


class Verdict:
    """The first failing reason and its detail for each row of a block (row-aligned arrays)."""

    def __init__(self, n: int):
        self.failed = np.zeros(n, dtype=bool)
        self.reason = np.full(n, None, dtype=object)
        self.detail = np.full(n, None, dtype=object)

    @property
    def ok(self) -> np.ndarray:
        return ~self.failed

    def add(self, mask: np.ndarray, reason: str, detail: str | Callable[[np.ndarray], Sequence[str]]):
        """Fail the rows of ``mask`` that have not failed yet; ``detail`` is text or a function of
        their positions returning one text each."""
        if reason not in REASONS:
            raise ValueError(f"unknown quarantine reason {reason!r}; add it to REASONS")
        new = np.asarray(mask, dtype=bool) & ~self.failed
        if not new.any():
            return
        where = np.flatnonzero(new)
        self.failed[where] = True
        self.reason[where] = reason
        self.detail[where] = detail if isinstance(detail, str) else list(detail(where))

    def counts(self) -> dict[str, int]:
        reasons, counts = np.unique(self.reason[self.failed].astype(str), return_counts=True)
        return dict(zip(reasons.tolist(), counts.tolist()))


@dataclass(frozen=True)
class UnitSuspicion:
    """A column whose values look like another unit than the configured one."""

    line_id: str
    column: str
    configured: str
    meant: str
    message: str
    declared: bool  # the plant description names the unit explicitly: warn, do not quarantine


def suggest_line(line_id: str, known: Sequence[str]) -> str | None:
    """The configured line an unknown id spells differently ('tl1' → 'TL-1': case and punctuation), or None.

    Ids that differ in a letter or digit ('TL-3', 'DR-2') are other lines, not typos.
    """
    def norm(x):
        return "".join(ch for ch in x.lower() if ch.isalnum())
    return next((k for k in known if norm(k) == norm(line_id)), None)


def value_ranges(line: Line) -> dict[str, tuple[float, float, str]]:
    """Physical range [low, high] of each numeric canonical column on this line, with its reason."""
    out = {
        "belt_speed_m_per_min": (0.0, SPEED_LIMIT_FACTOR * line.belt_speed_max_m_per_min,
                                 f"{SPEED_LIMIT_FACTOR:.0%} of the line's maximum speed"),
        "belt_load_kg_per_m": (0.0, np.inf, "a load cannot be negative"),
        "energy_kwh": (0.0, np.inf, "a meter reading cannot be negative"),
    }
    for col in ("infeed_temp_c", "air_temp_c", "outfeed_temp_mean_c", "outfeed_temp_min_c",
                "outfeed_temp_max_c", "temp_c"):
        out[col] = (*TEMP_RANGE_C, "the range of food processing temperatures")
    for col in ("infeed_moisture_pct_wb", "outfeed_moisture_pct_wb", "air_rh_pct", "moisture_pct_wb"):
        out[col] = (*PCT_RANGE, "a percentage")
    for i, rating in enumerate(line.zone_max_kw, start=1):
        for stem in ("forward_kw", "reflected_kw"):
            out[f"zone{i}_{stem}"] = (0.0, POWER_RATING_LIMIT * rating,
                                      f"{POWER_RATING_LIMIT:.0%} of the zone's {rating:g} kW rating")
    return out


def zone_columns(columns, line: Line | None = None) -> list[str]:
    """The zone{i}_* columns among ``columns`` (beyond the line's zones when ``line`` is given)."""
    out = []
    for c in columns:
        if c.startswith("zone") and "_" in c and c.split("_", 1)[0][4:].isdigit():
            if line is None or int(c.split("_", 1)[0][4:]) > line.zone_count:
                out.append(c)
    return out


def check_lines(data: pd.DataFrame, verdict: Verdict, plant: Plant, layout_key: str, layout_keys: dict) -> None:
    """Missing and unknown line ids, and rows of a line whose layout is not the file's."""
    line_id = data["line_id"]
    verdict.add(line_id.isna().to_numpy(), "missing_line_id", "the line_id is empty")
    known = sorted(plant.lines)
    unknown = ~line_id.isin(known).to_numpy() & line_id.notna().to_numpy()
    if unknown.any():
        def detail(where):
            ids = line_id.to_numpy()[where]
            hints = {x: suggest_line(x, known) for x in set(ids)}
            return [f"line_id '{x}' is not a line of this plant (lines: {', '.join(known)})"
                    + (f"; it looks like '{hints[x]}' spelled differently: fix the export's line id"
                       if hints[x] else "; if it is one of its lines, describe it under [lines]") for x in ids]
        verdict.add(unknown, "unknown_line", detail)
    for other, key in layout_keys.items():
        if key != layout_key:
            verdict.add((line_id == other).to_numpy(), "layout_mismatch",
                        f"a row of line {other}, whose export layout ([lines.{other}.csv/columns/units]) differs "
                        "from the layout this file was read with; export each line with its own layout")


def check_zones(data: pd.DataFrame, rows: np.ndarray, verdict: Verdict, line: Line) -> None:
    """Values in zone columns beyond the line's zone count."""
    for col in zone_columns(data.columns, line):
        has = rows & data[col].notna().to_numpy()
        verdict.add(has, "unknown_zone",
                    lambda where, c=col: [f"{c} = {v:g} but line {line.line_id} has {line.zone_count} zones; "
                                          f"check the line_id or zone_length_m/zone_max_kw in [lines.{line.line_id}]"
                                          for v in data[c].to_numpy()[where]])


def check_ranges(data: pd.DataFrame, rows: np.ndarray, verdict: Verdict, line: Line) -> None:
    """Values outside the physical range of their column."""
    for col, (low, high, why) in value_ranges(line).items():
        if col not in data.columns:
            continue
        v = data[col].to_numpy(dtype=float)
        with np.errstate(invalid="ignore"):
            bad = rows & ((v < low) | (v > high))
        if bad.any():
            verdict.add(bad, "out_of_range",
                        lambda where, c=col, lo=low, hi=high, w=why, x=v:
                        [f"{c} = {x[i]:g} is outside [{lo:g}, {hi:g}] ({w})" for i in where])


def running_rows(data: pd.DataFrame) -> np.ndarray:
    """Rows with product on a moving belt: the rows on which unit plausibility is judged."""
    speed = data["belt_speed_m_per_min"].to_numpy(dtype=float) if "belt_speed_m_per_min" in data else None
    has_lot = data["lot_id"].notna().to_numpy() if "lot_id" in data else np.ones(len(data), bool)
    moving = speed > 0 if speed is not None else np.ones(len(data), bool)
    return has_lot & moving


def unit_suspicions(data: pd.DataFrame, rows: np.ndarray, line: Line, plant: Plant,
                    units: dict[str, str]) -> list[UnitSuspicion] | None:
    """Columns whose running values fit another unit of their kind far better than the configured one.

    None when there are too few running rows (belt moving, lot set) to judge.

    Power is judged against the zone rating, belt speed against the line's speed range, moisture
    against 1…95 %, temperatures against what the products on the rows typically read there
    (infeed and air from the product's typical inputs, outfeed from its targets). Medians are
    taken over at most ``UNIT_CHECK_SAMPLE`` evenly spaced running rows.
    """
    run = np.flatnonzero(rows & running_rows(data))
    if len(run) < UNIT_CHECK_MIN_ROWS:
        return None
    run = run[::max(1, len(run) // UNIT_CHECK_SAMPLE)]
    products = data["product_id"].iloc[run].value_counts() if "product_id" in data else pd.Series(dtype=int)
    out = []
    for col in data.columns:
        kind = unit_kind(col)
        if kind is None or col == "utc_offset_min":
            continue
        v = data[col].to_numpy(dtype=float)[run]
        v = v[np.isfinite(v) & (v != 0)]
        if len(v) < UNIT_CHECK_MIN_ROWS:
            continue
        configured = units.get(col)
        current = configured or CANONICAL_UNIT[kind]
        found = _suspect(col, kind, float(np.median(v)), products, line, plant, current)
        if found:
            meant, text = found
            where = f"[lines.{line.line_id}.units]"
            if configured:
                message = (f"{col}: {text}; the plant description declares '{configured}' in {where} — check it")
            else:
                message = (f"{col}: {text}; if so set {where} {col} = '{meant}', or declare {col} = '{current}' "
                           "there if the values are right. Until then rows with a value in this column are "
                           "quarantined")
            out.append(UnitSuspicion(line.line_id, col, current, meant, message, declared=configured is not None))
    return out


def check_units(data: pd.DataFrame, rows: np.ndarray, verdict: Verdict, suspicions: list[UnitSuspicion]) -> None:
    for s in suspicions:
        if not s.declared:
            verdict.add(rows & data[s.column].notna().to_numpy(), "unit_mistake",
                        f"{s.column} looks like '{s.meant}', not '{s.configured}' (see the file's warnings)")


def check_qa(data: pd.DataFrame, rows: np.ndarray, verdict: Verdict, line: Line) -> None:
    """QA rows: a known position and the reading it needs (temperature, or lab moisture)."""
    pos = data["position"] if "position" in data else pd.Series([None] * len(data), dtype=object)
    known = pos.isin(QA_POSITIONS).to_numpy()
    verdict.add(rows & ~known, "bad_position",
                lambda where: [f"position '{p}' is not one of core, surface, edge, lab" for p in pos.to_numpy()[where]])
    temp = data["temp_c"].to_numpy(dtype=float) if "temp_c" in data else np.full(len(data), np.nan)
    moist = data["moisture_pct_wb"].to_numpy(dtype=float) if "moisture_pct_wb" in data else np.full(len(data), np.nan)
    lab = (pos == "lab").to_numpy()
    verdict.add(rows & lab & np.isnan(moist), "missing_value", "a lab row needs moisture_pct_wb")
    verdict.add(rows & known & ~lab & np.isnan(temp), "missing_value", "a probe row needs temp_c")
    check_ranges(data, rows, verdict, line)


def _suspect(col, kind, median, products, line, plant, current):
    """(meant unit, explanation) when the column's median fits another unit far better."""
    if kind == "power":
        zone = int(col.split("_", 1)[0][4:])
        if zone > line.zone_count:
            return None
        rating = line.zone_max_kw[zone - 1]
        low = 0.01 * rating if col.endswith("forward_kw") else 0.0
        def fits(x):
            return low < x <= POWER_RATING_LIMIT * rating
        for meant, factor in (("W", 1e-3), ("kW", 1e3)):
            if meant != current and not fits(median) and fits(median * factor):
                return meant, (f"values look like {meant} (median of the running rows {median:.4g} kW as configured, "
                               f"{median * factor:.4g} kW as {meant}; the zone is rated {rating:g} kW)")
    elif kind == "speed":
        lo, hi = 0.5 * line.belt_speed_min_m_per_min, SPEED_LIMIT_FACTOR * line.belt_speed_max_m_per_min
        for meant, factor in (("m/s", 60.0), ("ft/min", 0.3048)):
            if meant != current and not lo <= median <= hi and lo <= median * factor <= hi:
                return meant, (f"values look like {meant} (median {median:.4g} m/min as configured, "
                               f"{median * factor:.4g} m/min as {meant}; the line runs "
                               f"{line.belt_speed_min_m_per_min:g}…{line.belt_speed_max_m_per_min:g} m/min)")
    elif kind == "moisture":
        if current != "fraction" and median < 1.0 and 1.0 <= median * 100 <= 95:
            return "fraction", (f"values look like a mass fraction (median {median:.3g} where percent is expected)")
    elif kind == "temp":
        expected = _expected_temp(col, products, line, plant)
        if expected is None:
            return None
        if current != "C":
            return None  # a declared °F/K column is converted; its plausibility is the range check's
        for meant, value in (("F", f_to_c(median)), ("K", median - KELVIN_OFFSET)):
            off_now = abs(median - expected)
            off_meant = abs(value - expected)
            if off_meant <= 25.0 and off_now > 3.0 * max(off_meant, 5.0):
                label = "°F" if meant == "F" else "K"
                return meant, (f"values look like {label} (median of the running rows {median:.4g} read as °C, "
                               f"{value:.4g} °C as {label}; the products here typically read about {expected:.3g} °C)")
    return None


def _expected_temp(col: str, products: pd.Series, line: Line, plant: Plant) -> float | None:
    """What the products on the running rows typically read in this column [°C] (median over rows).

    ``products`` counts the running rows per product id.
    """
    expected = {}
    for pid in products.index:
        p = plant.products.get(pid) if pid in line.products else None
        if p is None:
            continue
        if col == "infeed_temp_c":
            expected[pid] = p.typical.infeed_temp_c
        elif col == "air_temp_c":
            expected[pid] = p.typical.air_temp_c
        elif col.startswith("outfeed_temp"):
            if p.process == "tempering" and p.targets.core_temp_c is not None:
                expected[pid] = p.targets.core_temp_c
            elif p.targets.max_temp_c is not None:
                expected[pid] = 0.5 * (p.typical.infeed_temp_c + p.targets.max_temp_c)
    if not expected:
        return None
    values = np.array(list(expected.values()))
    weights = products[list(expected)].to_numpy(dtype=float)
    order = np.argsort(values)
    cum = np.cumsum(weights[order])
    return float(values[order][np.searchsorted(cum, cum[-1] / 2)])
