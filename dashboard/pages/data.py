"""Data: ingested files, rows set aside by reason, lots per day, the job history."""
from __future__ import annotations

from dash import dcc, html

from .. import figures
from ..layout import notice, table

PATH = "/data"
#: Rows of the file and run tables on the page (every table cell is a browser component: a year
#: of nightly runs in full would make the page slow to draw; the totals above cover everything).
FILES_SHOWN = 24
RUNS_SHOWN = 14


def layout(ctx, **_):
    if ctx.reader is None:
        return html.Div([html.H1("Data"), notice("No store yet: run the nightly job first.", "warn", "empty-store")])
    files = ctx.reader.ingested_files()
    quarantine = ctx.reader.quarantine_summary()
    lots = ctx.reader.lots_per_day()
    runs = ctx.reader.job_runs()
    file_rows = [{"file": str(r.path).rsplit("/", 1)[-1], "rows": r.rows_read, "accepted": r.accepted,
                  "duplicates": r.duplicates, "set aside": r.quarantined, "ingested": str(r.ingested_utc)[:16]}
                 for r in files.tail(FILES_SHOWN).iloc[::-1].itertuples()] if not files.empty else []
    newest_runs = runs.sort_values("id").tail(RUNS_SHOWN).iloc[::-1] if not runs.empty else runs
    run_rows = [{"run": r.id, "kind": r.kind, "started": str(r.started_utc)[:16], "status": r.status,
                 "finished": str(r.finished_utc)[:16]} for r in newest_runs.itertuples()]
    return html.Div([
        html.H1("Data behind the models"),
        html.Div(f"{len(files)} files ingested; {int(files['accepted'].sum()) if not files.empty else 0} rows accepted, "
                 f"{int(files['quarantined'].sum()) if not files.empty else 0} set aside", id="data-totals"),
        html.Div(className="two-col", children=[
            dcc.Graph(figure=figures.lots_per_day_figure(lots)),
            dcc.Graph(figure=figures.quarantine_figure(quarantine)) if not quarantine.empty
            else notice("No rows set aside.", "ok")]),
        html.H2(f"Job history (newest {min(len(runs), RUNS_SHOWN)} of {len(runs)} runs)"),
        table(run_rows, [("run", "run"), ("kind", "job"), ("started", "started (UTC)"), ("status", "outcome"),
                         ("finished", "finished (UTC)")], "data-runs"),
        html.H2(f"Ingested files (newest {min(len(files), FILES_SHOWN)} of {len(files)})"),
        table(file_rows, [("file", "file"), ("rows", "rows read"), ("accepted", "accepted"),
                          ("duplicates", "duplicates skipped"), ("set aside", "set aside"),
                          ("ingested", "ingested (UTC)")], "data-files"),
    ])


def register(app, ctx):
    return None
