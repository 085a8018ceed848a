"""The dashboard in a real headless Chromium, on the demo plant's store."""
from __future__ import annotations

import shutil
import time
from pathlib import Path

import pytest

pytest.importorskip("selenium", reason="the browser tests need the test extra: pip install -e '.[test]'")

from selenium.common.exceptions import StaleElementReferenceException  # noqa: E402
from selenium.webdriver.common.by import By  # noqa: E402
from selenium.webdriver.common.keys import Keys  # noqa: E402

from dash.testing.wait import until  # noqa: E402

from dashboard.app import create_app  # noqa: E402
from dashboard.data import open_reader  # noqa: E402
from dashboard.pages import whatif  # noqa: E402
from optimizer.store import Store  # noqa: E402

OUT = Path(__file__).resolve().parents[1] / "test-output"
pytestmark = pytest.mark.browser

if not (shutil.which("chromium") and shutil.which("chromedriver")):
    raise RuntimeError("browser tests need Debian's chromium and chromium-driver: run `python -m tests.browser` "
                       "(as root) or apt-get install -y chromium chromium-driver")


@pytest.fixture
def app_on_demo(demo_runs, dash_duo):
    app = create_app(demo_runs.plant, open_reader(demo_runs.plant))
    dash_duo.start_server(app, port=8071)
    return dash_duo, demo_runs.plant


def _shot(duo, name):
    OUT.mkdir(exist_ok=True)
    duo.driver.save_screenshot(str(OUT / f"{name}.png"))


def _fmt(v):
    return f"{v:,.2f}"


def _cells(duo, selector, tries=40):
    """The text of every row of a table, read again if the page re-renders meanwhile."""
    for _ in range(tries):
        try:
            return [[td.text for td in tr.find_elements(By.TAG_NAME, "td")]
                    for tr in duo.find_element(selector).find_elements(By.TAG_NAME, "tr")[1:]]
        except StaleElementReferenceException:
            time.sleep(0.25)
    raise AssertionError(f"{selector} kept changing")


def test_today_shows_the_stored_recommendations(app_on_demo):
    duo, plant = app_on_demo
    duo.wait_for_element("#last-run", timeout=20)
    store = Store.open(plant.store_url, readonly=True)
    recs = store.recommendations().sort_values("id").groupby(["line_id", "product_id"]).tail(1)
    store.close()
    assert duo.find_element("#caution").text.startswith("Advisory settings")
    for r in recs.itertuples():
        table = duo.find_element(f"#today-{r.line_id}")
        rows = {tr.find_elements(By.TAG_NAME, "td")[0].text: tr for tr in table.find_elements(By.TAG_NAME, "tr")[1:]}
        cells = {td.get_attribute("data-key"): td.text for td in rows[r.product_id].find_elements(By.TAG_NAME, "td")}
        assert cells["speed"] == _fmt(r.payload["belt_speed_m_per_min"])
        assert cells["powers"] == " / ".join(f"{x:g}" for x in r.payload["zone_forward_kw"])
    _shot(duo, "today")
    assert duo.get_logs() == []


def test_model_page_shows_the_fitted_parameters_of_the_store(app_on_demo):
    duo, plant = app_on_demo
    store = Store.open(plant.store_url, readonly=True)
    version = store.active_model("TMP-1", "PORK-SHLDR-BLK")
    store.close()
    assert version is not None
    duo.driver.get(duo.server_url + "/model?line=TMP-1&product=PORK-SHLDR-BLK")
    duo.wait_for_element("#model-parameters", timeout=20)
    shown = {row[0]: row[1] for row in _cells(duo, "#model-parameters")}
    for row in version["payload"]["parameters"]:
        v = row["value"]
        assert shown[row["name"]] == (f"{v:.3g}" if abs(v) < 0.01 and v != 0 else _fmt(v))
    _shot(duo, "model")
    assert duo.get_logs() == []


def test_recommendation_page_shows_settings_profile_and_front(app_on_demo):
    duo, plant = app_on_demo
    store = Store.open(plant.store_url, readonly=True)
    rec = store.recommendations(line_id="TMP-2").sort_values("id").iloc[-1]
    store.close()
    duo.driver.get(duo.server_url + f"/recommendation?line=TMP-2&product={rec['product_id']}")
    duo.wait_for_element("#rec-settings", timeout=20)
    assert rec["payload"]["settings_text"] in duo.find_element("#rec-settings").text
    duo.wait_for_element("#rec-profile .main-svg", timeout=20)
    _shot(duo, "recommendation")
    assert duo.get_logs() == []
    # the graphs were drawn by the vendored partial bundle, and the full plotly.js never loaded
    scripts = duo.driver.execute_script(
        "return performance.getEntriesByType('resource').map(e => e.name.split('?')[0].split('/').pop())")
    assert "plotly-basic.min.js" in scripts
    assert "plotly.min.js" not in scripts


def test_what_if_controls_change_the_prediction_as_the_model_says(app_on_demo):
    duo, plant = app_on_demo
    duo.driver.get(duo.server_url + "/what-if?line=TMP-1&product=PORK-SHLDR-BLK")
    duo.wait_for_element("#wi-outcome-table", timeout=20)
    box = duo.find_element("#wi-infeed")
    box.send_keys(Keys.CONTROL, "a")
    box.send_keys("-12", Keys.ENTER)
    line = plant.line("TMP-1")
    speed = round(0.5 * (line.belt_speed_min_m_per_min + line.belt_speed_max_m_per_min), 2)
    powers = [round(0.4 * r, 1) for r in line.zone_max_kw]
    typ = plant.product("PORK-SHLDR-BLK").typical
    from dashboard.context import DashboardContext

    ctx = DashboardContext(plant, open_reader(plant))
    expected = whatif.simulate(ctx, "TMP-1", "PORK-SHLDR-BLK", speed, powers, -12.0, typ.belt_load_kg_per_m,
                               typ.air_temp_c)["predicted"]["core_temp_c"]

    def core_shown():
        return next((row[1] for row in _cells(duo, "#wi-outcome-table") if row[0].startswith("core at mid")), None)

    until(lambda: core_shown() == _fmt(expected), timeout=20)
    _shot(duo, "what-if")
    assert duo.get_logs() == []


def test_data_page_and_an_empty_store(app_on_demo, tmp_path):
    duo, plant = app_on_demo
    duo.driver.get(duo.server_url + "/data")
    duo.wait_for_element("#data-totals", timeout=20)
    assert "files ingested" in duo.find_element("#data-totals").text
    _shot(duo, "data")
    assert duo.get_logs() == []
