"""What operators actually ran for a product recently: median settings and measured specific energy.

The specific energy comes from the line's cumulative energy meter over the mass the belt
carried between consecutive log rows, ΔE / Σ(load × speed × Δt); intervals across a gap in
the log (another product ran, the line stopped) or across a meter reset are left out.
"""
from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np
import pandas as pd

from ..config import Line, Product
from ..errors import DataError, InputError

#: An interval longer than this many typical sampling intervals is a gap, not a run.
MAX_GAP_INTERVALS = 3.0
#: Lots needed before their spread is trusted as the lot-to-lot standard deviation.
MIN_LOTS_FOR_SPREAD = 3


@dataclass(frozen=True)
class RecentPractice:
    """Summary of recent operator runs of one product on one line (medians over running rows)."""

    belt_speed_m_per_min: float
    zone_forward_kw: tuple[float, ...]
    specific_energy_kwh_per_t: float | None = None  # measured: energy meter over carried mass
    belt_load_kg_per_m: float | None = None
    infeed_temp_c: float | None = None
    infeed_temp_sd_c: float | None = None  # lot-to-lot sd of lot means
    belt_load_sd_kg_per_m: float | None = None
    tonnes_per_day: float | None = None  # carried mass per calendar day with running rows
    rows: int = 0
    lots: int = 0

    def to_json(self) -> dict:
        out = {}
        for f in fields(self):
            v = getattr(self, f.name)
            if isinstance(v, tuple):
                v = [round(float(x), 3) for x in v]
            elif isinstance(v, float):
                v = round(v, 4)
            out[f.name] = v
        return out

    @classmethod
    def from_mapping(cls, data: dict, line: Line) -> "RecentPractice":
        """From a plain dict (e.g. ``to_json`` output); raises InputError naming a missing or bad key."""
        allowed = {f.name for f in fields(cls)}
        unknown = set(data) - allowed
        if unknown:
            raise InputError(f"recent_practice: unknown key(s) {', '.join(sorted(unknown))}; "
                             f"allowed: {', '.join(sorted(allowed))}")
        for key in ("belt_speed_m_per_min", "zone_forward_kw"):
            if data.get(key) is None:
                raise InputError(f"recent_practice: '{key}' is missing")
        powers = tuple(float(x) for x in data["zone_forward_kw"])
        if len(powers) != line.zone_count:
            raise InputError(f"recent_practice.zone_forward_kw has {len(powers)} value(s); line "
                             f"{line.line_id} has {line.zone_count} zones")
        values = {k: data.get(k) for k in allowed}
        values["zone_forward_kw"] = powers
        values["belt_speed_m_per_min"] = float(data["belt_speed_m_per_min"])
        values["rows"] = int(data.get("rows") or 0)
        values["lots"] = int(data.get("lots") or 0)
        return cls(**values)


def recent_practice_from_samples(samples: pd.DataFrame, line: Line, product: Product) -> RecentPractice:
    """Median settings and measured specific energy of recent runs, from canonical log rows.

    Parameters
    ----------
    samples : DataFrame
        Canonical log columns: ``belt_speed_m_per_min`` [m min⁻¹] and ``zone{i}_forward_kw``
        [kW] (required); ``timestamp`` (or the store's ``timestamp_utc``), ``energy_kwh``
        (cumulative meter) [kWh] and
        ``belt_load_kg_per_m`` [kg m⁻¹] for the specific energy; ``infeed_temp_c`` [°C];
        ``lot_id`` for lot-to-lot spreads; ``line_id`` and ``product_id`` to select rows.
    line, product
        Rows of other lines or products are left out when those columns are present.

    Returns
    -------
    RecentPractice
        Medians over the *running* rows (belt moving and some forward power on).

    Raises
    ------
    DataError
        A required column is missing or no running row of this line × product remains.

    Examples
    --------
    >>> import pandas as pd
    >>> from optimizer.config import load_plant
    >>> plant, _ = load_plant("configs/demo.toml")
    >>> line = plant.line("TMP-2")
    >>> rows = pd.DataFrame({"timestamp": pd.date_range("2024-03-01", periods=4, freq="min", tz="UTC"),
    ...                      "belt_speed_m_per_min": 1.0, "belt_load_kg_per_m": 30.0,
    ...                      "zone1_forward_kw": 15.0, "zone2_forward_kw": 15.0, "zone3_forward_kw": 10.0,
    ...                      "energy_kwh": [0.0, 0.8, 1.6, 2.4]})
    >>> practice = recent_practice_from_samples(rows, line, plant.product("HAKE-FLT-BLK"))
    >>> round(practice.specific_energy_kwh_per_t, 2)  # 0.8 kWh per 30 kg/m × 1 m/min × 1 min
    26.67
    """
    z = line.zone_count
    zone_cols = [f"zone{i}_forward_kw" for i in range(1, z + 1)]
    missing = [c for c in ["belt_speed_m_per_min", *zone_cols] if c not in samples.columns]
    if missing:
        raise DataError(f"recent runs of {line.line_id} × {product.product_id}: column(s) "
                        f"{', '.join(missing)} missing; the canonical log has belt_speed_m_per_min and "
                        f"zone1…zone{z}_forward_kw")
    df = samples
    if "timestamp" not in df.columns and "timestamp_utc" in df.columns:  # as the store returns them
        df = df.rename(columns={"timestamp_utc": "timestamp"})
    if "line_id" in df.columns:
        df = df[df["line_id"] == line.line_id]
    if "product_id" in df.columns:
        df = df[df["product_id"] == product.product_id]
    if "timestamp" in df.columns:
        df = df.assign(timestamp=pd.to_datetime(df["timestamp"], utc=True)).sort_values("timestamp")
    speed = pd.to_numeric(df["belt_speed_m_per_min"], errors="coerce")
    power = df[zone_cols].apply(pd.to_numeric, errors="coerce")
    running = (speed > 0) & (power.sum(axis=1) > 0) & power.notna().all(axis=1)
    if not running.any():
        raise DataError(f"recent runs of {line.line_id} × {product.product_id}: no running row (belt "
                        "moving with forward power on) among the samples given")
    run = df[running]

    def median(col):
        if col not in run.columns:
            return None
        v = pd.to_numeric(run[col], errors="coerce").median()
        return None if pd.isna(v) else float(v)

    energy, tonnes_per_day = _measured_energy(df, running)
    temp_sd, load_sd, lots = _lot_spreads(run)
    return RecentPractice(
        belt_speed_m_per_min=float(speed[running].median()),
        zone_forward_kw=tuple(float(x) for x in power[running].median()),
        specific_energy_kwh_per_t=energy, belt_load_kg_per_m=median("belt_load_kg_per_m"),
        infeed_temp_c=median("infeed_temp_c"), infeed_temp_sd_c=temp_sd, belt_load_sd_kg_per_m=load_sd,
        tonnes_per_day=tonnes_per_day, rows=int(running.sum()), lots=lots)


def _measured_energy(df: pd.DataFrame, running: pd.Series) -> tuple[float | None, float | None]:
    """Meter energy over carried mass [kWh t⁻¹], and tonnes per production day; None if unknown."""
    if not {"timestamp", "energy_kwh", "belt_load_kg_per_m"} <= set(df.columns) or len(df) < 2:
        return None, None
    minutes = df["timestamp"].diff().dt.total_seconds().to_numpy() / 60.0
    d_energy = pd.to_numeric(df["energy_kwh"], errors="coerce").diff().to_numpy()
    speed = pd.to_numeric(df["belt_speed_m_per_min"], errors="coerce").to_numpy()
    load = pd.to_numeric(df["belt_load_kg_per_m"], errors="coerce").to_numpy()
    on = running.to_numpy()
    typical = np.nanmedian(minutes[1:]) if np.isfinite(minutes[1:]).any() else np.nan
    ok = np.zeros(len(df), dtype=bool)
    ok[1:] = on[1:] & on[:-1] & (minutes[1:] > 0) & (minutes[1:] <= MAX_GAP_INTERVALS * typical) \
        & (d_energy[1:] >= 0) & np.isfinite(load[:-1]) & (load[:-1] > 0)
    if not ok.any():
        return None, None
    mass_kg = np.zeros(len(df))
    mass_kg[1:] = load[:-1] * speed[:-1] * minutes[1:]  # the earlier row's settings held over the interval
    total_kg = float(mass_kg[ok].sum())
    if total_kg <= 0:
        return None, None
    days = df["timestamp"][ok].dt.date.nunique()
    return float(d_energy[ok].sum()) / total_kg * 1000.0, total_kg / 1000.0 / max(days, 1)


def _lot_spreads(run: pd.DataFrame) -> tuple[float | None, float | None, int]:
    if "lot_id" not in run.columns:
        return None, None, 0
    lots = run.dropna(subset=["lot_id"]).groupby("lot_id")
    n = int(lots.ngroups)
    if n < MIN_LOTS_FOR_SPREAD:
        return None, None, n

    def spread(col):
        if col not in run.columns:
            return None
        v = lots[col].mean().std(ddof=1)
        return None if pd.isna(v) else float(v)

    return spread("infeed_temp_c"), spread("belt_load_kg_per_m"), n
