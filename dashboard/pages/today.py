"""Today: for every line, the last nightly run, the active models and the day's settings."""
from __future__ import annotations

import pandas as pd
from dash import dcc, html

from ..layout import notice

PATH = "/"


def _age(ts) -> str:
    if ts is None or pd.isna(ts):
        return "–"
    delta = pd.Timestamp.now(tz="UTC") - pd.Timestamp(ts)
    return f"{delta.days} d {delta.seconds // 3600} h"


def _run_block(run):
    if run is None:
        return notice("The nightly job has not run yet: run `beltwave nightly --config FILE`.", "warn", "no-run")
    summary = run.get("summary") or {}
    warnings = summary.get("warnings", [])
    kind = {"ok": "ok", "warning": "warn", "failed": "warn"}.get(run.get("status"), "info")
    return html.Div(id="last-run", className=f"notice notice-{kind}", children=[
        html.B(f"Last nightly run: {str(run.get('started_utc'))[:16]} UTC — {run.get('status')}"),
        html.Ul([html.Li(w) for w in warnings[:8]]) if warnings else None])


def _product_row(ctx, line, pid, recs):
    rec = recs.get((line.line_id, pid))
    version = ctx.reader.active_version(line.line_id, pid)
    model_text = "cold start" if version is None else f"v{version['id']} ({_age(version.get('activated_utc'))} old)"
    row = {"product": pid, "model": model_text}
    if rec is None:
        row.update({"speed": "–", "powers": "no recommendation yet"})
        return row
    pay = rec["payload"]
    pred = pay.get("predicted", {})
    main = pred.get("outfeed_moisture_pct_wb") if line.kind == "drying" else pred.get("core_temp_c")
    saving = (pay.get("savings") or {}).get("saving_kwh_per_t")
    row.update({
        "speed": pay.get("belt_speed_m_per_min"), "powers": pay.get("zone_forward_kw"),
        "outfeed": main, "probability": pay.get("probability_in_spec"),
        "energy": pay.get("specific_energy_kwh_per_t"), "saving": saving,
        "feasible": "yes" if pay.get("feasible") else "NO",
        "link": dcc.Link("details", href=f"/recommendation?line={line.line_id}&product={pid}")})
    return row


def layout(ctx, **_):
    if ctx.reader is None:
        return html.Div([html.H1("Today"), notice("No store yet: run the nightly job first "
                                                  "(beltwave nightly --config FILE).", "warn", "empty-store")])
    recs_df = ctx.reader.latest_recommendations()
    recs = {(r.line_id, r.product_id): r._asdict() for r in recs_df.itertuples()} if not recs_df.empty else {}
    run = ctx.reader.last_run()
    alerts = ctx.reader.alerts(run_id=int(run["id"])) if run is not None else pd.DataFrame()
    cards = []
    for line in ctx.plant.lines.values():
        rows = [_product_row(ctx, line, pid, recs) for pid in line.products]
        unit = "% wb" if line.kind == "drying" else "°C core"
        cols = [("product", "product"), ("speed", "belt speed [m/min]"), ("powers", "zone forward power [kW]"),
                ("outfeed", f"predicted outfeed [{unit}]"), ("probability", "probability in spec"),
                ("energy", "specific energy [kWh/t]"), ("saving", "saving vs recent practice [kWh/t]"),
                ("feasible", "feasible"), ("model", "active model"), ("link", "")]
        body = [html.H2(f"{line.line_id} — {line.kind}, {line.frequency_hz / 1e6:g} MHz, {line.zone_count} zones"),
                _table_with_links(rows, cols, f"today-{line.line_id}")]
        line_alerts = alerts[alerts["line_id"] == line.line_id] if not alerts.empty else alerts
        if not line_alerts.empty:
            body.append(html.Ul([html.Li(m) for m in line_alerts["message"]], className="alerts"))
        cards.append(html.Div(body, className="card"))
    return html.Div([html.H1("Today: recommended settings per line"), _run_block(run), html.Div(cards, className="cards")])


def _table_with_links(rows, cols, table_id):
    head = html.Thead(html.Tr([html.Th(t) for _, t in cols]))
    body = []
    for r in rows:
        cells = []
        for key, _ in cols:
            v = r.get(key)
            if isinstance(v, float):
                v = f"{v:.3f}" if key == "probability" else f"{v:,.2f}"
            elif isinstance(v, (list, tuple)):
                v = " / ".join(f"{x:g}" for x in v)
            cells.append(html.Td(v if v is not None else "–", **{"data-key": key}))
        body.append(html.Tr(cells))
    return html.Table([head, html.Tbody(body)], className="grid", id=table_id)


def register(app, ctx):
    return None
