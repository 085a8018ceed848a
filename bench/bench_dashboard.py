"""Dashboard speed: first full render of each page in headless Chromium, and one What-if evaluation.

The render is timed inside the browser: from the start of the navigation (a cold browser
cache, the browser already running) until the page's content is in and every graph on it
is drawn, read as ``performance.now()`` at that moment. Each page is loaded ``REPEATS``
times and the median is reported; the baseline is the same measurement of the bare shell
(the /_dash-layout JSON, no renderer), so the ratio shows the page's own share.
Needs the demo store (``beltwave demo``) and Chromium with ChromeDriver (the test command
installs them); without them only the What-if figure is measured.
Target: first full render under 2 s; What-if model call well under a second.
"""
from __future__ import annotations

import shutil
import socket
import statistics
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PAGES = ("/", "/recommendation", "/model", "/what-if", "/data")
REPEATS = 3
#: True once the routed page is in, no Dash callback is pending and every graph has drawn.
RENDERED = """
const page = document.getElementById('page');
if (!page || page.children.length === 0) return null;
if (document.querySelector('[data-dash-is-loading="true"]')) return null;
const graphs = document.querySelectorAll('.dash-graph');
for (const g of graphs) { if (!g.querySelector('.main-svg')) return null; }
return [performance.now(), graphs.length];
"""


def _driver():
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    from tests.browser import chromium_options

    return webdriver.Chrome(service=Service(shutil.which("chromedriver") or "/usr/bin/chromedriver"),
                            options=chromium_options())


def _render_ms(driver, url: str, condition: str, timeout_s: float = 30.0) -> tuple[float, int]:
    driver.execute_cdp_cmd("Network.clearBrowserCache", {})
    driver.get("about:blank")
    driver.get(url)
    t0 = time.perf_counter()
    while time.perf_counter() - t0 < timeout_s:
        done = driver.execute_script(condition)
        if done:
            return float(done[0]), int(done[1])
        time.sleep(0.01)
    raise TimeoutError(f"{url} did not finish rendering within {timeout_s:g} s")


def _serve(config: Path) -> tuple[subprocess.Popen, int]:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server = subprocess.Popen([sys.executable, "-m", "optimizer.cli", "serve", "--config", str(config),
                               "--port", str(port)], cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    for _ in range(300):
        try:
            urllib.request.urlopen(f"http://127.0.0.1:{port}/_dash-layout", timeout=2)
            return server, port
        except OSError:
            time.sleep(0.2)
    server.terminate()
    raise RuntimeError("the dashboard server did not start within 60 s")


def run(quick: bool = False) -> list[dict]:
    from dashboard.context import DashboardContext
    from dashboard.pages import whatif
    from optimizer.config import load_plant

    config = ROOT / "configs" / "demo.toml"
    plant, _ = load_plant(config)
    ctx = DashboardContext(plant)
    line = plant.line("TMP-1")
    t0 = time.perf_counter()
    for _ in range(5):
        whatif.simulate(ctx, "TMP-1", "PORK-SHLDR-BLK", 0.8, [10.0] * line.zone_count, -18, 55, 2)
    rows = [{"name": "what-if: one model evaluation with profile", "value": (time.perf_counter() - t0) / 5,
             "unit": "s", "baseline_value": None, "ratio": None, "target": "well under 1 s"}]
    store = ROOT / "data" / "demo" / "beltwave.sqlite"
    if not (shutil.which("chromium") and shutil.which("chromedriver")) or not store.exists():
        print("bench_dashboard: page renders skipped (needs Chromium, ChromeDriver and the demo store from "
              "`beltwave demo`)", file=sys.stderr)
        return rows
    server, port = _serve(config)
    driver = _driver()
    try:
        base = f"http://127.0.0.1:{port}"
        _render_ms(driver, base + "/", RENDERED)  # the browser's own first start, not counted
        shell = statistics.median(_render_ms(driver, base + "/_dash-layout",
                                             "return [performance.now(), 0];")[0] for _ in range(REPEATS))
        for path in PAGES:
            times, graphs = [], 0
            for _ in range(1 if quick else REPEATS):
                ms, graphs = _render_ms(driver, base + path, RENDERED)
                times.append(ms)
            value = statistics.median(times) / 1000.0
            rows.append({"name": f"first full render of {path} ({graphs} graphs, cold cache)", "value": value,
                         "unit": "s", "baseline_value": shell / 1000.0, "ratio": value / (shell / 1000.0),
                         "target": "< 2 s"})
    finally:
        driver.quit()
        server.terminate()
        server.wait(timeout=30)
    return rows
