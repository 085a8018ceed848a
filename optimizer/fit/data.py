"""From a line's logged samples to the observations a fit compares the model with.

Each observation is a parcel leaving the tunnel at a logged time, with the record of
what it met on its way (transport delay through each zone, held settings) and what
was measured of it: the outfeed array (mean, coldest, hottest probe), the online
moisture meter, and QA probe or laboratory readings taken from the same lot.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..config import Line, Product
from ..errors import DataError
from ..line import LineModel, Passages

#: A logged value may stand in for the settings a parcel met for at most this long [s];
#: longer gaps in the record (dropped rows, historian outages) make the passage unknown.
MAX_HOLD_S = 120.0

#: Channels, what they are compared with, and their nominal noise (σ, in their unit). The
#: fit re-estimates σ from its own residuals; these only start it. Nominal values are
#: typical of needle probes (±0.3 K), NIR meters (±0.3 % wb) and hand probes (common practice).
CHANNELS = {
    "array_mean": ("outfeed_temp_mean_c", 0.3),
    "array_min": ("outfeed_temp_min_c", 0.6),
    "array_max": ("outfeed_temp_max_c", 0.6),
    "moisture": ("outfeed_moisture_pct_wb", 0.3),
    "qa_core": ("core", 0.5),
    "qa_surface": ("surface", 0.7),
    "qa_edge": ("edge", 1.5),
    "qa_lab": ("lab", 0.3),
}
LINE_CHANNELS = ("array_mean", "array_min", "array_max", "moisture")
QA_CHANNELS = ("qa_core", "qa_surface", "qa_edge", "qa_lab")


@dataclass(frozen=True)
class Lot:
    lot_id: str
    product_id: str
    start_s: float
    end_s: float
    rows: int


@dataclass
class Observations:
    """All observations of one product on one line."""

    product_id: str
    passages: Passages
    readings: dict[str, np.ndarray]  # channel -> (N,) reading, NaN where not measured
    lot_index: np.ndarray  # (N,) index into ``lots``
    time_s: np.ndarray  # (N,) outfeed time
    lots: list[Lot]

    def __len__(self):
        return len(self.passages)

    def take(self, mask) -> "Observations":
        idx = np.flatnonzero(mask)
        return Observations(self.product_id, self.passages.take(idx),
                            {k: v[idx] for k, v in self.readings.items()}, self.lot_index[idx],
                            self.time_s[idx], self.lots)

    def take_rows(self, idx) -> "Observations":
        """Observations at these indices (repeats allowed, e.g. for a bootstrap)."""
        idx = np.asarray(idx)
        return Observations(self.product_id, self.passages.take(idx), {k: v[idx] for k, v in self.readings.items()},
                            self.lot_index[idx], self.time_s[idx], self.lots)

    def count(self, channel: str) -> int:
        return int(np.isfinite(self.readings[channel]).sum())


def line_record(samples: pd.DataFrame, line: Line) -> pd.DataFrame:
    """The line's samples in time order, one row per instant, with ``time_s`` [s, UTC epoch].

    Accepts a ``timestamp_utc`` or ``timestamp`` column (ISO text with offsets, or
    datetimes). Short sensor dropouts of the infeed conditions (up to a minute) are
    bridged by the last reading; longer ones stay missing.
    """
    if len(samples) == 0:
        raise DataError(f"line {line.line_id}: no samples to fit")
    df = samples[samples["line_id"] == line.line_id] if "line_id" in samples else samples
    col = "timestamp_utc" if "timestamp_utc" in df else "timestamp"
    ts = pd.to_datetime(df[col], utc=True, format="ISO8601") if df[col].dtype == object else pd.to_datetime(df[col], utc=True)
    df = df.assign(time_s=(ts - pd.Timestamp("1970-01-01", tz="UTC")).dt.total_seconds().to_numpy())
    df = df.sort_values("time_s", kind="stable").drop_duplicates("time_s", keep="first").reset_index(drop=True)
    missing = [c for c in ("belt_speed_m_per_min", "belt_load_kg_per_m", "infeed_temp_c", "air_temp_c")
               if c not in df]
    missing += [f"zone{i + 1}_forward_kw" for i in range(line.zone_count) if f"zone{i + 1}_forward_kw" not in df]
    if missing:
        raise DataError(f"line {line.line_id}: the samples lack column(s) {', '.join(missing)}")
    step = float(np.median(np.diff(df["time_s"].to_numpy()))) if len(df) > 1 else 10.0
    limit = max(1, int(round(60.0 / max(step, 1e-9))))
    for c in ("infeed_temp_c", "belt_load_kg_per_m", "air_temp_c", "infeed_moisture_pct_wb", "air_rh_pct"):
        if c in df:
            df[c] = df[c].ffill(limit=limit)
    return df


def find_lots(record: pd.DataFrame) -> list[Lot]:
    """Lots in time order: runs of rows with the same lot_id and product_id."""
    if "lot_id" not in record or len(record) == 0:
        return []
    lot = record["lot_id"].astype("string")
    prod = record["product_id"].astype("string")
    has = lot.notna() & (lot != "")
    g = record.loc[has].assign(_lot=lot[has], _prod=prod[has])
    agg = g.groupby(["_lot", "_prod"], sort=False)["time_s"].agg(["min", "max", "size"]).reset_index()
    agg = agg.sort_values("min")
    return [Lot(str(r._lot), str(r._prod), float(r["min"]), float(r["max"]), int(r["size"])) for _, r in agg.iterrows()]


def build_observations(record: pd.DataFrame, qa: pd.DataFrame | None, line: Line, product: Product,
                       model: LineModel, lots: list[Lot], *, per_lot: int = 40) -> Observations | None:
    """Observations of ``product``: up to ``per_lot`` outfeed samples per lot plus its QA readings.

    A sample counts only when its parcel entered the tunnel during the same lot (so the
    product in the tunnel is this product) and the record around its passage has no gap
    longer than :data:`MAX_HOLD_S`.
    """
    lots = [l for l in lots if l.product_id == product.product_id]
    if not lots:
        return None
    t = record["time_s"].to_numpy(float)
    has_reading = np.zeros(len(record), bool)
    for c in ("outfeed_temp_mean_c", "outfeed_moisture_pct_wb"):
        if c in record:
            has_reading |= np.isfinite(record[c].to_numpy(float))
    rows, lot_of_row, qa_rows = [], [], []
    for k, lot in enumerate(lots):
        in_lot = np.flatnonzero((t >= lot.start_s) & (t <= lot.end_s) & has_reading)
        if in_lot.size:
            pick = in_lot[np.unique(np.linspace(0, in_lot.size - 1, min(per_lot, in_lot.size)).round().astype(int))]
            rows.append(pick)
            lot_of_row.append(np.full(pick.size, k))
    qa_read = {}
    if qa is not None and len(qa):
        q = qa[(qa["product_id"] == product.product_id)] if "product_id" in qa else qa
        if "line_id" in q:
            q = q[q["line_id"] == line.line_id]
        if len(q):
            col = "timestamp_utc" if "timestamp_utc" in q else "timestamp"
            ts = pd.to_datetime(q[col], utc=True, format="ISO8601") if q[col].dtype == object else pd.to_datetime(q[col], utc=True)
            qt = (ts - pd.Timestamp("1970-01-01", tz="UTC")).dt.total_seconds().to_numpy()
            lot_ids = {l.lot_id: k for k, l in enumerate(lots)}
            qk = q["lot_id"].map(lot_ids).to_numpy()
            ok = pd.notna(qk)
            r = np.clip(np.searchsorted(t, qt, side="right") - 1, 0, len(t) - 1)
            for i in np.flatnonzero(ok):
                qa_rows.append((r[i], int(qk[i]), str(q["position"].iloc[i]),
                                q["moisture_pct_wb"].iloc[i] if q["position"].iloc[i] == "lab" else q["temp_c"].iloc[i]))
    line_rows = np.concatenate(rows) if rows else np.zeros(0, int)
    line_lots = np.concatenate(lot_of_row) if lot_of_row else np.zeros(0, int)
    all_rows = np.concatenate([line_rows, np.array([r[0] for r in qa_rows], int)])
    all_lots = np.concatenate([line_lots, np.array([r[1] for r in qa_rows], int)])
    if all_rows.size == 0:
        return None
    n_line = line_rows.size
    readings = {}
    for ch in LINE_CHANNELS:
        col = CHANNELS[ch][0]
        vals = np.full(all_rows.size, np.nan)
        if col in record:
            vals[:n_line] = record[col].to_numpy(float)[line_rows]
        readings[ch] = vals
    position_of = {"core": "qa_core", "surface": "qa_surface", "edge": "qa_edge", "lab": "qa_lab"}
    for ch in QA_CHANNELS:
        readings[ch] = np.full(all_rows.size, np.nan)
    for j, (_, _, pos, value) in enumerate(qa_rows):
        if pos in position_of and value is not None and np.isfinite(float(value)):
            readings[position_of[pos]][n_line + j] = float(value)
    passages = model.passages(**record_arrays(record, line), rows=all_rows)
    start = np.array([lots[k].start_s for k in all_lots])
    good = passages.traceable & (passages.entry_time_s >= start - 1e-6) & (passages.max_hold_s <= MAX_HOLD_S)
    good &= np.isfinite(passages.infeed_temp_c) & np.isfinite(passages.belt_load_kg_per_m)
    good &= np.isfinite(passages.infeed_water_db) & (passages.zone_mass_kg.min(axis=1) > 0)
    obs = Observations(product.product_id, passages, readings, all_lots, t[all_rows], lots)
    return obs.take(good)


def record_arrays(record: pd.DataFrame, line: Line) -> dict:
    """The record's columns as the keyword arguments of :meth:`LineModel.passages`."""
    z = line.zone_count
    out = dict(
        time_s=record["time_s"].to_numpy(float),
        belt_speed_m_per_min=record["belt_speed_m_per_min"].to_numpy(float),
        zone_forward_kw=record[[f"zone{i + 1}_forward_kw" for i in range(z)]].to_numpy(float),
        infeed_temp_c=record["infeed_temp_c"].to_numpy(float),
        belt_load_kg_per_m=record["belt_load_kg_per_m"].to_numpy(float),
        air_temp_c=record["air_temp_c"].to_numpy(float),
    )
    refl = [f"zone{i + 1}_reflected_kw" for i in range(z)]
    if all(c in record for c in refl):
        out["zone_reflected_kw"] = record[refl].to_numpy(float)
    if "infeed_moisture_pct_wb" in record and line.kind == "drying":
        out["infeed_moisture_pct_wb"] = record["infeed_moisture_pct_wb"].to_numpy(float)
    if "air_rh_pct" in record:
        out["air_rh_pct"] = record["air_rh_pct"].to_numpy(float)
    return out
