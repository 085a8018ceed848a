"""Figure builders: pure functions from data frames to plotly figures.

No globals, no store access, no app imports: every function takes the data it draws
and returns a ``go.Figure`` whose axes carry units. Colours come from the Okabe–Ito
palette (Okabe & Ito 2008), chosen to stay distinct for common colour-vision deficiencies.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import plotly.graph_objects as go

#: Okabe & Ito (2008), "Color Universal Design": distinguishable with protan/deutan/tritan vision.
PALETTE = {"hot": "#D55E00", "cold": "#0072B2", "core": "#009E73", "mean": "#000000", "moisture": "#CC79A7",
           "limit": "#E69F00", "band": "rgba(86,180,233,0.18)", "practice": "#999999", "chosen": "#D55E00",
           "measured": "#000000", "predicted": "#0072B2", "baseline": "#999999"}
TEMPLATE = go.layout.Template(layout=dict(
    font=dict(family="DejaVu Sans, Arial, sans-serif", size=14), paper_bgcolor="white", plot_bgcolor="white",
    xaxis=dict(showgrid=True, gridcolor="#e5e5e5", zeroline=False, ticks="outside"),
    yaxis=dict(showgrid=True, gridcolor="#e5e5e5", zeroline=False, ticks="outside"),
    margin=dict(l=70, r=20, t=50, b=60), legend=dict(orientation="h", y=-0.2)))


def _figure(title: str, x_title: str, y_title: str) -> go.Figure:
    fig = go.Figure()
    fig.update_layout(template=TEMPLATE, title=title, xaxis_title=x_title, yaxis_title=y_title,
                      uirevision=title)
    return fig


def _band(y0, y1, text, yref="y") -> tuple[dict, dict]:
    """A horizontal band across the plot and its label (plain dicts: one layout update, not one
    validated call per shape, which is what keeps building a figure in milliseconds)."""
    return ({"type": "rect", "xref": "paper", "x0": 0, "x1": 1, "yref": yref, "y0": y0, "y1": y1,
             "fillcolor": PALETTE["band"], "line": {"width": 0}, "layer": "below"},
            {"text": text, "xref": "paper", "x": 0, "xanchor": "left", "yref": yref, "y": y1, "yanchor": "bottom",
             "showarrow": False})


def _hline(y, line: dict, text: str | None = None, yref="y") -> tuple[dict, dict | None]:
    shape = {"type": "line", "xref": "paper", "x0": 0, "x1": 1, "yref": yref, "y0": y, "y1": y, "line": line}
    label = None if text is None else {"text": text, "xref": "paper", "x": 1, "xanchor": "right", "yref": yref,
                                       "y": y, "yanchor": "bottom", "showarrow": False}
    return shape, label


def _vline(x, line: dict) -> dict:
    return {"type": "line", "xref": "x", "x0": x, "x1": x, "yref": "paper", "y0": 0, "y1": 1, "line": line}


def _decorate(fig: go.Figure, shapes: list, labels: list) -> None:
    fig.update_layout(shapes=[*fig.layout.shapes, *shapes],
                      annotations=[*fig.layout.annotations, *[a for a in labels if a is not None]])


def downsample(df: pd.DataFrame, x: str, max_points: int = 2000) -> pd.DataFrame:
    """At most ``max_points`` rows, keeping each bucket's first, lowest and highest values.

    Plots of a year of samples stay fast in the browser while spikes and dips survive.
    """
    if len(df) <= max_points:
        return df
    buckets = max(1, max_points // 3)
    key = np.floor(np.linspace(0, buckets, len(df), endpoint=False)).astype(int)
    numeric = [c for c in df.columns if c != x and pd.api.types.is_numeric_dtype(df[c])]
    keep = {0, len(df) - 1}
    grouped = df.assign(_b=key).reset_index(drop=True)
    for col in numeric[:3]:
        g = grouped.groupby("_b")[col]
        keep.update(g.idxmin().dropna().astype(int).tolist())
        keep.update(g.idxmax().dropna().astype(int).tolist())
    keep.update(grouped.groupby("_b").head(1).index.tolist())
    return grouped.loc[sorted(keep)].drop(columns="_b")


def tunnel_profile_figure(profile: pd.DataFrame, *, zone_edges_m=(), max_temp_c=None, min_temp_c=None,
                          core_band_c=None, moisture_target=None) -> go.Figure:
    """Temperature of the hot, cold and core shares along the tunnel, with the target band and limits.

    ``profile`` has ``position_m``, ``hot_c``, ``cold_c``, ``core_c`` and, for dryers,
    ``moisture_pct_wb`` (drawn on a second axis).
    """
    fig = _figure("Temperature along the tunnel", "position from the infeed [m]", "temperature [°C]")
    shapes, labels = [], []
    if core_band_c is not None:
        band, label = _band(core_band_c[0], core_band_c[1], "core target band")
        shapes.append(band)
        labels.append(label)
    for col, name, dash in (("hot_c", "hot share", "solid"), ("cold_c", "cold share", "dash"),
                            ("core_c", "core (mid-thickness)", "dot")):
        key = col[:-2]
        fig.add_trace(go.Scatter(x=profile["position_m"], y=profile[col], name=name, mode="lines",
                                 line=dict(color=PALETTE[key], dash=dash, width=3)))
    for value, colour, text in ((max_temp_c, PALETTE["limit"], "hottest allowed"),
                                (min_temp_c, PALETTE["cold"], "coldest allowed")):
        if value is not None:
            shape, label = _hline(value, {"color": colour, "dash": "dashdot"}, f"{text} {value:g} °C")
            shapes.append(shape)
            labels.append(label)
    shapes += [_vline(x, {"color": "#bbbbbb", "width": 1}) for x in zone_edges_m]
    if "moisture_pct_wb" in profile:
        fig.add_trace(go.Scatter(x=profile["position_m"], y=profile["moisture_pct_wb"], name="moisture (mean)",
                                 mode="lines", yaxis="y2", line=dict(color=PALETTE["moisture"], width=3)))
        fig.update_layout(yaxis2=dict(title="moisture [% wet basis]", overlaying="y", side="right",
                                      showgrid=False))
        if moisture_target is not None:
            shape, label = _hline(moisture_target, {"color": PALETTE["moisture"], "dash": "dot"},
                                  f"moisture target {moisture_target:g} %", yref="y2")
            shapes.append(shape)
            labels.append(label)
    _decorate(fig, shapes, labels)
    return fig


def parity_figure(df: pd.DataFrame, unit: str = "°C") -> go.Figure:
    """Predicted against measured on held-out data; ``df`` has ``measured``, ``predicted``, ``channel``."""
    fig = _figure("Predicted against measured (held-out lots)", f"measured [{unit}]", f"predicted [{unit}]")
    if len(df):
        lo = float(np.nanmin(df[["measured", "predicted"]].to_numpy()))
        hi = float(np.nanmax(df[["measured", "predicted"]].to_numpy()))
        fig.add_trace(go.Scatter(x=[lo, hi], y=[lo, hi], mode="lines", name="equal",
                                 line=dict(color="#888888", dash="dash")))
    for i, (channel, part) in enumerate(df.groupby("channel", sort=False)):
        colour = list(PALETTE.values())[i % 6]
        fig.add_trace(go.Scatter(x=part["measured"], y=part["predicted"], mode="markers", name=str(channel),
                                 marker=dict(color=colour, size=6, opacity=0.7)))
    return fig


def fit_over_time_figure(df: pd.DataFrame, channel: str, unit: str = "°C", max_points: int = 2000) -> go.Figure:
    """Measured and predicted over time for one channel; ``df`` has ``time``, ``measured``, ``predicted``."""
    part = downsample(df.sort_values("time"), "time", max_points)
    fig = _figure(f"{channel}: measured and predicted over time", "time", f"{channel} [{unit}]")
    fig.add_trace(go.Scatter(x=part["time"], y=part["measured"], mode="markers", name="measured",
                             marker=dict(color=PALETTE["measured"], size=5)))
    fig.add_trace(go.Scatter(x=part["time"], y=part["predicted"], mode="markers", name="predicted",
                             marker=dict(color=PALETTE["predicted"], size=5, symbol="x")))
    return fig


def residuals_figure(df: pd.DataFrame, unit: str = "K", bins: int = 30) -> go.Figure:
    """Distribution of prediction errors per channel (predicted − measured), binned on the server.

    Every channel shares the same bins (numpy's histogram over the pooled errors), so the
    browser draws ``bins`` bars per channel whatever the number of observations.
    """
    fig = _figure("Prediction error on held-out lots", f"predicted − measured [{unit}]", "observations [count]")
    errors = (df["predicted"] - df["measured"]).to_numpy(float) if len(df) else np.zeros(0)
    finite = errors[np.isfinite(errors)]
    if finite.size:
        edges = np.histogram_bin_edges(finite, bins=bins)
        centres, widths = 0.5 * (edges[:-1] + edges[1:]), np.diff(edges)
        for i, (channel, part) in enumerate(df.groupby("channel", sort=False)):
            err = (part["predicted"] - part["measured"]).to_numpy(float)
            counts, _ = np.histogram(err[np.isfinite(err)], bins=edges)
            fig.add_trace(go.Bar(x=centres, y=counts, width=widths, name=str(channel), opacity=0.6,
                                 marker_color=list(PALETTE.values())[i % 6]))
    fig.update_layout(barmode="overlay")
    return fig


def drift_figure(df: pd.DataFrame, *, reference: float | None = None, threshold_pct: float | None = None,
                 parameter: str = "generator efficiency", unit: str = "1") -> go.Figure:
    """A parameter fitted in consecutive windows with its 95 % interval and the alert band.

    ``df`` has ``window_start``, ``value`` and ``stderr``.
    """
    fig = _figure(f"{parameter} over time", "window start", f"{parameter} [{unit}]")
    if reference is not None and threshold_pct is not None:
        d = reference * threshold_pct / 100.0
        band, label = _band(reference - d, reference + d, f"±{threshold_pct:g} % alert band")
        _decorate(fig, [band], [label])
    fig.add_trace(go.Scatter(x=df["window_start"], y=df["value"], mode="lines+markers", name=parameter,
                             error_y=dict(type="data", array=1.96 * df["stderr"], visible=True),
                             line=dict(color=PALETTE["predicted"])))
    return fig


def pareto_figure(front: pd.DataFrame, *, chosen: dict | None = None, practice: dict | None = None) -> go.Figure:
    """Specific energy against throughput of feasible settings, the chosen point and recent practice."""
    fig = _figure("Energy and throughput", "throughput [kg/h]", "specific energy [kWh/t]")
    if len(front):
        f = front.sort_values("throughput_kg_per_h")
        fig.add_trace(go.Scatter(x=f["throughput_kg_per_h"], y=f["specific_energy_kwh_per_t"], mode="lines+markers",
                                 name="best feasible settings", line=dict(color=PALETTE["predicted"])))
    if chosen:
        fig.add_trace(go.Scatter(x=[chosen["throughput_kg_per_h"]], y=[chosen["specific_energy_kwh_per_t"]],
                                 mode="markers", name="recommended",
                                 marker=dict(color=PALETTE["chosen"], size=16, symbol="star")))
    if practice and practice.get("throughput_kg_per_h") is not None:
        fig.add_trace(go.Scatter(x=[practice["throughput_kg_per_h"]], y=[practice["specific_energy_kwh_per_t"]],
                                 mode="markers", name="recent practice (median)",
                                 marker=dict(color=PALETTE["practice"], size=14, symbol="diamond")))
    return fig


def margins_figure(df: pd.DataFrame) -> go.Figure:
    """Margin on every target (positive: met); ``df`` has ``target``, ``margin``, ``unit``."""
    fig = _figure("Margin on each target", "margin (positive = met)", "")
    colours = [PALETTE["core"] if m >= 0 else PALETTE["hot"] for m in df["margin"]]
    fig.add_trace(go.Bar(x=df["margin"], y=[f"{t} [{u}]" for t, u in zip(df["target"], df["unit"])],
                         orientation="h", marker_color=colours, name="margin",
                         text=[f"{m:+.2f}" for m in df["margin"]], textposition="outside"))
    _decorate(fig, [_vline(0, {"color": "#444444"})], [])
    fig.update_yaxes(automargin=True)
    # its own height (a bar per target): in a grid cell beside a short table the graph would
    # otherwise shrink to the cell's height and hide the bars
    fig.update_layout(height=max(240, 150 + 45 * len(df)), showlegend=False)
    return fig


def lots_per_day_figure(df: pd.DataFrame) -> go.Figure:
    """Lots started per day and line; ``df`` has ``date``, ``line_id``, ``lots``."""
    fig = _figure("Lots per day", "date", "lots [count]")
    for i, (line_id, part) in enumerate(df.groupby("line_id", sort=True)):
        fig.add_trace(go.Bar(x=part["date"], y=part["lots"], name=str(line_id),
                             marker_color=list(PALETTE.values())[i % 6]))
    fig.update_layout(barmode="group")
    return fig


def quarantine_figure(df: pd.DataFrame) -> go.Figure:
    """Quarantined rows by reason; ``df`` has ``reason`` and ``rows``."""
    fig = _figure("Rows set aside, by reason", "rows [count]", "")
    d = df.sort_values("rows")
    fig.add_trace(go.Bar(x=d["rows"], y=d["reason"], orientation="h", marker_color=PALETTE["cold"], name="rows"))
    return fig
