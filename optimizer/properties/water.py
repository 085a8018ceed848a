"""Properties of pure water and steam that the food models need.

Saturation pressure and the saturated densities follow the IAPWS auxiliary
equations (Wagner & Pruss 1993), and the latent heat of vaporisation follows
from them by the Clausius–Clapeyron equation, exact for a pure substance.
The viscosity of liquid water (for the ionic conductivity of brine) is a
Vogel-type correlation.
"""
from __future__ import annotations

import numpy as np

from .composition import _scalar_or_array

#: Latent heat of fusion of ice at 0 °C used in food freezing models
#: (Chen 1985; ASHRAE) [J kg⁻¹]. IAPWS-95 liquid minus IAPWS-06 ice gives
#: 333.43 kJ kg⁻¹ at 0.101325 MPa (checked in the tests).
LATENT_HEAT_FUSION_J_PER_KG = 333.6e3

# IAPWS Revised Supplementary Release on Saturation Properties of Ordinary
# Water Substance (1992) = Wagner & Pruss (1993), Eqs. 1–3; τ = 1 − T/T_c.
CRITICAL_TEMPERATURE_K = 647.096
CRITICAL_PRESSURE_PA = 22.064e6
CRITICAL_DENSITY_KG_PER_M3 = 322.0
WAGNER_PRUSS_VAPOUR_PRESSURE = (
    (-7.85951783, 1.0), (1.84408259, 1.5), (-11.7866497, 3.0),
    (22.6807411, 3.5), (-15.9618719, 4.0), (1.80122502, 7.5),
)  # (a_i, exponent of τ), Eq. 1
WAGNER_PRUSS_LIQUID_DENSITY = (
    (1.99274064, 1 / 3), (1.09965342, 2 / 3), (-0.510839303, 5 / 3),
    (-1.75493479, 16 / 3), (-45.5170352, 43 / 3), (-6.74694450e5, 110 / 3),
)  # (b_i, exponent), Eq. 2
WAGNER_PRUSS_VAPOUR_DENSITY = (
    (-2.03150240, 2 / 6), (-2.68302940, 4 / 6), (-5.38626492, 8 / 6),
    (-17.2991605, 18 / 6), (-44.7586581, 37 / 6), (-63.9201063, 71 / 6),
)  # (c_i, exponent), Eq. 3

#: Vogel-type viscosity of liquid water, μ = A·10^(B/(T − C)), T in K:
#: (A [Pa s], B [K], C [K]).
VOGEL_WATER_VISCOSITY = (2.414e-5, 247.8, 140.0)


def _tau(temp_c):
    return 1.0 - (np.asarray(temp_c, dtype=float) + 273.15) / CRITICAL_TEMPERATURE_K


def saturation_pressure_pa(temp_c):
    """Saturation (vapour) pressure of water [Pa].

    Parameters
    ----------
    temp_c : float or array_like
        Temperature [°C], 0.01 to 373.946 °C (above the critical point: NaN).

    Returns
    -------
    float or ndarray
        p_sat [Pa].

    Notes
    -----
    ln(p/p_c) = (T_c/T)(a₁τ + a₂τ^1.5 + a₃τ³ + a₄τ^3.5 + a₅τ⁴ + a₆τ^7.5),
    τ = 1 − T/T_c. Consistent with IAPWS-95 within 0.025 % (Wagner & Pruss
    1993); it extrapolates smoothly to supercooled water below 0.01 °C.

    References
    ----------
    Wagner, W., Pruss, A. (1993). International equations for the saturation
    properties of ordinary water substance. Revised according to the
    international temperature scale of 1990. J. Phys. Chem. Ref. Data 22(3),
    783–787. (IAPWS Revised Supplementary Release on Saturation Properties,
    1992.)

    Examples
    --------
    >>> round(float(saturation_pressure_pa(100.0)))
    101418
    """
    tau = _tau(temp_c)
    total_k = np.asarray(temp_c, dtype=float) + 273.15
    with np.errstate(invalid="ignore"):
        series = sum(a * tau**n for a, n in WAGNER_PRUSS_VAPOUR_PRESSURE)
    return _scalar_or_array(CRITICAL_PRESSURE_PA * np.exp(CRITICAL_TEMPERATURE_K / total_k * series))


def _dpsat_dt_pa_per_k(temp_c):
    tau = _tau(temp_c)
    total_k = np.asarray(temp_c, dtype=float) + 273.15
    with np.errstate(invalid="ignore"):
        series = sum(a * tau**n for a, n in WAGNER_PRUSS_VAPOUR_PRESSURE)
        dseries_dtau = sum(a * n * tau ** (n - 1.0) for a, n in WAGNER_PRUSS_VAPOUR_PRESSURE)
    # d/dT [(T_c/T) S(τ)] with dτ/dT = −1/T_c
    dln_p = -CRITICAL_TEMPERATURE_K / total_k**2 * series - dseries_dtau / total_k
    return saturation_pressure_pa(temp_c) * dln_p


def _saturated_liquid_density(temp_c):
    tau = _tau(temp_c)
    with np.errstate(invalid="ignore"):
        return CRITICAL_DENSITY_KG_PER_M3 * (1.0 + sum(b * tau**n for b, n in WAGNER_PRUSS_LIQUID_DENSITY))


def _saturated_vapour_density(temp_c):
    tau = _tau(temp_c)
    with np.errstate(invalid="ignore"):
        return CRITICAL_DENSITY_KG_PER_M3 * np.exp(sum(c * tau**n for c, n in WAGNER_PRUSS_VAPOUR_DENSITY))


def latent_heat_vaporisation_j_per_kg(temp_c):
    """Latent heat of vaporisation of water on the saturation line [J kg⁻¹].

    Parameters
    ----------
    temp_c : float or array_like
        Temperature [°C], 0.01 to ~370 °C (used here for 0–150 °C).

    Returns
    -------
    float or ndarray
        h_fg = h'' − h' [J kg⁻¹].

    Notes
    -----
    Clausius–Clapeyron, h_fg = T (dp_sat/dT)(1/ρ'' − 1/ρ'), with p_sat, ρ' and
    ρ'' from the IAPWS auxiliary equations. Agrees with IAPWS-95 within
    0.02 % from 0 to 150 °C (checked in the tests).

    References
    ----------
    Wagner, W., Pruss, A. (1993). J. Phys. Chem. Ref. Data 22(3), 783–787.

    Examples
    --------
    >>> round(float(latent_heat_vaporisation_j_per_kg(100.0)) / 1e3, 1)
    2256.6
    """
    total_k = np.asarray(temp_c, dtype=float) + 273.15
    specific_volume_change = 1.0 / _saturated_vapour_density(temp_c) - 1.0 / _saturated_liquid_density(temp_c)
    return _scalar_or_array(total_k * _dpsat_dt_pa_per_k(temp_c) * specific_volume_change)


def dynamic_viscosity_pa_s(temp_c):
    """Dynamic viscosity of liquid water at atmospheric pressure [Pa s].

    Parameters
    ----------
    temp_c : float or array_like
        Temperature [°C]; 0–100 °C within about 2.5 % of IAPWS 2008.

    Returns
    -------
    float or ndarray
        μ [Pa s].

    Notes
    -----
    Vogel's form μ = A·10^(B/(T − C)) with A = 2.414e-5 Pa s, B = 247.8 K,
    C = 140 K, the coefficients widely quoted for water in engineering
    references (not re-read at the primary source; the tests check them
    against IAPWS 2008). Below 0 °C (supercooled brine) it extrapolates and
    reads low: about 15 % under IAPWS 2008 at −20 °C.

    References
    ----------
    Vogel, H. (1921). Das Temperaturabhängigkeitsgesetz der Viskosität von
    Flüssigkeiten. Phys. Z. 22, 645–646.
    Huber, M. L. et al. (2009). New international formulation for the
    viscosity of H₂O. J. Phys. Chem. Ref. Data 38(2), 101–125 (check values).

    Examples
    --------
    >>> round(float(dynamic_viscosity_pa_s(20.0)) * 1e3, 3)
    1.002
    """
    a, b, c = VOGEL_WATER_VISCOSITY
    total_k = np.asarray(temp_c, dtype=float) + 273.15
    return _scalar_or_array(a * 10.0 ** (b / (total_k - c)))
