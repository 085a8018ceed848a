"""Thermal properties of foods from their composition, frozen or not.

Specific heat, density and conductivity are mass- or volume-weighted sums of
the Choi–Okos (1986) component polynomials, with the water split into liquid
and ice by the Schwartzberg/Pham ice-fraction law below the initial freezing
point. Enthalpy (datum −40 °C) follows Chen (1985) below the initial freezing
point, latent heat included, and the integrated Choi–Okos specific heat above
it; its inverse is closed-form below and a few Newton steps above.

All functions are vectorised: temperatures, enthalpies, freezing points and
the fields of a :class:`Composition` broadcast together like numpy arrays.
Salt is counted with the ash coefficients (Choi–Okos have no separate salt
class and salt is part of the ash of a proximate analysis).
"""
from __future__ import annotations

import numpy as np

from .composition import Composition, _scalar_or_array, validate_composition
from .water import LATENT_HEAT_FUSION_J_PER_KG

# Choi & Okos (1986), as tabulated in ASHRAE Handbook—Refrigeration,
# "Thermal Properties of Foods", Table 1; t in °C. Each entry is (a0, a1, a2)
# of a0 + a1 t + a2 t², converted to SI.
#
# Water: the 0…150 °C polynomial 4.1762 − 9.0864e-5 t + 5.4731e-6 t² kJ kg⁻¹ K⁻¹.
# Some reprints (and CoolProp's INCOMP::FoodWater) use 4.1289 for the constant
# term; 4.1762 is kept because it agrees with IAPWS-95 within 0.2 % from 0 to
# 100 °C, where 4.1289 is 1.3 % low at 20 °C (both checked in the tests).
CHOI_OKOS_SPECIFIC_HEAT_J_PER_KG_K = {
    "water": (4176.2, -9.0864e-2, 5.4731e-3),
    "protein": (2008.2, 1.2089, -1.3129e-3),
    "fat": (1984.2, 1.4733, -4.8008e-3),
    "carbohydrate": (1548.8, 1.9625, -5.9399e-3),
    "fiber": (1845.9, 1.8306, -4.6509e-3),
    "ash": (1092.6, 1.8896, -3.6817e-3),
}
CHOI_OKOS_DENSITY_KG_PER_M3 = {
    "water": (997.18, 3.1439e-3, -3.7574e-3),
    "ice": (916.89, -0.13071, 0.0),
    "protein": (1329.9, -0.5184, 0.0),
    "fat": (925.59, -0.41757, 0.0),
    "carbohydrate": (1599.1, -0.31046, 0.0),
    "fiber": (1311.5, -0.36589, 0.0),
    "ash": (2423.8, -0.28063, 0.0),
}
CHOI_OKOS_CONDUCTIVITY_W_PER_M_K = {
    "water": (0.57109, 1.7625e-3, -6.7036e-6),
    "ice": (2.2196, -6.2489e-3, 1.0154e-4),
    "protein": (0.17881, 1.1958e-3, -2.7178e-6),
    "fat": (0.18071, -2.7604e-4, -1.7749e-7),
    "carbohydrate": (0.20141, 1.3874e-3, -4.3312e-6),
    "fiber": (0.18331, 1.2497e-3, -3.1683e-6),
    "ash": (0.32962, 1.4011e-3, -2.9069e-6),
}

#: Chen (1985): sensible specific heat of the frozen food, 1.55 + 1.26 x_s kJ kg⁻¹ K⁻¹.
CHEN_FROZEN_SPECIFIC_HEAT_J_PER_KG_K = (1550.0, 1260.0)
#: Enthalpy datum [°C]: h(−40 °C) = 0, as in Chen (1985) and the FAO/Riedel tables.
ENTHALPY_DATUM_C = -40.0
#: Schwartzberg (1976): unfreezable (bound) water ≈ 0.4 kg per kg of protein.
BOUND_WATER_PER_PROTEIN = 0.4

_SOLIDS = ("protein", "fat", "carbohydrate", "fiber", "ash")


def bound_water_mass_fraction(comp: Composition, bound_water_fraction=None):
    """Unfreezable (bound) water of the product [kg kg⁻¹].

    Parameters
    ----------
    comp : Composition
        Mass fractions [kg kg⁻¹]; fields may be arrays.
    bound_water_fraction : float, array_like or None
        A known value [kg kg⁻¹ of product]; None for Schwartzberg's
        x_b = 0.4 x_protein.

    Returns
    -------
    float or ndarray
        x_b [kg kg⁻¹], capped at the water content.

    Raises
    ------
    ValueError
        If the composition is invalid or ``bound_water_fraction`` is negative
        or not finite.

    Notes
    -----
    Bound water never freezes and, in the dielectric model, dissolves no salt.
    0.4 kg per kg of protein suits meat and fish; starchy products bind more
    water than their protein suggests, so pass a measured value for them.

    References
    ----------
    Schwartzberg, H. G. (1976). Effective heat capacities for the freezing and
    thawing of food. J. Food Sci. 41(1), 152–156.

    Examples
    --------
    >>> round(float(bound_water_mass_fraction(Composition(water=0.8, protein=0.2))), 3)
    0.08
    """
    validate_composition(comp)
    water = np.asarray(comp.water, dtype=float)
    if bound_water_fraction is None:
        bound = BOUND_WATER_PER_PROTEIN * np.asarray(comp.protein, dtype=float)
    else:
        bound = np.asarray(bound_water_fraction, dtype=float)
        if np.any(~np.isfinite(bound)) or np.any(bound < 0):
            raise ValueError(
                f"bound_water_fraction = {bound_water_fraction} must be a finite mass fraction >= 0"
            )
    return _scalar_or_array(np.minimum(bound, water))


def _solid_fractions(comp):
    """Solids by Choi–Okos class; salt joins the ash."""
    x = {name: np.asarray(getattr(comp, name), dtype=float) for name in _SOLIDS}
    x["ash"] = x["ash"] + np.asarray(comp.salt, dtype=float)
    return x


def _poly(coefficients, t):
    a0, a1, a2 = coefficients
    return a0 + t * (a1 + t * a2)


def _mixture_coefficients(comp):
    """(a0, a1, a2) of the unfrozen mixture's c_p(t) = Σ x_i c_p,i(t)."""
    fractions = _solid_fractions(comp)
    fractions["water"] = np.asarray(comp.water, dtype=float)
    return tuple(
        sum(fractions[name] * CHOI_OKOS_SPECIFIC_HEAT_J_PER_KG_K[name][k] for name in fractions)
        for k in range(3)
    )


def _antiderivative(coefficients, t):
    """P(t) = ∫ c_p dt for c_p = a0 + a1 t + a2 t²."""
    a0, a1, a2 = coefficients
    return t * (a0 + t * (a1 / 2.0 + t * (a2 / 3.0)))


def _freezing(comp, initial_freezing_point_c, bound_water_fraction):
    """Validated (t_f or None, freezable water x_w − x_b) of a composition."""
    bound = np.asarray(bound_water_mass_fraction(comp, bound_water_fraction))
    freezable = np.asarray(comp.water, dtype=float) - bound
    if initial_freezing_point_c is None:
        return None, freezable
    t_f = np.asarray(initial_freezing_point_c, dtype=float)
    if np.any(~np.isfinite(t_f)) or np.any(t_f >= 0.0) or np.any(t_f <= ENTHALPY_DATUM_C):
        raise ValueError(
            f"initial_freezing_point_c = {initial_freezing_point_c} °C must lie between "
            f"{ENTHALPY_DATUM_C:g} and 0 °C; pass None for a product that does not freeze"
        )
    return t_f, freezable


def _ice(freezable, t, t_f):
    """Ice mass fraction; min(t, t_f) makes it exactly 0 at and above t_f."""
    return freezable * (1.0 - t_f / np.minimum(t, t_f))


def _chen_coefficients(comp, freezable, t_f):
    """A [J kg⁻¹ K⁻¹] and K [J kg⁻¹] of Chen's h = (t − t_r)(A − K/t), t in °C."""
    c0, c1 = CHEN_FROZEN_SPECIFIC_HEAT_J_PER_KG_K
    solids = 1.0 - np.asarray(comp.water, dtype=float)
    a = c0 + c1 * solids
    k = freezable * LATENT_HEAT_FUSION_J_PER_KG * t_f / ENTHALPY_DATUM_C
    return a, k


def _chen_enthalpy(a, k, t):
    return (t - ENTHALPY_DATUM_C) * (a - k / t)


def specific_heat_j_per_kg_k(comp: Composition, temp_c):
    """Specific heat of the unfrozen food, Choi–Okos (1986) [J kg⁻¹ K⁻¹].

    Parameters
    ----------
    comp : Composition
        Mass fractions [kg kg⁻¹]; fields may be arrays.
    temp_c : float or array_like
        Temperature [°C].

    Returns
    -------
    float or ndarray
        c_p [J kg⁻¹ K⁻¹], broadcast over ``temp_c`` and the composition.

    Raises
    ------
    ValueError
        If the composition is invalid (negative fraction, sum not 1).

    Notes
    -----
    c_p = Σ x_i c_p,i(t), with the component polynomials of Choi & Okos (1986)
    in ``CHOI_OKOS_SPECIFIC_HEAT_J_PER_KG_K`` (salt uses the ash polynomial).
    Published for −40…150 °C; all water is taken as liquid (no ice), so below
    the initial freezing point use :func:`apparent_specific_heat_j_per_kg_k`.

    References
    ----------
    Choi, Y., Okos, M. R. (1986). Effects of temperature and composition on the
    thermal properties of foods. In Le Maguer, M., Jelen, P. (eds.), Food
    Engineering and Process Applications, Vol. 1, 93–101. Elsevier.
    ASHRAE Handbook—Refrigeration, "Thermal Properties of Foods", Table 1.

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(specific_heat_j_per_kg_k(fish, 5.0)))
    3734
    """
    validate_composition(comp)
    t = np.asarray(temp_c, dtype=float)
    return _scalar_or_array(_poly(_mixture_coefficients(comp), t))


def ice_mass_fraction(comp: Composition, temp_c, initial_freezing_point_c, bound_water_fraction=None):
    """Mass fraction of ice in the product [kg kg⁻¹].

    Parameters
    ----------
    comp : Composition
        Mass fractions [kg kg⁻¹]; fields may be arrays.
    temp_c : float or array_like
        Temperature [°C].
    initial_freezing_point_c : float, array_like or None
        Initial freezing point t_f [°C], between −40 and 0; None means the
        product does not freeze (no ice at any temperature).
    bound_water_fraction : float, array_like or None
        Unfreezable water x_b [kg kg⁻¹ of product]; default 0.4 x_protein.
        Capped at the water content.

    Returns
    -------
    float or ndarray
        x_ice [kg kg⁻¹]; 0 at and above t_f.

    Raises
    ------
    ValueError
        Invalid composition, t_f outside (−40, 0) °C or negative x_b.

    Notes
    -----
    x_ice = (x_w − x_b)(1 − t_f/t) for t < t_f (t, t_f in °C), the form that
    follows from Raoult's law for a dilute solution (Pham 1987; ASHRAE). Salt
    is treated as a solid: its effect on freezing is carried by t_f.

    References
    ----------
    Pham, Q. T. (1987). Calculation of bound water in frozen food.
    J. Food Sci. 52(1), 210–212.
    Schwartzberg, H. G. (1976). J. Food Sci. 41(1), 152–156.

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(ice_mass_fraction(fish, -5.0, -1.0)), 4)
    0.5824
    """
    t_f, freezable = _freezing(comp, initial_freezing_point_c, bound_water_fraction)
    t = np.asarray(temp_c, dtype=float)
    if t_f is None:
        return _scalar_or_array(np.zeros(np.broadcast_shapes(t.shape, freezable.shape)))
    return _scalar_or_array(_ice(freezable, t, t_f))


def unfrozen_water_fraction(comp: Composition, temp_c, initial_freezing_point_c, bound_water_fraction=None):
    """Liquid (unfrozen) water, x_w − x_ice [kg kg⁻¹ of product].

    Parameters
    ----------
    comp, temp_c, initial_freezing_point_c, bound_water_fraction
        As in :func:`ice_mass_fraction`.

    Returns
    -------
    float or ndarray
        Unfrozen water mass fraction [kg kg⁻¹], bound water included.

    Raises
    ------
    ValueError
        As in :func:`ice_mass_fraction`.

    Notes
    -----
    Tends to x_b far below t_f and equals x_w at and above t_f.

    References
    ----------
    Pham, Q. T. (1987). J. Food Sci. 52(1), 210–212.

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(unfrozen_water_fraction(fish, -5.0, -1.0)), 4)
    0.2176
    """
    ice = ice_mass_fraction(comp, temp_c, initial_freezing_point_c, bound_water_fraction)
    return _scalar_or_array(np.asarray(comp.water, dtype=float) - ice)


def specific_enthalpy_j_per_kg(comp: Composition, temp_c, initial_freezing_point_c=None,
                               bound_water_fraction=None):
    """Specific enthalpy above −40 °C, latent heat of the ice included [J kg⁻¹].

    Parameters
    ----------
    comp : Composition
        Mass fractions [kg kg⁻¹]; fields may be arrays.
    temp_c : float or array_like
        Temperature [°C].
    initial_freezing_point_c : float, array_like or None
        Initial freezing point t_f [°C] in (−40, 0); None for a product that
        does not freeze (dry goods): then h = ∫ c_p dt from −40 °C.
    bound_water_fraction : float, array_like or None
        Unfreezable water [kg kg⁻¹]; default 0.4 x_protein (Schwartzberg 1976).

    Returns
    -------
    float or ndarray
        h [J kg⁻¹], with h(−40 °C) = 0.

    Raises
    ------
    ValueError
        Invalid composition, t_f outside (−40, 0) °C or negative x_b.

    Notes
    -----
    Below t_f, Chen (1985):

        h = (t − t_r) [A − (x_w − x_b) L₀ t_f / (t_r t)],  A = 1550 + 1260 x_s,

    t_r = −40 °C, L₀ = 333.6 kJ kg⁻¹. Its latent term is exactly L₀ times the
    ice melted between t_r and t by :func:`ice_mass_fraction`, so the two
    functions are consistent. Above t_f, h = h(t_f) + ∫ c_p dt with the
    unfrozen Choi–Okos c_p. h is continuous at t_f, strictly increasing, and
    valid from −40 to 150 °C (Chen's form extends below −40 °C, h < 0).
    Chen's curve with t_f = −1.0 °C follows the FAO white-fish table within
    2.5 kJ kg⁻¹ from −20 to −4 °C (see the tests).

    References
    ----------
    Chen, C. S. (1985). Thermodynamic analysis of the freezing and thawing of
    foods: enthalpy and apparent specific heat. J. Food Sci. 50(4), 1158–1162.
    Choi, Y., Okos, M. R. (1986), see :func:`specific_heat_j_per_kg_k`.

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(specific_enthalpy_j_per_kg(fish, -20.0, -1.0)) / 1e3, 1)
    42.1
    """
    t_f, freezable = _freezing(comp, initial_freezing_point_c, bound_water_fraction)
    t = np.asarray(temp_c, dtype=float)
    unfrozen = _mixture_coefficients(comp)
    if t_f is None:
        h = _antiderivative(unfrozen, t) - _antiderivative(unfrozen, ENTHALPY_DATUM_C)
        return _scalar_or_array(h)
    a, k = _chen_coefficients(comp, freezable, t_f)
    # Each branch is evaluated on its own side of t_f and is constant beyond it.
    frozen_part = _chen_enthalpy(a, k, np.minimum(t, t_f))
    thawed_part = _antiderivative(unfrozen, np.maximum(t, t_f)) - _antiderivative(unfrozen, t_f)
    return _scalar_or_array(frozen_part + thawed_part)


def _newton_on_unfrozen(coefficients, t_start, dh):
    """t with ∫_{t_start}^{t} c_p = dh (dh ≥ 0), c_p the unfrozen Choi–Okos mixture."""
    p_start = _antiderivative(coefficients, t_start)
    t = t_start + dh / _poly(coefficients, t_start)
    for _ in range(20):  # converges in 3–4 steps; the cap only guards bad input
        step = (_antiderivative(coefficients, t) - p_start - dh) / _poly(coefficients, t)
        t = t - step
        if np.all(np.abs(step) <= 1e-13 * (1.0 + np.abs(t))):
            break
    return t


def _chen_inverse(a, k, h):
    """Negative root of a t² − (a t_r + k + h) t + k t_r = 0 (Chen's h solved for t)."""
    b = -(a * ENTHALPY_DATUM_C + k + h)
    c = k * ENTHALPY_DATUM_C
    root = np.sqrt(b * b - 4.0 * a * c)
    q = -0.5 * (b + np.where(b >= 0.0, root, -root))  # no cancellation
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(b > 0.0, q / a, c / q)


def temperature_from_enthalpy_c(comp: Composition, h_j_per_kg, initial_freezing_point_c=None,
                                bound_water_fraction=None):
    """Temperature at a given specific enthalpy, the exact inverse [°C].

    Parameters
    ----------
    comp : Composition
        Mass fractions [kg kg⁻¹]; fields may be arrays.
    h_j_per_kg : float or array_like
        Specific enthalpy [J kg⁻¹] on the −40 °C datum of
        :func:`specific_enthalpy_j_per_kg`.
    initial_freezing_point_c : float, array_like or None
        Initial freezing point [°C]; None for a product that does not freeze.
    bound_water_fraction : float, array_like or None
        Unfreezable water [kg kg⁻¹]; default 0.4 x_protein.

    Returns
    -------
    float or ndarray
        Temperature [°C].

    Raises
    ------
    ValueError
        As in :func:`specific_enthalpy_j_per_kg`.

    Notes
    -----
    Below h(t_f), Chen's equation is a quadratic in t whose negative root is
    taken in a cancellation-free form. Above, ∫ c_p dt is a cubic in t with
    c_p > 0, solved by Newton's method from the linear estimate (3–4 steps to
    machine precision). Round trips t → h → t agree to better than 1e-12 K.

    References
    ----------
    Chen, C. S. (1985). J. Food Sci. 50(4), 1158–1162.

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(temperature_from_enthalpy_c(fish, 42.1e3, -1.0)), 2)
    -20.0
    """
    t_f, freezable = _freezing(comp, initial_freezing_point_c, bound_water_fraction)
    h = np.asarray(h_j_per_kg, dtype=float)
    unfrozen = _mixture_coefficients(comp)
    if t_f is None:
        return _scalar_or_array(_newton_on_unfrozen(unfrozen, ENTHALPY_DATUM_C, h))
    a, k = _chen_coefficients(comp, freezable, t_f)
    h_f = _chen_enthalpy(a, k, t_f)
    t_frozen = _chen_inverse(a, k, np.minimum(h, h_f))
    t_thawed = _newton_on_unfrozen(unfrozen, t_f, np.maximum(h - h_f, 0.0))
    return _scalar_or_array(np.where(h <= h_f, t_frozen, t_thawed))


def apparent_specific_heat_j_per_kg_k(comp: Composition, temp_c, initial_freezing_point_c=None,
                                      bound_water_fraction=None):
    """Apparent specific heat dh/dt, latent heat included [J kg⁻¹ K⁻¹].

    Parameters
    ----------
    comp, temp_c, initial_freezing_point_c, bound_water_fraction
        As in :func:`specific_enthalpy_j_per_kg`.

    Returns
    -------
    float or ndarray
        dh/dt [J kg⁻¹ K⁻¹]; at t_f itself the unfrozen (right-hand) value.

    Raises
    ------
    ValueError
        As in :func:`specific_enthalpy_j_per_kg`.

    Notes
    -----
    Below t_f: c_app = A + (x_w − x_b) L₀ (−t_f)/t² (Chen 1985, analytic
    derivative); above: the unfrozen Choi–Okos c_p. It jumps at t_f, where the
    latent peak ends.

    References
    ----------
    Chen, C. S. (1985). J. Food Sci. 50(4), 1158–1162.

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(apparent_specific_heat_j_per_kg_k(fish, -5.0, -1.0)))
    11516
    """
    t_f, freezable = _freezing(comp, initial_freezing_point_c, bound_water_fraction)
    t = np.asarray(temp_c, dtype=float)
    unfrozen = _poly(_mixture_coefficients(comp), t)
    if t_f is None:
        return _scalar_or_array(unfrozen)
    a, k = _chen_coefficients(comp, freezable, t_f)
    frozen = a - k * ENTHALPY_DATUM_C / np.minimum(t, t_f) ** 2
    return _scalar_or_array(np.where(t < t_f, frozen, unfrozen))


def _specific_volumes(comp, temp_c, initial_freezing_point_c, bound_water_fraction):
    """x_i/ρ_i(t) [m³ kg⁻¹] of liquid water, ice and each solid (salt: ash density)."""
    t_f, freezable = _freezing(comp, initial_freezing_point_c, bound_water_fraction)
    t = np.asarray(temp_c, dtype=float)
    ice = 0.0 if t_f is None else _ice(freezable, t, t_f)
    volumes = {
        "water": (np.asarray(comp.water, dtype=float) - ice) / _poly(CHOI_OKOS_DENSITY_KG_PER_M3["water"], t),
        "ice": ice / _poly(CHOI_OKOS_DENSITY_KG_PER_M3["ice"], t),
    }
    for name in ("protein", "fat", "carbohydrate", "fiber", "ash", "salt"):
        density = _poly(CHOI_OKOS_DENSITY_KG_PER_M3["ash" if name == "salt" else name], t)
        volumes[name] = np.asarray(getattr(comp, name), dtype=float) / density
    return volumes


def volume_fractions(comp: Composition, temp_c, initial_freezing_point_c=None, bound_water_fraction=None):
    """Volume fractions of liquid water, ice and each solid [m³ m⁻³].

    Parameters
    ----------
    comp, temp_c, initial_freezing_point_c, bound_water_fraction
        As in :func:`specific_enthalpy_j_per_kg`.

    Returns
    -------
    dict of str to float or ndarray
        Keys ``water`` (unfrozen, bound water included), ``ice``, ``protein``,
        ``fat``, ``carbohydrate``, ``fiber``, ``ash``, ``salt``; they sum to 1.

    Raises
    ------
    ValueError
        As in :func:`specific_enthalpy_j_per_kg`.

    Notes
    -----
    v_i = (x_i/ρ_i) / Σ_j (x_j/ρ_j) with the Choi–Okos densities (salt: ash
    density), no air.

    References
    ----------
    Choi, Y., Okos, M. R. (1986); ASHRAE Handbook—Refrigeration, Table 1.

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(volume_fractions(fish, -20.0, -1.0)["ice"]), 3)
    0.745
    """
    specific_volumes = _specific_volumes(comp, temp_c, initial_freezing_point_c, bound_water_fraction)
    total = sum(specific_volumes.values())
    return {name: _scalar_or_array(np.asarray(v / total)) for name, v in specific_volumes.items()}


def density_kg_per_m3(comp: Composition, temp_c, initial_freezing_point_c=None, bound_water_fraction=None):
    """Density of the (possibly frozen) product, without air [kg m⁻³].

    Parameters
    ----------
    comp, temp_c, initial_freezing_point_c, bound_water_fraction
        As in :func:`specific_enthalpy_j_per_kg`.

    Returns
    -------
    float or ndarray
        ρ [kg m⁻³].

    Raises
    ------
    ValueError
        As in :func:`specific_enthalpy_j_per_kg`.

    Notes
    -----
    1/ρ = Σ x_i/ρ_i(t), ice and liquid water counted separately, Choi–Okos
    densities (salt: ash density). Porosity is not modelled.

    References
    ----------
    Choi, Y., Okos, M. R. (1986); ASHRAE Handbook—Refrigeration, Table 1.

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(density_kg_per_m3(fish, 5.0)))
    1049
    """
    specific_volumes = _specific_volumes(comp, temp_c, initial_freezing_point_c, bound_water_fraction)
    return _scalar_or_array(np.asarray(1.0 / sum(specific_volumes.values())))


def thermal_conductivity_w_per_m_k(comp: Composition, temp_c, initial_freezing_point_c=None,
                                   bound_water_fraction=None):
    """Thermal conductivity, parallel model on volume fractions [W m⁻¹ K⁻¹].

    Parameters
    ----------
    comp, temp_c, initial_freezing_point_c, bound_water_fraction
        As in :func:`specific_enthalpy_j_per_kg`.

    Returns
    -------
    float or ndarray
        k [W m⁻¹ K⁻¹].

    Raises
    ------
    ValueError
        As in :func:`specific_enthalpy_j_per_kg`.

    Notes
    -----
    k = Σ v_i k_i(t) (Choi & Okos 1986), v_i from :func:`volume_fractions`.
    The parallel model is an upper bound; for frozen foods it overestimates k
    when ice is not continuous along the heat flow (ASHRAE).

    References
    ----------
    Choi, Y., Okos, M. R. (1986); ASHRAE Handbook—Refrigeration, Table 1.

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(thermal_conductivity_w_per_m_k(fish, 5.0)), 3)
    0.518
    """
    t = np.asarray(temp_c, dtype=float)
    fractions = volume_fractions(comp, t, initial_freezing_point_c, bound_water_fraction)
    k = sum(
        np.asarray(v) * _poly(CHOI_OKOS_CONDUCTIVITY_W_PER_M_K["ash" if name == "salt" else name], t)
        for name, v in fractions.items()
    )
    return _scalar_or_array(np.asarray(k))


def thermal_diffusivity_m2_per_s(comp: Composition, temp_c, initial_freezing_point_c=None,
                                 bound_water_fraction=None):
    """Thermal diffusivity k/(ρ c_app), latent heat included [m² s⁻¹].

    Parameters
    ----------
    comp, temp_c, initial_freezing_point_c, bound_water_fraction
        As in :func:`specific_enthalpy_j_per_kg`.

    Returns
    -------
    float or ndarray
        α [m² s⁻¹], using :func:`apparent_specific_heat_j_per_kg_k`, so it
        dips in the freezing range.

    Raises
    ------
    ValueError
        As in :func:`specific_enthalpy_j_per_kg`.

    Notes
    -----
    α = k / (ρ c_app).

    References
    ----------
    Choi, Y., Okos, M. R. (1986); Chen, C. S. (1985).

    Examples
    --------
    >>> fish = Composition(water=0.80, protein=0.18, fat=0.01, ash=0.01)
    >>> round(float(thermal_diffusivity_m2_per_s(fish, 5.0)) * 1e7, 2)
    1.32
    """
    args = (comp, temp_c, initial_freezing_point_c, bound_water_fraction)
    k = thermal_conductivity_w_per_m_k(*args)
    rho = density_kg_per_m3(*args)
    c_app = apparent_specific_heat_j_per_kg_k(*args)
    return _scalar_or_array(np.asarray(k / (rho * c_app)))
