"""Food composition as mass fractions, the input of every property function.

A food is described by the mass fractions of its proximate components (water,
protein, fat, carbohydrate, fiber, ash) plus dissolved salt, which matters for
the ionic part of the dielectric loss. Fractions sum to one.
"""
from __future__ import annotations

from dataclasses import dataclass, fields, replace

import numpy as np

COMPONENTS = ("water", "protein", "fat", "carbohydrate", "fiber", "ash", "salt")

#: Allowed deviation of the sum of mass fractions from 1 (±0.5 %).
SUM_TOLERANCE = 0.005


@dataclass(frozen=True)
class Composition:
    """Mass fractions [kg kg⁻¹] of a food's components.

    Fields may be floats or numpy arrays (broadcast together), so that a
    composition whose water content varies (a product drying on the belt) can
    be passed to the vectorised property functions in one call.

    ``salt`` is dissolved salt (NaCl-equivalent), counted *in addition to* the
    other solids; it is part of the ash in a proximate analysis, so when both are
    given, ``ash`` is the ash other than salt.
    """

    water: float
    protein: float = 0.0
    fat: float = 0.0
    carbohydrate: float = 0.0
    fiber: float = 0.0
    ash: float = 0.0
    salt: float = 0.0

    @property
    def solids(self):
        """Mass fraction of everything but water [kg kg⁻¹]."""
        return self.protein + self.fat + self.carbohydrate + self.fiber + self.ash + self.salt

    def total(self):
        """Sum of all fractions (1 for a valid composition)."""
        return self.water + self.solids

    def as_dict(self) -> dict[str, float]:
        return {f.name: getattr(self, f.name) for f in fields(self)}

    def problems(self) -> list[str]:
        """Plain-language problems with this composition (empty when valid)."""
        out = []
        for name in COMPONENTS:
            value = np.asarray(getattr(self, name), dtype=float)
            if np.any(~np.isfinite(value)):
                out.append(f"{name} is not a finite number")
            elif np.any(value < 0):
                out.append(f"{name} = {value} is negative; mass fractions are between 0 and 1")
        total = np.asarray(self.total(), dtype=float)
        if np.all(np.isfinite(total)) and np.any(np.abs(total - 1.0) > SUM_TOLERANCE):
            out.append(
                f"fractions sum to {float(np.max(total)):.4f}, not 1 (±{SUM_TOLERANCE:.1%}); "
                "give mass fractions (kg per kg of product), not percent"
            )
        return out

    def with_moisture(self, water_fraction_wb):
        """The same dry matter at another water content (wet basis, kg kg⁻¹).

        The solids keep their proportions; ``water_fraction_wb`` may be an array.

        >>> round(Composition(water=0.3, carbohydrate=0.7).with_moisture(0.12).carbohydrate, 6)
        0.88
        """
        w = np.asarray(water_fraction_wb, dtype=float)
        scale = (1.0 - w) / self.solids
        if w.ndim == 0:
            w = float(w)
            scale = float(scale)
        return replace(
            self,
            water=w,
            **{name: getattr(self, name) * scale for name in COMPONENTS if name != "water"},
        )


def _scalar_or_array(x):
    """0-d arrays become numpy scalars; other values pass through (shared by the property modules)."""
    return x[()] if isinstance(x, np.ndarray) else x


def validate_composition(comp: Composition) -> None:
    """Raise if ``comp`` is not a valid composition.

    Parameters
    ----------
    comp : Composition
        Mass fractions [kg kg⁻¹], floats or broadcastable arrays.

    Raises
    ------
    ValueError
        Listing every problem found by :meth:`Composition.problems`, each one
        naming its field (a negative or non-finite fraction) or the sum.

    Examples
    --------
    >>> validate_composition(Composition(water=0.8, protein=0.2))
    >>> validate_composition(Composition(water=0.8, protein=-0.2))  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    ValueError: invalid composition: protein = -0.2 is negative; mass fractions are between 0 and 1; ...
    """
    problems = comp.problems()
    if problems:
        raise ValueError("invalid composition: " + "; ".join(problems))
