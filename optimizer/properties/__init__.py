"""Physical properties of foods for RF and microwave process models.

Pure, vectorised functions of composition, temperature and frequency:
thermal properties with freezing (:mod:`.thermal`), dielectric properties,
penetration depth and absorbed power (:mod:`.dielectric`) and the water and
steam properties they rely on (:mod:`.water`). SI units throughout.
"""
from .composition import COMPONENTS, Composition, validate_composition
from .dielectric import (
    absorbed_power_density_w_per_m3,
    brine_conductivity_s_per_m,
    check_frequency_hz,
    food_permittivity,
    free_space_wavelength_m,
    ice_permittivity,
    ionic_loss_factor,
    penetration_depth_m,
    water_permittivity,
    water_static_permittivity,
)
from .thermal import (
    apparent_specific_heat_j_per_kg_k,
    bound_water_mass_fraction,
    density_kg_per_m3,
    ice_mass_fraction,
    specific_enthalpy_j_per_kg,
    specific_heat_j_per_kg_k,
    temperature_from_enthalpy_c,
    thermal_conductivity_w_per_m_k,
    thermal_diffusivity_m2_per_s,
    unfrozen_water_fraction,
    volume_fractions,
)
from .water import (
    LATENT_HEAT_FUSION_J_PER_KG,
    dynamic_viscosity_pa_s,
    latent_heat_vaporisation_j_per_kg,
    saturation_pressure_pa,
)

__all__ = [
    "COMPONENTS",
    "Composition",
    "LATENT_HEAT_FUSION_J_PER_KG",
    "absorbed_power_density_w_per_m3",
    "apparent_specific_heat_j_per_kg_k",
    "bound_water_mass_fraction",
    "brine_conductivity_s_per_m",
    "check_frequency_hz",
    "density_kg_per_m3",
    "dynamic_viscosity_pa_s",
    "food_permittivity",
    "free_space_wavelength_m",
    "ice_mass_fraction",
    "ice_permittivity",
    "ionic_loss_factor",
    "latent_heat_vaporisation_j_per_kg",
    "penetration_depth_m",
    "saturation_pressure_pa",
    "specific_enthalpy_j_per_kg",
    "specific_heat_j_per_kg_k",
    "temperature_from_enthalpy_c",
    "thermal_conductivity_w_per_m_k",
    "thermal_diffusivity_m2_per_s",
    "unfrozen_water_fraction",
    "validate_composition",
    "volume_fractions",
    "water_permittivity",
    "water_static_permittivity",
]
