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
    assert CAUTION in _text(app.layout)
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
    hrefs = [c.href for c in app.layout.children[1].children[1].children]
    assert hrefs == list(PAGES)
    args = build_parser().parse_args(["serve", "--config", "x.toml"])
    assert args.host == "127.0.0.1"
