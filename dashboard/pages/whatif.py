"""What-if: move belt speed, zone powers and infeed conditions; the active model answers at once."""
from __future__ import annotations

import numpy as np
import pandas as pd
from dash import ALL, Input, Output, State, dcc, html

from optimizer.simulate import check_settings, outcome_record
from optimizer.errors import BeltwaveError

from .. import figures
from ..layout import notice, register_selector, selector, table

PATH = "/what-if"


def _controls(ctx, line_id, product_id, speed=None, powers=None):
    line, product = ctx.plant.line(line_id), ctx.plant.product(product_id)
    typ = product.typical
    speed = speed if speed is not None else round(0.5 * (line.belt_speed_min_m_per_min + line.belt_speed_max_m_per_min), 2)
    powers = powers if powers is not None else [round(0.4 * r, 1) for r in line.zone_max_kw]
    rows = [html.Label("belt speed [m/min]"),
            dcc.Slider(id="wi-speed", min=line.belt_speed_min_m_per_min, max=line.belt_speed_max_m_per_min,
                       step=0.01, value=speed, tooltip={"always_visible": True}, marks=None)]
    for i, (p, rating) in enumerate(zip(powers, line.zone_max_kw)):
        rows += [html.Label(f"zone {i + 1} forward power [kW]"),
                 dcc.Slider(id={"type": "wi-zone-power", "zone": i}, min=0, max=rating, step=0.1, value=p,
                            tooltip={"always_visible": True}, marks=None)]
    rows += [html.Label("infeed temperature [°C]"),
             dcc.Input(id="wi-infeed", type="number", value=typ.infeed_temp_c, step=0.5, debounce=True),
             html.Label("belt load [kg/m]"),
             dcc.Input(id="wi-load", type="number", value=typ.belt_load_kg_per_m, step=0.5, min=0.1, debounce=True),
             html.Label("tunnel air temperature [°C]"),
             dcc.Input(id="wi-air", type="number", value=typ.air_temp_c, step=0.5, debounce=True)]
    return html.Div(rows, className="controls")


def layout(ctx, line=None, product=None, speed=None, **_):
    sel, line_id, product_id = selector("wi", ctx.plant, line, product)
    model = ctx.active_model(line_id, product_id)
    return html.Div([
        html.H1("What-if: predicted outfeed for chosen settings"),
        sel,
        notice(f"model: {'cold start (composition-based defaults)' if model.status == 'cold_start' else 'version ' + str(model.version_id)}",
               id_="wi-model"),
        html.Div(id="wi-controls", children=_controls(ctx, line_id, product_id,
                                                       float(speed) if speed else None)),
        html.Div(className="two-col", children=[
            dcc.Graph(id="wi-profile"),
            html.Div([html.H2("Predicted outfeed"), html.Div(id="wi-outcome")]),
        ]),
    ])


def simulate(ctx, line_id, product_id, speed, powers, infeed, load, air):
    """One model evaluation for the page (a pure function of its inputs and the active model)."""
    line, product = ctx.plant.line(line_id), ctx.plant.product(product_id)
    check_settings(line, float(speed), [float(p) for p in powers])
    fitted = ctx.active_model(line_id, product_id)
    model = fitted.build(line, product)
    out = model.steady(belt_speed_m_per_min=float(speed), zone_forward_kw=np.asarray(powers, float),
                       infeed_temp_c=infeed, belt_load_kg_per_m=load, air_temp_c=air, keep_history=True)
    return outcome_record(model, out, 0)


def outcome_view(ctx, record, product):
    p = record["predicted"]
    rows = [{"quantity": "array reading mean [°C]", "value": p["outfeed_temp_mean_c"]},
            {"quantity": "array reading coldest / hottest [°C]", "value": f"{p['outfeed_temp_min_c']:.2f} / {p['outfeed_temp_max_c']:.2f}"},
            {"quantity": "core at mid-thickness [°C]", "value": p["core_temp_c"]},
            {"quantity": "hottest / coldest point [°C]", "value": f"{p['hottest_temp_c']:.2f} / {p['coldest_temp_c']:.2f}"}]
    if "outfeed_moisture_pct_wb" in p:
        rows.append({"quantity": "outfeed moisture [% wb]", "value": p["outfeed_moisture_pct_wb"]})
    rows += [{"quantity": "specific energy [kWh/t]", "value": record["specific_energy_kwh_per_t"]},
             {"quantity": "throughput [kg/h]", "value": record["throughput_kg_per_h"]}]
    targets = [{"target": t["target"], "met": "yes" if t["met"] else "NO", "margin": f"{t['margin']:+.2f} {t['unit']}"}
               for t in record["targets_met"].values()]
    return html.Div([table(rows, [("quantity", "quantity"), ("value", "value")], "wi-outcome-table"),
                     html.H2("Targets"),
                     table(targets, [("target", "target"), ("met", "met"), ("margin", "margin")], "wi-targets")])


def profile_figure(ctx, record, line, product):
    prof = pd.DataFrame(record["profile"])
    tg = product.targets
    edges = np.cumsum([line.infeed_choke_m, *line.zone_length_m])
    band = (tg.core_temp_c - tg.core_tol_c, tg.core_temp_c + tg.core_tol_c) if tg.core_temp_c is not None else None
    return figures.tunnel_profile_figure(prof, zone_edges_m=edges, max_temp_c=tg.max_temp_c, min_temp_c=tg.min_temp_c,
                                         core_band_c=band, moisture_target=tg.outfeed_moisture_pct_wb)


def register(app, ctx):
    register_selector(app, ctx, "wi")

    @app.callback(Output("wi-controls", "children"), Output("wi-model", "children"),
                  Input("wi-product", "value"), State("wi-line", "value"), prevent_initial_call=True)
    def _rebuild(product_id, line_id):
        model = ctx.active_model(line_id, product_id)
        label = "cold start (composition-based defaults)" if model.status == "cold_start" else f"version {model.version_id}"
        return _controls(ctx, line_id, product_id), f"model: {label}"

    @app.callback(Output("wi-profile", "figure"), Output("wi-outcome", "children"),
                  Input("wi-speed", "value"), Input({"type": "wi-zone-power", "zone": ALL}, "value"),
                  Input("wi-infeed", "value"), Input("wi-load", "value"), Input("wi-air", "value"),
                  State("wi-line", "value"), State("wi-product", "value"))
    def _update(speed, powers, infeed, load, air, line_id, product_id):
        line, product = ctx.plant.line(line_id), ctx.plant.product(product_id)
        if len(powers) != line.zone_count or None in (speed, infeed, load, air):
            return figures.tunnel_profile_figure(pd.DataFrame(columns=["position_m", "hot_c", "cold_c", "core_c"])), \
                notice("enter every value", "warn")
        try:
            record = simulate(ctx, line_id, product_id, speed, powers, infeed, load, air)
        except BeltwaveError as exc:
            return figures.tunnel_profile_figure(pd.DataFrame(columns=["position_m", "hot_c", "cold_c", "core_c"])), \
                notice(str(exc), "warn")
        return profile_figure(ctx, record, line, product), outcome_view(ctx, record, product)
