"""Fit, gate and store: the training step of the nightly job and of ``beltwave fit``.

Each fit becomes a new model version in the store. It becomes the active model only when
it converged, has no parameter pinned at a bound, and predicts the held-out lots at least
as well as the active model does (within a tolerance); otherwise the old one stays active
and the version records why.
"""
from __future__ import annotations

import logging
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .config import Plant
from .errors import DataError
from .fit import fit_line
from .fit.report import ProductFit, fit_options
from .models import FittedModel

log = logging.getLogger(__name__)

#: The new model may be this much worse on the held-out lots and still replace the active one:
#: relative share of the active model's error plus an absolute floor below sensor noise.
GATE_RELATIVE = 0.05
GATE_ABSOLUTE = {"temp": 0.05, "moisture": 0.05}  # K, % points


@dataclass
class Decision:
    line_id: str
    product_id: str
    version_id: int | None
    promoted: bool
    reason: str
    fit: ProductFit

    def to_json(self) -> dict:
        return {"line_id": self.line_id, "product_id": self.product_id, "version_id": self.version_id,
                "promoted": self.promoted, "reason": self.reason, "status": self.fit.status,
                "warnings": self.fit.warnings}


def load_active_model(plant: Plant, store, line_id: str, product_id: str) -> FittedModel:
    """The store's active model of a line × product, or the composition-based cold start."""
    if store is not None:
        row = store.active_model(line_id, product_id)
        if row is not None:
            return FittedModel.from_json(row["payload"]["model"], version_id=int(row["id"]))
    return FittedModel.cold_start(plant.line(line_id), plant.product(product_id))


def gate(pf: ProductFit, has_active: bool) -> tuple[bool, str]:
    """Promotion decision for a fitted product (pure: the report in, verdict and reason out)."""
    if pf.status != "fitted":
        return False, pf.message
    if not pf.converged:
        return False, f"not promoted: the fit did not converge ({pf.message})"
    pinned = [w for w in pf.warnings if w.startswith("at a bound")]
    if pinned:
        return False, "not promoted: " + pinned[0]
    model = pf.scores.get("model", {})
    if not model:
        return False, "not promoted: no held-out lots to validate on"
    if not all(np.isfinite(s.mae) for s in model.values()):
        return False, "not promoted: the held-out scores are not finite"
    active = pf.scores.get("active")
    if not has_active or not active:
        return True, "promoted: first fitted model of this line × product"
    worse = []
    for ch, s in model.items():
        a = active.get(ch)
        if a is None:
            continue
        allowed = a.mae * (1 + GATE_RELATIVE) + GATE_ABSOLUTE["moisture" if ch == "moisture" else "temp"]
        if s.mae > allowed:
            worse.append(f"{ch} MAE {s.mae:.3f} against {a.mae:.3f} of the active model")
    if worse:
        return False, "not promoted: worse than the active model on the same held-out lots: " + "; ".join(worse)
    return True, "promoted: at least as good as the active model on the same held-out lots"


def fit_task(plant: Plant, line_id: str, products: list[str], samples, qa, incumbents: dict, options=None):
    """The compute part of training one line (pure; runs on a worker when scaled out)."""
    return fit_line(plant, line_id, samples, qa, options=options, products=products, incumbents=incumbents)


def record_fits(plant: Plant, store, report, incumbents: dict) -> tuple[list[Decision], list[dict]]:
    """Gate every product of a line's fit report and append the versions to the store."""
    decisions, alerts = [], list(report.alerts)
    lid = report.line_id
    for pid, pf in report.products.items():
        has_active = incumbents[pid].status == "fitted"
        promoted, reason = gate(pf, has_active)
        version = None
        if pf.status == "fitted":
            payload = pf.summary()
            payload["electric"] = report.electric
            payload["drift"] = report.drift
            payload["thermal"] = report.thermal
            start, end = pf.data_span or (None, None)
            version = store.add_model_version(lid, pid, payload, status="accepted" if promoted else "rejected",
                                              reason=reason, data_start=start, data_end=end, activate=promoted)
            if not promoted:
                alerts.append({"kind": "model_not_promoted", "line_id": lid, "product_id": pid,
                               "message": f"{lid} × {pid}: model version {version} {reason}"})
        log.info("%s × %s: %s", lid, pid, reason)
        decisions.append(Decision(lid, pid, version, promoted, reason, pf))
    return decisions, alerts


def train_inputs(plant: Plant, store, line_id: str, products: list[str]):
    """What a line's fit needs from the store: samples and QA readings of the last
    ``fit.history_days`` before the line's newest sample, and the active models."""
    days = float(fit_options(plant)["history_days"])
    newest = store.newest_sample_utc(line_id)
    start = None if newest is None or not np.isfinite(days) or days <= 0 else newest - pd.Timedelta(days=days)
    return (store.samples(line_id, start=start), store.qa_samples(line_id, start=start),
            {pid: load_active_model(plant, store, line_id, pid) for pid in products})


def train(plant: Plant, store, line_id: str | None = None, product_id: str | None = None,
          options: dict | None = None) -> tuple[list[Decision], list[dict], dict]:
    """Fit every line (or one) × product with data; store versions; return decisions, alerts, reports."""
    have = store.lines_with_samples()
    if line_id and line_id not in have:
        raise DataError(f"the store holds no samples of line {line_id}; ingest its logs first "
                        "(beltwave ingest --config FILE PATH)")
    lines = [line_id] if line_id else [l for l in plant.lines if l in have]
    if not lines:
        raise DataError("the store holds no samples; ingest logs first (beltwave ingest --config FILE PATH)")
    decisions, alerts, reports = [], [], {}
    for lid in lines:
        products = [product_id] if product_id else list(plant.line(lid).products)
        samples, qa, incumbents = train_inputs(plant, store, lid, products)
        report = fit_task(plant, lid, products, samples, qa, incumbents, options)
        reports[lid] = report
        d, a = record_fits(plant, store, report, incumbents)
        decisions += d
        alerts += a
    return decisions, alerts, reports
