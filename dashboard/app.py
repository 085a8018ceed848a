"""The dashboard shell: navigation, the caution on every page, and a router to the pages.

``create_app(plant, reader)`` builds a Dash app for one plant; pages are plain modules
with ``layout(ctx, **query)`` (deep links such as ``/model?line=TMP-1&product=...``) and
``register(app, ctx)`` for their callbacks. The app only reads the store.
"""
from __future__ import annotations

from pathlib import Path
from urllib.parse import parse_qsl, urlparse

from dash import Dash, Input, Output, State, html, no_update
from flask import request

from optimizer.config import Plant

from .context import DashboardContext
from .layout import notice, shell
from .pages import data as data_page
from .pages import model as model_page
from .pages import recommendation as recommendation_page
from .pages import today as today_page
from .pages import whatif as whatif_page

PAGES = {"/": today_page, "/recommendation": recommendation_page, "/model": model_page,
         "/what-if": whatif_page, "/data": data_page}


def create_app(plant: Plant, reader=None) -> Dash:
    ctx = DashboardContext(plant, reader)
    app = Dash(__name__, title=f"beltwave — {plant.name}", assets_folder=str(Path(__file__).parent / "assets"),
               assets_ignore=r"^plotly-.*\.min\.js$", suppress_callback_exceptions=True, serve_locally=True)
    def render(pathname, search):
        page = PAGES.get(pathname or "/")
        if page is None:
            return notice(f"No page at {pathname}; use the links above.", "warn")
        query = {k: v for k, v in parse_qsl((search or "").lstrip("?")) if k.isidentifier()}
        return page.layout(ctx, **query)

    def initial_layout():
        """The shell with the first page already in it, built from the page the browser asks
        from (the layout request's Referer): a first load needs no routing round trip. Without
        it (no request, no or foreign Referer) the shell comes empty and the router fills it."""
        try:
            ref = urlparse(request.referrer or "")
            if ref.netloc and ref.netloc != request.host:
                raise ValueError("a referrer from another site")
            path = ref.path or "/"
        except (RuntimeError, ValueError):  # outside a request (start-up checks) or foreign
            return shell(plant.name)
        search = f"?{ref.query}" if ref.query else ""
        return shell(plant.name, render(path, search), path + search)

    app.layout = initial_layout

    @app.callback(Output("page", "children"), Output("rendered", "data"), Input("url", "pathname"),
                  Input("url", "search"), State("rendered", "data"))
    def _route(pathname, search, rendered):
        key = (pathname or "/") + (search or "")
        if rendered == key:  # this page is already shown (the first load: sent with the layout)
            return no_update, no_update
        return render(pathname, search), key

    for page in PAGES.values():
        page.register(app, ctx)
    app.server.config["beltwave_context"] = ctx
    return app


def placeholder(title: str, text: str):
    return html.Div([html.H1(title), notice(text)])
