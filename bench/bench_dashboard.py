"""Dashboard speed: first full render of each page in headless Chromium, and one What-if evaluation.

The page render is timed with the Chromium command line (--dump-dom with a virtual-time
budget ends when the page is idle); the baseline is an empty page of the same server.
Target: first full render under 2 s; What-if model call well under a second.
"""
from __future__ import annotations

import shutil
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic",
         "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1, EXCLUDE localhost"]


def _render_s(url: str, profile: Path) -> float:
    t0 = time.perf_counter()
    subprocess.run([shutil.which("chromium") or "chromium", *FLAGS, f"--user-data-dir={profile}",
                    "--virtual-time-budget=10000", "--dump-dom", url], capture_output=True, timeout=120)
    return time.perf_counter() - t0


def run(quick: bool = False) -> list[dict]:
    import numpy as np

    from dashboard.context import DashboardContext
    from dashboard.pages import whatif
    from optimizer.config import load_plant

    plant, _ = load_plant(ROOT / "configs" / "demo.toml")
    ctx = DashboardContext(plant)
    line = plant.line("TMP-1")
    t0 = time.perf_counter()
    for _ in range(5):
        whatif.simulate(ctx, "TMP-1", "PORK-SHLDR-BLK", 0.8, [10.0] * line.zone_count, -18, 55, 2)
    rows = [{"name": "what-if: one model evaluation with profile", "value": (time.perf_counter() - t0) / 5,
             "unit": "s", "baseline_value": None, "ratio": None, "target": "well under 1 s"}]
    if not shutil.which("chromium"):
        return rows
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server = subprocess.Popen([sys.executable, "-m", "optimizer.cli", "serve", "--config",
                               str(ROOT / "configs" / "demo.toml"), "--port", str(port)], cwd=ROOT,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        time.sleep(5)
        with tempfile.TemporaryDirectory() as tmp:
            base = _render_s(f"http://127.0.0.1:{port}/_dash-layout", Path(tmp) / "p0")
            for path in ("/", "/recommendation", "/model", "/what-if", "/data"):
                s_ = _render_s(f"http://127.0.0.1:{port}{path}", Path(tmp) / f"p{len(rows)}")
                rows.append({"name": f"first full render of {path} (Chromium, cold profile)", "value": s_,
                             "unit": "s", "baseline_value": base, "ratio": s_ / base, "target": "< 2 s"})
    finally:
        server.terminate()
        server.wait(timeout=30)
    return rows
