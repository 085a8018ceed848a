"""Page placeholder until the store is wired in."""
from __future__ import annotations

from ..layout import notice
from dash import html


def layout(ctx, **_):
    if ctx.reader is None:
        return html.Div([html.H1("today"), notice("No store yet: run the nightly job first (beltwave nightly --config FILE).", "warn", "empty-store")])
    return html.Div([html.H1("today")])


def register(app, ctx):
    return None
