"""What the dashboard's pages share: the plant description and a read-only view of the store.

The context is built once per app by :func:`dashboard.app.create_app` and handed to each
page's layout and callbacks explicitly (no module-level state).
"""
from __future__ import annotations

from dataclasses import dataclass, field

from optimizer.config import Plant
from optimizer.models import FittedModel


@dataclass
class DashboardContext:
    plant: Plant
    reader: object | None = None  # dashboard.data.StoreReader, or None when there is no store yet
    _models: dict = field(default_factory=dict)

    def active_model(self, line_id: str, product_id: str) -> FittedModel:
        """The store's active model for a line × product, or the composition-based cold start."""
        if self.reader is not None:
            model = self.reader.active_model(line_id, product_id)
            if model is not None:
                return model
        key = (line_id, product_id)
        if key not in self._models:
            line, product = self.plant.line(line_id), self.plant.product(product_id)
            self._models[key] = FittedModel.cold_start(line, product)
        return self._models[key]
