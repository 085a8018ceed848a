"""The plant description: lines, zones, ratings, products, targets and log layouts.

Loaded from TOML into frozen, typed objects. Every problem found is reported with
its path in the file (``lines.TMP-1.zone_max_kw[2]``) and how to fix it, all at once,
so an engineer can correct a description in one pass.

Targets are written on the *piece* (core temperature at mid-thickness, the hottest
and coldest point anywhere, the mean moisture); the logs show what the *outfeed
array* reads. The two are kept apart: ``Product.targets`` for the first,
``Line.outfeed_array`` for the second.
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import ConfigError
from .properties.composition import COMPONENTS, Composition
from .units import SOURCE_UNITS

LINE_KINDS = ("tempering", "drying")
ARRAY_KINDS = ("needle_probes", "surface_pyrometers")

#: Canonical log columns (shared run-log format) and the units a source may use for them.
CANONICAL_COLUMNS = (
    "timestamp", "line_id", "product_id", "lot_id", "belt_speed_m_per_min",
    "belt_load_kg_per_m", "infeed_temp_c", "air_temp_c", "outfeed_temp_mean_c",
    "outfeed_temp_min_c", "outfeed_temp_max_c", "energy_kwh", "infeed_moisture_pct_wb",
    "outfeed_moisture_pct_wb", "air_rh_pct",
)
ZONE_COLUMN_STEMS = ("forward_kw", "reflected_kw")
#: Columns only QA probe sample files carry (shared run-log format), and the positions they name.
QA_ONLY_COLUMNS = ("position", "temp_c", "moisture_pct_wb")
QA_POSITIONS = ("core", "surface", "edge", "lab")
UNIT_CHOICES = {kind: tuple(units) for kind, units in SOURCE_UNITS.items()}
TOP_LEVEL_KEYS = ("plant", "store", "paths", "economics", "fit", "recommend", "nightly", "alerts",
                  "lines", "products")


def is_mappable_column(name: str) -> bool:
    """A canonical column of process logs or of QA probe sample files."""
    return is_canonical_column(name) or name in QA_ONLY_COLUMNS


def unit_kind(canonical: str) -> str | None:
    """Which kind of unit a canonical column carries (``temp``, ``power``, …), or None for text."""
    if canonical.endswith("_c"):
        return "temp"
    if canonical.endswith("_kw"):
        return "power"
    if canonical.endswith("m_per_min"):
        return "speed"
    if canonical.endswith("kg_per_m"):
        return "load"
    if canonical.endswith("_kwh"):
        return "energy"
    if canonical.endswith("_pct_wb") or canonical.endswith("_pct"):
        return "moisture"
    return None


def is_canonical_column(name: str) -> bool:
    if name in CANONICAL_COLUMNS:
        return True
    if name.startswith("zone") and "_" in name:
        head, _, stem = name.partition("_")
        return head[4:].isdigit() and stem in ZONE_COLUMN_STEMS
    return False


@dataclass(frozen=True)
class OutfeedArray:
    """What the line's outfeed measurement is and where it sits in the piece."""

    kind: str  # needle_probes | surface_pyrometers
    count: int
    depth_m: float  # below the top surface; 0 for pyrometers


@dataclass(frozen=True)
class CsvLayout:
    """How a line's historian writes its CSV files."""

    separator: str = ","
    decimal: str = "."
    encoding: str = "utf-8"
    timestamp_format: str | None = None  # strptime format; None = ISO 8601
    naive_timezone: str | None = None  # IANA zone for timestamps without an offset


@dataclass(frozen=True)
class Line:
    """A conveyor line: zones in series on a moving belt, with their ratings."""

    line_id: str
    kind: str  # tempering | drying
    frequency_hz: float
    zone_length_m: tuple[float, ...]
    zone_max_kw: tuple[float, ...]
    total_power_cap_kw: float
    infeed_choke_m: float
    outfeed_choke_m: float
    belt_width_m: float
    belt_speed_min_m_per_min: float
    belt_speed_max_m_per_min: float
    generator_efficiency: float  # nameplate mains-to-RF efficiency [-]
    products: tuple[str, ...]
    outfeed_array: OutfeedArray
    aux_power_kw: float = 5.0  # belt, fans, controls (a first guess the fit refines)
    air_heater_kw_per_k: float = 0.0  # dryers: electric heater power per K above ambient
    ambient_temp_c: float = 20.0
    power_step_kw: float | None = None
    csv: CsvLayout = field(default_factory=CsvLayout)
    columns: dict[str, str] = field(default_factory=dict)  # canonical -> source column
    units: dict[str, str] = field(default_factory=dict)  # canonical -> source unit
    qa_positions: dict[str, str] = field(default_factory=dict)  # canonical position -> the export's word
    #: the line's controls scale every zone's forward power with the measured belt load (the
    #: setting holds for the nominal load; kW per kg/m stays), within the ratings and the cap
    power_follows_load: bool = False

    @property
    def zone_count(self) -> int:
        return len(self.zone_length_m)

    @property
    def heated_length_m(self) -> float:
        return float(sum(self.zone_length_m))

    @property
    def tunnel_length_m(self) -> float:
        return self.infeed_choke_m + self.heated_length_m + self.outfeed_choke_m

    def source_column(self, canonical: str) -> str:
        """The column name this line's export uses for a canonical column."""
        return self.columns.get(canonical, canonical)


@dataclass(frozen=True)
class Targets:
    """What the piece must be at the outfeed (all optional; at least one is set)."""

    core_temp_c: float | None = None
    core_tol_c: float | None = None
    max_temp_c: float | None = None  # hottest point anywhere (drying: during the passage)
    min_temp_c: float | None = None  # coldest point anywhere
    outfeed_moisture_pct_wb: float | None = None
    moisture_tol_pct: float | None = None


@dataclass(frozen=True)
class TypicalInputs:
    """Inputs a what-if run assumes when the engineer gives none and no log exists."""

    infeed_temp_c: float
    belt_load_kg_per_m: float
    air_temp_c: float
    infeed_moisture_pct_wb: float | None = None
    air_rh_pct: float | None = None


@dataclass(frozen=True)
class Product:
    product_id: str
    process: str  # tempering | drying
    description: str
    composition: Composition
    piece_thickness_m: float
    targets: Targets
    typical: TypicalInputs
    initial_freezing_point_c: float | None = None
    density_kg_per_m3: float | None = None
    bed_porosity: float | None = None


@dataclass(frozen=True)
class Economics:
    currency: str = "EUR"
    electricity_price_per_kwh: float = 0.15
    co2_kg_per_kwh: float = 0.35
    operating_days_per_year: float = 250.0


@dataclass(frozen=True)
class Plant:
    """The whole description, with paths already resolved against the file's folder."""

    name: str
    source: Path
    timezone: str
    lines: dict[str, Line]
    products: dict[str, Product]
    store_url: str
    incoming_dirs: tuple[Path, ...]
    export_dir: Path
    economics: Economics
    sections: dict[str, dict[str, Any]]  # fit / recommend / nightly / alerts, read by their steps

    def line(self, line_id: str) -> Line:
        try:
            return self.lines[line_id]
        except KeyError:
            known = ", ".join(sorted(self.lines)) or "none"
            raise ConfigError(str(self.source), [f"unknown line '{line_id}'; lines here: {known}"]) from None

    def product(self, product_id: str) -> Product:
        try:
            return self.products[product_id]
        except KeyError:
            known = ", ".join(sorted(self.products)) or "none"
            raise ConfigError(str(self.source),
                              [f"unknown product '{product_id}'; products here: {known}"]) from None


class _Reader:
    """Reads values out of nested dicts, collecting problems with their paths."""

    def __init__(self):
        self.problems: list[str] = []
        self.warnings: list[str] = []

    def problem(self, path: str, text: str):
        self.problems.append(f"{path}: {text}")

    def table(self, data: dict, key: str, path: str, required=True) -> dict:
        value = data.get(key)
        if value is None:
            if required:
                self.problem(f"{path}{key}", "missing table; add it")
            return {}
        if not isinstance(value, dict):
            self.problem(f"{path}{key}", f"must be a table, not {type(value).__name__}")
            return {}
        return value

    def number(self, data: dict, key: str, path: str, *, default=None, required=True,
               low=-math.inf, high=math.inf, low_open=False, hint=""):
        full = f"{path}{key}"
        if key not in data:
            if required and default is None:
                self.problem(full, f"missing; give a number{hint}")
            return default
        value = data[key]
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            self.problem(full, f"must be a number, not {value!r}{hint}")
            return default
        value = float(value)
        if value < low or (low_open and value == low) or value > high:
            lo = f"{'>' if low_open else '≥'} {low:g}" if low > -math.inf else ""
            hi = f"≤ {high:g}" if high < math.inf else ""
            rng = " and ".join(x for x in (lo, hi) if x)
            self.problem(full, f"{value:g} is out of range; it must be {rng}{hint}")
        return value

    def flag(self, data: dict, key: str, path: str, *, default: bool = False) -> bool:
        if key not in data:
            return default
        value = data[key]
        if not isinstance(value, bool):
            self.problem(f"{path}{key}", f"must be true or false, not {value!r}")
            return default
        return value

    def text(self, data: dict, key: str, path: str, *, default=None, choices=None):
        full = f"{path}{key}"
        if key not in data:
            if default is None:
                self.problem(full, "missing; give a text value"
                             + (f" (one of: {', '.join(choices)})" if choices else ""))
            return default
        value = data[key]
        if not isinstance(value, str):
            self.problem(full, f"must be text, not {value!r}")
            return default
        if choices and value not in choices:
            self.problem(full, f"'{value}' is not allowed; use one of: {', '.join(choices)}")
        return value

    def numbers(self, data: dict, key: str, path: str, *, low=-math.inf, low_open=False, hint=""):
        full = f"{path}{key}"
        value = data.get(key)
        if not isinstance(value, list) or not value:
            self.problem(full, f"missing or empty; give a list of numbers, one per zone{hint}")
            return ()
        out = []
        for i, v in enumerate(value):
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                self.problem(f"{full}[{i}]", f"must be a number, not {v!r}")
                continue
            if v < low or (low_open and v == low):
                self.problem(f"{full}[{i}]", f"{v:g} must be {'>' if low_open else '≥'} {low:g}{hint}")
            out.append(float(v))
        return tuple(out)

    def unknown_keys(self, data: dict, allowed, path: str):
        for key in data:
            if key not in allowed:
                self.problem(f"{path}{key}", f"unknown key; allowed here: {', '.join(sorted(allowed))}")


_LINE_KEYS = {
    "kind", "frequency_mhz", "zone_length_m", "zone_max_kw", "total_power_cap_kw", "infeed_choke_m",
    "outfeed_choke_m", "belt_width_m", "belt_speed_min_m_per_min", "belt_speed_max_m_per_min",
    "generator_efficiency", "products", "outfeed_array", "aux_power_kw", "air_heater_kw_per_k",
    "ambient_temp_c", "power_step_kw", "csv", "columns", "units", "qa_positions", "power_follows_load",
    "description",
}
_PRODUCT_KEYS = {
    "process", "description", "composition", "piece_thickness_m", "targets", "typical",
    "initial_freezing_point_c", "density_kg_per_m3", "bed_porosity",
}
_TARGET_KEYS = {f for f in Targets.__dataclass_fields__}
_TYPICAL_KEYS = {f for f in TypicalInputs.__dataclass_fields__}


def _read_line(r: _Reader, line_id: str, d: dict, base: Path) -> Line | None:
    p = f"lines.{line_id}."
    r.unknown_keys(d, _LINE_KEYS, p)
    kind = r.text(d, "kind", p, choices=LINE_KINDS)
    f_mhz = r.number(d, "frequency_mhz", p, low=0, low_open=True, hint=" [MHz], e.g. 915 or 2450")
    if f_mhz is not None:
        from .properties.dielectric import check_frequency_hz

        warn = check_frequency_hz(f_mhz * 1e6)
        if warn:
            r.warnings.append(f"{p}frequency_mhz: {warn}")
    lengths = r.numbers(d, "zone_length_m", p, low=0, low_open=True, hint=" [m]; a zone has a length")
    ratings = r.numbers(d, "zone_max_kw", p, low=0, low_open=True, hint=" [kW]")
    if lengths and ratings and len(lengths) != len(ratings):
        r.problem(f"{p}zone_max_kw", f"has {len(ratings)} entries but zone_length_m has {len(lengths)}; "
                  "give one rating per zone")
    cap = r.number(d, "total_power_cap_kw", p, default=sum(ratings) if ratings else None,
                   low=0, low_open=True, hint=" [kW]")
    vmin = r.number(d, "belt_speed_min_m_per_min", p, low=0, low_open=True, hint=" [m/min]")
    vmax = r.number(d, "belt_speed_max_m_per_min", p, low=0, low_open=True, hint=" [m/min]")
    if vmin is not None and vmax is not None and vmin >= vmax:
        r.problem(f"{p}belt_speed_max_m_per_min", f"{vmax:g} must be above belt_speed_min_m_per_min ({vmin:g})")
    eff = r.number(d, "generator_efficiency", p, low=0.2, high=1.0, hint=" (mains-to-RF, e.g. 0.8)")
    products = d.get("products", [])
    if not isinstance(products, list) or not all(isinstance(x, str) for x in products):
        r.problem(f"{p}products", "must be a list of product ids")
        products = []
    arr = r.table(d, "outfeed_array", p)
    ap = f"{p}outfeed_array."
    r.unknown_keys(arr, {"kind", "count", "depth_m"}, ap)
    array = OutfeedArray(
        kind=r.text(arr, "kind", ap, choices=ARRAY_KINDS) or "needle_probes",
        count=int(r.number(arr, "count", ap, low=1, high=100) or 1),
        depth_m=r.number(arr, "depth_m", ap, default=0.0, low=0.0, hint=" [m] below the top surface"),
    )
    csv_d = r.table(d, "csv", p, required=False)
    cp = f"{p}csv."
    r.unknown_keys(csv_d, {"separator", "decimal", "encoding", "timestamp_format", "naive_timezone"}, cp)
    csv = CsvLayout(
        separator=r.text(csv_d, "separator", cp, default=","),
        decimal=r.text(csv_d, "decimal", cp, default=".", choices=(".", ",")),
        encoding=r.text(csv_d, "encoding", cp, default="utf-8"),
        timestamp_format=csv_d.get("timestamp_format"),
        naive_timezone=csv_d.get("naive_timezone"),
    )
    if csv.naive_timezone is not None:
        try:
            from zoneinfo import ZoneInfo
            ZoneInfo(csv.naive_timezone)
        except Exception:
            r.problem(f"{cp}naive_timezone", f"'{csv.naive_timezone}' is not an IANA time zone "
                      "(e.g. Europe/Berlin)")
    columns = r.table(d, "columns", p, required=False)
    for canonical, source in columns.items():
        if not is_mappable_column(canonical):
            r.problem(f"{p}columns.{canonical}", "is not a canonical column name; the keys are canonical "
                      "names (e.g. belt_speed_m_per_min, zone1_forward_kw, or position and temp_c of QA "
                      "files), the values your export's names")
        if not isinstance(source, str):
            r.problem(f"{p}columns.{canonical}", "must be the source column name as text")
    units = r.table(d, "units", p, required=False)
    for canonical, unit in units.items():
        kind_u = unit_kind(canonical)
        if kind_u is None or not is_mappable_column(canonical):
            r.problem(f"{p}units.{canonical}", "is not a numeric canonical column")
        elif unit not in UNIT_CHOICES[kind_u]:
            r.problem(f"{p}units.{canonical}", f"'{unit}' is not a known unit; use one of: "
                      + ", ".join(UNIT_CHOICES[kind_u]))
    positions = r.table(d, "qa_positions", p, required=False)
    words = {}
    for canonical, word in positions.items():
        if canonical not in QA_POSITIONS:
            r.problem(f"{p}qa_positions.{canonical}", f"is not a QA position; the keys are {', '.join(QA_POSITIONS)}"
                      ", the values the words your QA export writes for them")
        elif not isinstance(word, str) or not word.strip():
            r.problem(f"{p}qa_positions.{canonical}", "must be the word your QA export writes, as text")
        elif word.strip().lower() in words:
            r.problem(f"{p}qa_positions.{canonical}", f"'{word}' is also given for "
                      f"{words[word.strip().lower()]}; each position needs a word of its own")
        else:
            words[word.strip().lower()] = canonical
    step = r.number(d, "power_step_kw", p, required=False, low=0, low_open=True, hint=" [kW]")
    if None in (kind, f_mhz, cap, vmin, vmax, eff) or not lengths or not ratings:
        return None
    return Line(
        line_id=line_id, kind=kind, frequency_hz=f_mhz * 1e6, zone_length_m=lengths,
        zone_max_kw=ratings, total_power_cap_kw=cap,
        infeed_choke_m=r.number(d, "infeed_choke_m", p, default=0.0, low=0.0),
        outfeed_choke_m=r.number(d, "outfeed_choke_m", p, default=0.0, low=0.0),
        belt_width_m=r.number(d, "belt_width_m", p, low=0, low_open=True) or 1.0,
        belt_speed_min_m_per_min=vmin, belt_speed_max_m_per_min=vmax, generator_efficiency=eff,
        products=tuple(products), outfeed_array=array,
        aux_power_kw=r.number(d, "aux_power_kw", p, default=5.0, low=0.0),
        air_heater_kw_per_k=r.number(d, "air_heater_kw_per_k", p, default=0.0, low=0.0),
        ambient_temp_c=r.number(d, "ambient_temp_c", p, default=20.0, low=-40, high=60),
        power_step_kw=step, csv=csv, columns=dict(columns), units=dict(units),
        qa_positions={c: w.strip() for c, w in positions.items() if c in QA_POSITIONS and isinstance(w, str)},
        power_follows_load=r.flag(d, "power_follows_load", p),
    )


def _read_product(r: _Reader, product_id: str, d: dict) -> Product | None:
    p = f"products.{product_id}."
    r.unknown_keys(d, _PRODUCT_KEYS, p)
    process = r.text(d, "process", p, choices=LINE_KINDS)
    comp_d = r.table(d, "composition", p)
    cp = f"{p}composition."
    r.unknown_keys(comp_d, set(COMPONENTS), cp)
    if "water" not in comp_d and comp_d:
        r.problem(f"{cp}water", "missing; give the water mass fraction")
    fractions = {}
    for name in COMPONENTS:
        if name in comp_d:
            fractions[name] = r.number(comp_d, name, cp, low=0.0, high=1.0,
                                       hint=" (a mass fraction, kg per kg; not percent)")
    comp = None
    if comp_d and all(v is not None for v in fractions.values()) and "water" in fractions:
        comp = Composition(**fractions)
        for text in comp.problems():
            r.problem(cp.rstrip("."), text)
    tf = r.number(d, "initial_freezing_point_c", p, required=False, high=0.0,
                  hint=" [°C]; water in food starts to freeze at or below 0 °C")
    if process == "tempering" and "initial_freezing_point_c" not in d:
        r.problem(f"{p}initial_freezing_point_c", "missing; a tempered product needs its initial "
                  "freezing point [°C] (e.g. -1.1 for lean beef)")
    thick = r.number(d, "piece_thickness_m", p, low=0, low_open=True, high=1.0,
                     hint=" [m], the piece or bed thickness")
    tg = r.table(d, "targets", p)
    tp = f"{p}targets."
    r.unknown_keys(tg, _TARGET_KEYS, tp)
    targets = Targets(**{k: r.number(tg, k, tp, required=False, low=-60, high=250) for k in _TARGET_KEYS})
    if targets.core_tol_c is not None and targets.core_tol_c <= 0:
        r.problem(f"{tp}core_tol_c", "must be > 0")
    if targets.core_temp_c is not None and targets.core_tol_c is None:
        r.problem(f"{tp}core_tol_c", "missing; a core target needs its tolerance [K]")
    if targets.outfeed_moisture_pct_wb is not None and targets.moisture_tol_pct is None:
        r.problem(f"{tp}moisture_tol_pct", "missing; a moisture target needs its tolerance [% points]")
    if targets.min_temp_c is not None and targets.max_temp_c is not None \
            and targets.min_temp_c >= targets.max_temp_c:
        r.problem(f"{tp}min_temp_c", f"{targets.min_temp_c:g} °C is not below max_temp_c "
                  f"({targets.max_temp_c:g} °C): the targets contradict each other")
    if targets.core_temp_c is not None and targets.max_temp_c is not None \
            and targets.core_temp_c >= targets.max_temp_c:
        r.problem(f"{tp}core_temp_c", f"{targets.core_temp_c:g} °C is not below max_temp_c "
                  f"({targets.max_temp_c:g} °C)")
    if process == "drying" and targets.outfeed_moisture_pct_wb is None:
        r.problem(f"{tp}outfeed_moisture_pct_wb", "missing; a dried product needs a moisture target")
    if process == "tempering" and targets.core_temp_c is None:
        r.problem(f"{tp}core_temp_c", "missing; a tempered product needs a core temperature target")
    ty = r.table(d, "typical", p)
    yp = f"{p}typical."
    r.unknown_keys(ty, _TYPICAL_KEYS, yp)
    typical = TypicalInputs(
        infeed_temp_c=r.number(ty, "infeed_temp_c", yp, low=-60, high=120),
        belt_load_kg_per_m=r.number(ty, "belt_load_kg_per_m", yp, low=0, low_open=True),
        air_temp_c=r.number(ty, "air_temp_c", yp, low=-60, high=250),
        infeed_moisture_pct_wb=r.number(ty, "infeed_moisture_pct_wb", yp, required=process == "drying",
                                        low=0, high=95),
        air_rh_pct=r.number(ty, "air_rh_pct", yp, required=False, low=0, high=100),
    )
    if process == "drying" and comp is not None and typical.infeed_moisture_pct_wb is not None \
            and abs(typical.infeed_moisture_pct_wb / 100 - comp.water) > 0.05:
        r.warnings.append(f"{yp}infeed_moisture_pct_wb: {typical.infeed_moisture_pct_wb:g} % differs from the "
                          f"composition's water ({comp.water:.1%}); the composition's dry matter is used")
    if None in (process, comp, thick) or None in (typical.infeed_temp_c, typical.belt_load_kg_per_m,
                                                  typical.air_temp_c):
        return None
    if tf is not None and typical.infeed_temp_c is not None and process == "tempering" \
            and typical.infeed_temp_c >= tf:
        r.warnings.append(f"{yp}infeed_temp_c: {typical.infeed_temp_c:g} °C is not below the initial "
                          f"freezing point ({tf:g} °C); the product arrives thawed")
    return Product(
        product_id=product_id, process=process, description=str(d.get("description", "")),
        composition=comp, piece_thickness_m=thick, targets=targets, typical=typical,
        initial_freezing_point_c=tf,
        density_kg_per_m3=r.number(d, "density_kg_per_m3", p, required=False, low=100, high=3000),
        bed_porosity=r.number(d, "bed_porosity", p, required=False, low=0.0, high=0.95),
    )


def parse_plant(data: dict, source: Path) -> tuple[Plant, list[str]]:
    """Build a :class:`Plant` from parsed TOML; returns it with warnings, raises ConfigError."""
    r = _Reader()
    base = source.parent
    r.unknown_keys(data, TOP_LEVEL_KEYS, "")
    plant_d = r.table(data, "plant", "", required=False)
    store_d = r.table(data, "store", "", required=False)
    paths_d = r.table(data, "paths", "", required=False)
    econ_d = r.table(data, "economics", "", required=False)
    lines_d = r.table(data, "lines", "")
    products_d = r.table(data, "products", "")
    lines = {}
    for line_id, d in lines_d.items():
        if not isinstance(d, dict):
            r.problem(f"lines.{line_id}", "must be a table")
            continue
        line = _read_line(r, line_id, d, base)
        if line is not None:
            lines[line_id] = line
    products = {}
    for product_id, d in products_d.items():
        if not isinstance(d, dict):
            r.problem(f"products.{product_id}", "must be a table")
            continue
        product = _read_product(r, product_id, d)
        if product is not None:
            products[product_id] = product
    for line in lines.values():
        for i, pid in enumerate(line.products):
            if pid not in products_d:
                r.problem(f"lines.{line.line_id}.products[{i}]", f"'{pid}' is not described under [products]")
            elif pid in products and products[pid].process != line.kind:
                r.problem(f"products.{pid}.process", f"is '{products[pid].process}' but it runs on "
                          f"{line.kind} line {line.line_id}")
    url = store_d.get("url", "sqlite:///beltwave.sqlite")
    if url.startswith("sqlite:///") and not url.startswith("sqlite:////"):
        rel = url[len("sqlite:///"):]
        url = "sqlite:///" + str((base / rel).resolve())
    incoming = paths_d.get("incoming", [])
    if isinstance(incoming, str):
        incoming = [incoming]
    economics = Economics(
        currency=r.text(econ_d, "currency", "economics.", default="EUR"),
        electricity_price_per_kwh=r.number(econ_d, "electricity_price_per_kwh", "economics.",
                                           default=0.15, low=0.0),
        co2_kg_per_kwh=r.number(econ_d, "co2_kg_per_kwh", "economics.", default=0.35, low=0.0),
        operating_days_per_year=r.number(econ_d, "operating_days_per_year", "economics.",
                                         default=250.0, low=1, high=366),
    )
    if r.problems:
        raise ConfigError(str(source), r.problems)
    plant = Plant(
        name=str(plant_d.get("name", source.stem)), source=source,
        timezone=str(plant_d.get("timezone", "UTC")), lines=lines, products=products,
        store_url=url, incoming_dirs=tuple((base / x).resolve() for x in incoming),
        export_dir=(base / paths_d.get("exports", "exports")).resolve(), economics=economics,
        sections={k: dict(data.get(k, {})) for k in ("fit", "recommend", "nightly", "alerts")},
    )
    return plant, r.warnings


def load_plant(path: str | Path) -> tuple[Plant, list[str]]:
    """Read and validate a plant description file; returns (plant, warnings)."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise ConfigError(str(path), [f"cannot read the file: {exc.strerror}"]) from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise ConfigError(str(path), ["is not UTF-8 text; save it as UTF-8"]) from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(str(path), [f"is not valid TOML: {exc}"]) from None
    return parse_plant(data, path.resolve())
