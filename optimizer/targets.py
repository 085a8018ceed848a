"""Whether a predicted outfeed meets the product's targets, and by what margin.

Margins are positive when a target is met and say how far from its edge the
prediction lies, in the target's own unit (K, or percentage points of moisture).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .config import Product


@dataclass(frozen=True)
class TargetCheck:
    name: str
    unit: str
    limit_text: str
    value: np.ndarray  # the predicted quantity the target is written on
    margin: np.ndarray  # > 0: met

    @property
    def met(self) -> np.ndarray:
        return self.margin >= 0.0


def check_targets(product: Product, outcome) -> list[TargetCheck]:
    """All targets of ``product`` against a model :class:`~optimizer.line.Outcome` (vectorised)."""
    tg = product.targets
    out = []
    if tg.core_temp_c is not None:
        core = outcome.core_temp_c
        out.append(TargetCheck("core_temp_c", "K", f"{tg.core_temp_c:g} ± {tg.core_tol_c:g} °C", core,
                               tg.core_tol_c - np.abs(core - tg.core_temp_c)))
    if tg.max_temp_c is not None:
        hottest = outcome.hottest_during_passage_c if product.process == "drying" else outcome.hottest_temp_c
        out.append(TargetCheck("max_temp_c", "K", f"hottest point ≤ {tg.max_temp_c:g} °C", hottest,
                               tg.max_temp_c - hottest))
    if tg.min_temp_c is not None:
        coldest = outcome.coldest_temp_c
        out.append(TargetCheck("min_temp_c", "K", f"coldest point ≥ {tg.min_temp_c:g} °C", coldest,
                               coldest - tg.min_temp_c))
    if tg.outfeed_moisture_pct_wb is not None and outcome.outfeed_moisture_pct_wb is not None:
        m = outcome.outfeed_moisture_pct_wb
        out.append(TargetCheck("outfeed_moisture_pct_wb", "% points",
                               f"{tg.outfeed_moisture_pct_wb:g} ± {tg.moisture_tol_pct:g} % wb", m,
                               tg.moisture_tol_pct - np.abs(m - tg.outfeed_moisture_pct_wb)))
    return out
