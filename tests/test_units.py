"""Unit conversions of historian exports, checked against scipy.constants (CODATA / SI values)."""
from __future__ import annotations

import numpy as np
import pytest
from scipy import constants as sc

from optimizer.config import UNIT_CHOICES
from optimizer.units import SOURCE_UNITS, f_to_c

# (kind, source unit, value in the source unit, the same in the trade unit, source of the factor)
CASES = [
    ("temp", "F", 212.0, 100.0, "scipy.constants.convert_temperature"),
    ("temp", "K", 255.15, 255.15 - sc.zero_Celsius, "scipy.constants.zero_Celsius"),
    ("power", "W", 2500.0, 2.5, "SI prefix kilo"),
    ("speed", "m/s", 0.01, 0.01 * sc.minute, "scipy.constants.minute"),
    ("speed", "ft/min", 10.0, 10.0 * sc.foot, "scipy.constants.foot"),
    ("load", "lb/ft", 30.0, 30.0 * sc.pound / sc.foot, "scipy.constants.pound, foot"),
    ("energy", "Wh", 1500.0, 1.5, "SI prefix kilo"),
    ("energy", "MWh", 0.25, 250.0, "SI prefixes"),
    ("moisture", "fraction", 0.125, 12.5, "definition of percent"),
]


@pytest.mark.parametrize("kind, unit, value, expected, source", CASES)
def test_source_units_convert_to_the_trade_unit(kind, unit, value, expected, source):
    assert SOURCE_UNITS[kind][unit](np.array([value]))[0] == pytest.approx(expected, rel=1e-12), source


def test_fahrenheit_matches_scipy_over_the_range_of_the_trade():
    temps_f = np.linspace(-40.0, 400.0, 45)
    expected = sc.convert_temperature(temps_f, "Fahrenheit", "Celsius")
    np.testing.assert_allclose(f_to_c(temps_f), expected, rtol=0, atol=1e-12)


def test_the_trade_unit_comes_first_and_converts_to_itself():
    for kind, units in SOURCE_UNITS.items():
        first = next(iter(units))
        assert units[first](np.array([3.25]))[0] == 3.25, kind
    # the plant description offers exactly the units the reader converts
    assert UNIT_CHOICES == {kind: tuple(units) for kind, units in SOURCE_UNITS.items()}
