"""Unit parsing against pint (the reference unit library), resistor codes against
IEC 60062, decibels against the 20·log10 amplitude definition, formatting."""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pint
import pytest

from selector.errors import UnitError
from selector.units import format_si, parse_column, parse_quantity

UREG = pint.UnitRegistry()

# (as an engineer writes it, our dimension, the same quantity in pint's spelling,
#  pint's SI unit for that dimension)
PINT_CASES = [
    ("3 fF", "F", "3 femtofarad", "farad"),
    ("6 pF", "F", "6 picofarad", "farad"),
    ("2 nA", "A", "2 nanoampere", "ampere"),
    ("15 uA", "A", "15 microampere", "ampere"),
    ("15 µA", "A", "15 microampere", "ampere"),   # U+00B5 micro sign
    ("15 μA", "A", "15 microampere", "ampere"),   # U+03BC Greek mu
    ("250 mV", "V", "250 millivolt", "volt"),
    ("2.4 kHz", "Hz", "2.4 kilohertz", "hertz"),
    ("2.4 MHz", "Hz", "2.4 megahertz", "hertz"),
    ("1.2 GHz", "Hz", "1.2 gigahertz", "hertz"),
    ("3 megHz", "Hz", "3 megahertz", "hertz"),   # SPICE-style 'meg'
    ("1.257 V/us", "V/s", "1.257 volt/microsecond", "volt/second"),
    ("1.257 V/µs", "V/s", "1.257 volt/microsecond", "volt/second"),
    ("8 nV/√Hz", "V/rtHz", "8 nanovolt/hertz**0.5", "volt/hertz**0.5"),
    ("8 nV/rtHz", "V/rtHz", "8 nanovolt/hertz**0.5", "volt/hertz**0.5"),
    ("0.5 pA/sqrt(Hz)", "A/rtHz", "0.5 picoampere/hertz**0.5", "ampere/hertz**0.5"),
    ("2 uV/°C", "V/degC", "2 microvolt/delta_degC", "volt/delta_degC"),
    ("2 uV/K", "V/degC", "2 microvolt/kelvin", "volt/kelvin"),
    ("4.7 kΩ", "ohm", "4.7 kiloohm", "ohm"),
    ("4.7 kohm", "ohm", "4.7 kiloohm", "ohm"),
    ("4.7k", "ohm", "4.7 kiloohm", "ohm"),
    ("100 R", "ohm", "100 ohm", "ohm"),
    ("470 Ω", "ohm", "470 ohm", "ohm"),
    ("22 ohm", "ohm", "22 ohm", "ohm"),
    ("2.2 Mohm", "ohm", "2.2 megaohm", "ohm"),
    ("1 meg", "ohm", "1 megaohm", "ohm"),
    ("1 %", "fraction", "1 percent", "dimensionless"),
    ("50 ppm", "fraction", "50 ppm", "dimensionless"),
    ("25 us", "s", "25 microsecond", "second"),
    ("300 K", "degC", "300 kelvin", "degC"),
]


@pytest.mark.parametrize("text, dimension, reference, si", PINT_CASES)
def test_quantity_matches_pint(text, dimension, reference, si):
    # source: pint 0.2x unit registry (independent conversion of the same quantity)
    expected = UREG.Quantity(reference).to(si).magnitude
    assert parse_quantity(text, dimension) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("code, ohms", [
    # source: IEC 60062 letter-and-digit code, the letter marks the decimal point
    ("4k7", 4.7e3), ("4R7", 4.7), ("2M2", 2.2e6), ("R47", 0.47), ("9k09", 9.09e3),
    ("499R", 499.0), ("1k", 1e3), ("10K", 10e3),
])
def test_iec_60062_codes(code, ohms):
    assert parse_quantity(code, "ohm") == pytest.approx(ohms, rel=1e-12)
    # and the same code in a library column (vectorised path)
    values, errors = parse_column(pd.Series([code, "1 kohm"]), "ohm")
    assert errors.empty
    assert values[0] == pytest.approx(ohms, rel=1e-12)
    assert values[1] == pytest.approx(UREG.Quantity("1 kiloohm").to("ohm").magnitude)


@pytest.mark.parametrize("text, ratio", [
    # source: IEC 60027-3, amplitude (field) level: L = 20·log10(V/V) dB
    ("20 dB", 10.0), ("100 dB", 1e5), ("120 dB", 1e6), ("6.0206 dB", 2.0), ("0 dB", 1.0),
])
def test_decibel_gain(text, ratio):
    assert parse_quantity(text, "ratio") == pytest.approx(ratio, rel=1e-4)


def test_bare_numbers():
    # a header unit applies to a bare number; pint converts the same figure
    assert parse_quantity("3.5", "Hz", default_unit="MHz") == pytest.approx(
        UREG.Quantity(3.5, "megahertz").to("hertz").magnitude)
    # a gain may be bare (V/V), a count is bare
    assert parse_quantity("100", "ratio", bare_ok=True) == 100.0
    assert parse_quantity(4, "count") == 4.0


@pytest.mark.parametrize("text, dimension, fragment", [
    ("3", "Hz", "has no unit"),                      # bare number, no unit anywhere
    ("3 MHz", "V/s", "expected slew rate"),          # wrong dimension
    ("2 V", "Hz", "expected frequency"),
    ("5 furlongs", "V", "unknown unit"),
    ("2,5 V", "V", "decimal comma"),
    ("fast", "V/s", "is not a slew rate"),
])
def test_bad_quantities(text, dimension, fragment):
    with pytest.raises(UnitError, match=fragment):
        parse_quantity(text, dimension)


def test_column_is_parsed_like_single_values():
    cells = pd.Series(["3.5", "2.4 MHz", "", "900 kHz", "3 V", "0.01 GHz"])
    values, errors = parse_column(cells, "Hz", header_unit="MHz")
    expected = [UREG.Quantity(q).to("hertz").magnitude for q in
                ("3.5 MHz", "2.4 MHz", "900 kHz", "0.01 GHz")]
    assert values[[0, 1, 3, 5]] == pytest.approx(expected, rel=1e-12)
    assert math.isnan(values[2])          # empty cell: missing, not an error
    assert math.isnan(values[4])          # wrong dimension: an error at that row
    assert list(errors.index) == [4]
    assert "expected frequency" in errors[4]


def test_column_without_header_unit_flags_bare_numbers():
    values, errors = parse_column(pd.Series(["1.5", "2 V/us"]), "V/s")
    assert list(errors.index) == [0]
    assert values[1] == pytest.approx(2e6)
    with pytest.raises(UnitError):
        parse_column(pd.Series(["1"]), "Hz", header_unit="parsecs")


@pytest.mark.parametrize("value, dimension, text", [
    # engineering notation: a multiple-of-three SI prefix (SI brochure, 9th ed.,
    # prefixes table) and three significant figures (common practice)
    (1.2566e6, "V/s", "1.26 V/µs"),
    (2.4e6, "Hz", "2.4 MHz"),
    (29.18e6, "Hz", "29.2 MHz"),
    (4.06e-9, "V/rtHz", "4.06 nV/√Hz"),
    (-0.5, "V", "-500 mV"),
    (999.7, "Hz", "1 kHz"),          # rounds up into the next prefix
    (999.4, "Hz", "999 Hz"),
    (1e9, "V/s", "1000 V/µs"),       # no exponent notation in a table cell
    (0.0, "V", "0 V"),
    (0.01, "fraction", "1 %"),
    (1e5, "ratio", "100.00 dB"),
])
def test_format_si(value, dimension, text):
    assert format_si(value, dimension) == text


def test_format_missing_and_infinite():
    assert format_si(float("nan"), "V") == "—"
    assert format_si(None, "V") == "—"
    assert format_si(np.inf, "Hz") == "∞"
