"""Figure builders: pure functions, tested without a browser (trace names, axis units, bands)."""
from __future__ import annotations

import numpy as np
import pandas as pd

from dashboard import figures


def test_profile_figure_draws_three_shares_limits_and_units():
    prof = pd.DataFrame({"position_m": [0, 1, 2], "hot_c": [-18, -8, -2], "cold_c": [-18, -10, -5],
                         "core_c": [-18, -12, -6]})
    fig = figures.tunnel_profile_figure(prof, zone_edges_m=[0.5, 1.5], max_temp_c=-1.5, core_band_c=(-5, -3))
    assert [t.name for t in fig.data] == ["hot share", "cold share", "core (mid-thickness)"]
    assert fig.layout.xaxis.title.text == "position from the infeed [m]"
    assert fig.layout.yaxis.title.text == "temperature [°C]"
    shapes = fig.layout.shapes
    assert any(s.type == "rect" and s.y0 == -5 and s.y1 == -3 for s in shapes)
    assert any(s.y0 == -1.5 and s.y1 == -1.5 for s in shapes)


def test_profile_figure_for_dryers_adds_moisture_on_its_own_axis():
    prof = pd.DataFrame({"position_m": [0, 1], "hot_c": [30, 70], "cold_c": [30, 68], "core_c": [30, 66],
                         "moisture_pct_wb": [30, 12]})
    fig = figures.tunnel_profile_figure(prof, moisture_target=12.0)
    assert fig.data[-1].yaxis == "y2"
    assert fig.layout.yaxis2.title.text == "moisture [% wet basis]"


def test_downsample_keeps_extremes_and_bounds_the_size():
    x = np.arange(100_000)
    y = np.sin(x / 500.0)
    y[54_321] = 9.0  # a spike must survive
    df = pd.DataFrame({"time": x, "value": y})
    out = figures.downsample(df, "time", max_points=1500)
    assert len(out) <= 1500 + 2
    assert out["value"].max() == 9.0
    assert out["time"].is_monotonic_increasing


def test_parity_and_residual_figures_name_channels_and_units():
    df = pd.DataFrame({"measured": [1.0, 2.0, 3.0], "predicted": [1.1, 1.9, 3.2],
                       "channel": ["array_mean", "array_mean", "array_max"]})
    fig = figures.parity_figure(df)
    assert [t.name for t in fig.data] == ["equal", "array_mean", "array_max"]
    assert fig.layout.xaxis.title.text == "measured [°C]"
    res = figures.residuals_figure(df, bins=3)
    # errors 0.1, −0.1 (array_mean) and 0.2 (array_max) in three shared bins over [−0.1, 0.2]
    # (numpy.histogram_bin_edges): widths 0.1, the last bin closed, as numpy counts
    np.testing.assert_allclose(res.data[0].x, [-0.05, 0.05, 0.15], atol=1e-12)
    assert list(res.data[0].y) == [1, 0, 1] and list(res.data[1].y) == [0, 0, 1]
    assert [t.name for t in res.data] == ["array_mean", "array_max"]


def test_pareto_drift_margins_and_data_figures():
    front = pd.DataFrame({"throughput_kg_per_h": [900, 1200, 1500], "specific_energy_kwh_per_t": [30, 32, 36]})
    fig = figures.pareto_figure(front, chosen={"throughput_kg_per_h": 1200, "specific_energy_kwh_per_t": 32},
                                practice={"throughput_kg_per_h": 1250, "specific_energy_kwh_per_t": 38})
    assert [t.name for t in fig.data] == ["best feasible settings", "recommended", "recent practice (median)"]
    assert fig.layout.yaxis.title.text == "specific energy [kWh/t]"
    drift = figures.drift_figure(pd.DataFrame({"window_start": ["2026-10-05", "2026-10-12"], "value": [0.8, 0.78],
                                               "stderr": [0.003, 0.003]}), reference=0.8, threshold_pct=3)
    rect = drift.layout.shapes[0]
    assert (rect.y0, rect.y1) == (0.8 - 0.024, 0.8 + 0.024)
    m = figures.margins_figure(pd.DataFrame({"target": ["core", "hottest"], "margin": [0.4, -0.2], "unit": ["K", "K"]}))
    assert list(m.data[0].marker.color) == [figures.PALETTE["core"], figures.PALETTE["hot"]]
    assert m.layout.height >= 240  # its own height: a bar per target stays readable beside a table
    lots = figures.lots_per_day_figure(pd.DataFrame({"date": ["d1", "d1"], "line_id": ["A", "B"], "lots": [3, 4]}))
    assert {t.name for t in lots.data} == {"A", "B"}
    q = figures.quarantine_figure(pd.DataFrame({"reason": ["a", "b"], "rows": [5, 2]}))
    assert list(q.data[0].x) == [2, 5]
