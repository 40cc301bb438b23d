"""The number formats of explanations (ptype/engine/wording.py).

A space between a number and its unit, also before % and degree Celsius (SI Brochure,
BIPM2019 section 5.4); the minus sign is U+2212 MINUS SIGN (Unicode), not the hyphen; a
value that rounds to zero carries no sign (common typographic practice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from ptype.codes import Code
from ptype.engine import wording as w

MINUS = "\N{MINUS SIGN}"


@pytest.mark.parametrize("value, digits, expected", [
    (1.25, 1, "1.2"), (-6.6, 1, MINUS + "6.6"), (-0.04, 1, "0.0"), (-0.0, 1, "0.0"),
    (0.049, 2, "0.05"), (np.float64(-3000.4), 0, MINUS + "3000"), (2.0, 0, "2"),
])
def test_number(value, digits, expected):
    assert w.number(value, digits) == expected


def test_number_signed_and_trimmed():
    assert w.number(1.5, signed=True) == "+1.5"
    assert w.number(0.0, signed=True) == "0.0" and w.number(-0.01, signed=True) == "0.0"
    assert w.number(46.0, trim=True) == "46" and w.number(5.60, 2, trim=True) == "5.6"
    assert w.number(-10.0, trim=True) == MINUS + "10"


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_number_not_finite(value):
    assert w.number(value) == "n/a"


def test_units_are_spaced():
    assert w.temperature(1.5) == "+1.5 \u00b0C"
    assert w.temperature(-6.6) == MINUS + "6.6 \u00b0C"
    assert w.temperature(0.0, trim=True) == "0 \u00b0C"
    assert w.temperature(-10.0, trim=True) == MINUS + "10 \u00b0C"
    assert w.kelvin(2.0) == "2 K"
    assert w.energy(46.0) == "46 J/kg" and w.energy(13.24) == "13.2 J/kg"
    assert w.energy_range(5.6, 13.2) == "5.6\u201313.2 J/kg"
    assert w.area(-3000.0) == MINUS + "3000 K\u00b7m"
    assert w.pressure(849.6) == "850 hPa"
    assert w.pressure_range(850.0, 700.0) == "850\u2013700 hPa"
    assert w.height(1234.4) == "1234 m" and w.height_range(0.0, 1500.0) == "0\u20131500 m"
    assert w.fraction(0.6251) == "0.63" and w.fraction(1.0) == "1.00"
    assert w.percent(79.6) == "80 %"
    assert w.seconds(120.2) == "120 s" and w.speed(4.051) == "4.05 m/s"
    assert w.micrometres(750e-6) == "750 \u00b5m"


def test_code_in_words():
    assert w.code(Code.FZRA) == "freezing rain (FZRA)"
    assert w.code(int(Code.RASN)) == "rain and snow (RASN)"


def test_no_hyphen_minus_before_digits():
    for text in (w.temperature(-1.0), w.area(-5.0), w.number(-2.5), w.energy(-1.0)):
        assert "-" not in text and MINUS in text
