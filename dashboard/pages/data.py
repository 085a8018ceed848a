"""Data: ingested files, rows set aside by reason, lots per day, the job history."""
from __future__ import annotations

from dash import dcc, html

from .. import figures
from ..layout import notice, table

PATH = "/data"


def layout(ctx, **_):
    if ctx.reader is None:
        return html.Div([html.H1("Data"), notice("No store yet: run the nightly job first.", "warn", "empty-store")])
    files = ctx.reader.ingested_files()
    quarantine = ctx.reader.quarantine_summary()
    lots = ctx.reader.lots_per_day()
    runs = ctx.reader.job_runs()
    file_rows = [{"file": str(r.path).rsplit("/", 1)[-1], "rows": r.rows_read, "accepted": r.accepted,
                  "duplicates": r.duplicates, "set aside": r.quarantined, "ingested": str(r.ingested_utc)[:16]}
                 for r in files.tail(200).itertuples()] if not files.empty else []
    run_rows = [{"run": r.id, "kind": r.kind, "started": str(r.started_utc)[:16], "status": r.status,
                 "finished": str(r.finished_utc)[:16]} for r in runs.itertuples()] if not runs.empty else []
    return html.Div([
        html.H1("Data behind the models"),
        html.Div(f"{len(files)} files ingested; {int(files['accepted'].sum()) if not files.empty else 0} rows accepted, "
                 f"{int(files['quarantined'].sum()) if not files.empty else 0} set aside", id="data-totals"),
        html.Div(className="two-col", children=[
            dcc.Graph(figure=figures.lots_per_day_figure(lots)),
            dcc.Graph(figure=figures.quarantine_figure(quarantine)) if not quarantine.empty
            else notice("No rows set aside.", "ok")]),
        html.H2("Job history"),
        table(run_rows, [("run", "run"), ("kind", "job"), ("started", "started (UTC)"), ("status", "outcome"),
                         ("finished", "finished (UTC)")], "data-runs"),
        html.H2("Ingested files (newest 200)"),
        table(file_rows, [("file", "file"), ("rows", "rows read"), ("accepted", "accepted"),
                          ("duplicates", "duplicates skipped"), ("set aside", "set aside"),
                          ("ingested", "ingested (UTC)")], "data-files"),
    ])


def register(app, ctx):
    return None
