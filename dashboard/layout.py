"""Layout builders shared by the pages: the shell, the caution, tables and small blocks."""
from __future__ import annotations

from dash import Input, Output, State, dcc, html

CAUTION = ("Advisory settings from a fitted model. Verify the first lot with a probe (core and edges). "
           "Microwave and RF installations, exposure limits and food safety follow local codes and "
           "licensed practice.")

NAV = (("/", "Today"), ("/recommendation", "Recommendation"), ("/model", "Model"), ("/what-if", "What-if"),
       ("/data", "Data"))


def shell(plant_name: str, page=None, rendered: str | None = None):
    """The frame of every page; ``page`` is the routed page's content when the server already
    knows it (first load), ``rendered`` the path and query of the page shown (the router keeps it)."""
    return html.Div(className="shell", children=[
        dcc.Location(id="url"),
        dcc.Store(id="rendered", data=rendered),
        html.Header(className="top", children=[
            html.Div(plant_name, className="plant-name"),
            html.Nav([dcc.Link(label, href=href, className="nav-link", id=f"nav-{label.lower()}")
                      for href, label in NAV]),
        ]),
        html.Div(CAUTION, className="caution", id="caution"),
        html.Main(page, id="page"),
    ])


def table(rows: list[dict], columns: list[tuple[str, str]], table_id: str | None = None, class_name="grid"):
    """A plain HTML table; ``columns`` pairs a key of each row with a header that carries its unit."""
    head = html.Thead(html.Tr([html.Th(title) for _, title in columns]))
    body = html.Tbody([html.Tr([html.Td(_fmt(r.get(key)), **{"data-key": key}) for key, _ in columns])
                       for r in rows])
    kwargs = {"id": table_id} if table_id else {}
    return html.Table([head, body], className=class_name, **kwargs)


def _fmt(value):
    if value is None:
        return "–"
    if isinstance(value, float):
        return f"{value:.3g}" if abs(value) < 0.01 and value != 0 else f"{value:,.2f}"
    if isinstance(value, (list, tuple)):
        return ", ".join(_fmt(v) for v in value)
    return str(value)


def notice(text: str, kind: str = "info", id_: str | None = None):
    kwargs = {"id": id_} if id_ else {}
    return html.Div(text, className=f"notice notice-{kind}", **kwargs)


def selector(id_prefix: str, plant, line_id: str | None, product_id: str | None):
    """Line and product dropdowns (the product list follows the line)."""
    line_id = line_id if line_id in plant.lines else next(iter(plant.lines))
    products = plant.lines[line_id].products
    product_id = product_id if product_id in products else products[0]
    return html.Div(className="selector", children=[
        html.Label(["Line", dcc.Dropdown(id=f"{id_prefix}-line", options=list(plant.lines), value=line_id,
                                         clearable=False)]),
        html.Label(["Product", dcc.Dropdown(id=f"{id_prefix}-product", options=list(products), value=product_id,
                                            clearable=False)]),
    ]), line_id, product_id


def register_selector(app, ctx, id_prefix: str):
    """The product dropdown follows the line dropdown (keeping the product when the line runs it)."""
    @app.callback(Output(f"{id_prefix}-product", "options"), Output(f"{id_prefix}-product", "value"),
                  Input(f"{id_prefix}-line", "value"), State(f"{id_prefix}-product", "value"), prevent_initial_call=True)
    def _products(line_id, product_id):
        products = list(ctx.plant.line(line_id).products)
        return products, product_id if product_id in products else products[0]
