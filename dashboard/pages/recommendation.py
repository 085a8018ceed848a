"""Recommendation detail: profile along the tunnel, margins, energy-throughput front, recent practice."""
from __future__ import annotations

import numpy as np
import pandas as pd
from dash import Input, Output, State, dcc, html

from optimizer.errors import BeltwaveError

from .. import figures
from ..layout import notice, register_selector, selector, table
from . import whatif

PATH = "/recommendation"


def content(ctx, line_id, product_id):
    if ctx.reader is None:
        return notice("No store yet: run the nightly job first.", "warn", "empty-store")
    recs = ctx.reader.latest_recommendations()
    match = recs[(recs["line_id"] == line_id) & (recs["product_id"] == product_id)] if not recs.empty else recs
    if match.empty:
        return notice(f"No recommendation for {line_id} × {product_id} yet.", "warn", "no-recommendation")
    pay = match.iloc[-1]["payload"]
    line, product = ctx.plant.line(line_id), ctx.plant.product(product_id)
    parts = [html.Div(id="rec-settings", className="card", children=[
        html.Div(pay.get("settings_text", ""), className="setting"),
        html.Div(f"plan date {match.iloc[-1]['plan_date']}; model version {pay.get('model_version') or 'cold start'}; "
                 f"probability in spec {pay.get('probability_in_spec') if pay.get('probability_in_spec') is not None else '–'}"),
    ])]
    if not pay.get("feasible"):
        info = pay.get("infeasible") or {}
        parts.append(notice(f"Infeasible: {info.get('message', 'no setting meets every target')}", "warn", "rec-infeasible"))
    if pay.get("belt_speed_m_per_min") is not None:
        try:
            inputs = pay.get("inputs", {})
            record = whatif.simulate(ctx, line_id, product_id, pay["belt_speed_m_per_min"], pay["zone_forward_kw"],
                                     inputs.get("infeed_temp_c", product.typical.infeed_temp_c),
                                     inputs.get("belt_load_kg_per_m", product.typical.belt_load_kg_per_m),
                                     inputs.get("air_temp_c", product.typical.air_temp_c))
            parts.append(dcc.Graph(id="rec-profile", figure=whatif.profile_figure(ctx, record, line, product)))
        except BeltwaveError as exc:
            parts.append(notice(str(exc), "warn"))
    targets = pay.get("targets") or {}
    rows = [{"target": k, "margin": v.get("margin"), "unit": v.get("unit", "K"), "probability": v.get("probability")}
            for k, v in targets.items()]
    if rows:
        parts.append(html.Div(className="two-col", children=[
            dcc.Graph(figure=figures.margins_figure(pd.DataFrame(rows).fillna({"margin": np.nan}))),
            table(rows, [("target", "target"), ("margin", "margin"), ("unit", "unit"),
                         ("probability", "probability met")], "rec-targets")]))
    front = pd.DataFrame(pay.get("pareto_front") or [])
    practice = pay.get("recent_practice") or {}
    practice_point = None
    if practice.get("specific_energy_kwh_per_t") is not None or practice.get("specific_energy_measured_kwh_per_t") is not None:
        practice_point = {"throughput_kg_per_h": practice.get("throughput_kg_per_h"),
                          "specific_energy_kwh_per_t": practice.get("specific_energy_kwh_per_t",
                                                                    practice.get("specific_energy_measured_kwh_per_t"))}
    if not front.empty and {"throughput_kg_per_h", "specific_energy_kwh_per_t"} <= set(front.columns):
        parts.append(dcc.Graph(id="rec-front", figure=figures.pareto_figure(
            front, chosen={"throughput_kg_per_h": pay.get("throughput_kg_per_h"),
                           "specific_energy_kwh_per_t": pay.get("specific_energy_kwh_per_t")}, practice=practice_point)))
    binding = pay.get("binding_constraints") or []
    if binding:
        parts.append(html.Div([html.H2("What limits this setting"),
                               html.Ul([html.Li(b.get("name", str(b)) + (f": {b['detail']}" if b.get("detail") else ""))
                                        for b in binding])]))
    savings = pay.get("savings") or {}
    if savings:
        parts.append(html.Div([html.H2("Against recent practice"),
                               table([{"quantity": k, "value": v} for k, v in savings.items()
                                      if isinstance(v, (int, float))], [("quantity", "quantity"), ("value", "value")],
                                     "rec-savings")]))
    return html.Div(parts)


def layout(ctx, line=None, product=None, **_):
    sel, line_id, product_id = selector("rec", ctx.plant, line, product)
    return html.Div([html.H1("Recommended settings in detail"), sel,
                     html.Div(id="rec-content", children=content(ctx, line_id, product_id))])


def register(app, ctx):
    register_selector(app, ctx, "rec")

    @app.callback(Output("rec-content", "children"), Input("rec-product", "value"), State("rec-line", "value"),
                  prevent_initial_call=True)
    def _content(product_id, line_id):
        return content(ctx, line_id, product_id)
