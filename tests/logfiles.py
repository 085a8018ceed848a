"""Small historian log files for the logs, store and ingest tests (canonical layout by default).

The plant is the repository's description of the example plant (configs/sample-plant.toml):
TL-1 is a 4-zone, 25 kW-per-zone tempering tunnel, 5.8 m long; DR-1 a 6-zone dryer.
"""
from __future__ import annotations

import dataclasses
import gzip
from pathlib import Path

import numpy as np
import pandas as pd

from optimizer.config import load_plant

ROOT = Path(__file__).resolve().parents[1]
SAMPLE_CONFIG = ROOT / "configs" / "sample-plant.toml"

TL1_COLUMNS = (["timestamp", "line_id", "product_id", "lot_id", "belt_speed_m_per_min", "belt_load_kg_per_m",
                "infeed_temp_c"] + [f"zone{i}_forward_kw" for i in range(1, 5)]
               + [f"zone{i}_reflected_kw" for i in range(1, 5)]
               + ["air_temp_c", "outfeed_temp_mean_c", "outfeed_temp_min_c", "outfeed_temp_max_c", "energy_kwh"])


def plant():
    loaded, _ = load_plant(SAMPLE_CONFIG)
    return loaded


def with_line(base, line_id: str, **changes):
    """The plant with one line's fields replaced (csv=..., columns=..., units=...)."""
    lines = dict(base.lines)
    lines[line_id] = dataclasses.replace(lines[line_id], **changes)
    return dataclasses.replace(base, lines=lines)


def tl1_frame(n: int = 60, start: str = "2026-03-16T06:00:00+01:00", step_s: int = 30, seed: int = 1,
              lot_id: str = "TL1-BEEF-0001", product_id: str = "BEEF-TRIM-90") -> pd.DataFrame:
    """``n`` running samples of TL-1 as text cells, noisy like a historian (2 decimals)."""
    rng = np.random.default_rng(seed)
    t0 = pd.Timestamp(start)
    times = [t0 + pd.Timedelta(seconds=step_s * i) for i in range(n)]
    df = pd.DataFrame({
        "timestamp": [t.isoformat() for t in times],
        "line_id": "TL-1", "product_id": product_id, "lot_id": lot_id,
        "belt_speed_m_per_min": np.round(0.6 + rng.normal(0, 0.002, n), 3),
        "belt_load_kg_per_m": np.round(rng.normal(58, 1.5, n), 2),
        "infeed_temp_c": np.round(rng.normal(-18, 0.3, n), 2),
    })
    for i, level in enumerate((21.0, 20.0, 17.0, 14.0), start=1):
        df[f"zone{i}_forward_kw"] = np.round(rng.normal(level, 0.15, n), 2)
    for i in range(1, 5):
        df[f"zone{i}_reflected_kw"] = np.round(rng.normal(0.6, 0.05, n), 2)
    df["air_temp_c"] = np.round(rng.normal(-2.0, 0.2, n), 2)
    df["outfeed_temp_mean_c"] = np.round(rng.normal(-4.0, 0.3, n), 2)
    df["outfeed_temp_min_c"] = np.round(df["outfeed_temp_mean_c"] - 0.6, 2)
    df["outfeed_temp_max_c"] = np.round(df["outfeed_temp_mean_c"] + 0.6, 2)
    df["energy_kwh"] = np.round(12000 + 0.5 * np.arange(n), 1)
    return df[TL1_COLUMNS].astype(str)


def csv_text(df: pd.DataFrame, sep: str = ",") -> str:
    lines = [sep.join(df.columns)] + [sep.join(map(str, row)) for row in df.itertuples(index=False)]
    return "\n".join(lines) + "\n"


def write(path: Path, text: str | bytes, bom: bool = False, gz: bool = False) -> Path:
    data = text.encode("utf-8") if isinstance(text, str) else text
    if bom:
        data = b"\xef\xbb\xbf" + data
    if gz:
        data = gzip.compress(data)
    path.write_bytes(data)
    return path


def write_frame(path: Path, df: pd.DataFrame, **kw) -> Path:
    sep = kw.pop("sep", ",")
    return write(path, csv_text(df, sep), **kw)
