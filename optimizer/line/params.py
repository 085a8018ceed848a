"""The line model's parameters: each with a name, unit, meaning, bounds, scope and a default.

Defaults come from first principles and the plant description, so a new product can
be simulated before any log exists ("cold start" from composition); the fit step
refines them. ``scope`` says whether a parameter belongs to the line (shared by all
its products) or to the product on that line.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..config import Line, Product


@dataclass(frozen=True)
class ParameterSpec:
    name: str
    unit: str
    meaning: str
    low: float
    high: float
    default: float
    scope: str  # "line" | "product"
    identified_by: str  # which kind of run makes the data informative about it


#: Forced-convection heat-transfer coefficient of recirculated tunnel air [W m⁻² K⁻¹];
#: 10–30 is the usual range for air at a few m/s (common practice, from memory).
DEFAULT_AIR_HTC_W_PER_M2_K = 15.0
#: Share of net power lost in the cavity walls, chokes and belt at the product's typical load
#: (a well-loaded industrial tunnel loses a few percent; common practice, from memory).
DEFAULT_CAVITY_LOSS_SHARE = 0.05
#: Default amplitude of the field non-uniformity across the belt (hot share receives 1 + a
#: times the mean field intensity). Multimode tunnels show ±20–30 % (common practice, from memory).
DEFAULT_FIELD_NONUNIFORMITY = 0.25
#: Lewis-model drying rate constant at 80 °C [s⁻¹] for a microwave-assisted hot-air dryer:
#: products of a few mm dry from ~30 % to ~12 % wb in ten to twenty minutes (from memory).
DEFAULT_DRYING_RATE_PER_S = 1.5e-3


def parameter_specs(line: Line, product: Product) -> tuple[ParameterSpec, ...]:
    """The parameters of the model of ``product`` on ``line`` (at most eight).

    >>> from optimizer.config import load_plant
    >>> plant, _ = load_plant("configs/demo.toml")
    >>> [s.name for s in parameter_specs(plant.line("TMP-1"), plant.product("PORK-SHLDR-BLK"))][:3]
    ['mains_to_rf_efficiency', 'aux_power_kw', 'cavity_loss_equiv_kg']
    """
    specs = [
        ParameterSpec("mains_to_rf_efficiency", "1", "generator output (forward RF power) over mains input",
                      0.3, 0.98, line.generator_efficiency, "line", "runs at different total power"),
        ParameterSpec("aux_power_kw", "kW", "electric load of belt, fans and controls",
                      0.0, 200.0, line.aux_power_kw, "line", "runs at low or zero generator power"),
        ParameterSpec("cavity_loss_equiv_kg", "kg", "cavity, choke and belt losses, as the mass of "
                      "product of unit loss factor that would absorb the same share",
                      0.0, 1e4, _default_cavity_loss_kg(line, product), "line",
                      "runs at another belt load"),
        ParameterSpec("air_htc_w_per_m2_k", "W m-2 K-1", "heat-transfer coefficient between tunnel "
                      "air and product surface", 1.0, 150.0, DEFAULT_AIR_HTC_W_PER_M2_K, "line",
                      "runs at another air temperature or belt speed"),
        ParameterSpec("loss_factor_scale", "1", "measured over composition-based dielectric loss "
                      "factor of the product", 0.2, 5.0, 1.0, "product", "runs at another power level"),
        ParameterSpec("field_nonuniformity", "1", "extra field intensity of the hot share of the "
                      "piece over the mean (the cold share gets correspondingly less)",
                      0.0, 0.9, DEFAULT_FIELD_NONUNIFORMITY, "product",
                      "QA edge/surface probes or outfeed min/max readings"),
    ]
    if line.kind == "tempering":
        specs.append(ParameterSpec("freezing_point_shift_k", "K", "correction to the configured initial "
                                   "freezing point", -3.0, 1.0, 0.0, "product",
                                   "runs reaching different outfeed temperatures"))
    else:
        specs.append(ParameterSpec("drying_rate_per_s", "s-1", "thin-layer (Lewis) drying rate "
                                   "constant at 80 °C", 1e-5, 5e-2, DEFAULT_DRYING_RATE_PER_S,
                                   "product", "runs at another belt speed or air temperature"))
        specs.append(ParameterSpec("air_heater_kw_per_k", "kW K-1", "electric air-heater power per "
                                   "kelvin of air above ambient", 0.0, 50.0, line.air_heater_kw_per_k,
                                   "line", "runs at another air temperature"))
    return tuple(specs)


def _default_cavity_loss_kg(line: Line, product: Product) -> float:
    """Loss mass that takes DEFAULT_CAVITY_LOSS_SHARE of the power at the typical load."""
    from .model import ProductTables  # late import: tables need the properties package

    tables = ProductTables.build(line, product, freezing_point_shift_k=0.0)
    temp = product.typical.infeed_temp_c
    moisture = product.typical.infeed_moisture_pct_wb
    water = tables.infeed_water_db(moisture)
    loss = float(tables.loss_factor(np.asarray([temp]), np.asarray([water]))[0])
    zone_mass = product.typical.belt_load_kg_per_m * float(np.mean(line.zone_length_m))
    share = DEFAULT_CAVITY_LOSS_SHARE
    return zone_mass * loss * share / (1.0 - share)


@dataclass(frozen=True)
class ModelParameters:
    """Values of a line × product model's parameters (a plain record, no arithmetic)."""

    specs: tuple[ParameterSpec, ...]
    values: dict[str, float] = field(default_factory=dict)

    @classmethod
    def defaults(cls, line: Line, product: Product) -> "ModelParameters":
        specs = parameter_specs(line, product)
        return cls(specs, {s.name: s.default for s in specs})

    def __getitem__(self, name: str) -> float:
        return self.values[name]

    def get(self, name: str, default: float) -> float:
        return self.values.get(name, default)

    def names(self) -> list[str]:
        return [s.name for s in self.specs]

    def with_values(self, **changes: float) -> "ModelParameters":
        unknown = set(changes) - set(self.values)
        if unknown:
            raise KeyError(f"unknown parameter(s): {', '.join(sorted(unknown))}; known: {', '.join(self.names())}")
        return replace(self, values={**self.values, **changes})

    def out_of_bounds(self) -> list[str]:
        out = []
        for s in self.specs:
            v = self.values[s.name]
            if not (s.low <= v <= s.high):
                out.append(f"{s.name} = {v:g} {s.unit} is outside [{s.low:g}, {s.high:g}]")
        return out
