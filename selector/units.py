"""Quantities as engineers write them, parsed to SI at the edge and formatted back.

Internally every value is a plain float in SI units (V, A, Hz, V/s, F, ohm, s,
V/sqrt(Hz), A/sqrt(Hz), V/degC, degC, degrees, V/V, fraction).  This module is the
only place that knows about prefixes and unit spellings.

A *dimension* is one of the keys of :data:`DIMENSIONS`.  ``parse_quantity`` reads
one string; ``parse_column`` reads a whole pandas column at once (regex over the
column, unit spellings resolved once per distinct spelling).
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .errors import UnitError

#: dimension key -> (human name, SI unit shown in messages)
DIMENSIONS: dict[str, tuple[str, str]] = {
    "V": ("voltage", "V"),
    "A": ("current", "A"),
    "Hz": ("frequency", "Hz"),
    "V/s": ("slew rate", "V/s"),
    "F": ("capacitance", "F"),
    "ohm": ("resistance", "Ω"),
    "s": ("time", "s"),
    "W": ("power", "W"),
    "V/rtHz": ("voltage noise density", "V/√Hz"),
    "A/rtHz": ("current noise density", "A/√Hz"),
    "V/degC": ("temperature drift", "V/°C"),
    "degC": ("temperature", "°C"),
    "deg": ("angle", "°"),
    "ratio": ("gain (V/V or dB)", "V/V"),
    "fraction": ("fraction (% or ppm)", "%"),
    "count": ("plain number", ""),
}

PREFIXES: dict[str, float] = {
    "f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3,
    "": 1.0, "k": 1e3, "K": 1e3, "meg": 1e6, "M": 1e6, "G": 1e9,
}

# atom -> dimension key of the atom
_NUMERATOR_ATOMS = {"V": "V", "A": "A", "Hz": "Hz", "F": "F", "ohm": "ohm",
                    "s": "s", "W": "W"}
_DENOMINATOR_ATOMS = {"s": "s", "rtHz": "rtHz", "degC": "degC", "K": "degC", "C": "degC",
                      "V": "V", "Hz": "Hz"}
_COMPOUND = {("V", "s"): "V/s", ("V", "rtHz"): "V/rtHz", ("A", "rtHz"): "A/rtHz",
             ("V", "degC"): "V/degC", ("V", "V"): "ratio"}

_SPELLINGS = [  # applied in order to a unit string before it is resolved
    ("μ", "u"), ("µ", "u"),
    ("√(Hz)", "rtHz"), ("√Hz", "rtHz"), ("sqrt(Hz)", "rtHz"), ("sqrtHz", "rtHz"),
    ("rt(Hz)", "rtHz"), ("Hz^0.5", "rtHz"), ("Hz^(1/2)", "rtHz"),
    ("Ω", "ohm"), ("Ohms", "ohm"), ("ohms", "ohm"), ("Ohm", "ohm"),
    ("°C", "degC"), ("℃", "degC"), ("deg C", "degC"), ("degrees", "deg"),
    ("°", "deg"),
]

# ASCII digits only: Python's \d and float() also take other scripts' digits
_NUMBER = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
QUANTITY_RE = re.compile(rf"^\s*({_NUMBER})\s*([^0-9\s,.].*?)?\s*$")
# IEC 60062 resistor code: the letter is the decimal point and the multiplier
RESISTOR_CODE_RE = re.compile(r"^\s*([0-9]*)([RrKkMG])([0-9]*)\s*(?:ohm|Ω)?\s*$")
_CODE_MULTIPLIER = {"R": 1.0, "r": 1.0, "k": 1e3, "K": 1e3, "M": 1e6, "G": 1e9}


@dataclass(frozen=True)
class Unit:
    """A resolved unit spelling: value_SI = scale * number + offset (or dB)."""

    dimension: str
    scale: float = 1.0
    offset: float = 0.0
    decibel: bool = False

    def to_si(self, number):
        """SI value(s); a result beyond float range is inf (callers reject it)."""
        with np.errstate(over="ignore"):
            if self.decibel:
                return 10.0 ** (np.asarray(number, dtype=float) / 20.0)
            return np.asarray(number, dtype=float) * self.scale + self.offset


def _normalise(unit: str) -> str:
    text = unit.strip()
    for old, new in _SPELLINGS:
        text = text.replace(old, new)
    return text.replace(" ", "")


def _split_prefix(text: str, atoms: dict[str, str]) -> tuple[float, str] | None:
    if text in atoms:
        return 1.0, atoms[text]
    for prefix in ("meg", "Meg", "MEG"):
        if text.startswith(prefix) and text[len(prefix):] in atoms:
            return 1e6, atoms[text[len(prefix):]]
    if len(text) > 1 and text[0] in PREFIXES and text[1:] in atoms:
        return PREFIXES[text[0]], atoms[text[1:]]
    return None


_UNIT_CACHE: dict[tuple[str, str], Unit] = {}


def resolve_unit(unit: str, dimension: str) -> Unit:
    """Resolve a unit spelling for a quantity of ``dimension``.

    Raises :class:`UnitError` if the spelling is unknown or of another dimension.
    """
    key = (unit, dimension)
    if key in _UNIT_CACHE:
        return _UNIT_CACHE[key]
    resolved = _resolve(_normalise(unit), dimension, unit)
    if resolved.dimension != dimension and not (
        dimension == "ratio" and resolved.dimension == "count"
    ):
        raise UnitError(
            f"unit '{unit}' is a {describe(resolved.dimension)}, "
            f"expected {describe(dimension)}"
        )
    _UNIT_CACHE[key] = resolved
    return resolved


def _resolve(text: str, dimension: str, original: str) -> Unit:
    if text == "":
        return Unit("count")
    if text == "dB":
        return Unit("ratio", decibel=True)
    if text in ("%", "percent"):
        return Unit("fraction", 1e-2)
    if text == "ppm":
        return Unit("fraction", 1e-6)
    if text in ("V/V", "x"):
        return Unit("ratio")
    if text == "deg":
        return Unit("deg")
    if text in ("degC", "C"):
        return Unit("degC")
    if text == "K" and dimension == "degC":
        return Unit("degC", 1.0, -273.15)
    if dimension == "ohm" and text in PREFIXES and text != "":
        return Unit("ohm", PREFIXES[text])  # "10k" for a resistor
    if dimension == "ohm" and text in ("R", "r"):
        return Unit("ohm")
    if "/" in text:
        numerator, _, denominator = text.partition("/")
        top = _split_prefix(numerator, _NUMERATOR_ATOMS)
        bottom = _split_prefix(denominator, _DENOMINATOR_ATOMS)
        if top and bottom and (top[1], bottom[1]) in _COMPOUND:
            return Unit(_COMPOUND[(top[1], bottom[1])], top[0] / bottom[0])
    else:
        simple = _split_prefix(text, _NUMERATOR_ATOMS)
        if simple:
            return Unit(simple[1], simple[0])
    raise UnitError(f"unknown unit '{original}'")


def describe(dimension: str) -> str:
    name, si = DIMENSIONS.get(dimension, (dimension, ""))
    return f"{name} ({si})" if si else name


def parse_resistor_code(text: str) -> float | None:
    """IEC 60062 code such as ``4k7`` → 4700.0, ``4R7`` → 4.7; None if not a code."""
    match = RESISTOR_CODE_RE.match(text)
    if not match or not (match.group(1) or match.group(3)):
        return None
    whole, letter, frac = match.groups()
    value = float(f"{whole or 0}.{frac or 0}")
    return value * _CODE_MULTIPLIER[letter]


def parse_quantity(text, dimension: str, default_unit: str | None = None,
                   bare_ok: bool = False) -> float:
    """Parse one quantity to SI.

    ``default_unit`` applies to a bare number (a unit given in a column header).
    A bare number with no unit anywhere is an error unless the dimension is a
    plain count or ``bare_ok`` is set (a gain in V/V).  Raises :class:`UnitError`.
    """
    if isinstance(text, bool):
        raise UnitError(f"expected a {describe(dimension)}, got {text!r}")
    if isinstance(text, (int, float)):
        if not math.isfinite(text):
            raise UnitError(f"value {text!r} is not a finite number")
        return _bare_number(float(text), str(text), dimension, default_unit, bare_ok)
    if not isinstance(text, str):
        raise UnitError(f"expected a {describe(dimension)}, got {type(text).__name__}")
    if dimension == "ohm":
        coded = parse_resistor_code(text)
        if coded is not None:
            return coded
    match = QUANTITY_RE.match(text)
    if not match:
        raise UnitError(_not_a_quantity_message(text, dimension))
    number, unit = float(match.group(1)), (match.group(2) or "")
    if not math.isfinite(number):
        raise UnitError(f"'{text}' is not a finite number")
    if unit == "":
        return _bare_number(number, text, dimension, default_unit, bare_ok)
    value = float(resolve_unit(unit, dimension).to_si(number))
    if not math.isfinite(value):
        raise UnitError(f"'{text}' is out of range")
    return value


def _bare_number(number: float, text: str, dimension: str, default_unit: str | None,
                 bare_ok: bool = False) -> float:
    if default_unit:
        value = float(resolve_unit(default_unit, dimension).to_si(number))
        if not math.isfinite(value):
            raise UnitError(f"'{text}' is out of range")
        return value
    if dimension == "count" or bare_ok:
        return number
    example = {"Hz": "2.4 MHz", "V/s": "1.2 V/us", "V": "3.3 V", "ohm": "10k",
               "F": "6 pF", "A": "2 nA", "V/rtHz": "8 nV/rtHz", "degC": "-40 C",
               "fraction": "1 %", "deg": "45 deg"}.get(dimension, "")
    hint = f" such as '{example}'" if example else ""
    raise UnitError(f"'{text}' has no unit; give a {describe(dimension)} with its unit{hint}")


def _not_a_quantity_message(text: str, dimension: str) -> str:
    shown = text if len(text) <= 40 else text[:37] + "..."
    if re.fullmatch(r"\s*[+-]?\d+,\d+\s*\S*\s*", text):
        return (f"'{shown}' uses a decimal comma; write it with a point "
                f"('{text.replace(',', '.').strip()}')")
    return f"'{shown}' is not a {describe(dimension)}"


def parse_column(values: pd.Series, dimension: str, header_unit: str | None = None,
                 bare_ok: bool = False) -> tuple[np.ndarray, pd.Series]:
    """Parse a column of strings to SI floats, vectorised.

    A bad ``header_unit`` raises :class:`UnitError`.  Returns ``(values_si, errors)``
    where ``errors`` is a Series of messages indexed
    like ``values`` for every cell that could not be parsed (empty cells are NaN,
    not errors).  Work is done once per distinct cell text (a library column holds
    few distinct spellings), then mapped back to the rows with integer codes.
    """
    if header_unit is not None:
        resolve_unit(header_unit, dimension)  # raises UnitError for a bad header unit
    codes, uniques = pd.factorize(values, use_na_sentinel=True)  # missing -> -1
    distinct = pd.Series(np.asarray(uniques, dtype=object)).astype("string").str.strip()
    si, message = _parse_distinct(distinct, dimension, header_unit, bare_ok)
    present = codes >= 0
    result = np.full(len(codes), np.nan)
    result[present] = si[codes[present]]
    bad_distinct = message != None  # noqa: E711 (element-wise comparison)
    if not bad_distinct.any():
        return result, pd.Series(dtype=object)
    bad = present.copy()
    bad[present] = bad_distinct[codes[present]]
    errors = pd.Series(message[codes[bad]], index=values.index[bad], dtype=object)
    return result, errors


def _parse_distinct(text: pd.Series, dimension: str, header_unit: str | None,
                    bare_ok: bool) -> tuple[np.ndarray, np.ndarray]:
    """SI value (NaN for empty or bad) and message (None if fine) per stripped text."""
    empty = (text.isna() | (text == "")).to_numpy()
    result = np.full(len(text), np.nan)
    messages = np.full(len(text), None, dtype=object)
    present = text[~empty]
    if present.empty:
        return result, messages
    number, unit, unmatched = _split_quantities(present)
    if dimension == "ohm":  # IEC 60062 codes ("4k7", "R47") first, as parse_quantity does
        unmatched = unmatched | present.str.fullmatch(
            RESISTOR_CODE_RE.pattern[1:-1]).to_numpy(dtype=bool)
    si = np.full(len(present), np.nan)
    message = np.full(len(present), None, dtype=object)
    for spelling in pd.unique(unit[~unmatched]):
        rows = (unit == spelling) & ~unmatched
        if spelling == "":
            if header_unit is not None:
                resolved = resolve_unit(header_unit, dimension)
            elif dimension == "count" or bare_ok:
                resolved = Unit(dimension)
            else:
                message[rows] = [_bare_number_message(v, dimension) for v in present[rows]]
                continue
        else:
            try:
                resolved = resolve_unit(spelling, dimension)
            except UnitError as exc:
                message[rows] = str(exc)
                continue
        with np.errstate(over="ignore", invalid="ignore"):
            si[rows] = resolved.to_si(number[rows])
    if unmatched.any():
        if dimension == "ohm":
            codes = present[unmatched].map(parse_resistor_code)
            si[unmatched] = codes.astype(float).fillna(np.nan).to_numpy()
            still = unmatched & np.isnan(si)
        else:
            still = unmatched
        message[still] = [_not_a_quantity_message(v, dimension) for v in present[still]]
    overflow = np.isnan(si) | np.isinf(si)
    overflow &= message == None  # noqa: E711 (element-wise comparison)
    message[overflow] = [f"'{v}' is not a finite number" for v in present[overflow]]
    bad = message != None  # noqa: E711
    si[bad] = np.nan
    result[~empty] = si
    messages[~empty] = message
    return result, messages


def _split_quantities(text: pd.Series) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Number, unit text ("" if none) and a no-match mask for stripped cell texts, as
    :data:`QUANTITY_RE` splits them.  Plain finite numbers (most cells under a header
    unit) are read by pandas' C number parser; only the rest meet the regex."""
    number = np.array(pd.to_numeric(text, errors="coerce"), dtype=float)  # writable copy
    unit = np.full(len(text), "", dtype=object)
    rest = ~np.isfinite(number)
    unmatched = np.zeros(len(text), dtype=bool)
    if rest.any():
        match = QUANTITY_RE.match  # one call per distinct text, not per row
        groups = [m.groups() if m else (None, None)
                  for m in map(match, text[rest].tolist())]
        figure = pd.Series([g[0] for g in groups], dtype=object)
        number[rest] = pd.to_numeric(figure, errors="coerce").to_numpy(dtype=float)
        unit[rest] = [g[1] or "" for g in groups]
        unmatched[rest] = figure.isna().to_numpy()
    return number, unit.astype(str), unmatched


def _bare_number_message(text: str, dimension: str) -> str:
    try:
        _bare_number(0.0, text, dimension, None)
    except UnitError as exc:
        return str(exc)
    return ""


# ---------------------------------------------------------------- formatting
_ENG_PREFIXES = [(1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"),
                 (1e-6, "µ"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f")]

#: how each dimension is shown: (unit text, fixed scale or None for engineering prefix)
DISPLAY: dict[str, tuple[str, float | None]] = {
    "V": ("V", None), "A": ("A", None), "Hz": ("Hz", None), "V/s": ("V/µs", 1e-6),
    "F": ("F", None), "ohm": ("Ω", None), "s": ("s", None), "W": ("W", None),
    "V/rtHz": ("V/√Hz", None), "A/rtHz": ("A/√Hz", None),
    "V/degC": ("V/°C", None), "degC": ("°C", 1.0), "deg": ("°", 1.0),
    "ratio": ("dB", "dB"), "fraction": ("%", 1e2), "count": ("", 1.0),
}


def format_si(value, dimension: str, digits: int = 3) -> str:
    """Format an SI value for people: ``format_si(1.257e6, "V/s") == "1.26 V/µs"``."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "—"
    value = float(value)
    if math.isinf(value):
        return "∞" if value > 0 else "-∞"
    unit, scale = DISPLAY.get(dimension, (dimension, 1.0))
    if scale == "dB":
        return f"{20 * math.log10(value):.{max(digits - 2, 0) + 1}f} dB" if value > 0 else "—"
    if scale is not None:
        return f"{_sig(value * scale, digits)} {unit}".rstrip()
    magnitude = abs(value)
    if magnitude == 0:
        return f"0 {unit}".rstrip()
    rounded = float(f"{magnitude:.{digits}g}")  # round first: 999.7 → 1000 → "1 k"
    for factor, prefix in _ENG_PREFIXES:
        if rounded >= factor or factor == _ENG_PREFIXES[-1][0]:
            return f"{_sig(value / factor, digits)} {prefix}{unit}"
    return f"{_sig(value, digits)} {unit}"


def _sig(number: float, digits: int) -> str:
    """``digits`` significant figures in plain positional notation (no exponent)."""
    if number == 0:
        return "0"
    text = f"{number:.{digits}g}"
    if "e" in text:  # beyond the prefix range: write the digits out
        decimals = max(digits - 1 - int(np.floor(np.log10(abs(float(text))))), 0)
        text = f"{float(text):.{decimals}f}"
    return text
