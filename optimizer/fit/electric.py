"""What the line's electricity meter and reflected-power readings say about the line.

The cumulative meter integrates mains power P = Σ P_fwd / η + P_aux + c_heat · (T_air − T_amb)⁺,
which is linear in (1/η, P_aux, c_heat): a robust linear least-squares fit over meter
intervals gives the generator efficiency, the auxiliary load and the heater coefficient
with their standard errors. Reflected power per zone against the load in the zone gives
the reflection relation fraction = b + c / m_zone, linear in (b, c).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.optimize import least_squares

from ..config import Line
from ..line import ReflectionRelation

#: Meter intervals for the energy fit [s]: long enough that the 0.1 kWh resolution of a
#: typical cumulative meter is small against the energy in the interval.
METER_INTERVAL_S = 900.0


@dataclass(frozen=True)
class ElectricFit:
    values: dict[str, float]  # mains_to_rf_efficiency, aux_power_kw, air_heater_kw_per_k
    standard_errors: dict[str, float]
    intervals: int
    residual_kw_rms: float
    identified: dict[str, bool]  # False where the data carry no information (e.g. no heater use)


def meter_intervals(record: pd.DataFrame, line: Line, interval_s: float = METER_INTERVAL_S) -> pd.DataFrame:
    """Mean forward power, air-temperature lift and metered mains power per interval.

    ``record`` holds the line's samples in time order with ``time_s``, ``energy_kwh``,
    ``air_temp_c`` and ``zone{i}_forward_kw``. Intervals with a meter gap, a meter that ran
    backwards (replacement, roll-over) or missing power readings are dropped.
    """
    t = record["time_s"].to_numpy(float)
    meter = record["energy_kwh"].to_numpy(float)
    fwd = np.nan_to_num(record[[f"zone{i + 1}_forward_kw" for i in range(line.zone_count)]].to_numpy(float)).sum(axis=1)
    lift = np.maximum(record["air_temp_c"].to_numpy(float) - line.ambient_temp_c, 0.0)
    lift = np.nan_to_num(lift)
    ok = np.isfinite(meter)
    t, meter, fwd, lift = t[ok], meter[ok], fwd[ok], lift[ok]
    if t.size < 2:
        return pd.DataFrame(columns=["start_s", "forward_kw", "lift_k", "mains_kw"])
    bins = np.floor((t - t[0]) / interval_s).astype(int)
    # segments of equal bin (t is in time order): first and last index of each
    first = np.flatnonzero(np.r_[True, bins[1:] != bins[:-1]])
    last = np.r_[first[1:] - 1, t.size - 1]
    dt = np.diff(t)
    # ∫ power dt over [t_first, t_last] by the left rule, from cumulative sums
    cum_fwd = np.r_[0.0, np.cumsum(fwd[:-1] * dt)]
    cum_lift = np.r_[0.0, np.cumsum(lift[:-1] * dt)]
    inner = dt.copy()
    inner[last[last < dt.size]] = 0.0  # the step from one interval into the next is not inside either
    longest = np.maximum.reduceat(inner, np.minimum(first, dt.size - 1)) if dt.size else np.zeros(first.size)
    span = t[last] - t[first]
    keep = ((last - first + 1) >= 3) & (span >= 0.5 * interval_s) & (meter[last] >= meter[first]) \
        & (longest <= 0.2 * interval_s)  # a gap in the record: the power between is unknown
    f, l_, sp = first[keep], last[keep], span[keep]
    rows = np.column_stack([t[f], (cum_fwd[l_] - cum_fwd[f]) / sp, (cum_lift[l_] - cum_lift[f]) / sp,
                            (meter[l_] - meter[f]) / (sp / 3600.0)]) if f.size else np.zeros((0, 4))
    return pd.DataFrame(rows, columns=["start_s", "forward_kw", "lift_k", "mains_kw"])


def fit_electric(intervals: pd.DataFrame, line: Line) -> ElectricFit | None:
    """Robust fit of mains_kw = forward_kw / η + aux + c_heat · lift (None without data)."""
    if len(intervals) < 8:
        return None
    fwd = intervals["forward_kw"].to_numpy(float)
    lift = intervals["lift_k"].to_numpy(float)
    mains = intervals["mains_kw"].to_numpy(float)
    use_heater = bool(np.mean(lift) > 1.0)  # the heaters only matter with air above ambient
    cols = [fwd, np.ones_like(fwd)] + ([lift] if use_heater else [])
    A = np.column_stack(cols)
    # physical bounds: 1/η ≥ 1 (no generator beats the mains), auxiliaries and heaters ≥ 0
    lo = np.array([1.0, 0.0] + ([0.0] if use_heater else []))
    hi = np.array([1.0 / 0.2, np.inf] + ([np.inf] if use_heater else []))
    x0 = np.clip(np.linalg.lstsq(A, mains, rcond=None)[0], lo, np.minimum(hi, 1e6))
    x0 = np.where(x0 <= lo, lo + 1e-3, x0)
    scale = max(np.median(np.abs(mains - A @ x0)) * 1.4826, 0.05)
    res = least_squares(lambda x: (A @ x - mains) / scale, x0, bounds=(lo, hi), loss="soft_l1", f_scale=2.0)
    x = res.x
    r = A @ x - mains
    dof = max(len(mains) - len(x), 1)
    s2 = float(np.sum((r / scale) ** 2 * (np.abs(r / scale) < 5)) / dof) * scale ** 2
    try:
        cov = np.linalg.inv(A.T @ A) * s2
    except np.linalg.LinAlgError:
        cov = np.full((len(x), len(x)), np.inf)
    inv_eta, aux = x[0], x[1]
    eta = 1.0 / inv_eta if inv_eta > 0 else np.nan
    se_eta = np.sqrt(cov[0, 0]) / inv_eta ** 2 if inv_eta > 0 else np.inf
    values = {"mains_to_rf_efficiency": float(eta), "aux_power_kw": float(aux)}
    ses = {"mains_to_rf_efficiency": float(se_eta), "aux_power_kw": float(np.sqrt(cov[1, 1]))}
    identified = {"mains_to_rf_efficiency": bool(np.ptp(fwd) > 2.0), "aux_power_kw": True}
    if use_heater:
        values["air_heater_kw_per_k"] = float(x[2])
        ses["air_heater_kw_per_k"] = float(np.sqrt(cov[2, 2]))
        identified["air_heater_kw_per_k"] = bool(np.ptp(lift) > 5.0)
    return ElectricFit(values, ses, len(mains), float(np.sqrt(np.mean(r ** 2))), identified)


def fit_reflection(record: pd.DataFrame, line: Line) -> ReflectionRelation | None:
    """Reflected share of forward power against zone load: fraction = b + c / m_zone."""
    fracs, inv_mass = [], []
    load = record["belt_load_kg_per_m"].to_numpy(float)
    for i, length in enumerate(line.zone_length_m, start=1):
        fwd = record.get(f"zone{i}_forward_kw")
        refl = record.get(f"zone{i}_reflected_kw")
        if fwd is None or refl is None:
            continue
        fwd = fwd.to_numpy(float)
        refl = refl.to_numpy(float)
        ok = np.isfinite(fwd) & np.isfinite(refl) & (fwd > 0.02 * line.zone_max_kw[i - 1]) & (load > 0)
        fracs.append(refl[ok] / fwd[ok])
        inv_mass.append(1.0 / (load[ok] * length))
    if not fracs:
        return None
    y = np.concatenate(fracs)
    x = np.concatenate(inv_mass)
    if y.size < 20:
        return None
    A = np.column_stack([np.ones_like(x), x])
    res = least_squares(lambda c: A @ c - y, np.linalg.lstsq(A, y, rcond=None)[0], loss="soft_l1", f_scale=0.02)
    b, c = res.x
    if np.ptp(x) < 0.1 * np.mean(x):  # the load hardly varied: keep a constant share
        return ReflectionRelation(float(np.clip(np.median(y), 0.0, 0.95)), 0.0)
    return ReflectionRelation(float(np.clip(b, 0.0, 0.95)), float(max(c, 0.0)))
