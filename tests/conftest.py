"""Shared fixtures: a small demo plant run night by night (used by end-to-end and browser tests)."""
from __future__ import annotations

import datetime as dt
import shutil
from dataclasses import dataclass
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO_START = dt.date(2026, 10, 19)  # a Monday
DEMO_DAYS = 3


@dataclass
class DemoRuns:
    config: Path
    plant: object
    results: list  # NightlyResult per night, in order
    delivered: list  # file names delivered before each night
    staging: Path


def demo_config(tmp: Path) -> Path:
    """configs/demo.toml with its store, folders and a lighter fit, all inside ``tmp``."""
    text = (ROOT / "configs" / "demo.toml").read_text()
    text = text.replace('url = "sqlite:///../data/demo/beltwave.sqlite"', f'url = "sqlite:///{tmp / "store.sqlite"}"')
    text = text.replace('incoming = ["../data/demo/incoming"]', f'incoming = ["{tmp / "incoming"}"]')
    text = text.replace('exports = "../data/demo/exports"', f'exports = "{tmp / "exports"}"')
    text += "\n[fit]\nobservations_per_lot = 12\nmax_observations = 150\nmin_lots = 2\n"
    path = tmp / "plant.toml"
    path.write_text(text)
    (tmp / "incoming").mkdir(exist_ok=True)
    return path


@pytest.fixture(scope="session")
def demo_runs(tmp_path_factory) -> DemoRuns:
    from optimizer.config import load_plant
    from optimizer.demo import generate_demo_logs
    from optimizer.jobs import run_nightly

    tmp = tmp_path_factory.mktemp("demo-plant")
    config = demo_config(tmp)
    plant, _ = load_plant(config)
    staging = tmp / "staging"
    generate_demo_logs(plant, staging, start=DEMO_START.isoformat(), days=DEMO_DAYS, interval_s=60, seed=7)
    files = sorted(p for p in staging.iterdir() if p.name.endswith(".csv.gz"))
    results, delivered = [], []
    for k in range(DEMO_DAYS):
        day = DEMO_START + dt.timedelta(days=k)
        todays = [f for f in files if _file_day(f.name) == day]  # process and QA files, as a plant sends them
        for f in todays:
            shutil.copy(f, tmp / "incoming" / f.name)
        delivered.append(sorted(f.name for f in todays))
        results.append(run_nightly(plant, plan_date=(day + dt.timedelta(days=1)).isoformat()))
    return DemoRuns(config, plant, results, delivered, staging)


def _file_day(name: str) -> dt.date | None:
    """The local day a demo file belongs to (re-exports: the day of their export time)."""
    stem = name.split(".")[0]
    for part in stem.split("_")[1:]:
        try:
            return dt.date.fromisoformat(part[:10])
        except ValueError:
            continue
    return None


def pytest_setup_options():
    """Headless Chromium for dash_duo (Debian's /usr/bin/chromium; closed-network flags)."""
    from browser import chromium_options

    return chromium_options()
