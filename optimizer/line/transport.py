"""Belt transport: when did the parcel now at a position pass the positions upstream of it.

The belt moves at a speed that may vary (and stop); a parcel's position is the
distance the belt has travelled since it was loaded. With the cumulative belt
travel D(t) = ∫ v dt, the parcel that is at the outfeed at time t passed the
point s metres from the infeed (tunnel length L) when D = D(t) − (L − s).
"""
from __future__ import annotations

import numpy as np


def belt_travel_m(time_s, belt_speed_m_per_min):
    """Cumulative belt travel [m] at each sample time, speed held from each sample to the next.

    Parameters
    ----------
    time_s : array (n,)
        Sample times [s], strictly increasing.
    belt_speed_m_per_min : array (n,)
        Belt speed [m min⁻¹] at each sample; NaN counts as stopped.

    Returns
    -------
    array (n,) of travel [m], starting at 0.

    >>> belt_travel_m(np.array([0., 60., 120.]), np.array([1., 2., 0.])).tolist()
    [0.0, 1.0, 3.0]
    """
    t = np.asarray(time_s, dtype=float)
    v = np.nan_to_num(np.asarray(belt_speed_m_per_min, dtype=float), nan=0.0).clip(min=0.0) / 60.0
    travel = np.zeros_like(t)
    travel[1:] = np.cumsum(v[:-1] * np.diff(t))
    return travel


def time_at_travel(time_s, travel_m, target_m):
    """Earliest time [s] at which the cumulative travel reached ``target_m`` (NaN before the record).

    ``travel_m`` is non-decreasing (plateaus while the belt stands); the answer
    is interpolated linearly inside the sample interval where the target is crossed.
    """
    t = np.asarray(time_s, dtype=float)
    d = np.asarray(travel_m, dtype=float)
    target = np.asarray(target_m, dtype=float)
    idx = np.searchsorted(d, target, side="left")
    out = np.full(target.shape, np.nan)
    inside = (idx > 0) & (idx < len(d))
    i = idx[inside]
    d0, d1 = d[i - 1], d[i]
    frac = np.where(d1 > d0, (target[inside] - d0) / np.where(d1 > d0, d1 - d0, 1.0), 1.0)
    out[inside] = t[i - 1] + frac * (t[i] - t[i - 1])
    exact_first = idx == 0
    out[exact_first & (target == d[0])] = t[0]
    return out


def passage_times(time_s, belt_speed_m_per_min, positions_m, tunnel_length_m, rows=None):
    """Times at which the parcel leaving the tunnel at each sample time passed each position.

    Parameters
    ----------
    time_s, belt_speed_m_per_min : arrays (n,)
        The sample record (times strictly increasing).
    positions_m : array (k,)
        Positions along the tunnel [m from the infeed], e.g. zone boundaries.
    tunnel_length_m : float
        Infeed to outfeed [m].
    rows : index array, optional
        Only the parcels leaving at these samples (default: every sample).

    Returns
    -------
    array (n or len(rows), k) of times [s]; NaN where the parcel entered before the record starts.
    """
    travel = belt_travel_m(time_s, belt_speed_m_per_min)
    pos = np.asarray(positions_m, dtype=float)
    # a position at (or, by round-off, just past) the outfeed is the parcel's present position
    now = travel if rows is None else travel[rows]
    target = np.minimum(now[:, None] - (tunnel_length_m - pos[None, :]), now[:, None])
    return time_at_travel(time_s, travel, target.ravel()).reshape(target.shape)
