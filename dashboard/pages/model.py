"""Model: fitted parameters with intervals, held-out fit, baselines, identifiability and drift."""
from __future__ import annotations

import pandas as pd
from dash import Input, Output, dcc, html

from .. import figures
from ..layout import notice, register_selector, selector, table

PATH = "/model"
UNITS = {"array_mean": "°C", "array_min": "°C", "array_max": "°C", "moisture": "% wb"}


def content(ctx, line_id, product_id):
    version = ctx.reader.active_version(line_id, product_id) if ctx.reader else None
    if version is None:
        return notice(f"{line_id} × {product_id} has no fitted model yet; predictions use the composition-based "
                      "cold start. The nightly job fits it once enough lots are logged.", "warn", "no-model")
    pay = version["payload"]
    params = [{"name": r["name"], "value": r["value"], "interval": "–" if r.get("low95") is None
               else f"{r['low95']:.4g} … {r['high95']:.4g}", "unit": r["unit"], "meaning": r.get("meaning", "")}
              for r in pay.get("parameters", [])]
    listed = {r["name"] for r in params}
    for name, value in (pay.get("model", {}).get("sensor_offsets") or {}).items():
        if name in listed:
            continue
        params.append({"name": name, "value": value, "interval": "–", "unit": "K" if name.endswith("_k") else "% points",
                       "meaning": "calibration offset of the line's sensor, estimated against QA references"})
    scores = []
    for ch, s in (pay.get("scores", {}).get("model") or {}).items():
        row = {"channel": f"{ch} [{UNITS.get(ch, '')}]", "model": s["mae"], "bias": s["bias"]}
        for base in ("defaults", "linear", "active"):
            b = (pay.get("scores", {}).get(base) or {}).get(ch)
            row[base] = None if b is None else b["mae"]
        scores.append(row)
    hold = pd.DataFrame(pay.get("holdout", []))
    parts = [
        html.Div(f"Active version {version['id']} ({version['status']}), data {str(version.get('data_start_utc'))[:10]} "
                 f"… {str(version.get('data_end_utc'))[:10]}; {version.get('reason', '')}", id="model-version"),
        html.H2("Fitted parameters (95 % intervals)"),
        table(params, [("name", "parameter"), ("value", "value"), ("interval", "95 % interval"), ("unit", "unit"),
                       ("meaning", "meaning")], "model-parameters"),
        html.Div([notice(w, "warn") for w in pay.get("warnings", [])], id="model-warnings"),
        html.H2("Held-out lots: mean absolute error, against the baselines"),
        table(scores, [("channel", "channel"), ("model", "fitted model"), ("bias", "bias"), ("defaults", "default model"),
                       ("linear", "linear regression"), ("active", "previous model")], "model-scores"),
    ]
    if not hold.empty:
        hold["time"] = pd.to_datetime(hold["time"])
        first = hold["channel"].iloc[0]
        parts += [html.Div(className="two-col", children=[
            dcc.Graph(figure=figures.fit_over_time_figure(hold[hold["channel"] == first], first, UNITS.get(first, ""))),
            dcc.Graph(figure=figures.parity_figure(hold, "% wb" if first == "moisture" else "°C"))]),
            dcc.Graph(figure=figures.residuals_figure(hold))]
    drift = pd.DataFrame(pay.get("drift", []))
    if not drift.empty:
        threshold = ctx.plant.sections.get("fit", {}).get("drift_threshold_pct", 3.0)
        drift = drift.rename(columns={"mains_to_rf_efficiency": "value"})
        parts.append(dcc.Graph(figure=figures.drift_figure(drift, reference=float(drift["value"].iloc[0]),
                                                           threshold_pct=threshold)))
    return html.Div(parts)


def layout(ctx, line=None, product=None, **_):
    sel, line_id, product_id = selector("model", ctx.plant, line, product)
    return html.Div([html.H1("Model health"), sel, html.Div(id="model-content",
                                                            children=content(ctx, line_id, product_id))])


def register(app, ctx):
    register_selector(app, ctx, "model")

    @app.callback(Output("model-content", "children"), Input("model-product", "value"), Input("model-line", "value"),
                  prevent_initial_call=True)
    def _content(product_id, line_id):
        if product_id not in ctx.plant.line(line_id).products:
            return notice("choose a product", "info")
        return content(ctx, line_id, product_id)
