"""Conversions between the trade units of logs, CLI and dashboard and SI inside the physics.

Trade units: kW, m/min, °C, % wet basis, kg/m of belt, kWh/t. Physics: W, m/s, K or °C, kg/kg.
"""

KELVIN_OFFSET = 273.15


def kw_to_w(kw):
    return kw * 1e3


def w_to_kw(w):
    return w * 1e-3


def m_per_min_to_m_per_s(v):
    return v / 60.0


def pct_to_fraction(pct):
    return pct / 100.0


def fraction_to_pct(x):
    return x * 100.0


def c_to_k(temp_c):
    return temp_c + KELVIN_OFFSET


def f_to_c(temp_f):
    return (temp_f - 32.0) * 5.0 / 9.0


def throughput_kg_per_h(belt_load_kg_per_m, belt_speed_m_per_min):
    """Mass flow on the belt [kg h⁻¹] from belt load [kg m⁻¹] and speed [m min⁻¹]."""
    return belt_load_kg_per_m * belt_speed_m_per_min * 60.0


def specific_energy_kwh_per_t(power_kw, mass_flow_kg_per_h):
    """Energy per tonne [kWh t⁻¹] at a power [kW] and a mass flow [kg h⁻¹]."""
    return power_kw / (mass_flow_kg_per_h / 1000.0)


#: International foot and avoirdupois pound, exact by definition (international yard and
#: pound agreement, 1959).
FOOT_M = 0.3048
POUND_KG = 0.45359237

#: The units a historian export may write for each kind of column, each with the conversion to
#: the trade unit the tool reads (the first one listed). The plant description's ``units`` table
#: offers exactly these.
SOURCE_UNITS = {
    "temp": {"C": lambda x: x, "F": f_to_c, "K": lambda x: x - KELVIN_OFFSET},
    "power": {"kW": lambda x: x, "W": w_to_kw},
    "speed": {"m/min": lambda x: x, "m/s": lambda x: x * 60.0, "ft/min": lambda x: x * FOOT_M},
    "load": {"kg/m": lambda x: x, "lb/ft": lambda x: x * (POUND_KG / FOOT_M)},
    "energy": {"kWh": lambda x: x, "Wh": lambda x: x * 1e-3, "MWh": lambda x: x * 1e3},
    "moisture": {"%": lambda x: x, "fraction": fraction_to_pct},
}
