"""Property-based tests (hypothesis) of the unit parser, the loader and the solver.

Example counts are set per test with ``settings(max_examples=...)`` and listed in
EXAMPLE_COUNTS below.  SI prefixes are from the SI Brochure (BIPM, 9th edition,
2019, table 7); the decibel as 20·log10 of a voltage ratio is IEC 60027-3 (from
memory).  All parts and values are invented.
"""
from __future__ import annotations

import csv
import io
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from selector.brief import brief_from_dict
from selector.checks import REGISTRY
from selector.errors import InputError, UnitError
from selector.library import parse_library
from selector.ranking import shortlist
from selector.requirements import derive
from selector.units import DIMENSIONS, format_si, parse_column, parse_quantity

EXAMPLE_COUNTS = {"unit_text": 1000, "unit_column": 200, "format_parse": 1000,
                  "loader": 150, "solver": 100}

# characters engineers (and spreadsheets) put in quantity cells
QUANTITY_ALPHABET = "0123456789.,+-eE kMGmunpfµμΩ°√/()%^_VAHzFsWdBCKrRthgo\t\r\n\x00'\"="
UNIT_WORDS = ["V", "mV", "uV", "µV", "A", "nA", "pA", "Hz", "kHz", "MHz", "GHz",
              "V/us", "V/µs", "V/ms", "pF", "nF", "ohm", "kohm", "Ω", "kΩ", "k", "R",
              "nV/rtHz", "nV/√Hz", "fA/rtHz", "uV/C", "µV/°C", "C", "°C", "K", "deg",
              "°", "dB", "V/V", "%", "ppm", "s", "us", "W", "meg", "furlong", "1/f", ""]

text_cells = st.one_of(
    st.text(alphabet=QUANTITY_ALPHABET, max_size=24),
    st.text(max_size=24),  # any unicode, surrogates excluded by hypothesis
    st.builds(lambda n, u, sep: f"{n}{sep}{u}",
              st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr),
                        st.integers(-10**30, 10**30).map(str),
                        st.from_regex(r"[+-]?\d{0,3}[.,]?\d{0,3}([eE][+-]?\d{1,4})?",
                                      fullmatch=True)),
              st.sampled_from(UNIT_WORDS), st.sampled_from(["", " ", "  ", "\t"])),
)


# ------------------------------------------------------------------ unit parser
@settings(max_examples=EXAMPLE_COUNTS["unit_text"], deadline=None)
@given(text=text_cells, dimension=st.sampled_from(sorted(DIMENSIONS)),
       default_unit=st.one_of(st.none(), st.sampled_from(UNIT_WORDS), st.text(max_size=6)),
       bare_ok=st.booleans())
def test_unit_parser_raises_only_unit_error(text, dimension, default_unit, bare_ok):
    try:
        value = parse_quantity(text, dimension, default_unit or None, bare_ok)
    except UnitError:
        return
    assert isinstance(value, float) and math.isfinite(value)


@settings(max_examples=EXAMPLE_COUNTS["unit_column"], deadline=None)
@given(cells=st.lists(text_cells, min_size=1, max_size=12),
       dimension=st.sampled_from(sorted(DIMENSIONS)),
       header=st.one_of(st.none(), st.sampled_from(UNIT_WORDS[:-1])))
def test_column_parser_agrees_with_scalar_parser(cells, dimension, header):
    """The vectorised column parser and the one-cell parser give the same answer."""
    try:
        values, errors = parse_column(pd.Series(cells, dtype=object), dimension, header)
    except UnitError:  # only for a header unit of the wrong kind
        with pytest.raises(UnitError):
            parse_quantity("1", dimension, header)
        return
    for index, cell in enumerate(cells):
        stripped = cell.strip()
        if stripped == "":
            assert math.isnan(values[index]) and index not in errors.index
            continue
        try:
            expected = parse_quantity(stripped, dimension, header)
        except UnitError:
            assert index in errors.index, (cell, values[index])
            assert math.isnan(values[index])
            continue
        assert index not in errors.index, (cell, errors.get(index))
        assert values[index] == pytest.approx(expected, rel=1e-15, abs=0.0)


SIGNED = sorted(set(DIMENSIONS) - {"ratio"})


@settings(max_examples=EXAMPLE_COUNTS["format_parse"], deadline=None)
@given(dimension=st.sampled_from(sorted(DIMENSIONS)),
       mantissa=st.floats(1.0, 10.0, exclude_max=True), exponent=st.integers(-14, 11),
       negative=st.booleans(), digits=st.integers(3, 8))
def test_format_then_parse_round_trips(dimension, mantissa, exponent, negative, digits):
    value = mantissa * 10.0 ** exponent
    if negative and dimension in SIGNED:
        value = -value
    text = format_si(value, dimension, digits)
    parsed = parse_quantity(text, dimension, bare_ok=True)
    if dimension == "ratio":  # shown in dB with max(digits − 2, 0) + 1 decimals
        decimals = max(digits - 2, 0) + 1
        worst = 10 ** (0.5 * 10 ** -decimals / 20) - 1
        assert parsed == pytest.approx(value, rel=worst * 1.001), text
    else:  # `digits` significant figures: half a unit in the last place, relative
        assert parsed == pytest.approx(value, rel=0.5 * 10 ** (1 - digits) * 1.001), text


# ------------------------------------------------------------------ loader
# column -> (header, [(cell text, SI value), ...] valid cells, [invalid cells])
# SI values by the SI prefixes: k = 1e3, M = 1e6, µ/u = 1e-6, n = 1e-9, p = 1e-12.
LOADER_COLUMNS = {
    "gbw": ("gbw [MHz]", [("2.4", 2.4e6), ("900 kHz", 900e3), ("0.05 GHz", 5e7),
                          ("12", 12e6), ("", math.nan)],
            ["fast", "1,5", "nan", "5 V", "-3", "1e400", "=1+2", "0"]),
    "slew": ("slew [V/us]", [("1.2", 1.2e6), ("300 V/ms", 3e5), ("20 V/us", 2e7),
                             ("", math.nan)],
             ["slow", "2 Hz", "-1", "inf", "1,2 V/us"]),
    "vos": ("vos [uV]", [("150", 150e-6), ("-25", -25e-6), ("1.5 mV", 1.5e-3),
                         ("0", 0.0), ("", math.nan)],
            ["abc", "3 uA", "1e999"]),
    "supply_max": ("supply_max [V]", [("5.5", 5.5), ("36", 36.0), ("12000 mV", 12.0)],
                   ["", "x", "12 A", "-5"]),
    "rro": ("rro", [("yes", 1.0), ("no", 0.0), ("", math.nan), ("TRUE", 1.0)],
            ["maybe", "2"]),
    "notes": ("notes", [("plain", "plain"), ("with, comma", "with, comma"),
                        ("two\nlines", "two\nlines"), ('quote " inside', 'quote " inside'),
                        ("", "")], []),
}
ORDER = ["gbw", "slew", "vos", "supply_max", "rro", "notes"]


@st.composite
def libraries(draw):
    rows = draw(st.integers(1, 8))
    cells, invalid = [], set()
    for row in range(rows):
        record = {}
        for name in ORDER:
            header, valid, bad = LOADER_COLUMNS[name]
            if bad and draw(st.integers(0, 9)) == 0:  # about one cell in ten is bad
                record[name] = (draw(st.sampled_from(bad)), None)
                invalid.add((row + 2, name))
            else:
                record[name] = draw(st.sampled_from(valid))
        cells.append(record)
    newline = draw(st.sampled_from(["\n", "\r\n"]))
    bom = draw(st.booleans())
    return cells, invalid, newline, bom


def write_csv_text(cells, newline, bom) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator=newline)
    writer.writerow(["part", "supply_min [V]"] + [LOADER_COLUMNS[n][0] for n in ORDER])
    for index, record in enumerate(cells):
        writer.writerow([f"ZT-{4400 + index}", "1.8"] + [record[n][0] for n in ORDER])
    return ("\ufeff" if bom else "") + buffer.getvalue()


def assert_valid_cells_intact(library, cells):
    table = library.table
    for index, record in enumerate(cells):
        assert table["part"].iloc[index] == f"ZT-{4400 + index}"
        assert table["supply_min"].iloc[index] == 1.8
        for name, (text, expected) in record.items():
            got = table[name].iloc[index]
            if expected is None:  # an invalid cell: lenient load leaves it missing
                assert (isinstance(got, float) and math.isnan(got)), (name, text, got)
            elif isinstance(expected, str):
                assert got == expected
            elif math.isnan(expected):
                assert math.isnan(got), (name, text, got)
            else:
                assert got == pytest.approx(expected, rel=1e-12), (name, text)


@settings(max_examples=EXAMPLE_COUNTS["loader"], deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(libraries())
def test_loader_keeps_valid_cells_and_reports_every_invalid_one(drawn):
    cells, invalid, newline, bom = drawn
    text = write_csv_text(cells, newline, bom)
    if not invalid:
        assert_valid_cells_intact(parse_library(text, "random.csv"), cells)
        return
    with pytest.raises(InputError) as info:
        parse_library(text, "random.csv")
    reported = {p.where for p in info.value.problems}
    expected = {f"row {row}, column '{name}'" for row, name in invalid}
    assert reported == expected  # every bad cell, and nothing else
    assert all(p.source == "random.csv" for p in info.value.problems)
    lenient = parse_library(text, "random.csv", strict=False)
    assert {p.where for p in lenient.problems} == expected
    assert_valid_cells_intact(lenient, cells)


# ------------------------------------------------------------------ solver
# The solver (selector.requirements.derive + selector.ranking.shortlist, vectorised
# over the whole table) against a small independent scalar re-implementation of the
# method sheet (shared/METHOD.md §2–§6, §8), evaluated one part at a time with
# Python floats and complex numbers, and scipy's brentq root finder for the loop
# crossover and for the GBW that just meets the gain error.

K_BOLTZMANN = 1.380649e-23  # J/K, exact in the 2019 SI (BIPM SI Brochure, 9th ed.)
T_ROOM = 298.15  # K
SUPPLIES = [(5.0, 0.0), (3.3, 0.0), (12.0, 0.0), (5.0, -5.0), (15.0, -15.0)]
PACKAGES = ["SOIC-8", "SOT-23-5", "MSOP-8", "DFN-8"]
STATUS_WORDS = ["active", "nrnd", "obsolete"]


def log_uniform(low, high):
    return st.floats(math.log10(low), math.log10(high)).map(lambda e: 10.0 ** e)


def q(value, unit):  # a brief quantity as text, full precision
    return f"{value!r} {unit}"


@st.composite
def briefs(draw):
    topology = draw(st.sampled_from(["follower", "non-inverting", "inverting"]))
    v_pos, v_neg = draw(st.sampled_from(SUPPLIES))
    span = v_pos - v_neg
    a, b = sorted(draw(st.lists(st.floats(0.02, 0.98), min_size=2, max_size=2,
                                unique=True)))
    assume(b - a > 0.01)
    y_lo, y_hi = v_neg + a * span, v_neg + b * span
    gain = {"follower": 1.0, "non-inverting": draw(st.floats(1.5, 60.0)),
            "inverting": draw(st.floats(0.3, 60.0))}[topology]
    rs = draw(st.sampled_from([0.0, 50.0, 1e3, 20e3]))
    data = {"topology": topology, "channels": draw(st.integers(1, 4)),
            "supply": {"positive": q(v_pos, "V"), "negative": q(v_neg, "V")},
            "signal": {"source_resistance": q(rs, "ohm")}, "output": {}, "limits": {},
            "margins": {}, "filters": {}, "network": {}}
    # now and then an output range with an offset and no network: the tool then
    # synthesises a summing network, a reference divider or Rg to a reference
    designed = topology != "follower" and draw(st.integers(0, 2)) == 0
    if designed:  # a signal centred on 0 V, so the output's mid-scale is the offset
        half = (y_hi - y_lo) / (2 * gain)
        x_lo, x_hi = -half, half
        data["output"].update({"min": q(y_lo, "V"), "max": q(y_hi, "V")})
    elif topology == "inverting":
        x_lo, x_hi = -y_hi / gain, -y_lo / gain
        data["output"]["gain"] = -gain
    else:
        x_lo, x_hi = y_lo / gain, y_hi / gain
        if topology == "non-inverting":
            data["output"]["gain"] = gain
    if topology != "follower" and not designed:
        rg = draw(st.sampled_from([499.0, 1e3, 4.99e3, 10e3]))
        rf = (gain - 1) * rg if topology == "non-inverting" else gain * (rg + rs)
        data["network"] = {"rf": q(rf, "ohm"), "rg": q(rg, "ohm")}
    data["signal"].update({"min": q(x_lo, "V"), "max": q(x_hi, "V")})
    if draw(st.booleans()):
        data["signal"]["frequency"] = q(draw(log_uniform(10.0, 1e6)), "Hz")
    else:
        data["signal"]["waveform"] = "dc"
    if draw(st.booleans()):
        data["output"]["load_resistance"] = q(draw(log_uniform(500.0, 1e5)), "ohm")
    if draw(st.booleans()):
        data["output"]["load_capacitance"] = q(draw(log_uniform(1e-11, 2e-9)), "F")
    if draw(st.booleans()):
        data["network"]["stray_capacitance"] = q(draw(log_uniform(1e-13, 5e-12)), "F")
    limits = data["limits"]
    limits["gain_error"] = q(draw(log_uniform(1e-3, 0.1)) * 100, "%")
    limits["phase_margin"] = q(draw(st.floats(30.0, 75.0)), "deg")
    if draw(st.booleans()):
        limits["dc_error"] = q(draw(log_uniform(1e-4, 0.2)), "V")
    if draw(st.booleans()):
        limits["noise"] = q(draw(log_uniform(1e-6, 1e-2)), "V")
        band = draw(st.sampled_from(["none", "high", "both"]))
        if band == "high":
            limits["noise_bandwidth"] = q(draw(log_uniform(1e2, 1e6)), "Hz")
        elif band == "both":
            low = draw(log_uniform(0.1, 1e3))
            limits["noise_bandwidth"] = [q(low, "Hz"), q(low * draw(log_uniform(2, 1e4)), "Hz")]
    if draw(st.booleans()):
        limits["quiescent_current"] = q(draw(log_uniform(1e-5, 1e-2)), "A")
    if draw(st.booleans()):
        limits["temperature_min"] = q(float(draw(st.sampled_from([-40, -20, 0]))), "C")
        limits["temperature_max"] = q(float(draw(st.sampled_from([70, 85, 105]))), "C")
    if draw(st.booleans()):
        data["margins"] = {"slew": draw(st.floats(1.0, 3.0)), "gbw": draw(st.floats(1.0, 3.0))}
    if draw(st.booleans()):
        data["filters"]["status"] = draw(st.lists(st.sampled_from(STATUS_WORDS), min_size=1,
                                                  max_size=2, unique=True))
    if draw(st.booleans()):
        data["filters"]["packages"] = draw(st.lists(st.sampled_from(PACKAGES), min_size=1,
                                                    max_size=3, unique=True))
    if draw(st.booleans()):
        data["filters"]["max_unit_cost"] = draw(st.floats(0.5, 5.0))
    return {k: v for k, v in data.items() if v != {}}


NUMERIC_RANGES = {  # column -> (low, high, header unit (SI)); log-uniform draws
    "gbw": (1e4, 5e8, "Hz"), "slew": (1e3, 1e9, "V/s"), "aol": (1e3, 1e7, "V/V"),
    "vos": (1e-6, 5e-3, "V"), "vos_drift": (1e-8, 2e-5, "V/C"), "ib": (1e-13, 1e-6, "A"),
    "en": (1e-9, 1e-7, "V/rtHz"), "in": (1e-15, 1e-11, "A/rtHz"),
    "en_corner": (1.0, 1e4, "Hz"), "cin_cm": (5e-13, 2e-11, "F"),
    "cin_diff": (5e-13, 2e-11, "F"), "ro": (5.0, 500.0, "ohm"), "iout": (1e-3, 0.1, "A"),
    "iq": (1e-6, 5e-3, "A"), "unit_cost": (0.1, 6.0, ""),
}


GOOD_RANGES = {  # the favourable end of each range: parts that may well qualify
    "gbw": (1e8, 5e8), "slew": (1e8, 1e9), "aol": (1e6, 1e7), "vos": (1e-6, 1e-5),
    "vos_drift": (1e-8, 1e-7), "ib": (1e-13, 1e-12), "en": (1e-9, 3e-9),
    "in": (1e-15, 1e-14), "en_corner": (1.0, 10.0), "cin_cm": (5e-13, 1e-12),
    "cin_diff": (5e-13, 1e-12), "ro": (5.0, 20.0), "iout": (0.05, 0.1),
    "iq": (1e-6, 1e-5), "unit_cost": (0.1, 0.5),
}


@st.composite
def solver_libraries(draw):
    size = draw(st.integers(4, 16))
    rows = []
    for index in range(size):
        good = draw(st.integers(0, 2)) == 0  # about a third of the parts are strong
        supply_min = draw(st.sampled_from([1.8, 2.7, 4.5, 10.0] if not good else [1.8]))
        row = {"part": f"QV-{5000 + index}", "supply_min": supply_min,
               "supply_max": supply_min + draw(st.sampled_from([3.0, 10.0, 30.0]
                                                               if not good else [38.0]))}
        headroom_high = 1.5 if not good else 0.02
        row.update({
            "swing_low": draw(st.floats(0.0, headroom_high)),
            "swing_high": draw(st.floats(0.0, headroom_high)),
            "cm_low": draw(st.floats(-0.3, 2.0 if not good else -0.1)),
            "cm_high": draw(st.floats(-0.3, 2.0 if not good else -0.1)),
            "pm": draw(st.floats(35.0 if not good else 75.0, 88.0)),
            "temp_min": float(draw(st.sampled_from([-55, -40, 0] if not good else [-55]))),
            "temp_max": float(draw(st.sampled_from([70, 85, 125] if not good else [125]))),
            "status": draw(st.sampled_from(STATUS_WORDS if not good else ["active"])),
            "package": draw(st.sampled_from(PACKAGES))})
        for name, (low, high, _) in NUMERIC_RANGES.items():
            row[name] = draw(log_uniform(*(GOOD_RANGES[name] if good else (low, high))))
        if not good and draw(st.integers(0, 3)) == 0:  # now and then a missing figure
            name = draw(st.sampled_from(sorted(set(row) - {"part", "supply_min",
                                                           "supply_max"})))
            row[name] = "" if isinstance(row[name], str) else math.nan
        rows.append(row)
    return rows


def library_csv(rows) -> str:
    units = {"supply_min": "V", "supply_max": "V", "swing_low": "V", "swing_high": "V",
             "cm_low": "V", "cm_high": "V", "pm": "deg", "temp_min": "C", "temp_max": "C"}
    units.update({k: v[2] for k, v in NUMERIC_RANGES.items()})
    names = list(rows[0])
    header = [f"{n} [{units[n]}]" if units.get(n) else n for n in names]
    lines = [",".join(header)]
    for row in rows:
        cells = []
        for n in names:
            value = row[n]
            cells.append(value if isinstance(value, str) else
                         ("" if math.isnan(value) else repr(value)))
        lines.append(",".join(cells))
    return "\n".join(lines) + "\n"


# ---- the scalar re-implementation: (status, margin) per check, one part at a time
def nan(x) -> bool:
    return isinstance(x, float) and math.isnan(x)


def ratio(required, available):
    if nan(available):
        return "unknown", math.nan
    margin = available / required
    return ("pass" if margin >= 1 else "fail"), margin


def budget(limit, actual):
    margin = math.inf if actual == 0 else limit / actual
    return ("pass" if margin >= 1 else "fail"), margin


def headroom(low_left, low_need, high_left, high_need):
    if nan(low_need) or nan(high_need):
        return "unknown", math.nan
    margin = min(low_left - low_need, high_left - high_need)
    return ("pass" if margin >= 0 else "fail"), margin


def amplitude_error(f, ng, gbw, aol):
    a = 1 / ((0.0 if math.isinf(aol) else 1 / aol) + 1j * f / gbw)
    return 1 - abs(1 / (1 + ng / a))


def phase_margin_of(gbw, aol, ng, poles):
    def loop(f):
        value = 1 / ((0.0 if math.isinf(aol) else 1 / aol) + 1j * f / gbw) / ng
        for p in poles:
            value /= 1 + 1j * f / p
        return value
    g = lambda log_f: abs(loop(10.0 ** log_f)) - 1  # noqa: E731
    if g(-6.0) < 0:
        return 180.0
    fx = 10.0 ** brentq(g, -6.0, 13.0, xtol=1e-13, rtol=1e-14)
    phase = -math.degrees(math.atan(fx * aol / gbw)) if not math.isinf(aol) else -90.0
    phase -= sum(math.degrees(math.atan(fx / p)) for p in poles)
    return 180.0 + phase


def plus_resistance(brief, req) -> float:
    """Resistance (Ω) at the + input from the resistor values: Rs (follower,
    non-inverting); (R1 + Rs) ∥ R2 through a summing network; Ra ∥ Rb (Ra alone
    without Rb) of a divider at an inverting stage's + input; 0 for an inverting
    stage with + grounded or at a stiff reference."""
    rs, net = brief.source_resistance, req.offset_network
    kind = None if net is None else net.kind
    if kind == "summing" and net.r1 and net.r2:
        return 1 / (1 / (net.r1 + rs) + 1 / net.r2)
    if brief.topology == "inverting":
        if kind == "reference-at-plus" and net.ra:
            return net.ra if net.rb is None else 1 / (1 / net.ra + 1 / net.rb)
        return 0.0
    return rs


def brute_force(brief, req, part) -> dict[str, tuple[str, float]]:
    """Every check of one part from the method sheet, by its own figures."""
    topo, rs = brief.topology, brief.source_resistance
    g, ng, rf, rg = req.gain, req.noise_gain, req.rf, req.rg
    x_lo, x_hi = brief.signal_min, brief.signal_max
    y_lo, y_hi = sorted((g * x_lo + req.offset, g * x_hi + req.offset))
    v_pos, v_neg = brief.supply_positive, brief.supply_negative
    sine = brief.waveform == "sine"
    f = brief.frequency
    aol = math.inf if nan(part["aol"]) else part["aol"]
    r_eq = (0.0 if topo == "follower" else
            1 / (1 / rf + 1 / (rg + rs)) if topo == "inverting" else 1 / (1 / rf + 1 / rg))
    r_plus = plus_resistance(brief, req)
    out: dict[str, tuple[str, float]] = {}
    span = v_pos - v_neg
    out["supply"] = headroom(span, part["supply_min"], -span, -part["supply_max"])
    vp = abs(g) * (x_hi - x_lo) / 2
    out["slew"] = ratio(2 * math.pi * f * vp * brief.slew_margin, part["slew"]) if sine \
        else ("n/a", math.nan)
    if sine:
        if nan(part["gbw"]):
            out["gain_accuracy"] = ("unknown", math.nan)
        else:  # the GBW that just meets the error (root of the amplitude error)
            dc = 1 - 1 / (1 + ng / aol)
            if dc >= brief.gain_error:
                out["gain_accuracy"] = ("fail", 0.0)
            else:
                h = lambda lg: amplitude_error(f, ng, 10.0 ** lg, aol) - brief.gain_error  # noqa
                needed = 10.0 ** brentq(h, -3.0, 15.0, xtol=1e-14, rtol=1e-15)
                out["gain_accuracy"] = ratio(needed * brief.gbw_margin, part["gbw"])
    else:
        out["gain_accuracy"] = ratio(ng / (1 / (1 - brief.gain_error) - 1), part["aol"])
    out["output_swing"] = headroom(y_lo - v_neg, part["swing_low"], v_pos - y_hi,
                                   part["swing_high"])
    summing = getattr(req.offset_network, "kind", None) == "summing"
    # + input: the signal; for an inverting stage the reference; through a summing
    # network the output divided back by the noise gain (the − input is at y/NG)
    cm = ((req.reference or 0.0,) * 2 if topo == "inverting" else
          (y_lo / ng, y_hi / ng) if summing else (x_lo, x_hi))
    out["input_common_mode"] = headroom(cm[0] - v_neg, part["cm_low"], v_pos - cm[1],
                                        part["cm_high"])
    t = (brief.temperature_min, brief.temperature_max)
    dt = 0.0 if t[0] is None else max(abs(t[1] - 25), abs(t[0] - 25))
    if brief.dc_error is None:
        out["dc_error"] = ("n/a", math.nan)
    else:
        ib_coefficient = rf + ng * r_plus  # |Ib|·Rf + NG·|Ib|·R+
        terms = [(ng, part["vos"]), (ng * dt, part["vos_drift"]), (ib_coefficient, part["ib"])]
        if any(c > 0 and nan(v) for c, v in terms):
            out["dc_error"] = ("unknown", math.nan)
        else:
            out["dc_error"] = budget(brief.dc_error,
                                     sum(c * abs(v) for c, v in terms if c > 0))
    if brief.noise is None:
        out["noise"] = ("n/a", math.nan)
    else:
        band = brief.noise_band
        f_lo = band[0] if band and band[0] is not None else 0.1
        enbw = math.pi / 2 * part["gbw"] / ng
        f_hi = enbw if band is None else (band[1] if nan(enbw) else min(enbw, band[1]))
        f_hi = max(f_hi, f_lo) if not nan(f_hi) else f_hi
        r_src = r_plus
        resistive = r_src + r_eq > 0
        if nan(part["en"]) or nan(part["en_corner"]) or nan(f_hi) or (
                resistive and nan(part["in"])):
            out["noise"] = ("unknown", math.nan)
        else:
            i_n = 0.0 if nan(part["in"]) else part["in"]
            width = f_hi - f_lo
            power = (part["en"] ** 2 * (width + part["en_corner"] * math.log(f_hi / f_lo))
                     + (4 * K_BOLTZMANN * T_ROOM * (r_src + r_eq)
                        + i_n ** 2 * (r_src ** 2 + r_eq ** 2)) * width)
            out["noise"] = budget(brief.noise, ng * math.sqrt(power))
    c_in = part["cin_cm"] + part["cin_diff"] + brief.stray_capacitance
    # the feedback network as a load on the output, returned to the reference
    fb = math.inf if topo == "follower" else (rf if topo == "inverting" else rf + rg)
    if nan(part["gbw"]) or nan(part["pm"]) or (r_eq > 0 and nan(c_in)) or (
            brief.load_capacitance > 0 and nan(part["ro"])):
        out["phase_margin"] = ("unknown", math.nan)
    else:
        poles = [part["gbw"] * math.tan(math.radians(part["pm"]))]
        if r_eq > 0:
            poles.append(1 / (2 * math.pi * r_eq * c_in))
        # Ro drives R' = R_L ∥ network (fb: Rf inverting, Rf + Rg non-inverting, none
        # for a follower): loop gain × R'/(R' + Ro), C_L's pole at 1/(2π·(Ro ∥ R')·C_L)
        conductance = sum(1 / r for r in (brief.load_resistance, fb) if not math.isinf(r))
        r_dash = math.inf if conductance == 0 else 1 / conductance
        ro = part["ro"]
        loop_ng = ng if nan(ro) or math.isinf(r_dash) else ng * (r_dash + ro) / r_dash
        if brief.load_capacitance > 0:
            driving = ro if math.isinf(r_dash) else 1 / (1 / ro + 1 / r_dash)
            poles.append(1 / (2 * math.pi * driving * brief.load_capacitance))
        pm = phase_margin_of(part["gbw"], aol, loop_ng, poles)
        slack = pm - brief.phase_margin  # a headroom in degrees, not a ratio
        out["phase_margin"] = ("pass" if slack >= 0 else "fail"), slack
    out["temperature"] = ("n/a", math.nan) if t[0] is None else headroom(
        t[0], part["temp_min"], -t[1], -part["temp_max"])
    if brief.quiescent_current is None:
        out["quiescent_current"] = ("n/a", math.nan)
    elif nan(part["iq"]):
        out["quiescent_current"] = ("unknown", math.nan)
    else:
        out["quiescent_current"] = budget(brief.quiescent_current, part["iq"] * brief.channels)
    ref = req.reference or 0.0
    current = max(abs(y) / brief.load_resistance + abs(y - ref) / fb for y in (y_lo, y_hi))
    if sine:
        current += 2 * math.pi * f * vp * brief.load_capacitance
    out["output_drive"] = ratio(current, part["iout"]) if current > 0 else ("n/a", math.nan)
    out["settling"] = ("n/a", math.nan)
    status = part["status"].lower()
    out["status"] = ("unknown" if status == "" else
                     "pass" if status in brief.status else "fail", math.nan)
    if brief.packages:
        package = part["package"].lower()
        wanted = [p.lower() for p in brief.packages]
        out["package"] = ("unknown" if package == "" else
                          "pass" if package in wanted else "fail", math.nan)
    else:
        out["package"] = ("n/a", math.nan)
    if brief.max_unit_cost is None:
        out["cost"] = ("n/a", math.nan)
    elif nan(part["unit_cost"]):
        out["cost"] = ("unknown", math.nan)
    else:
        out["cost"] = ("pass" if part["unit_cost"] <= brief.max_unit_cost else "fail",
                       math.nan)
    return out


def near_threshold(name: str, status: str, margin: float, sense: str) -> bool:
    """Too close to the pass/fail line for two implementations to agree exactly."""
    if status in ("n/a", "unknown") or nan(margin) or math.isinf(margin):
        return False
    if name == "phase_margin":  # degrees from two root finders
        return abs(margin) < 1e-6
    if sense == "headroom":
        return abs(margin) < 1e-9
    return abs(margin - 1) < 1e-7


SOLVER_STATS = {"examples": 0, "parts": 0, "qualifying": 0, "networks": set()}


@settings(max_examples=EXAMPLE_COUNTS["solver"], deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(data=briefs(), rows=solver_libraries())
def test_solver_matches_brute_force(data, rows):
    try:
        brief = brief_from_dict(data, "random.toml")
        req = derive(brief)
    except InputError:
        assume(False)
    library = parse_library(library_csv(rows), "random.csv")
    result = shortlist(req, library)
    evaluation = result.evaluation
    qualifying = set(result.qualifying["part"])
    SOLVER_STATS["examples"] += 1
    SOLVER_STATS["networks"].add(getattr(req.offset_network, "kind", None))
    for position, row in enumerate(rows):
        part = {k: (library.table[k].iloc[position] if k in library.table else math.nan)
                for k in row}
        part = {k: (float(v) if not isinstance(v, str) else v) for k, v in part.items()}
        expected = brute_force(brief, req, part)
        solver = evaluation.checks_of(position)
        assert set(expected) == set(solver), "the check list changed: update the test"
        ambiguous = False
        for name, (status, margin) in expected.items():
            sense = REGISTRY[name].sense
            if near_threshold(name, status, margin, sense):
                ambiguous = True
                continue
            got = solver[name]
            assert got["status"] == status, (name, row["part"], got, status, margin)
            if status == "pass" and sense in ("min", "max", "headroom"):
                got_margin = math.inf if got["margin"] is None else got["margin"]
                if math.isinf(margin):
                    assert math.isinf(got_margin) or got_margin > 1e12
                elif name == "phase_margin":  # degrees above the minimum
                    assert got_margin == pytest.approx(margin, abs=1e-6), name
                elif sense == "headroom":
                    assert got_margin == pytest.approx(margin, abs=1e-9)
                else:
                    assert got_margin == pytest.approx(margin, rel=1e-6), name
        brute_qualifies = all(s in ("pass", "n/a") for s, _ in expected.values())
        SOLVER_STATS["parts"] += 1
        if row["part"] in qualifying:
            SOLVER_STATS["qualifying"] += 1
            for name, check in solver.items():  # passes every check by its own figures
                assert check["status"] in ("pass", "n/a"), (name, check)
                if check["status"] == "pass" and REGISTRY[name].sense in ("min", "max"):
                    assert check["margin"] is None or check["margin"] >= 1
                if check["status"] == "pass" and REGISTRY[name].sense == "headroom":
                    assert check["margin"] >= 0
        if not ambiguous:
            assert (row["part"] in qualifying) == brute_qualifies, row["part"]
    # ranking: best weakest ratio margin first (method §8)
    scores = result.qualifying["score"].to_numpy()
    assert np.all(np.diff(scores) <= 0)


def test_solver_property_exercised_both_outcomes():
    # guards the property above against a generator that only ever rejects
    if SOLVER_STATS["examples"] == 0:
        pytest.skip("run together with test_solver_matches_brute_force")
    assert SOLVER_STATS["qualifying"] > 0
    assert SOLVER_STATS["parts"] - SOLVER_STATS["qualifying"] > 0
    # and met a synthesised network whose + input sees R1, R2 or Ra, Rb (about one
    # brief in five is drawn with an offset and no network)
    assert SOLVER_STATS["networks"] & {"summing", "reference-at-plus"}
