"""A line × product model as the fit leaves it and the store keeps it.

A :class:`FittedModel` holds the parameter values, which of them were fitted and their
covariance, the reflection relation, the calibration offsets of the line's sensors,
and how it came about ("fitted" or "cold_start"). It serialises to plain JSON for the
store and builds a :class:`~optimizer.line.LineModel` for simulation. Parameter
samples for robust recommendations come from its covariance (a normal distribution
truncated to each parameter's bounds).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .config import Line, Product
from .line import LineModel, ModelParameters, ReflectionRelation

#: Relative standard deviation assumed for a cold-start (unfitted) parameter: composition-based
#: defaults are rarely better than ±15 % (common practice, from memory).
COLD_START_RELATIVE_SD = 0.15


@dataclass(frozen=True)
class FittedModel:
    line_id: str
    product_id: str
    values: dict[str, float]
    free: tuple[str, ...] = ()
    covariance: np.ndarray | None = None  # over ``free``, in their units
    reflection: ReflectionRelation = field(default_factory=ReflectionRelation)
    sensor_offsets: dict[str, float] = field(default_factory=dict)  # reading − truth, per sensor
    status: str = "cold_start"  # cold_start | fitted
    version_id: int | None = None
    #: Noise per observation channel the fit estimated from its residuals (robust σ, the
    #: channel's unit); the next fit starts its weighting there.
    noise_sigma: dict[str, float] = field(default_factory=dict)

    @classmethod
    def cold_start(cls, line: Line, product: Product) -> "FittedModel":
        """Composition-based defaults, with a wide prior uncertainty on the product's parameters."""
        params = ModelParameters.defaults(line, product)
        free = tuple(s.name for s in params.specs if s.scope == "product" or s.name == "cavity_loss_equiv_kg")
        sd = []
        for name in free:
            spec = next(s for s in params.specs if s.name == name)
            sd.append(COLD_START_RELATIVE_SD * abs(spec.default) if spec.default != 0
                      else COLD_START_RELATIVE_SD * (spec.high - spec.low) / 4)
        return cls(line.line_id, product.product_id, dict(params.values), free, np.diag(np.square(sd)))

    def parameters(self, line: Line, product: Product) -> ModelParameters:
        base = ModelParameters.defaults(line, product)
        return base.with_values(**{k: v for k, v in self.values.items() if k in base.values})

    def build(self, line: Line, product: Product, **kwargs) -> LineModel:
        return LineModel(line, product, self.parameters(line, product), self.reflection, **kwargs)

    def standard_errors(self) -> dict[str, float]:
        if self.covariance is None:
            return {}
        return dict(zip(self.free, np.sqrt(np.clip(np.diag(self.covariance), 0.0, None))))

    def sample(self, line: Line, product: Product, n: int, rng: np.random.Generator) -> dict[str, np.ndarray]:
        """``n`` draws of the free parameters (normal, truncated to bounds by clipping).

        Parameters whose value changes the property tables (``freezing_point_shift_k``) are
        held at their value: the tables are built once per model.
        """
        if self.covariance is None or not self.free:
            return {}
        specs = {s.name: s for s in ModelParameters.defaults(line, product).specs}
        mean = np.array([self.values[k] for k in self.free])
        draws = rng.multivariate_normal(mean, self.covariance, size=n, method="eigh")
        out = {}
        for i, name in enumerate(self.free):
            if name == "freezing_point_shift_k":
                continue
            out[name] = np.clip(draws[:, i], specs[name].low, specs[name].high)
        return out

    def to_json(self) -> dict:
        """Plain JSON; numbers rounded to 10 significant digits, so that the same fit done on
        another machine or process (other BLAS threading, last-bit differences) stores the same model."""
        return {
            "line_id": self.line_id, "product_id": self.product_id,
            "values": {k: _round(v) for k, v in self.values.items()},
            "free": list(self.free),
            "covariance": None if self.covariance is None else
            [[_round(x) for x in row] for row in np.asarray(self.covariance, float)],
            "reflection": {"base_fraction": self.reflection.base_fraction,
                           "light_load_kg": self.reflection.light_load_kg},
            "sensor_offsets": {k: _round(v) for k, v in self.sensor_offsets.items()}, "status": self.status,
            "noise_sigma": {k: _round(v) for k, v in self.noise_sigma.items()},
        }

    @classmethod
    def from_json(cls, data: dict, version_id: int | None = None) -> "FittedModel":
        cov = data.get("covariance")
        return cls(
            line_id=data["line_id"], product_id=data["product_id"], values=dict(data["values"]),
            free=tuple(data.get("free", ())), covariance=None if cov is None else np.asarray(cov, float),
            reflection=ReflectionRelation(**data.get("reflection", {})),
            sensor_offsets=dict(data.get("sensor_offsets", {})), status=data.get("status", "fitted"),
            version_id=version_id, noise_sigma=dict(data.get("noise_sigma", {})))


def _round(x: float) -> float:
    x = float(x)
    return float(f"{x:.10g}") if np.isfinite(x) else x
