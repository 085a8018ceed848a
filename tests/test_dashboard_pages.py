"""Page layouts without a browser: an empty store, a line without a model, the caution everywhere."""
from __future__ import annotations

from pathlib import Path

from dashboard.app import PAGES, create_app
from dashboard.layout import CAUTION
from optimizer.config import load_plant

ROOT = Path(__file__).resolve().parents[1]
PLANT, _ = load_plant(ROOT / "configs" / "demo.toml")


def _text(component) -> str:
    """All text inside a Dash component tree."""
    if component is None:
        return ""
    if isinstance(component, (str, int, float)):
        return str(component)
    if isinstance(component, (list, tuple)):
        return " ".join(_text(c) for c in component)
    return _text(getattr(component, "children", None))


def test_every_page_works_on_an_empty_store_and_says_what_to_do():
    app = create_app(PLANT, reader=None)
    ctx = app.server.config["beltwave_context"]
    assert CAUTION in _text(app.layout())
    for path, page in PAGES.items():
        text = _text(page.layout(ctx))
        if path == "/what-if":  # works from the cold-start model without any store
            assert "cold start" in text
        elif path == "/model":
            assert "no fitted model yet" in text
        else:
            assert "run the nightly job first" in text.lower(), path


def test_the_shell_links_every_page_and_listens_only_on_this_machine_by_default():
    from optimizer.cli import build_parser

    app = create_app(PLANT, reader=None)
    header = next(c for c in app.layout().children if getattr(c, "className", "") == "top")
    hrefs = [c.href for c in header.children[1].children]
    assert hrefs == list(PAGES)
    args = build_parser().parse_args(["serve", "--config", "x.toml"])
    assert args.host == "127.0.0.1"


def test_the_first_load_brings_its_page_and_a_foreign_referrer_gets_the_bare_shell():
    """The layout request carries the page in its Referer: the server sends that page with the
    shell (no routing round trip); without a Referer or from another site, the router fills it."""
    app = create_app(PLANT, reader=None)

    def page_of(referrer):
        headers = {"Referer": referrer} if referrer else {}
        with app.server.test_request_context("/_dash-layout", headers=headers):
            layout = app.layout()
        main = next(c for c in layout.children if getattr(c, "id", None) == "page")
        rendered = next(c for c in layout.children if getattr(c, "id", None) == "rendered")
        return _text(main), rendered.data

    text, rendered = page_of("http://localhost/data")
    assert "Data" in text and "run the nightly job first" in text.lower() and rendered == "/data"
    text, rendered = page_of("http://localhost/model?line=TMP-2")
    assert "no fitted model yet" in text and rendered == "/model?line=TMP-2"
    assert page_of("http://elsewhere.example/data") == ("", None)
    assert page_of(None)[1] == "/"  # no Referer: the home page, as a browser would get from "/"


def test_the_vendored_plotly_bundle_matches_plotly_and_draws_every_trace_type_we_use():
    """The partial plotly.js bundle (dashboard/assets/vendor) must be the plotly.js version the
    installed plotly package writes figures for, and hold every trace type the dashboard builds."""
    import re

    import plotly.graph_objects as go
    from plotly.basedatatypes import BaseTraceType
    from plotly.offline import get_plotlyjs_version

    bundle = (ROOT / "dashboard" / "assets" / "vendor" / "plotly-basic.min.js").read_text(encoding="utf-8")
    version = re.search(r"plotly\.js \(basic - minified\) v(\S+)", bundle[:300]).group(1)
    assert version == get_plotlyjs_version(), "update the vendored bundle (see dashboard/assets/vendor/README.md)"
    registered = set(re.findall(r'moduleType:"trace",name:"([a-z0-9]+)"', bundle))
    used = set()
    for path in (ROOT / "dashboard").rglob("*.py"):
        for name in re.findall(r"\bgo\.([A-Z][A-Za-z0-9]*)\(", path.read_text(encoding="utf-8")):
            cls = getattr(go, name, None)
            if isinstance(cls, type) and issubclass(cls, BaseTraceType):
                used.add(cls().type)
    assert {"scatter", "bar"} <= used  # what the figures draw today
    assert used <= registered, f"trace types missing from the bundle: {sorted(used - registered)}"
