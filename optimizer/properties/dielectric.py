"""Dielectric properties of water, ice and foods at RF and microwave frequencies.

Liquid water relaxes as one Debye dipole (Kaatze 1989), dissolved salts add an
ionic loss σ/(ωε₀), and ice is nearly lossless (Mätzler & Wegmüller 1987). A
food is a Looyenga (1965) mixture of brine (the unfrozen freezable water with
the salts, freeze-concentrated as ice forms), bound water, ice and dry solids;
the same module gives the penetration depth and the absorbed power density.

Convention: ε = ε' − jε''; functions return the pair (ε', ε'') with ε'' > 0.
"""
from __future__ import annotations

import numpy as np
from scipy.constants import c as SPEED_OF_LIGHT_M_PER_S
from scipy.constants import epsilon_0 as VACUUM_PERMITTIVITY_F_PER_M

from .composition import Composition, _scalar_or_array
from .thermal import bound_water_mass_fraction, unfrozen_water_fraction, volume_fractions
from .water import dynamic_viscosity_pa_s

# Kaatze (1989), single Debye relaxation of pure water, T in °C:
# log10 ε_s = a + b T;  ε_∞ = a + b T;
# τ = τ₀ (1 + q (T − T_c)²) exp(E/T_K)  as (τ₀ [s], q [K⁻²], T_c [°C], E [K]).
KAATZE_1989_LOG10_STATIC = (1.94404, -1.991e-3)
KAATZE_1989_HIGH_FREQUENCY = (5.77, -2.74e-2)
KAATZE_1989_RELAXATION_TIME = (3.745e-15, 7e-5, 27.5, 2295.7)

#: Malmberg & Maryott (1956): ε_s = Σ c_n T^n, T in °C, 0–100 °C.
MALMBERG_MARYOTT_1956 = (87.740, -0.40008, 9.398e-4, -1.410e-6)

#: Mätzler & Wegmüller (1987): ε'_ice = 3.1884 + 9.1e-4 T (T in °C, −40…0 °C).
MATZLER_WEGMULLER_1987_ICE_REAL = (3.1884, 9.1e-4)
# Mätzler (2006) loss of pure ice, ε'' = α/f + β f (f in GHz, T in K):
# α = (α₀ + α₁ θ) exp(−α₂ θ), θ = 300/T − 1;
# β = B₁/T · e^(b/T)/(e^(b/T) − 1)² + B₂ f² + exp(d₀ + d₁ (T − 273.16)).
MATZLER_2006_ICE_ALPHA = (0.00504, 0.0062, 22.1)
MATZLER_2006_ICE_BETA = {"B1_K_per_GHz": 0.0207, "b_K": 335.0, "B2_per_GHz3": 1.16e-11,
                         "delta": (-9.963, 0.0372)}

# Stogryn (1971), NaCl solutions: normality from salinity S [‰],
# N = S (n₀ + n₁ S + n₂ S²); conductivity at 25 °C,
# σ₂₅ = N (s₀ + s₁ N + s₂ N² + s₃ N³ + s₄ N⁴) [S m⁻¹].
STOGRYN_1971_NORMALITY = (1.707e-2, 1.205e-5, 4.058e-9)
STOGRYN_1971_CONDUCTIVITY_25C = (10.394, -2.3776, 0.68258, -0.13538, 1.0086e-2)
#: NaCl solubility limit [kg kg⁻¹ of brine] (CRC Handbook: tables stop at 26 %).
NACL_SATURATION_MASS_FRACTION = 0.26

#: Ash counted as dissolved NaCl, kg per kg (assumption: the ash of muscle
#: foods is mostly soluble K/Na phosphates and chlorides; no published factor).
ASH_AS_NACL = 1.0

#: Dry non-fat solids (protein, carbohydrate, fiber, ash, salt): (ε', ε'').
#: Representative of dry starch and protein at 0.9–3 GHz (ε' ≈ 2–3,
#: ε'' ≈ 0.05–0.2; review tables such as Ryynänen 1995, from memory).
DRY_SOLID_PERMITTIVITY = (2.5, 0.1)
#: Fats and oils: (ε', ε''), ε' ≈ 2.5–2.6, ε'' ≈ 0.1–0.2 (Ryynänen 1995, memory).
FAT_PERMITTIVITY = (2.5, 0.15)

#: Industrial, scientific and medical (ISM) bands used for dielectric heating
#: [Hz]: ITU Radio Regulations footnote 5.150 (902–928 MHz in Region 2 only),
#: plus 896 MHz, the UK industrial-heating allocation (band edges 886–906 MHz
#: as listed in CISPR 11; from memory, confirm before relying on the edges).
ISM_BANDS_HZ = (
    ("13.56 MHz", 13.553e6, 13.567e6),
    ("27.12 MHz", 26.957e6, 27.283e6),
    ("40.68 MHz", 40.66e6, 40.70e6),
    ("896 MHz (UK)", 886e6, 906e6),
    ("915 MHz (902–928 MHz, incl. 922 MHz)", 902e6, 928e6),
    ("2450 MHz (2400–2500 MHz)", 2400e6, 2500e6),
    ("5800 MHz (5725–5875 MHz)", 5725e6, 5875e6),
)


def _frequency(frequency_hz):
    f = np.asarray(frequency_hz, dtype=float)
    if np.any(~np.isfinite(f)) or np.any(f <= 0):
        raise ValueError(f"frequency_hz = {frequency_hz} must be a positive frequency in Hz")
    return f


def _pair(eps):
    """(ε', ε'') from a complex ε = ε' − jε''."""
    return _scalar_or_array(np.asarray(eps.real)), _scalar_or_array(np.asarray(-eps.imag))


def free_space_wavelength_m(frequency_hz):
    """Free-space wavelength λ₀ = c/f [m].

    Parameters
    ----------
    frequency_hz : float or array_like
        Frequency [Hz], > 0.

    Returns
    -------
    float or ndarray
        λ₀ [m].

    Raises
    ------
    ValueError
        If a frequency is not positive and finite.

    Notes
    -----
    c = 299 792 458 m s⁻¹ (exact, ``scipy.constants.c``).

    References
    ----------
    BIPM (2019). The International System of Units, 9th ed.

    Examples
    --------
    >>> round(float(free_space_wavelength_m(2.45e9)) * 100, 2)
    12.24
    """
    return _scalar_or_array(SPEED_OF_LIGHT_M_PER_S / _frequency(frequency_hz))


def water_static_permittivity(temp_c):
    """Static relative permittivity of pure water, Malmberg & Maryott (1956).

    Parameters
    ----------
    temp_c : float or array_like
        Temperature [°C], 0–100 °C.

    Returns
    -------
    float or ndarray
        ε_s [–].

    Notes
    -----
    ε_s = 87.740 − 0.40008 T + 9.398e-4 T² − 1.410e-6 T³ (T in °C), fitted to
    measurements from 0 to 100 °C.

    References
    ----------
    Malmberg, C. G., Maryott, A. A. (1956). Dielectric constant of water from
    0° to 100 °C. J. Res. Natl. Bur. Stand. 56(1), 1–8.

    Examples
    --------
    >>> round(float(water_static_permittivity(25.0)), 2)
    78.3
    """
    t = np.asarray(temp_c, dtype=float)
    c0, c1, c2, c3 = MALMBERG_MARYOTT_1956
    return _scalar_or_array(c0 + t * (c1 + t * (c2 + t * c3)))


def _water_complex(t, f):
    a, b = KAATZE_1989_LOG10_STATIC
    static = 10.0 ** (a + b * t)
    a, b = KAATZE_1989_HIGH_FREQUENCY
    high = a + b * t
    tau0, q, centre, activation = KAATZE_1989_RELAXATION_TIME
    tau = tau0 * (1.0 + q * (t - centre) ** 2) * np.exp(activation / (t + 273.15))
    return high + (static - high) / (1.0 + 1j * 2.0 * np.pi * f * tau)


def water_permittivity(temp_c, frequency_hz):
    """Complex permittivity of pure liquid water, single Debye (Kaatze 1989).

    Parameters
    ----------
    temp_c : float or array_like
        Temperature [°C]; fitted −4…60 °C, extrapolated to −40…120 °C
        (supercooled brine, hot products).
    frequency_hz : float or array_like
        Frequency [Hz].

    Returns
    -------
    eps_prime, eps_loss : float or ndarray
        ε' and ε'' [–].

    Raises
    ------
    ValueError
        If a frequency is not positive and finite.

    Notes
    -----
    ε = ε_∞ + (ε_s − ε_∞)/(1 + jωτ) with log10 ε_s = 1.94404 − 1.991e-3 T,
    ε_∞ = 5.77 − 2.74e-2 T, τ = 3.745e-15 (1 + 7e-5 (T − 27.5)²) e^(2295.7/T_K) s.
    Below 10 GHz the single Debye term carries practically all the loss; it
    matches the other published parameterisations within ±0.3 in ε' and ±3 %
    in ε'' from 0 to 50 °C at 915 and 2450 MHz.

    References
    ----------
    Kaatze, U. (1989). Complex permittivity of water as a function of
    frequency and temperature. J. Chem. Eng. Data 34(4), 371–374.

    Examples
    --------
    >>> e1, e2 = water_permittivity(25.0, 2.45e9)
    >>> round(float(e1), 1), round(float(e2), 2)
    (77.2, 9.19)
    """
    eps = _water_complex(np.asarray(temp_c, dtype=float), _frequency(frequency_hz))
    return _pair(eps)


def _ice_complex(t, f):
    a, b = MATZLER_WEGMULLER_1987_ICE_REAL
    real = a + b * t
    total_k = t + 273.15
    f_ghz = f / 1e9
    a0, a1, a2 = MATZLER_2006_ICE_ALPHA
    theta = 300.0 / total_k - 1.0
    alpha = (a0 + a1 * theta) * np.exp(-a2 * theta)
    beta_coefficients = MATZLER_2006_ICE_BETA
    x = np.exp(beta_coefficients["b_K"] / total_k)
    d0, d1 = beta_coefficients["delta"]
    beta = (beta_coefficients["B1_K_per_GHz"] / total_k * x / (x - 1.0) ** 2
            + beta_coefficients["B2_per_GHz3"] * f_ghz**2
            + np.exp(d0 + d1 * (total_k - 273.16)))
    return real - 1j * (alpha / f_ghz + beta * f_ghz)


def ice_permittivity(temp_c, frequency_hz):
    """Complex permittivity of pure ice [–].

    Parameters
    ----------
    temp_c : float or array_like
        Temperature [°C], −40…0 °C.
    frequency_hz : float or array_like
        Frequency [Hz]; the loss model holds from about 10 MHz to 300 GHz.

    Returns
    -------
    eps_prime, eps_loss : float or ndarray
        ε' (≈ 3.17) and ε'' (≈ 2e-4 at microwave frequencies).

    Raises
    ------
    ValueError
        If a frequency is not positive and finite.

    Notes
    -----
    ε' = 3.1884 + 9.1e-4 T (Mätzler & Wegmüller 1987); ε'' = α/f + βf with
    f in GHz, the Hufford-type model in the form given by Mätzler (2006).

    References
    ----------
    Mätzler, C., Wegmüller, U. (1987). Dielectric properties of fresh-water
    ice at microwave frequencies. J. Phys. D: Appl. Phys. 20, 1623–1630.
    Mätzler, C. (ed.) (2006). Thermal Microwave Radiation: Applications for
    Remote Sensing, ch. 5. IET, London.

    Examples
    --------
    >>> e1, e2 = ice_permittivity(-18.0, 915e6)
    >>> round(float(e1), 3), round(float(e2) * 1e4, 1)
    (3.172, 2.0)
    """
    eps = _ice_complex(np.asarray(temp_c, dtype=float), _frequency(frequency_hz))
    return _pair(eps)


def brine_conductivity_s_per_m(nacl_mass_fraction, temp_c):
    """Ionic conductivity of an NaCl solution (brine) [S m⁻¹].

    Parameters
    ----------
    nacl_mass_fraction : float or array_like
        Salt per mass of solution [kg kg⁻¹], 0 to saturation (0.26).
    temp_c : float or array_like
        Temperature [°C], −20…120 °C (supercooled or freeze-concentrated
        brine below 0 °C).

    Returns
    -------
    float or ndarray
        σ [S m⁻¹].

    Notes
    -----
    Normality N = S (1.707e-2 + 1.205e-5 S + 4.058e-9 S²), S in ‰, and
    σ₂₅ = N (10.394 − 2.3776 N + 0.68258 N² − 0.13538 N³ + 1.0086e-2 N⁴)
    (Stogryn 1971). The temperature dependence follows Walden's rule
    (molar conductivity × solvent viscosity ≈ constant),
    σ(T) = σ₂₅ μ_w(25 °C)/μ_w(T): unlike Stogryn's own polynomial in
    (25 − T), which is fitted near 0–40 °C and grows without bound above,
    it stays reasonable at drying temperatures. Checked against brine in
    equilibrium with ice (Stogryn & Desargant 1985) in the tests.

    References
    ----------
    Stogryn, A. (1971). Equations for calculating the dielectric constant of
    saline water. IEEE Trans. Microwave Theory Tech. 19(8), 733–736.
    Walden, P. (1906). Z. Phys. Chem. 55, 207–249.
    Stogryn, A., Desargant, G. J. (1985). The dielectric properties of brine in
    sea ice at microwave frequencies. IEEE Trans. Antennas Propag. 33(5),
    523–532.

    Examples
    --------
    >>> round(float(brine_conductivity_s_per_m(0.05, 25.0)), 2)
    7.73
    """
    salinity_permille = 1e3 * np.asarray(nacl_mass_fraction, dtype=float)
    n0, n1, n2 = STOGRYN_1971_NORMALITY
    normality = salinity_permille * (n0 + salinity_permille * (n1 + salinity_permille * n2))
    s0, s1, s2, s3, s4 = STOGRYN_1971_CONDUCTIVITY_25C
    sigma_25 = normality * (s0 + normality * (s1 + normality * (s2 + normality * (s3 + normality * s4))))
    walden = dynamic_viscosity_pa_s(25.0) / dynamic_viscosity_pa_s(temp_c)
    return _scalar_or_array(np.asarray(sigma_25 * walden))


def ionic_loss_factor(conductivity_s_per_m, frequency_hz):
    """Loss factor from ionic conduction, ε''_ionic = σ/(2π f ε₀) [–].

    Parameters
    ----------
    conductivity_s_per_m : float or array_like
        Ionic conductivity σ [S m⁻¹].
    frequency_hz : float or array_like
        Frequency [Hz].

    Returns
    -------
    float or ndarray
        ε''_ionic [–], added to the dipolar loss.

    Raises
    ------
    ValueError
        If a frequency is not positive and finite.

    Notes
    -----
    Falls as 1/f, so salty products are much lossier at 915 MHz than at
    2450 MHz, and lossier when warmer.

    References
    ----------
    Metaxas, A. C., Meredith, R. J. (1983). Industrial Microwave Heating,
    ch. 2. Peter Peregrinus (IEE), London.

    Examples
    --------
    >>> round(float(ionic_loss_factor(1.0, 915e6)), 2)
    19.64
    """
    sigma = np.asarray(conductivity_s_per_m, dtype=float)
    f = _frequency(frequency_hz)
    return _scalar_or_array(sigma / (2.0 * np.pi * f * VACUUM_PERMITTIVITY_F_PER_M))


def food_permittivity(comp: Composition, temp_c, frequency_hz, initial_freezing_point_c=None,
                      bound_water_fraction=None):
    """Complex permittivity of a food from its composition, frozen or not.

    Parameters
    ----------
    comp : Composition
        Mass fractions [kg kg⁻¹]; fields may be arrays (e.g. water falling
        along a dryer).
    temp_c : float or array_like
        Temperature [°C], −40…120 °C.
    frequency_hz : float or array_like
        Frequency [Hz], about 10 MHz to 10 GHz.
    initial_freezing_point_c : float, array_like or None
        Initial freezing point [°C]; None for a product that does not freeze.
    bound_water_fraction : float, array_like or None
        Unfreezable water [kg kg⁻¹]; default 0.4 x_protein (Schwartzberg 1976).

    Returns
    -------
    eps_prime, eps_loss : float or ndarray
        ε' and ε'' [–], ε'' > 0.

    Raises
    ------
    ValueError
        Invalid composition, freezing point or frequency.

    Notes
    -----
    Phases and their permittivities, on the volume fractions of
    :func:`volume_fractions`:

    * brine — the unfrozen freezable water, x_w − x_b − x_ice, holding the
      salt plus the ash counted as NaCl (``ASH_AS_NACL``); its NaCl fraction
      rises as ice forms (freeze-concentration, capped at saturation).
      ε = Kaatze water − j σ/(ωε₀), σ from :func:`brine_conductivity_s_per_m`.
      The dielectric decrement of salt on ε_s is neglected (it would lower ε'
      of salty products by up to ~10–15 %).
    * bound water x_b — holds no salt (it is not a solvent) and relaxes like
      pure water above t_f; below t_f it is immobilised in the same proportion
      as the freezable water freezes, t_f/t of it staying water-like and the
      rest taking the ice permittivity. This proportionality is an assumption
      of this model (continuous at t_f), not a published law.
    * ice — :func:`ice_permittivity`; dry solids ``DRY_SOLID_PERMITTIVITY``;
      fat ``FAT_PERMITTIVITY``.

    Mixing rule: Looyenga (1965), ε^(1/3) = Σ v_i ε_i^(1/3) (complex, principal
    root). Frozen foods come out far lossier than ice (ε'' ≈ 0.5–2 for lean
    meat at −18…−10 °C) because of the freeze-concentrated brine.
    Limitation: in low-moisture goods the remaining water is treated as
    mobile, which overestimates ε' and ε'' (by a factor of a few for pasta
    near 12 % moisture, judged against literature values recalled from memory). A larger ``bound_water_fraction`` for starchy products removes
    their ionic loss but not the dipolar part; the line fit absorbs the rest.

    References
    ----------
    Looyenga, H. (1965). Dielectric constants of heterogeneous mixtures.
    Physica 31(3), 401–406.
    Kaatze, U. (1989). J. Chem. Eng. Data 34(4), 371–374.
    Stogryn, A. (1971). IEEE Trans. Microwave Theory Tech. 19(8), 733–736.
    To, E. C. et al. (1974). Dielectric properties of food materials.
    J. Microwave Power 9(4), 303–315 (check values).

    Examples
    --------
    >>> beef = Composition(water=0.74, protein=0.22, fat=0.03, ash=0.01)
    >>> e1, e2 = food_permittivity(beef, 5.0, 915e6, initial_freezing_point_c=-1.7)
    >>> round(float(e1)), round(float(e2))
    (53, 19)
    """
    t = np.asarray(temp_c, dtype=float)
    f = _frequency(frequency_hz)
    fractions = volume_fractions(comp, t, initial_freezing_point_c, bound_water_fraction)
    bound = np.asarray(bound_water_mass_fraction(comp, bound_water_fraction))
    unfrozen = np.asarray(unfrozen_water_fraction(comp, t, initial_freezing_point_c, bound_water_fraction))
    brine_water = unfrozen - bound
    if initial_freezing_point_c is None:
        mobile_bound_share = 1.0
    else:
        t_f = np.asarray(initial_freezing_point_c, dtype=float)
        mobile_bound_share = t_f / np.minimum(t, t_f)

    v_unfrozen = np.asarray(fractions["water"])
    v_brine = v_unfrozen * np.divide(brine_water, unfrozen, out=np.zeros_like(v_unfrozen * unfrozen),
                                     where=unfrozen > 0)
    v_bound = v_unfrozen - v_brine

    ions = np.asarray(comp.salt, dtype=float) + ASH_AS_NACL * np.asarray(comp.ash, dtype=float)
    solution = ions + brine_water
    nacl = np.divide(ions, solution, out=np.zeros_like(solution * 1.0), where=solution > 0)
    nacl = np.minimum(nacl, NACL_SATURATION_MASS_FRACTION)

    eps_water = _water_complex(t, f)
    eps_ice = _ice_complex(np.minimum(t, 0.0), f)
    eps_brine = eps_water - 1j * ionic_loss_factor(brine_conductivity_s_per_m(nacl, t), f)
    eps_solid = complex(DRY_SOLID_PERMITTIVITY[0], -DRY_SOLID_PERMITTIVITY[1])
    eps_fat = complex(FAT_PERMITTIVITY[0], -FAT_PERMITTIVITY[1])

    solid_volume = sum(np.asarray(fractions[name]) for name in ("protein", "carbohydrate", "fiber", "ash", "salt"))
    cube_root_sum = (
        v_brine * eps_brine ** (1 / 3)
        + v_bound * (mobile_bound_share * eps_water ** (1 / 3) + (1.0 - mobile_bound_share) * eps_ice ** (1 / 3))
        + np.asarray(fractions["ice"]) * eps_ice ** (1 / 3)
        + solid_volume * eps_solid ** (1 / 3)
        + np.asarray(fractions["fat"]) * eps_fat ** (1 / 3)
    )
    return _pair(cube_root_sum**3)


def penetration_depth_m(eps_prime, eps_loss, frequency_hz):
    """Power penetration depth, where the power density falls to 1/e [m].

    Parameters
    ----------
    eps_prime : float or array_like
        Dielectric constant ε' [–], > 0.
    eps_loss : float or array_like
        Loss factor ε'' [–], ≥ 0 (0 gives infinity).
    frequency_hz : float or array_like
        Frequency [Hz].

    Returns
    -------
    float or ndarray
        D_p [m].

    Raises
    ------
    ValueError
        If a frequency is not positive and finite.

    Notes
    -----
    D_p = λ₀ / (2π √(2ε') [√(1 + (ε''/ε')²) − 1]^½) (Metaxas & Meredith
    1983), computed as λ₀ √(√(1+r²) + 1) / (2π √(2ε') r), r = ε''/ε', which
    is the same expression without the cancellation at small r.

    References
    ----------
    Metaxas, A. C., Meredith, R. J. (1983). Industrial Microwave Heating,
    ch. 5. Peter Peregrinus (IEE), London.
    von Hippel, A. R. (1954). Dielectrics and Waves. Wiley, New York.

    Examples
    --------
    >>> round(float(penetration_depth_m(10.0, 1.0, 2.45e9)) * 100, 3)
    6.166
    """
    e1 = np.asarray(eps_prime, dtype=float)
    e2 = np.asarray(eps_loss, dtype=float)
    wavelength = SPEED_OF_LIGHT_M_PER_S / _frequency(frequency_hz)
    r = e2 / e1
    with np.errstate(divide="ignore"):
        depth = wavelength * np.sqrt(np.sqrt(1.0 + r * r) + 1.0) / (2.0 * np.pi * np.sqrt(2.0 * e1) * r)
    return _scalar_or_array(np.asarray(depth))


def absorbed_power_density_w_per_m3(frequency_hz, eps_loss, e_rms_v_per_m):
    """Power absorbed per unit volume, P = 2π f ε₀ ε'' E_rms² [W m⁻³].

    Parameters
    ----------
    frequency_hz : float or array_like
        Frequency [Hz].
    eps_loss : float or array_like
        Loss factor ε'' [–] (dipolar plus ionic).
    e_rms_v_per_m : float or array_like
        RMS electric field strength inside the material [V m⁻¹].

    Returns
    -------
    float or ndarray
        P [W m⁻³].

    Raises
    ------
    ValueError
        If a frequency is not positive and finite.

    Notes
    -----
    P = ω ε₀ ε'' |E_rms|² = 5.563e-11 f ε'' E² (Metaxas & Meredith 1983).

    References
    ----------
    Metaxas, A. C., Meredith, R. J. (1983). Industrial Microwave Heating,
    ch. 2. Peter Peregrinus (IEE), London.

    Examples
    --------
    >>> round(float(absorbed_power_density_w_per_m3(2.45e9, 10.0, 1e3)) / 1e6, 3)
    1.363
    """
    f = _frequency(frequency_hz)
    e2 = np.asarray(eps_loss, dtype=float)
    e = np.asarray(e_rms_v_per_m, dtype=float)
    return _scalar_or_array(np.asarray(2.0 * np.pi * f * VACUUM_PERMITTIVITY_F_PER_M * e2 * e * e))


def check_frequency_hz(frequency_hz) -> str | None:
    """Warning text if a heating frequency is outside the ISM bands, else None.

    Parameters
    ----------
    frequency_hz : float
        Generator frequency [Hz].

    Returns
    -------
    str or None
        None inside a band of ``ISM_BANDS_HZ``; otherwise a sentence naming
        the frequency and the bands.

    Notes
    -----
    Industrial RF and microwave heating runs in the ISM bands (ITU Radio
    Regulations 5.150): 13.56, 27.12 and 40.68 MHz (RF), 902–928 MHz
    (Region 2, 915 MHz centre), 896 MHz (UK), 2400–2500 MHz, 5725–5875 MHz.
    A frequency outside them usually means a unit mistake (MHz given as Hz)
    or a mistyped configuration.

    References
    ----------
    ITU Radio Regulations, article 5, footnote 5.150.
    IEC 60519-6, Safety in installations for electroheating — industrial
    microwave heating equipment.

    Examples
    --------
    >>> check_frequency_hz(915e6) is None
    True
    >>> print(check_frequency_hz(915.0))  # doctest: +ELLIPSIS
    915 Hz is outside the industrial heating (ISM) bands ...
    """
    f = float(frequency_hz)
    if np.isfinite(f) and any(low <= f <= high for _, low, high in ISM_BANDS_HZ):
        return None
    bands = ", ".join(name for name, _, _ in ISM_BANDS_HZ)
    return (
        f"{f:.6g} Hz is outside the industrial heating (ISM) bands ({bands}); "
        "check the unit (Hz, not MHz) and the generator frequency"
    )
