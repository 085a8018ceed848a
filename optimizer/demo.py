"""The demo plant's history: historian logs of known truth, for tests, tutorials and the dashboard.

Simulates weeks of production at the invented plant of ``configs/demo.toml`` ("Saltmarsh
Provisions", Harwick works) through the line model with perturbed "true" parameters, and
writes what its historians would export — one gzip CSV per line per local day in the
canonical layout of ``shared/spec/run-log-format.md`` (or in the line's own column names,
separator and decimal mark), a QA probe file per line, and ``manifest.json`` saying what
the truth was (parameters, sensor offsets, lots) and which export faults were injected where.

Scenario
--------
* Calendar (local time, the plant's time zone): two shifts on weekdays, 06:00–13:45 and
  14:15–22:00 with a cleaning gap between them; one lighter shift on Saturdays (06:00–12:30);
  Sundays idle. Shift ends are jittered by a few minutes each day. The historian samples
  every ``interval_s`` seconds, day and night.
* Lots of 1–4 h with 10–25 min changeovers; the first lot of a shift starts 15–25 min after
  the shift (air brought to temperature). Each line favours some of its products.
* Operators keep habitual settings per product: a belt speed and a falling power profile that
  bring the *true* model's piece slightly past the target (core 0.2–0.6 K warmer than the core
  target; dried product 0.3–0.7 % wb below the moisture target), chosen as the fastest speed at
  which the hottest point stays near its limit. Lot to lot they vary speed by ±1.5 % and power
  by ±2 %; within a lot they nudge a zone or the speed now and then (about every 45 min) and
  sometimes (one lot in three) step the speed or all powers by 4–8 %.
* Infeed temperature: cold-store variation ±2 K lot to lot, a slow drift and wander within
  the lot and ±0.15 K piece to piece. Belt load ±8 % lot to lot, ±2 % wander, ±1 % piece to
  piece. Dryer infeed moisture ±1 % wb lot to lot. Tunnel air follows its set point with a
  5 min lag (ambient outside shifts) and wanders about it (σ 0.15 K tempering, 0.3 K drying,
  0.5 % RH; correlation times 15 min and 1 h). Forward power and belt speed readings ripple by
  0.02 kW and 0.001 m/min about their set points.
* The generators of one line age: mains-to-RF efficiency falls linearly by 1.5–2.5 %
  (relative) over the window. ``energy_kwh`` integrates the model's mains power (generators,
  auxiliaries, dryer air heater; a standby load outside shifts), rounded to 0.1 kWh.
* Logged inputs (speed, forward power, infeed temperature, load, air) are exactly what the
  model was given. Outputs carry sensor error: outfeed array reading + calibration offset +
  noise (σ 0.15 K), NIR moisture + offset + noise (σ 0.15 % wb), reflected power from the
  reflection relation + noise (σ 0.05 kW). Outfeed readings are empty until the first parcel of
  a lot has passed the whole tunnel, and while idle.
* QA file: tempering lots get 1–3 probe samplings (``core`` = mid-thickness, ``surface`` = mean
  of the outer layers, ``edge`` = the hot share; calibrated probes, σ 0.3 K); dryer lots 1–2
  ``lab`` grab samples (oven-dry moisture, σ 0.1 % wb). QA files use the line's CSV layout too.

Faults (``faults=True``; each recorded in the manifest with file, time range and details):
sensor dropouts (~0.2 % of numeric cells), duplicated row blocks, a block of rows out of order,
a re-export overlapping two days, a stuck outfeed sensor (~3 h), spikes, a belt stop with the
generators interlocked off, a single generator trip, rows with an unknown ``line_id``, one file
with a UTF-8 byte-order mark. The random streams of the plant's history do not depend on the
faults: ``faults=False`` with the same seed gives the same history without them.

Speed: each lot is one vectorised call of the line model over all its samples; files are
written day by day; lines run in parallel processes when ``workers`` > 1.
"""
from __future__ import annotations

import gzip
import json
import logging
import os
from concurrent.futures import ProcessPoolExecutor
from dataclasses import asdict, dataclass, field
from datetime import date, datetime, time, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
from scipy.signal import lfilter

from .config import Line, Plant
from .errors import InputError
from .line import LineModel, ModelParameters, ReflectionRelation
from .line.model import HOT_SHARE, _electric_kw
from .models import FittedModel

log = logging.getLogger(__name__)

#: Default window: four weeks that include the end of British summer time (25 October 2026).
DEMO_DEFAULTS = {"start": "2026-10-05", "days": 28}
MANIFEST_NAME = "manifest.json"

# ------------------------------------------------------------------ the scenario's constants
#: Shifts as (start, end) minutes after local midnight.
WEEKDAY_SHIFTS_MIN = ((6 * 60, 13 * 60 + 45), (14 * 60 + 15, 22 * 60))
SATURDAY_SHIFTS_MIN = ((6 * 60, 12 * 60 + 30),)
SHIFT_JITTER_MIN = 10.0
START_UP_MIN = (15.0, 25.0)
LOT_MIN = (60.0, 240.0)
MIN_LOT_MIN = 45.0
CHANGEOVER_MIN = (10.0, 25.0)
#: Air set point lag (first order) [s]; outside shifts the air drifts to the line's ambient.
AIR_LAG_S = 300.0
HALL_RH_PCT = 45.0
#: Standby load outside shifts (controls, PLC, historian) [kW], drawn per line.
STANDBY_KW = (0.3, 0.8)

#: Perturbations of ModelParameters.defaults that make the demo's "truth".
EFFICIENCY_BELOW_NAMEPLATE = (0.02, 0.05)  # relative
EFFICIENCY_AGEING = (0.015, 0.025)  # relative loss over the window, on one line
AUX_POWER_FACTOR = (0.9, 1.15)
CAVITY_LOSS_FACTOR = (0.8, 1.3)
AIR_HTC_FACTOR = (0.8, 1.25)
AIR_HEATER_FACTOR = (0.9, 1.1)
LOSS_FACTOR_SCALE = (0.8, 1.25)
FIELD_NONUNIFORMITY = (0.15, 0.35)
FREEZING_POINT_SHIFT_K = (-0.5, 0.5)
DRYING_RATE_FACTOR = (0.7, 1.4)
REFLECTION_BASE_FRACTION = (0.03, 0.08)
#: light_load_kg as a share of the product's typical mass in a zone
REFLECTION_LIGHT_LOAD_SHARE = (0.01, 0.04)
OUTFEED_OFFSET_K = (0.2, 0.5)
NIR_OFFSET_PCT = (-0.3, 0.3)

#: Operator habits and variation.
TEMPERING_PROFILE_TAIL = (0.35, 0.6)  # last zone's power relative to the first
DRYING_PROFILE_TAIL = (0.5, 0.8)
#: how far past the edge of the specification the habit aims, as a share of the tolerance
HABIT_MARGIN_OF_TOLERANCE = (0.3, 0.8)
HABIT_SPEEDS = 16
HABIT_FRACTIONS = 20
LOT_SPEED_SD = 0.015
LOT_POWER_SD = 0.02
ZONE_POWER_SD = 0.01
STEP_CHANGE_PROBABILITY = 0.35
STEP_CHANGE = (0.04, 0.08)
TWEAK_MEAN_INTERVAL_S = 2700.0
INFEED_LOT_SPREAD_K = 2.0
INFEED_DRIFT_K_PER_H = (-0.3, 0.6)
LOAD_LOT_SPREAD = 0.08
MOISTURE_LOT_SPREAD_PCT = 1.0

#: Noise (standard deviations).
OUTFEED_NOISE_K = 0.15
NIR_NOISE_PCT = 0.15
REFLECTED_NOISE_KW = 0.05
FORWARD_RIPPLE_KW = 0.02
SPEED_RIPPLE_M_PER_MIN = 0.001
INFEED_PIECE_SD_K = 0.15
LOAD_PIECE_SD = 0.01
MOISTURE_PIECE_SD_PCT = 0.08
#: Tunnel air wanders about its set point (control loop, doors, load): a first-order random
#: process of this standard deviation and correlation time. Logged = what the product met.
AIR_WANDER_K = {"tempering": 0.15, "drying": 0.3}
AIR_WANDER_TIME_S = 900.0
RH_WANDER_PCT = 0.5
RH_WANDER_TIME_S = 3600.0
QA_PROBE_SD_K = 0.3
QA_LAB_SD_PCT = 0.1

#: Faults.
DROPOUT_SHARE = 0.002
DUPLICATE_FILE_SHARE = 0.15
DUPLICATE_BLOCK_ROWS = (10, 60)
OUT_OF_ORDER_FILE_SHARE = 0.08
OUT_OF_ORDER_BLOCK_ROWS = (5, 30)
OUT_OF_ORDER_SHIFT_ROWS = (20, 300)
SPIKES = 5
SPIKE_COLUMNS = ("outfeed_temp_mean_c", "outfeed_temp_max_c", "infeed_temp_c")
SPIKE_K = (8.0, 25.0)
STUCK_HOURS = (2.75, 3.25)
STUCK_COLUMN = "outfeed_temp_mean_c"
BELT_STOP_MIN = (8.0, 15.0)
#: Lines on which the belt stop is staged: the line model's drying step is not stable over a
#: sub-step of several minutes (parcels standing still in a hot dryer), so the demo stops a
#: tempering belt, where the step is.
BELT_STOP_KINDS = ("tempering",)
TRIP_MIN = (8.0, 12.0)
UNKNOWN_LINE_ROWS = (4, 8)
UNKNOWN_LINE_ID = "TST-9"

TEXT_COLUMNS = ("timestamp", "line_id", "product_id", "lot_id")
QA_COLUMNS = ("timestamp", "line_id", "product_id", "lot_id", "position", "temp_c", "moisture_pct_wb")
GZIP_LEVEL = 1  # fast; the files are re-read far more often than their size matters

# random streams, one per purpose, so that adding faults never changes the plant's history
_TRUTH, _TIMING, _SETTINGS, _NOISE, _FAULT_PLAN, _FAULT_CELLS, _QA = range(1, 8)


def _rng(seed: int, *key: int) -> np.random.Generator:
    return np.random.default_rng([int(seed), *key])


def _wander(rng: np.random.Generator, n: int, interval_s: float, sd: float, time_s: float) -> np.ndarray:
    """A stationary first-order (Ornstein–Uhlenbeck) process sampled every ``interval_s``."""
    a = float(np.exp(-interval_s / time_s))
    e = rng.normal(0.0, sd, n)
    e[1:] *= np.sqrt(1.0 - a * a)
    return lfilter([1.0], [1.0, -a], e)


# ------------------------------------------------------------------ manifest records
@dataclass
class LineTruth:
    """What is true of a line over the window (sensor offsets: reading − truth)."""

    line_id: str
    sensor_offsets: dict[str, float]
    efficiency_start: float  # mains_to_rf_efficiency at the window start [-]
    efficiency_end: float  # ... at the window end; linear in between
    standby_kw: float
    energy_start_kwh: float
    files: list[str] = field(default_factory=list)
    qa_files: list[str] = field(default_factory=list)  # one per local day with QA readings
    column_layout: dict[str, str] = field(default_factory=dict)  # canonical -> file column name


@dataclass
class ModelTruth:
    """The true parameters of a line × product model and the operators' habit for it."""

    line_id: str
    product_id: str
    values: dict[str, float]  # at the window start (efficiency: see LineTruth)
    reflection: dict[str, float]
    habit: dict = field(default_factory=dict)


@dataclass
class LotRecord:
    """A production lot: its first and last sample, set points, and lot-level conditions."""

    lot_id: str
    line_id: str
    product_id: str
    start: str  # first sample [ISO 8601 with offset]
    end: str  # last sample
    #: {"start", belt speed, zone powers}: the powers as the line applied them (on a line whose
    #: power follows the load, the keyed-in powers scaled to the lot's load)
    setpoints: list[dict] = field(default_factory=list)
    air_temp_c: float | None = None
    infeed_temp_c: float | None = None  # lot base (cold store)
    belt_load_kg_per_m: float | None = None


@dataclass
class FaultRecord:
    """One injected fault: where it is (file, first and last affected sample) and what it is.

    Kinds and their details: ``dropouts`` (``cells``: emptied cells per column, ``total``),
    ``duplicates`` (``rows``: the block written twice), ``out_of_order`` (``rows`` moved to after
    the sample ``moved_after``), ``reexport`` (``rows``; the file repeats day-file rows),
    ``stuck_sensor`` (``column``, frozen ``value``), ``spike`` (``column``, ``value`` written),
    ``belt_stop`` (``lot_id``; speed and all forward powers 0), ``generator_trip`` (``lot_id``,
    ``zone`` 1-based, its forward power 0), ``unknown_line`` (``line_id`` written, ``rows``),
    ``utf8_bom`` (the file starts with a byte-order mark). Columns are canonical names.
    """

    kind: str
    line_id: str
    file: str
    start: str
    end: str
    details: dict = field(default_factory=dict)


@dataclass
class DemoManifest:
    """The truth behind a generated demo data set (see :func:`generate_demo_logs`)."""

    plant: str
    seed: int
    start: str
    days: int
    interval_s: int
    timezone: str
    window_start: str
    window_end: str
    faults_injected: bool
    scenario: dict
    files: list[str]
    lines: dict[str, LineTruth]
    models: list[ModelTruth]
    lots: list[LotRecord]
    faults: list[FaultRecord]

    def to_json(self) -> dict:
        """Plain JSON types (what ``manifest.json`` holds)."""
        return asdict(self)

    @classmethod
    def from_json(cls, data: dict) -> "DemoManifest":
        d = dict(data)
        d["lines"] = {k: LineTruth(**_qa_files_of(v)) for k, v in d["lines"].items()}
        d["models"] = [ModelTruth(**m) for m in d["models"]]
        d["lots"] = [LotRecord(**x) for x in d["lots"]]
        d["faults"] = [FaultRecord(**x) for x in d["faults"]]
        return cls(**d)

    @classmethod
    def read(cls, out_dir) -> "DemoManifest":
        return cls.from_json(json.loads(demo_manifest_path(out_dir).read_text(encoding="utf-8")))

    def model_truth(self, line_id: str, product_id: str) -> ModelTruth:
        for m in self.models:
            if m.line_id == line_id and m.product_id == product_id:
                return m
        raise KeyError(f"no model {line_id} × {product_id} in the manifest")

    def true_model(self, line_id: str, product_id: str) -> FittedModel:
        """The truth as a model record (values at the window start), for recovery tests."""
        m = self.model_truth(line_id, product_id)
        return FittedModel(line_id, product_id, dict(m.values), reflection=ReflectionRelation(**m.reflection),
                           sensor_offsets=dict(self.lines[line_id].sensor_offsets), status="fitted")


def demo_manifest_path(out_dir) -> Path:
    """Where :func:`generate_demo_logs` writes the manifest of ``out_dir``."""
    return Path(out_dir) / MANIFEST_NAME


def _qa_files_of(line_truth: dict) -> dict:
    """A line's truth as stored; manifests of earlier versions named one QA file for the span."""
    d = dict(line_truth)
    if "qa_file" in d:
        old = d.pop("qa_file")
        d.setdefault("qa_files", [old] if old else [])
    return d


# ------------------------------------------------------------------ calendar
@dataclass(frozen=True)
class _Window:
    """Local days of the window and their sample grids (UTC seconds)."""

    tz_name: str
    dates: tuple[date, ...]
    day_start_s: tuple[int, ...]  # local midnights, one more than dates
    interval_s: int

    @classmethod
    def build(cls, tz_name: str, start: date, days: int, interval_s: int) -> "_Window":
        tz = ZoneInfo(tz_name)
        dates = tuple(start + timedelta(days=i) for i in range(days + 1))
        starts = tuple(int(datetime.combine(d, time(0), tz).timestamp()) for d in dates)
        return cls(tz_name, dates[:-1], starts, interval_s)

    def rows(self, d: int) -> np.ndarray:
        return np.arange(self.day_start_s[d], self.day_start_s[d + 1], self.interval_s, dtype=np.int64)

    def row_at(self, d: int, minutes: float) -> int:
        """First sample at or after local wall time ``minutes`` after midnight of day ``d``."""
        wall = datetime.combine(self.dates[d], time(0), ZoneInfo(self.tz_name)) + timedelta(minutes=minutes)
        return int(np.ceil((wall.timestamp() - self.day_start_s[d]) / self.interval_s))

    def iso(self, t_s) -> list[str]:
        """ISO 8601 local times with their UTC offset (unique across a fall-back hour)."""
        t = np.asarray(t_s, dtype=np.int64)
        utc = pd.DatetimeIndex(t.astype("datetime64[s]"), tz="UTC")
        wall_s = utc.tz_convert(self.tz_name).tz_localize(None).values.astype("datetime64[s]").astype(np.int64)
        offset_s = wall_s - t
        local = np.datetime_as_string(wall_s.astype("datetime64[s]"), unit="s")
        suffix = {int(o): f"{'+' if o >= 0 else '-'}{abs(int(o)) // 3600:02d}:{abs(int(o)) % 3600 // 60:02d}"
                  for o in np.unique(offset_s)}
        return [a + suffix[o] for a, o in zip(local.tolist(), offset_s.tolist())]

    @property
    def start_s(self) -> int:
        return self.day_start_s[0]

    @property
    def end_s(self) -> int:
        return self.day_start_s[-1]


@dataclass
class _LotPlan:
    lot_id: str
    product_id: str
    day: int
    row0: int
    row1: int  # exclusive


@dataclass
class _DayPlan:
    blocks: list[tuple[int, int]]
    lots: list[_LotPlan]


def _plan_days(line: Line, window: _Window, rng: np.random.Generator) -> list[_DayPlan]:
    """Shifts and lots (times and products) of one line over the window."""
    products = list(line.products)
    preference = rng.dirichlet(np.full(len(products), 3.0))
    plans = []
    for d, day in enumerate(window.dates):
        shifts = WEEKDAY_SHIFTS_MIN if day.weekday() < 5 else SATURDAY_SHIFTS_MIN if day.weekday() == 5 else ()
        blocks, lots = [], []
        for a_min, b_min in shifts:
            a_min += rng.uniform(0, SHIFT_JITTER_MIN)
            b_min -= rng.uniform(0, SHIFT_JITTER_MIN)
            blocks.append((window.row_at(d, a_min), window.row_at(d, b_min)))
            t_min = a_min + rng.uniform(*START_UP_MIN)
            while True:
                end_min = min(t_min + rng.uniform(*LOT_MIN), b_min)
                if end_min - t_min < MIN_LOT_MIN:
                    break
                product = products[rng.choice(len(products), p=preference)]
                r0, r1 = window.row_at(d, t_min), window.row_at(d, end_min)
                lots.append(_LotPlan(f"{line.line_id}-{day:%y%m%d}-{len(lots) + 1:02d}", product, d, r0, r1))
                t_min = end_min + rng.uniform(*CHANGEOVER_MIN)
        plans.append(_DayPlan(blocks, lots))
    return plans


# ------------------------------------------------------------------ the truth
def _draw_truth(plant: Plant, line: Line, rng: np.random.Generator, ageing: float):
    """True line record and per-product parameter values, drawn around the defaults."""
    eff0 = line.generator_efficiency * (1.0 - rng.uniform(*EFFICIENCY_BELOW_NAMEPLATE))
    aux = line.aux_power_kw * rng.uniform(*AUX_POWER_FACTOR)
    cavity_f = rng.uniform(*CAVITY_LOSS_FACTOR)
    htc_f = rng.uniform(*AIR_HTC_FACTOR)
    heater = line.air_heater_kw_per_k * rng.uniform(*AIR_HEATER_FACTOR)
    offsets = {"outfeed_temp_c": round(float(rng.uniform(*OUTFEED_OFFSET_K)), 3)}
    if line.kind == "drying":
        offsets["outfeed_moisture_pct_wb"] = round(float(rng.uniform(*NIR_OFFSET_PCT)), 3)
    truth = LineTruth(line.line_id, offsets, round(float(eff0), 4), round(float(eff0 * (1.0 - ageing)), 4),
                      round(float(rng.uniform(*STANDBY_KW)), 2), round(float(rng.uniform(2e4, 8e4)), 1),
                      column_layout={})
    models = []
    for pid in line.products:
        product = plant.product(pid)
        base = ModelParameters.defaults(line, product)
        changes = {
            "mains_to_rf_efficiency": truth.efficiency_start, "aux_power_kw": round(float(aux), 3),
            "cavity_loss_equiv_kg": float(base["cavity_loss_equiv_kg"] * cavity_f),
            "air_htc_w_per_m2_k": round(float(base["air_htc_w_per_m2_k"] * htc_f), 3),
            "loss_factor_scale": round(float(rng.uniform(*LOSS_FACTOR_SCALE)), 4),
            "field_nonuniformity": round(float(rng.uniform(*FIELD_NONUNIFORMITY)), 4),
        }
        if line.kind == "tempering":
            changes["freezing_point_shift_k"] = round(float(rng.uniform(*FREEZING_POINT_SHIFT_K)), 3)
        else:
            changes["drying_rate_per_s"] = float(base["drying_rate_per_s"] * rng.uniform(*DRYING_RATE_FACTOR))
            changes["air_heater_kw_per_k"] = round(float(heater), 4)
        zone_mass = product.typical.belt_load_kg_per_m * float(np.mean(line.zone_length_m))
        reflection = {"base_fraction": round(float(rng.uniform(*REFLECTION_BASE_FRACTION)), 4),
                      "light_load_kg": round(float(zone_mass * rng.uniform(*REFLECTION_LIGHT_LOAD_SHARE)), 3)}
        models.append(ModelTruth(line.line_id, pid, dict(base.with_values(**changes).values), reflection))
    return truth, models


# ------------------------------------------------------------------ operators' habits
@dataclass(frozen=True)
class _Habit:
    belt_speed_m_per_min: float
    zone_forward_kw: np.ndarray
    air_temp_c: float
    air_rh_pct: float | None


def _power_step_kw(line: Line) -> float:
    return line.power_step_kw or 0.1


def _round_power(line: Line, zone_kw) -> np.ndarray:
    """Zone powers on the line's set-point step, within ratings and the total cap."""
    step = _power_step_kw(line)
    p = np.clip(np.asarray(zone_kw, dtype=float), 0.0, np.asarray(line.zone_max_kw))
    total = p.sum(axis=-1, keepdims=True)
    p = p * np.minimum(1.0, line.total_power_cap_kw / np.maximum(total, 1e-9))
    return np.round(np.floor(p / step + 1e-9) * step, 6)


def _profile_kw(line: Line, shape: np.ndarray, fractions: np.ndarray) -> np.ndarray:
    p = fractions[:, None] * np.asarray(line.zone_max_kw)[None, :] * shape[None, :]
    total = p.sum(axis=1, keepdims=True)
    return p * np.minimum(1.0, line.total_power_cap_kw / total)


def _habit(model: LineModel, rng: np.random.Generator, air_bias_c: float) -> tuple[_Habit, dict]:
    """The setting operators have settled on: a little more than needed, as fast as they dare.

    "Needed" is the edge of the specification (core at ``target − tolerance``; moisture at
    ``target + tolerance``); the habit aims 30–80 % of the tolerance past it. On a grid of belt
    speeds with one falling power profile, the *true* model at the product's typical inputs
    gives the power level that meets the aim at each speed (interpolated on the smooth core or
    moisture response); the hottest point is then evaluated at exactly those settings, and the
    operators run the fastest speed whose hottest point stays within its limit, or else the
    setting of the grid nearest the aim whose hottest point is within the limit.
    """
    line, product = model.line, model.product
    tg, typ = product.targets, product.typical
    tempering = line.kind == "tempering"
    tail = rng.uniform(*(TEMPERING_PROFILE_TAIL if tempering else DRYING_PROFILE_TAIL))
    shape = np.linspace(1.0, tail, line.zone_count)
    margin = rng.uniform(*HABIT_MARGIN_OF_TOLERANCE)
    if tempering:
        aim = tg.core_temp_c - tg.core_tol_c * (1.0 - margin)
        limit = tg.max_temp_c
    else:
        aim = -(tg.outfeed_moisture_pct_wb + tg.moisture_tol_pct * (1.0 - margin))
        limit = tg.max_temp_c if tg.max_temp_c is not None else 100.0
    air = typ.air_temp_c + air_bias_c
    rh = typ.air_rh_pct if not tempering else None
    speeds = np.linspace(line.belt_speed_min_m_per_min, line.belt_speed_max_m_per_min, HABIT_SPEEDS)
    fractions = np.linspace(0.05, 1.0, HABIT_FRACTIONS)
    grid_kw = _profile_kw(line, shape, fractions)

    def run(speed, zone_kw):
        out = model.steady(belt_speed_m_per_min=speed, zone_forward_kw=zone_kw, air_temp_c=air, air_rh_pct=rh)
        metric = out.core_temp_c if tempering else -out.outfeed_moisture_pct_wb
        return out, metric, out.hottest_temp_c if tempering else out.hottest_during_passage_c

    _, grid_metric, grid_hottest = run(np.repeat(speeds, fractions.size), np.tile(grid_kw, (speeds.size, 1)))
    grid_metric, grid_hottest = grid_metric.reshape(speeds.size, -1), grid_hottest.reshape(speeds.size, -1)
    metric = np.maximum.accumulate(grid_metric, axis=1)  # monotone in power, for interpolation
    reach = (metric[:, 0] <= aim) & (metric[:, -1] >= aim)
    level = np.array([np.interp(aim, metric[i], fractions) if reach[i] else 1.0 for i in range(speeds.size)])
    candidates = _round_power(line, _profile_kw(line, shape, level))
    _, _, hottest = run(np.round(speeds, 2), candidates)
    ok = reach & (hottest <= limit)
    if ok.any():
        i = int(np.flatnonzero(ok)[-1])
        speed, zone_kw = float(np.round(speeds[i], 2)), candidates[i]
    else:
        # the aim costs overheated spots everywhere: operators back off to the grid setting that
        # gets closest to it with the hottest point still within its limit (or the coolest one)
        cool = grid_hottest <= limit
        score = np.where(cool, grid_metric, -np.inf) if cool.any() else -grid_hottest
        i, j = np.unravel_index(int(np.argmax(score)), score.shape)
        speed, zone_kw = float(np.round(speeds[i], 2)), _round_power(line, grid_kw[j])
    check, _, _ = run(speed, zone_kw)
    predicted = {"core_temp_c": check.core_temp_c[0], "hottest_temp_c": check.hottest_temp_c[0],
                 "hottest_during_passage_c": check.hottest_during_passage_c[0],
                 "outfeed_temp_mean_c": check.outfeed_temp_mean_c[0]}
    if not tempering:
        predicted["outfeed_moisture_pct_wb"] = check.outfeed_moisture_pct_wb[0]
    record = {"belt_speed_m_per_min": speed, "zone_forward_kw": [float(x) for x in zone_kw],
              "air_temp_c": round(float(air), 2), "air_rh_pct": rh,
              "aim": round(float(abs(aim)), 3), "aim_met_within_hottest_limit": bool(ok.any()),
              "predicted_at_typical_inputs": {k: round(float(v), 3) for k, v in predicted.items()}}
    return _Habit(speed, zone_kw, float(air), rh), record


# ------------------------------------------------------------------ faults: the plan
@dataclass
class _LineFaults:
    """Which faults one line gets on which day (details are drawn when the file is made)."""

    physical: dict[int, list[dict]] = field(default_factory=dict)  # day -> [{kind, lot, ...}]
    stuck: dict[int, dict] = field(default_factory=dict)
    spikes: dict[int, int] = field(default_factory=dict)
    duplicates: set[int] = field(default_factory=set)
    out_of_order: set[int] = field(default_factory=set)
    unknown_line: set[int] = field(default_factory=set)
    bom: set[int] = field(default_factory=set)
    reexport: set[int] = field(default_factory=set)  # the first of the two days


def _plan_faults(plans: dict[str, list[_DayPlan]], kinds: dict[str, str], interval_s: int,
                 rng: np.random.Generator) -> dict[str, _LineFaults]:
    """Place each fault on a line and day (the belt stop on a tempering line, see BELT_STOP_KINDS)."""
    line_ids = list(plans)
    out = {lid: _LineFaults() for lid in line_ids}
    days = len(next(iter(plans.values())))

    def lots_at_least(minutes, lines=line_ids):
        return [(lid, lot) for lid in lines for day in plans[lid] for lot in day.lots
                if (lot.row1 - lot.row0) * interval_s >= minutes * 60]

    def pick(cands, exclude=()):
        cands = [c for c in cands if c[1].lot_id not in exclude] or cands
        return cands[rng.integers(len(cands))] if cands else None

    long_lots = lots_at_least(90) or lots_at_least(MIN_LOT_MIN)
    stoppable = [lid for lid in line_ids if kinds[lid] in BELT_STOP_KINDS] or line_ids
    used = []
    stop = pick(lots_at_least(90, stoppable) or lots_at_least(MIN_LOT_MIN, stoppable))
    if stop:
        lid, lot = stop
        used.append(lot.lot_id)
        out[lid].physical.setdefault(lot.day, []).append(
            {"kind": "belt_stop", "lot": lot, "at": rng.uniform(0.35, 0.65), "minutes": rng.uniform(*BELT_STOP_MIN)})
    trip = pick(long_lots, used)
    if trip:
        lid, lot = trip
        used.append(lot.lot_id)
        out[lid].physical.setdefault(lot.day, []).append(
            {"kind": "generator_trip", "lot": lot, "at": rng.uniform(0.3, 0.7), "minutes": rng.uniform(*TRIP_MIN),
             "zone_draw": rng.random()})  # zone = int(zone_draw × zone count)
    stuck = pick(lots_at_least(120) or long_lots, used)
    if stuck:
        lid, lot = stuck
        out[lid].stuck[lot.day] = {"lot": lot, "at": rng.uniform(0.3, 0.5), "hours": rng.uniform(*STUCK_HOURS)}
    production = [(lid, d) for lid in line_ids for d in range(days) if plans[lid][d].lots]
    for _ in range(SPIKES if production else 0):
        lid, d = production[rng.integers(len(production))]
        out[lid].spikes[d] = out[lid].spikes.get(d, 0) + 1
    files = [(lid, d) for lid in line_ids for d in range(days)]
    for share, attr in ((DUPLICATE_FILE_SHARE, "duplicates"), (OUT_OF_ORDER_FILE_SHARE, "out_of_order")):
        k = max(1, int(round(share * len(files))))
        for j in rng.choice(len(files), size=min(k, len(files)), replace=False):
            lid, d = files[j]
            getattr(out[lid], attr).add(int(d))
    if production:
        lid, d = production[rng.integers(len(production))]
        out[lid].unknown_line.add(d)
    lid, d = files[rng.integers(len(files))]
    out[lid].bom.add(d)
    pairs = [(lid, d) for lid in line_ids for d in range(days - 1)
             if plans[lid][d].lots and plans[lid][d + 1].lots]
    pairs = pairs or [(lid, d) for lid in line_ids for d in range(days - 1)]
    if pairs:
        lid, d = pairs[rng.integers(len(pairs))]
        out[lid].reexport.add(d)
    return out


# ------------------------------------------------------------------ one line's simulation
@dataclass
class _LineJob:
    plant: Plant
    line_id: str
    line_index: int
    seed: int
    window: _Window
    out_dir: Path
    truth: LineTruth
    models: list[ModelTruth]
    plans: list[_DayPlan]
    faults: _LineFaults | None
    air_bias_c: float


@dataclass
class _LineResult:
    line_id: str
    truth: LineTruth
    models: list[ModelTruth]
    lots: list[LotRecord]
    faults: list[FaultRecord]
    files: list[str]


def log_columns(line: Line) -> list[str]:
    """Canonical numeric columns of a line's process log, in file order."""
    z = range(1, line.zone_count + 1)
    cols = ["belt_speed_m_per_min", "belt_load_kg_per_m", "infeed_temp_c", *(f"zone{i}_forward_kw" for i in z),
            *(f"zone{i}_reflected_kw" for i in z), "air_temp_c", "outfeed_temp_mean_c", "outfeed_temp_min_c",
            "outfeed_temp_max_c", "energy_kwh"]
    if line.kind == "drying":
        cols += ["infeed_moisture_pct_wb", "outfeed_moisture_pct_wb", "air_rh_pct"]
    return cols


def _decimals(column: str) -> int:
    if column == "belt_speed_m_per_min":
        return 3
    if column in ("energy_kwh", "air_rh_pct"):
        return 1
    return 2


class _LineSim:
    """Day-by-day simulation and export of one line (state: air temperature, energy meter)."""

    def __init__(self, job: _LineJob):
        self.job = job
        self.plant = job.plant
        self.line = job.plant.line(job.line_id)
        self.window = job.window
        self.iv = job.window.interval_s
        self.columns = log_columns(self.line)
        self.col = {c: i for i, c in enumerate(self.columns)}
        self.truth = job.truth
        self.settings_rng = _rng(job.seed, _SETTINGS, job.line_index)
        self.qa_rng = _rng(job.seed, _QA, job.line_index)
        self.models: dict[str, LineModel] = {}
        self.habits: dict[str, _Habit] = {}
        for mt in job.models:
            product = self.plant.product(mt.product_id)
            params = ModelParameters.defaults(self.line, product).with_values(**mt.values)
            model = LineModel(self.line, product, params, ReflectionRelation(**mt.reflection))
            self.models[mt.product_id] = model
            self.habits[mt.product_id], mt.habit = _habit(model, self.settings_rng, job.air_bias_c)
        self.line_values = job.models[0].values  # line-scope values (aux, heater) are shared
        self.air_c = self.line.ambient_temp_c
        self.meter_kwh = self.truth.energy_start_kwh
        self.lots: list[LotRecord] = []
        self.fault_records: list[FaultRecord] = []
        self.qa_rows: list[tuple] = []
        self.files: list[str] = []
        self.pending_reexport: list[str] | None = None  # the re-export's first half, until the next day
        self.reexport_name = self.reexport_start = ""
        layout = self.line.csv
        if layout.decimal == layout.separator:
            raise InputError(f"line {self.line.line_id}: csv separator and decimal mark are both "
                             f"'{layout.separator}'; a file written so cannot be read back")
        self.sep, self.decimal = layout.separator, layout.decimal
        self.header = self.sep.join(self.line.source_column(c) for c in (*TEXT_COLUMNS, *self.columns))
        self.truth.column_layout = {c: self.line.source_column(c) for c in (*TEXT_COLUMNS, *self.columns)}

    # -- efficiency drift -------------------------------------------------------------------
    def efficiency(self, t_s) -> np.ndarray:
        w = self.window
        share = (np.asarray(t_s, float) - w.start_s) / (w.end_s - w.start_s)
        return self.truth.efficiency_start + (self.truth.efficiency_end - self.truth.efficiency_start) * share

    # -- the settings of a lot ----------------------------------------------------------------
    def lot_setpoints(self, habit: _Habit, n_rows: int) -> list[tuple[int, float, np.ndarray]]:
        """Set-point segments (first row offset, speed, zone powers) of one lot."""
        line, rng = self.line, self.settings_rng
        vmin, vmax = line.belt_speed_min_m_per_min, line.belt_speed_max_m_per_min
        speed = float(np.clip(np.round(habit.belt_speed_m_per_min * (1 + rng.normal(0, LOT_SPEED_SD)), 2),
                              vmin, vmax))
        power = _round_power(line, habit.zone_forward_kw * (1 + rng.normal(0, LOT_POWER_SD))
                             * (1 + rng.normal(0, ZONE_POWER_SD, line.zone_count)))
        duration_s = n_rows * self.iv
        events = []
        if rng.random() < STEP_CHANGE_PROBABILITY:
            sign = rng.choice([-1.0, 1.0])
            events.append((rng.uniform(0.3, 0.7), "step_speed" if rng.random() < 0.5 else "step_power",
                           sign * rng.uniform(*STEP_CHANGE), 0))
        for _ in range(rng.poisson(duration_s / TWEAK_MEAN_INTERVAL_S)):
            at, is_speed = rng.uniform(0.1, 0.95), rng.random() < 0.3
            events.append((at, "tweak_speed" if is_speed else "tweak_zone", rng.choice([-1.0, 1.0]),
                           int(rng.integers(line.zone_count))))
        segments = [(0, speed, power)]
        for at, kind, amount, zone in sorted(events, key=lambda e: e[0]):
            if kind == "step_speed":
                speed = speed * (1 + amount)
            elif kind == "step_power":
                power = _round_power(line, power * (1 + amount))
            elif kind == "tweak_speed":
                speed = speed + amount * 0.01 * (1 + (zone % 2))
            else:
                power = power.copy()
                power[zone] += amount * max(_power_step_kw(line), 0.2)
                power = _round_power(line, power)
            speed = float(np.clip(np.round(speed, 2), vmin, vmax))
            segments.append((int(at * n_rows), speed, power))
        return segments

    # -- one day --------------------------------------------------------------------------------
    def run_day(self, d: int):
        w, line, iv = self.window, self.line, self.iv
        plan = self.job.plans[d]
        t = w.rows(d)
        n, z = t.size, line.zone_count
        drying = line.kind == "drying"
        noise = _rng(self.job.seed, _NOISE, self.job.line_index, d)
        # full-day noise, always drawn in this order (independent of faults and lots)
        speed_ripple = noise.normal(0, SPEED_RIPPLE_M_PER_MIN, n)
        fwd_ripple = noise.normal(0, FORWARD_RIPPLE_KW, (n, z))
        air_wander = _wander(noise, n, iv, AIR_WANDER_K[line.kind], AIR_WANDER_TIME_S)
        rh_wander = _wander(noise, n, iv, RH_WANDER_PCT, RH_WANDER_TIME_S)
        outfeed_noise = noise.normal(0, OUTFEED_NOISE_K, (3, n))
        refl_noise = noise.normal(0, REFLECTED_NOISE_KW, (n, z))
        nir_noise = noise.normal(0, NIR_NOISE_PCT, n)

        in_shift = np.zeros(n, bool)
        for a, b in plan.blocks:
            in_shift[a:b] = True
        speed_set = np.zeros(n)
        fwd_set = np.zeros((n, z))
        infeed = np.full(n, np.nan)
        load = np.zeros(n)
        moist_in = np.full(n, np.nan)
        air_target = np.full(n, line.ambient_temp_c)
        rh_target = np.full(n, HALL_RH_PCT)
        lot_info = []
        for a, b in plan.blocks:
            block_lots = [lot for lot in plan.lots if a <= lot.row0 < b]
            prev_end = a
            for lot in block_lots:
                info = self.lot_conditions(lot, t, noise)
                r0, r1 = lot.row0, lot.row1
                air_target[prev_end:r1] = info["air_temp_c"]
                if drying:
                    rh_target[prev_end:r1] = info["air_rh_pct"]
                prev_end = r1
                for k, (off, v, p) in enumerate(info["segments"]):
                    end = info["segments"][k + 1][0] if k + 1 < len(info["segments"]) else r1 - r0
                    speed_set[r0 + off:r0 + end] = v
                    fwd_set[r0 + off:r0 + end] = p
                infeed[r0:r1], load[r0:r1] = info["infeed"], info["load"]
                if drying:
                    moist_in[r0:r1] = info["moisture"]
                lot_info.append((lot, info))
            if block_lots:
                air_target[prev_end:b] = air_target[prev_end - 1]
                if drying:
                    rh_target[prev_end:b] = rh_target[prev_end - 1]
        physical = self.apply_physical_faults(d, t, speed_set, fwd_set)

        # logged inputs = what the model is given
        speed = np.where(speed_set > 0, np.round(np.maximum(speed_set + speed_ripple, 0.0), 3), 0.0)
        fwd = np.where(fwd_set > 0, np.round(np.maximum(fwd_set + fwd_ripple, 0.0), 2), 0.0)
        air = np.round(self.lagged_air(t, air_target) + air_wander, 2)
        rh = np.round(np.clip(rh_target + rh_wander, 1.0, 99.0), 1) if drying else None
        infeed, load = np.round(infeed, 2), np.round(load, 2)
        moist_in = np.round(moist_in, 2)

        outfeed = np.full((3, n), np.nan)
        moist_out = np.full(n, np.nan)
        refl_true = np.zeros((n, z))
        electric = np.where(in_shift, self.idle_kw(air, n), self.truth.standby_kw)
        for lot, info in lot_info:
            r = slice(lot.row0, lot.row1)
            model = self.models[lot.product_id]
            passages = model.passages(
                time_s=(t[r] - t[lot.row0]).astype(float), belt_speed_m_per_min=speed[r], zone_forward_kw=fwd[r],
                infeed_temp_c=infeed[r], belt_load_kg_per_m=load[r], air_temp_c=air[r],
                infeed_moisture_pct_wb=moist_in[r] if drying else None, air_rh_pct=rh[r] if drying else None)
            out = model.run(passages, param_overrides={"mains_to_rf_efficiency": self.efficiency(t[r])})
            outfeed[:, r] = (out.outfeed_temp_mean_c, out.outfeed_temp_min_c, out.outfeed_temp_max_c)
            if drying:
                moist_out[r] = out.outfeed_moisture_pct_wb
            refl_true[r] = out.reflected_kw
            electric[r] = out.electric_kw
            self.sample_qa(lot, t[r], out)

        offset = self.truth.sensor_offsets["outfeed_temp_c"]
        mean = outfeed[0] + offset + outfeed_noise[0]
        low = np.minimum(outfeed[1] + offset + outfeed_noise[1], mean)
        high = np.maximum(outfeed[2] + offset + outfeed_noise[2], mean)
        refl = np.where(fwd > 0, np.maximum(refl_true + refl_noise, 0.0), 0.0)
        energy = self.meter_kwh + np.concatenate([[0.0], np.cumsum(electric[:-1] * iv / 3600.0)])
        self.meter_kwh = energy[-1] + electric[-1] * iv / 3600.0

        values = np.empty((n, len(self.columns)))
        c = self.col
        values[:, c["belt_speed_m_per_min"]] = speed
        values[:, c["belt_load_kg_per_m"]] = load
        values[:, c["infeed_temp_c"]] = infeed
        for i in range(z):
            values[:, c[f"zone{i + 1}_forward_kw"]] = fwd[:, i]
            values[:, c[f"zone{i + 1}_reflected_kw"]] = refl[:, i]
        values[:, c["air_temp_c"]] = air
        values[:, c["outfeed_temp_mean_c"]] = mean
        values[:, c["outfeed_temp_min_c"]] = low
        values[:, c["outfeed_temp_max_c"]] = high
        values[:, c["energy_kwh"]] = energy
        if drying:
            values[:, c["infeed_moisture_pct_wb"]] = moist_in
            values[:, c["outfeed_moisture_pct_wb"]] = (moist_out + self.truth.sensor_offsets["outfeed_moisture_pct_wb"]
                                                       + nir_noise)
            values[:, c["air_rh_pct"]] = rh
        for j, name in enumerate(self.columns):
            values[:, j] = np.round(values[:, j], _decimals(name)) + 0.0
        product = np.full(n, "", dtype=object)
        lot_ids = np.full(n, "", dtype=object)
        for lot, _ in lot_info:
            product[lot.row0:lot.row1] = lot.product_id
            lot_ids[lot.row0:lot.row1] = lot.lot_id
        stamps = w.iso(t)
        for lot, info in lot_info:
            self.lots.append(LotRecord(
                lot.lot_id, line.line_id, lot.product_id, stamps[lot.row0], stamps[lot.row1 - 1],
                [{"start": stamps[lot.row0 + off], "belt_speed_m_per_min": v, "zone_forward_kw": [float(x) for x in p]}
                 for off, v, p in info["segments"]],
                air_temp_c=round(info["air_temp_c"], 2), infeed_temp_c=round(info["infeed_base_c"], 2),
                belt_load_kg_per_m=round(info["load_base"], 2)))
        self.export_day(d, t, stamps, values, product, lot_ids, lot_info, physical)

    def lot_conditions(self, lot: _LotPlan, t: np.ndarray, noise: np.random.Generator) -> dict:
        """Set points and infeed conditions of one lot (lot-level draws: settings stream)."""
        product = self.plant.product(lot.product_id)
        habit = self.habits[lot.product_id]
        rng, typ = self.settings_rng, product.typical
        n = lot.row1 - lot.row0
        drying = self.line.kind == "drying"
        segments = self.lot_setpoints(habit, n)
        infeed_base = typ.infeed_temp_c + rng.uniform(-INFEED_LOT_SPREAD_K, INFEED_LOT_SPREAD_K)
        drift = rng.uniform(*INFEED_DRIFT_K_PER_H)
        load_base = typ.belt_load_kg_per_m * (1 + rng.uniform(-LOAD_LOT_SPREAD, LOAD_LOT_SPREAD))
        if self.line.power_follows_load:  # the belt scale trims the keyed-in powers to the lot's load
            scale = load_base / typ.belt_load_kg_per_m
            segments = [(off, v, _round_power(self.line, p * scale)) for off, v, p in segments]
        air_c = habit.air_temp_c + rng.uniform(*((-1.0, 1.0) if drying else (-0.3, 0.3)))
        info = {"segments": segments, "infeed_base_c": infeed_base, "load_base": load_base, "air_temp_c": air_c}
        if drying:
            info["moisture_base"] = typ.infeed_moisture_pct_wb + rng.uniform(-MOISTURE_LOT_SPREAD_PCT,
                                                                              MOISTURE_LOT_SPREAD_PCT)
            info["air_rh_pct"] = (habit.air_rh_pct or HALL_RH_PCT) + rng.uniform(-3.0, 3.0)
        hours = (t[lot.row0:lot.row1] - t[lot.row0]) / 3600.0
        amp, period_h, phase = noise.uniform(0.1, 0.4), noise.uniform(0.5, 1.5), noise.uniform(0, 2 * np.pi)
        info["infeed"] = (infeed_base + drift * hours + amp * np.sin(2 * np.pi * hours / period_h + phase)
                          + noise.normal(0, INFEED_PIECE_SD_K, n))
        phase_l = noise.uniform(0, 2 * np.pi)
        info["load"] = load_base * (1 + 0.02 * np.sin(2 * np.pi * hours / 0.7 + phase_l)) \
            * (1 + noise.normal(0, LOAD_PIECE_SD, n))
        if drying:
            phase_m = noise.uniform(0, 2 * np.pi)
            info["moisture"] = (info["moisture_base"] + 0.2 * np.sin(2 * np.pi * hours / 1.1 + phase_m)
                                + noise.normal(0, MOISTURE_PIECE_SD_PCT, n))
        return info

    def lagged_air(self, t: np.ndarray, target: np.ndarray) -> np.ndarray:
        """Tunnel air following its piecewise-constant set point with a first-order lag."""
        out = np.empty_like(target)
        change = np.flatnonzero(np.diff(target)) + 1
        bounds = np.concatenate([[0], change, [target.size]])
        y = self.air_c
        for a, b in zip(bounds[:-1], bounds[1:]):
            u = target[a]
            out[a:b] = u + (y - u) * np.exp(-(t[a:b] - t[a]) / AIR_LAG_S)
            y = u + (y - u) * np.exp(-((b - a) * self.iv) / AIR_LAG_S)
        self.air_c = float(y)
        return out

    def idle_kw(self, air: np.ndarray, n: int) -> np.ndarray:
        """Mains power of the line in a shift with the generators off (the model at zero power)."""
        model = next(iter(self.models.values()))
        return np.asarray(_electric_kw(model, np.zeros((n, self.line.zone_count)), air, self.line_values), float)

    def apply_physical_faults(self, d, t, speed_set, fwd_set) -> list[tuple[str, int, int, dict]]:
        """Belt stop (speed and all powers 0) and generator trip (one zone 0), before simulation."""
        faults = self.job.faults
        out = []
        if faults is None:
            return out
        for f in faults.physical.get(d, []):
            lot = f["lot"]
            n_lot = lot.row1 - lot.row0
            a = lot.row0 + int(f["at"] * n_lot)
            b = min(a + max(1, int(round(f["minutes"] * 60 / self.iv))), lot.row1 - 1)
            if f["kind"] == "belt_stop":
                speed_set[a:b] = 0.0
                fwd_set[a:b] = 0.0
                out.append(("belt_stop", a, b, {"lot_id": lot.lot_id}))
            else:
                zone = int(f["zone_draw"] * self.line.zone_count)
                fwd_set[a:b, zone] = 0.0
                out.append(("generator_trip", a, b, {"lot_id": lot.lot_id, "zone": zone + 1}))
        return out

    # -- QA samples -------------------------------------------------------------------------------
    def sample_qa(self, lot: _LotPlan, t_lot: np.ndarray, out):
        rng = self.qa_rng
        ok = np.flatnonzero(np.isfinite(out.core_temp_c))
        tempering = self.line.kind == "tempering"
        k = int(rng.integers(1, 4 if tempering else 3))
        if ok.size == 0:
            return
        rows = np.sort(rng.choice(ok, size=min(k, ok.size), replace=False))
        for i in rows:
            if tempering:
                comp = out.compartment_temp_c[i]
                surface = HOT_SHARE * comp[0] + (1 - HOT_SHARE) * comp[1]
                for position, value in (("core", out.core_temp_c[i]), ("surface", surface),
                                        ("edge", out.hottest_temp_c[i])):
                    self.qa_rows.append((int(t_lot[i]), lot, position,
                                         float(value + rng.normal(0, QA_PROBE_SD_K)), np.nan))
            else:
                self.qa_rows.append((int(t_lot[i]), lot, "lab", np.nan,
                                     float(out.outfeed_moisture_pct_wb[i] + rng.normal(0, QA_LAB_SD_PCT))))

    # -- export --------------------------------------------------------------------------------------
    def numeric_text(self, values: np.ndarray) -> list[str]:
        fmt = self.sep.join(f"%.{_decimals(c)}f" for c in self.columns)
        text = "\n".join([fmt % tuple(row) for row in values.tolist()]).replace("nan", "")
        if self.decimal != ".":
            text = text.replace(".", self.decimal)
        return text.split("\n")

    def file_name(self, d: int) -> str:
        return f"{self.line.line_id}_{self.window.dates[d].isoformat()}.csv.gz"

    def export_day(self, d, t, stamps, values, product, lot_ids, lot_info, physical):
        faults = self.job.faults
        name = self.file_name(d)
        lid = self.line.line_id
        rng = _rng(self.job.seed, _FAULT_CELLS, self.job.line_index, d)
        for kind, a, b, details in physical:
            self.fault_records.append(FaultRecord(kind, lid, name, stamps[a], stamps[b - 1], details))
        if faults is not None:
            self.measurement_faults(d, name, stamps, values, lot_info, rng)
        numeric = self.numeric_text(values)
        sep = self.sep
        rows = [sep.join((s, lid, p, lo, x)) for s, p, lo, x in zip(stamps, product, lot_ids, numeric)]
        if self.pending_reexport is not None:
            noon = self.window.row_at(d, 12 * 60)
            self.write_reexport(self.pending_reexport + rows[:noon], stamps[noon - 1])
        if faults is not None and d in faults.reexport and d + 1 < len(self.window.dates):
            noon = self.window.row_at(d, 12 * 60)
            self.pending_reexport = rows[noon:]
            self.reexport_name = f"{lid}_reexport_{self.window.dates[d].isoformat()}T1200.csv.gz"
            self.reexport_start = stamps[noon]
        order = np.arange(len(rows))
        unknown = np.zeros(len(rows), bool)
        if faults is not None:
            order, unknown = self.export_faults(d, name, stamps, lot_info, order, unknown, rng)
        lines = [rows[i] if not u else sep.join((stamps[i], UNKNOWN_LINE_ID, product[i], lot_ids[i], numeric[i]))
                 for i, u in zip(order.tolist(), unknown.tolist())]
        bom = faults is not None and d in faults.bom
        if bom:
            self.fault_records.append(FaultRecord("utf8_bom", lid, name, stamps[0], stamps[-1]))
        self.write(name, lines, bom=bom)

    def measurement_faults(self, d, name, stamps, values, lot_info, rng):
        """Stuck sensor, spikes and dropouts, on the values the historian stored."""
        faults, lid, n = self.job.faults, self.line.line_id, values.shape[0]
        protected = np.zeros(values.shape, bool)
        stuck = faults.stuck.get(d)
        if stuck:
            lot, j = stuck["lot"], self.col[STUCK_COLUMN]
            a = lot.row0 + int(stuck["at"] * (lot.row1 - lot.row0))
            b = min(n, a + int(round(stuck["hours"] * 3600 / self.iv)))
            good = np.flatnonzero(np.isfinite(values[:a, j]))
            if good.size:
                value = values[good[-1], j]
                values[a:b, j] = value
                protected[a:b, j] = True
                self.fault_records.append(FaultRecord("stuck_sensor", lid, name, stamps[a], stamps[b - 1],
                                                      {"column": STUCK_COLUMN, "value": float(value)}))
        lot_rows = np.zeros(n, bool)
        for lot, _ in lot_info:
            lot_rows[lot.row0:lot.row1] = True
        for _ in range(faults.spikes.get(d, 0)):
            column = SPIKE_COLUMNS[rng.integers(len(SPIKE_COLUMNS))]
            j = self.col[column]
            cand = np.flatnonzero(lot_rows & np.isfinite(values[:, j]) & ~protected[:, j])
            if not cand.size:
                continue
            i = int(cand[rng.integers(cand.size)])
            values[i, j] = np.round(values[i, j] + rng.choice([-1.0, 1.0]) * rng.uniform(*SPIKE_K), 2) + 0.0
            protected[i, j] = True
            self.fault_records.append(FaultRecord("spike", lid, name, stamps[i], stamps[i],
                                                  {"column": column, "value": float(values[i, j])}))
        drop = (rng.random(values.shape) < DROPOUT_SHARE) & np.isfinite(values) & ~protected
        values[drop] = np.nan
        counts = {c: int(k) for c, k in zip(self.columns, drop.sum(axis=0)) if k}
        if counts:
            self.fault_records.append(FaultRecord("dropouts", lid, name, stamps[0], stamps[-1],
                                                  {"cells": counts, "total": int(drop.sum())}))

    def export_faults(self, d, name, stamps, lot_info, order, unknown, rng):
        """Duplicated rows, rows out of order, rows of an unknown line: how the file is written."""
        faults, lid, n = self.job.faults, self.line.line_id, order.size
        if d in faults.duplicates:
            k = int(rng.integers(DUPLICATE_BLOCK_ROWS[0], DUPLICATE_BLOCK_ROWS[1] + 1))
            p = int(rng.integers(0, n - k))
            order = np.concatenate([order[:p + k], order[p:p + k], order[p + k:]])
            unknown = np.zeros(order.size, bool)
            self.fault_records.append(FaultRecord("duplicates", lid, name, stamps[p], stamps[p + k - 1], {"rows": k}))
        if d in faults.out_of_order:
            k = int(rng.integers(OUT_OF_ORDER_BLOCK_ROWS[0], OUT_OF_ORDER_BLOCK_ROWS[1] + 1))
            shift = int(rng.integers(OUT_OF_ORDER_SHIFT_ROWS[0], OUT_OF_ORDER_SHIFT_ROWS[1] + 1))
            q = int(rng.integers(0, max(1, order.size - k - shift)))
            block = order[q:q + k]
            rest = np.concatenate([order[:q], order[q + k:]])
            at = min(q + shift, rest.size)
            order = np.concatenate([rest[:at], block, rest[at:]])
            unknown = np.zeros(order.size, bool)
            self.fault_records.append(FaultRecord("out_of_order", lid, name, stamps[block[0]], stamps[block[-1]],
                                                  {"rows": k, "moved_after": stamps[rest[at - 1]]}))
        if d in faults.unknown_line:
            k = int(rng.integers(UNKNOWN_LINE_ROWS[0], UNKNOWN_LINE_ROWS[1] + 1))
            prod = np.concatenate([np.arange(lot.row0, lot.row1) for lot, _ in lot_info]) if lot_info \
                else np.arange(n)
            src = np.sort(rng.choice(prod, size=k, replace=False))
            pos = np.sort(rng.choice(order.size + 1, size=k, replace=True))
            order = np.insert(order, pos, src)
            unknown = np.insert(unknown, pos, True)
            self.fault_records.append(FaultRecord("unknown_line", lid, name, stamps[src[0]], stamps[src[-1]],
                                                  {"line_id": UNKNOWN_LINE_ID, "rows": k}))
        return order, unknown

    def write(self, name: str, lines: list[str], bom=False):
        text = self.header + "\n" + "\n".join(lines) + "\n"
        data = (b"\xef\xbb\xbf" if bom else b"") + text.encode("utf-8")
        (self.job.out_dir / name).write_bytes(gzip.compress(data, compresslevel=GZIP_LEVEL, mtime=0))
        self.files.append(name)

    def write_reexport(self, lines: list[str], end_stamp: str):
        self.write(self.reexport_name, lines)
        self.fault_records.append(FaultRecord("reexport", self.line.line_id, self.reexport_name,
                                              self.reexport_start, end_stamp, {"rows": len(lines)}))
        self.pending_reexport = None

    def write_qa(self) -> list[str]:
        """The QA readings as a plant sends them: one file per line and local day with readings
        (a reading belongs to the day its sample was taken, as the process file of that day)."""
        w, line = self.window, self.line
        times = np.array([r[0] for r in self.qa_rows], dtype=np.int64)
        days = np.searchsorted(np.asarray(w.day_start_s), times, side="right") - 1
        stamps = w.iso(times) if self.qa_rows else []
        header = self.sep.join(line.source_column(c) for c in QA_COLUMNS)
        by_day: dict[int, list[str]] = {}
        for d, s, (_, lot, position, temp, moist) in zip(days.tolist(), stamps, self.qa_rows):
            cells = (s, line.line_id, lot.product_id, lot.lot_id, position,
                     "" if np.isnan(temp) else f"{temp:.1f}", "" if np.isnan(moist) else f"{moist:.2f}")
            if self.decimal != ".":
                cells = cells[:5] + tuple(c.replace(".", self.decimal) for c in cells[5:])
            by_day.setdefault(d, []).append(self.sep.join(cells))
        names = []
        for d in sorted(by_day):
            name = f"{line.line_id}_qa_{w.dates[d].isoformat()}.csv.gz"
            text = header + "\n" + "".join(x + "\n" for x in by_day[d])
            (self.job.out_dir / name).write_bytes(gzip.compress(text.encode("utf-8"), compresslevel=GZIP_LEVEL,
                                                                mtime=0))
            names.append(name)
        return names


def _cost(job: _LineJob) -> float:
    """Relative simulation cost of a line: parcels × sub-steps (a drying step costs about 1.5)."""
    line = job.plant.line(job.line_id)
    rows = sum(lot.row1 - lot.row0 for day in job.plans for lot in day.lots)
    return rows * (6 * line.zone_count + 4) * (1.5 if line.kind == "drying" else 1.0)


def _run_line(job: _LineJob) -> _LineResult:
    sim = _LineSim(job)
    for d in range(len(job.window.dates)):
        sim.run_day(d)
    qa = sim.write_qa()
    sim.truth.files = list(sim.files)
    sim.truth.qa_files = qa
    return _LineResult(job.line_id, sim.truth, job.models, sim.lots, sim.fault_records, sim.files + qa)


# ------------------------------------------------------------------ the entry point
def _parse_start(start) -> date:
    if isinstance(start, datetime):
        return start.date()
    if isinstance(start, date):
        return start
    try:
        return date.fromisoformat(str(start))
    except ValueError:
        raise InputError(f"start '{start}' is not a date; give it as YYYY-MM-DD, e.g. "
                         f"{DEMO_DEFAULTS['start']}") from None


def generate_demo_logs(plant: Plant, out_dir, *, start=DEMO_DEFAULTS["start"], days: int = DEMO_DEFAULTS["days"],
                       interval_s: int = 10, seed: int = 2026, faults: bool = True,
                       workers: int | None = None) -> DemoManifest:
    """Write the demo plant's historian logs, QA files and manifest into ``out_dir``.

    Parameters
    ----------
    plant : Plant
        The plant description (normally ``configs/demo.toml``); every line is simulated.
    out_dir : path
        Folder to write into (created if missing). Existing files of the same names are replaced.
    start : str or date
        First local day (YYYY-MM-DD) in the plant's time zone.
    days : int
        Number of local days [d].
    interval_s : int
        Sample interval of the historian [s]; must divide an hour.
    seed : int
        Seed of every random stream; the same seed gives byte-identical files.
    faults : bool
        Inject the export faults described in the module docstring (recorded in the manifest).
    workers : int, optional
        Processes to simulate lines in parallel (default: one per line, at most the CPU count).
        The output does not depend on it.

    Returns
    -------
    DemoManifest
        Also written as ``manifest.json`` in ``out_dir`` (see :func:`demo_manifest_path`).

    Raises
    ------
    InputError
        For a window or interval that cannot be generated.

    Examples
    --------
    >>> import tempfile
    >>> from optimizer.config import load_plant
    >>> plant, _ = load_plant("configs/demo.toml")
    >>> m = generate_demo_logs(plant, tempfile.mkdtemp(), start="2026-10-05", days=1, interval_s=600,
    ...                        faults=False, workers=1)
    >>> m.files[:2], len(m.lots) > 0
    (['TMP-1_2026-10-05.csv.gz', 'TMP-1_qa_2026-10-05.csv.gz'], True)
    """
    first = _parse_start(start)
    if isinstance(days, bool) or not isinstance(days, int) or days < 1:
        raise InputError(f"days {days!r}: give a whole number of days ≥ 1")
    if isinstance(interval_s, bool) or not isinstance(interval_s, int) or interval_s < 1 or 3600 % interval_s:
        raise InputError(f"interval_s {interval_s!r}: give a whole number of seconds that divides an hour "
                         "(e.g. 5, 10, 30, 60)")
    if UNKNOWN_LINE_ID in plant.lines:
        raise InputError(f"the plant has a line '{UNKNOWN_LINE_ID}', the id the demo uses for rows of an "
                         "unknown line; rename it")
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    window = _Window.build(plant.timezone, first, days, interval_s)
    line_ids = list(plant.lines)
    ageing_line = line_ids[_rng(seed, _TRUTH).integers(len(line_ids))]
    ageing = float(_rng(seed, _TRUTH, 999).uniform(*EFFICIENCY_AGEING))
    plans, truths, models, air_bias = {}, {}, {}, {}
    for k, lid in enumerate(line_ids):
        line = plant.line(lid)
        rng = _rng(seed, _TRUTH, k)
        truths[lid], models[lid] = _draw_truth(plant, line, rng, ageing if lid == ageing_line else 0.0)
        air_bias[lid] = float(rng.uniform(-0.5, 0.5))
        plans[lid] = _plan_days(line, window, _rng(seed, _TIMING, k))
    fault_plan = _plan_faults(plans, {lid: plant.line(lid).kind for lid in line_ids}, interval_s,
                              _rng(seed, _FAULT_PLAN)) if faults else {}
    jobs = [_LineJob(plant, lid, k, seed, window, out, truths[lid], models[lid], plans[lid],
                     fault_plan.get(lid), air_bias[lid]) for k, lid in enumerate(line_ids)]
    workers = min(len(jobs), os.cpu_count() or 1) if workers is None else max(1, int(workers))
    log.info("generating %d day(s) × %d line(s) at %d s into %s (%d worker(s))", days, len(jobs), interval_s,
             out, workers)
    if workers > 1 and len(jobs) > 1:
        # the costliest lines first, so that the last one to finish is a short one
        with ProcessPoolExecutor(max_workers=min(workers, len(jobs))) as pool:
            futures = {job.line_id: pool.submit(_run_line, job) for job in sorted(jobs, key=_cost, reverse=True)}
            results = [futures[job.line_id].result() for job in jobs]
    else:
        results = [_run_line(job) for job in jobs]
    manifest = DemoManifest(
        plant=plant.name, seed=int(seed), start=first.isoformat(), days=days, interval_s=interval_s,
        timezone=plant.timezone, window_start=window.iso([window.start_s])[0],
        window_end=window.iso([window.end_s])[0], faults_injected=bool(faults), scenario=_scenario_summary(),
        files=[f for r in results for f in r.files], lines={r.line_id: r.truth for r in results},
        models=[m for r in results for m in r.models], lots=[x for r in results for x in r.lots],
        faults=[x for r in results for x in r.faults])
    demo_manifest_path(out).write_text(json.dumps(manifest.to_json(), indent=1, ensure_ascii=False) + "\n",
                                       encoding="utf-8")
    log.info("wrote %d file(s), %d lot(s), %d fault record(s)", len(manifest.files), len(manifest.lots),
             len(manifest.faults))
    return manifest


def _scenario_summary() -> dict:
    """The scenario's constants that a reader of the data may want (noise levels, calendar)."""
    return {
        "weekday_shifts_min": [list(s) for s in WEEKDAY_SHIFTS_MIN],
        "saturday_shifts_min": [list(s) for s in SATURDAY_SHIFTS_MIN], "sunday": "idle",
        "lot_minutes": list(LOT_MIN), "changeover_minutes": list(CHANGEOVER_MIN),
        "outfeed_noise_k": OUTFEED_NOISE_K, "nir_noise_pct": NIR_NOISE_PCT,
        "reflected_noise_kw": REFLECTED_NOISE_KW, "forward_ripple_kw": FORWARD_RIPPLE_KW,
        "qa_probe_sd_k": QA_PROBE_SD_K, "qa_lab_sd_pct": QA_LAB_SD_PCT, "air_lag_s": AIR_LAG_S,
        "air_wander_k": dict(AIR_WANDER_K), "air_rh_wander_pct": RH_WANDER_PCT,
        "logged_inputs": "exactly what the model was given (speed, forward power, infeed, load, air, RH)",
        "sensor_offsets": "reading − truth; outfeed_temp_c applies to the mean, min and max of the array",
        "qa_positions": {"core": "mid-thickness", "surface": "mean of the outer layers",
                         "edge": "the hot share of the outer layers", "lab": "oven-dry moisture of a grab sample"},
        "energy_kwh": "integral of mains power (generators / efficiency + auxiliaries + air heater; standby "
                      "outside shifts), rounded to 0.1 kWh",
    }
