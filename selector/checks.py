"""Every check and filter, evaluated on the whole parts table at once.

A check is a function ``(req, parts) -> CheckResult`` registered with ``@check``.
``parts`` maps a library column name to a float array (NaN where missing), so a
check is a handful of numpy expressions over columns; it never loops over rows.

Status per part: ``pass``, ``fail``, ``unknown`` (data the check needs is missing;
never counted as a pass) or ``n/a`` (the brief does not ask for it).

Margins: ``sense="min"`` checks need available ≥ required, margin = available /
required; ``sense="max"`` checks are budgets, margin = budget / actual; both pass at
margin ≥ 1.  ``sense="headroom"`` checks give the smaller slack in the check's unit
(volts, °C) and pass at ≥ 0.  ``sense="filter"`` are the brief's filters.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import pandas as pd

from . import relations as rel
from .library import Library
from .requirements import Requirements

PASS, FAIL, UNKNOWN, NA = "pass", "fail", "unknown", "n/a"


@dataclass
class CheckResult:
    """One check over all parts.  Arrays have one element per part (SI units)."""

    name: str
    sense: str
    unit: str
    columns: tuple[str, ...]
    status: np.ndarray
    required: np.ndarray
    available: np.ndarray
    margin: np.ndarray
    #: the status as int8 codes (0 pass, 1 fail, 2 unknown, 3 n/a; see STATUS_CODES),
    #: for fast combination over many checks; None if only ``status`` was given
    code: np.ndarray | None = field(default=None, repr=False)


@dataclass(frozen=True)
class CheckSpec:
    name: str
    sense: str
    unit: str
    columns: tuple[str, ...]
    function: Callable


REGISTRY: dict[str, CheckSpec] = {}
RATIO_SENSES = ("min", "max")


def check(name: str, sense: str, unit: str, columns: tuple[str, ...]):
    """Register a check: ``columns`` are the library columns it reads."""
    def register(function):
        REGISTRY[name] = CheckSpec(name, sense, unit, columns, function)
        return function
    return register


class Parts(dict):
    """Column name → float array, NaN for a column the library lacks."""

    def __init__(self, library: Library):
        super().__init__()
        self.library = library
        self.size = len(library)

    def __missing__(self, name: str) -> np.ndarray:
        self[name] = self.library.column(name)
        return self[name]

    def text(self, name: str) -> pd.Series:
        table = self.library.table
        if name in table:
            return table[name].fillna("").astype(str)
        return pd.Series([""] * self.size, index=table.index)

    def lowered(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """(codes, distinct texts) of a text column in lower case, ``""`` for missing:
        ``distinct[codes]`` is ``text(name).str.lower()``; a filter then works on the
        few distinct values instead of every row."""
        key = ("lowered", name)
        if key not in self:
            table = self.library.table
            if name not in table:
                self[key] = (np.zeros(self.size, dtype=np.intp), np.array([""], dtype=object))
            else:
                codes, uniques = pd.factorize(table[name], use_na_sentinel=True)
                distinct = pd.Series(np.asarray(uniques, dtype=object), dtype=object)
                distinct = np.append(distinct.astype(str).str.lower().to_numpy(dtype=object), "")
                self[key] = (np.where(codes < 0, len(distinct) - 1, codes), distinct)
        return self[key]


def _full(size: int, value) -> np.ndarray:
    return np.full(size, value, dtype=float)


STATUS_CODES = (PASS, FAIL, UNKNOWN, NA)  # CheckResult.code i means STATUS_CODES[i]
_STATUS_OF_CODE = np.array(STATUS_CODES, dtype=object)


def _status_code(size: int, applicable: bool, missing, passed) -> np.ndarray:
    """int8 status codes: 0 pass, 1 fail, 2 unknown (missing data), 3 n/a."""
    if not applicable:
        return np.full(size, 3, dtype=np.int8)
    missing = np.broadcast_to(np.asarray(missing, dtype=bool), (size,))
    passed = np.broadcast_to(np.asarray(passed, dtype=bool), (size,))
    return np.where(missing, np.int8(2), (~passed).view(np.int8))


def _status(size: int, applicable: bool, missing, passed) -> np.ndarray:
    code = _status_code(size, applicable, missing, passed)
    return _STATUS_OF_CODE[code]  # one shared str object per status: no per-row copies


def _ratio(name, parts, required, available, applicable=True, missing=False):
    """A ``min`` check: available must reach required; margin = available/required."""
    size = parts.size
    required, available = _broadcast(size, required, available)
    with np.errstate(divide="ignore", invalid="ignore"):
        margin = available / required
    missing = np.asarray(missing) | np.isnan(margin)
    return _result(name, size, applicable, missing, margin >= 1, required, available, margin)


def _budget(name, parts, budget, actual, applicable=True, missing=False):
    """A ``max`` check: actual must stay within budget; margin = budget/actual."""
    size = parts.size
    budget, actual = _broadcast(size, budget, actual)
    with np.errstate(divide="ignore", invalid="ignore"):
        margin = np.where(actual == 0, np.inf, budget / actual)
    missing = np.asarray(missing) | np.isnan(margin)
    return _result(name, size, applicable, missing, margin >= 1, budget, actual, margin)


def _headroom(name, parts, low_slack_parts, low_need, high_slack_parts, high_need,
              applicable=True, missing=False):
    """Two-sided headroom: the design leaves ``*_slack_parts`` (V) on each side and the
    part needs ``*_need``; margin is the smaller (slack − need)."""
    size = parts.size
    low_left, low_need, high_left, high_need = _broadcast(
        size, low_slack_parts, low_need, high_slack_parts, high_need)
    low_margin, high_margin = low_left - low_need, high_left - high_need
    low_binds = low_margin <= high_margin
    margin = np.where(low_binds, low_margin, high_margin)
    required = np.where(low_binds, low_need, high_need)
    available = np.where(low_binds, low_left, high_left)
    # either side's figure missing is "unknown", even if the other side has room
    missing = np.asarray(missing) | np.isnan(low_margin) | np.isnan(high_margin)
    return _result(name, size, applicable, missing, margin >= 0, required, available, margin)


def _broadcast(size, *arrays):
    return [np.broadcast_to(np.asarray(a, dtype=float), (size,)).copy() for a in arrays]


def _result(name, size, applicable, missing, passed, required, available, margin):
    spec = REGISTRY[name]
    code = _status_code(size, applicable, missing, passed)
    if not applicable:
        margin = _full(size, np.nan)
    return CheckResult(name, spec.sense, spec.unit, spec.columns, _STATUS_OF_CODE[code],
                       required, available, margin, code)


# ------------------------------------------------------------------ checks
@check("supply", "headroom", "V", ("supply_min", "supply_max"))
def supply(req: Requirements, parts: Parts) -> CheckResult:
    span = req.supply_span
    result = _headroom("supply", parts, span, parts["supply_min"],
                       -span, -parts["supply_max"])
    return _limits_shown(result, span, parts["supply_min"], parts["supply_max"])


def _limits_shown(result: CheckResult, wanted, part_low, part_high) -> CheckResult:
    """For range checks show the brief's figure and the part's binding limit."""
    low_binds = (wanted - part_low) <= (part_high - wanted)
    result.required = np.broadcast_to(np.asarray(wanted, dtype=float), low_binds.shape).copy()
    result.available = np.where(low_binds, part_low, part_high)
    return result


@check("slew", "min", "V/s", ("slew",))
def slew(req: Requirements, parts: Parts) -> CheckResult:
    applicable = req.slew_min is not None
    return _ratio("slew", parts, req.slew_min or np.nan, parts["slew"], applicable)


@check("gain_accuracy", "min", "Hz", ("gbw", "aol"))
def gain_accuracy(req: Requirements, parts: Parts) -> CheckResult:
    """At f > 0: GBW against the GBW that meets the gain-error limit with this part's
    A_OL (exact single-pole model).  At DC: A_OL against the A_OL the limit needs."""
    aol = parts["aol"]
    if req.frequency > 0 and req.brief.waveform == "sine":
        needed = rel.gbw_for_gain_error(req.frequency, req.brief.gain_error,
                                        req.noise_gain, np.where(np.isnan(aol), np.inf, aol))
        result = _ratio("gain_accuracy", parts, needed * req.brief.gbw_margin, parts["gbw"])
        return result
    result = _ratio("gain_accuracy", parts, req.aol_min, aol)
    result.unit = "ratio"
    return result


@check("output_swing", "headroom", "V", ("swing_low", "swing_high"))
def output_swing(req: Requirements, parts: Parts) -> CheckResult:
    y_lo, y_hi = req.output_range
    brief = req.brief
    return _headroom("output_swing", parts, y_lo - brief.supply_negative, parts["swing_low"],
                     brief.supply_positive - y_hi, parts["swing_high"])


@check("input_common_mode", "headroom", "V", ("cm_low", "cm_high"))
def input_common_mode(req: Requirements, parts: Parts) -> CheckResult:
    cm_lo, cm_hi = req.input_common_mode
    brief = req.brief
    return _headroom("input_common_mode", parts, cm_lo - brief.supply_negative,
                     parts["cm_low"], brief.supply_positive - cm_hi, parts["cm_high"])


def dc_error_of(req: Requirements, parts: Parts) -> tuple[np.ndarray, np.ndarray]:
    """Worst-case output DC error (V) per part and a mask of parts lacking data."""
    rs = req.plus_input_resistance
    needs_drift = req.delta_t > 0
    needs_ib = req.rf > 0 or rs > 0
    vos, drift, ib = parts["vos"], parts["vos_drift"], parts["ib"]
    missing = np.isnan(vos)
    if needs_drift:
        missing = missing | np.isnan(drift)
    if needs_ib:
        missing = missing | np.isnan(ib)
    error = rel.dc_error(req.topology, req.noise_gain, vos,
                         np.nan_to_num(drift) if not needs_drift else drift,
                         req.delta_t, np.nan_to_num(ib) if not needs_ib else ib,
                         rs, req.rf)
    if req.topology == "inverting" and rs > 0:  # bias current through the + divider
        error = error + req.noise_gain * np.abs(ib) * rs
    return error, missing


@check("dc_error", "max", "V", ("vos", "vos_drift", "ib"))
def dc_error(req: Requirements, parts: Parts) -> CheckResult:
    error, missing = dc_error_of(req, parts)
    return _budget("dc_error", parts, req.dc_error_budget or np.nan, error,
                   req.dc_error_budget is not None, missing)


def noise_band(req: Requirements, parts: Parts) -> tuple[np.ndarray, np.ndarray]:
    """Noise band (Hz) per part: from the brief's lower edge (default 0.1 Hz) to the
    single-pole noise bandwidth (π/2)·GBW/NG, bounded above by the brief's upper edge.

    A stage narrower than the brief's band cannot pass noise beyond its own noise
    bandwidth; a part without a GBW figure gets NaN (unknown) only when the brief
    gives no upper edge.
    """
    band = req.brief.noise_band
    size = parts.size
    low = _full(size, band[0] if band is not None and band[0] is not None
                else rel.DEFAULT_NOISE_LOW_HZ)
    enbw = rel.noise_bandwidth_single_pole(parts["gbw"] / req.noise_gain)
    if band is None:
        return low, enbw
    high = np.fmin(enbw, band[1])  # fmin: a missing GBW leaves the brief's edge
    return low, np.maximum(high, low)


def noise_of(req: Requirements, parts: Parts) -> tuple[np.ndarray, np.ndarray]:
    """Output-referred rms noise (V) per part and a mask of parts lacking data."""
    req_r = req.feedback_parallel
    source = req.plus_input_resistance
    resistive = source > 0 or req_r > 0
    f_low, f_high = noise_band(req, parts)
    en, in_, corner = parts["en"], parts["in"], parts["en_corner"]
    missing = np.isnan(en) | np.isnan(corner) | np.isnan(f_high)
    if resistive:
        missing = missing | np.isnan(in_)
    rms = rel.output_noise_rms(en, in_ if resistive else np.nan_to_num(in_), corner,
                               source, req_r, req.noise_gain, f_low, f_high)
    return rms, missing


@check("noise", "max", "V", ("en", "in", "en_corner"))
def noise(req: Requirements, parts: Parts) -> CheckResult:
    rms, missing = noise_of(req, parts)
    return _budget("noise", parts, req.noise_budget or np.nan, rms,
                   req.noise_budget is not None, missing)


def loop_of(req: Requirements, parts: Parts):
    """(crossover Hz, phase margin deg, feedback pole Hz, missing mask) per part."""
    brief = req.brief
    gbw, pm, aol = parts["gbw"], parts["pm"], parts["aol"]
    c_in = parts["cin_cm"] + parts["cin_diff"] + brief.stray_capacitance
    poles = [rel.second_pole(gbw, pm)]
    missing = np.isnan(gbw) | np.isnan(pm)
    f_fb = _full(parts.size, np.inf)
    if req.feedback_parallel > 0:
        f_fb = rel.feedback_pole(req.feedback_parallel, c_in)
        poles.append(f_fb)
        missing = missing | np.isnan(c_in)
    # The output resistance drives R' = R_L ∥ (feedback network): it divides the loop
    # gain by R'/(R' + Ro) and, with C_L, makes a pole at 1/(2π·(Ro ∥ R')·C_L).
    # (METHOD §6 writes Ro·C_L; the divider matters for heavy resistive loads and was
    # confirmed against ngspice.)  Without an ro figure the divider is left out, and a
    # capacitive load makes the check unknown.
    ro = parts["ro"]
    load = rel.parallel(brief.load_resistance, req.feedback_load).item()
    divider = np.where(np.isnan(ro), 1.0, load / (load + ro)) if np.isfinite(load) else 1.0
    if brief.load_capacitance > 0:
        poles.append(1 / (2 * np.pi * rel.parallel(ro, load) * brief.load_capacitance))
        missing = missing | np.isnan(ro)
    poles = [np.where(np.isnan(p), np.inf, p) for p in poles]
    safe_gbw = np.where(np.isnan(gbw), 1.0, gbw)
    crossover, margin = rel.crossover_and_phase_margin(
        safe_gbw, np.where(np.isnan(aol), np.inf, aol), req.noise_gain / divider, poles)
    return crossover, margin, f_fb, missing


@check("phase_margin", "headroom", "deg", ("gbw", "pm", "aol", "cin_cm", "cin_diff", "ro"))
def phase_margin(req: Requirements, parts: Parts) -> CheckResult:
    """Phase margin of the loop gain against the brief's minimum.  The margin is in
    degrees above that minimum, not a ratio: phase margin is bounded (≤ 90° for a
    dominant-pole loop), so a ratio would cap near 2 and bind the ranking for most
    parts whatever their real shortfalls (a deliberate refinement of METHOD §8)."""
    _, margin, _, missing = loop_of(req, parts)
    size = parts.size
    required = _full(size, req.brief.phase_margin)
    slack = margin - required
    missing = np.asarray(missing) | np.isnan(slack)
    return _result("phase_margin", size, True, missing, slack >= 0, required, margin, slack)


@check("temperature", "headroom", "degC", ("temp_min", "temp_max"))
def temperature(req: Requirements, parts: Parts) -> CheckResult:
    applicable = req.temperature is not None
    t_lo, t_hi = req.temperature or (np.nan, np.nan)
    result = _headroom("temperature", parts, t_lo, parts["temp_min"],
                       -t_hi, -parts["temp_max"], applicable)
    low_binds = (t_lo - parts["temp_min"]) <= (parts["temp_max"] - t_hi)
    result.required = np.where(low_binds, t_lo, t_hi)
    result.available = np.where(low_binds, parts["temp_min"], parts["temp_max"])
    return result


@check("quiescent_current", "max", "A", ("iq",))
def quiescent_current(req: Requirements, parts: Parts) -> CheckResult:
    budget = req.brief.quiescent_current
    return _budget("quiescent_current", parts, budget or np.nan,
                   parts["iq"] * req.brief.channels, budget is not None)


def load_current(req: Requirements) -> float:
    """Peak output current (A): the load (returned to ground) plus the feedback network
    (returned to Vref) at either end of the output range, plus for a sine the peak
    current 2π·f·Vp·C_L into the load capacitance (added: conservative)."""
    reference = req.reference or 0.0
    resistive = max(abs(y) / req.brief.load_resistance
                    + abs(y - reference) / req.feedback_load for y in req.output_range)
    capacitive = 0.0
    if req.brief.waveform == "sine":
        capacitive = 2 * np.pi * req.frequency * req.output_peak * req.brief.load_capacitance
    return float(resistive + capacitive)


@check("output_drive", "min", "A", ("iout",))
def output_drive(req: Requirements, parts: Parts) -> CheckResult:
    current = load_current(req)
    return _ratio("output_drive", parts, current, parts["iout"], current > 0)


@check("settling", "max", "s", ("slew", "gbw"))
def settling(req: Requirements, parts: Parts) -> CheckResult:
    brief = req.brief
    applicable = brief.waveform == "step"
    fraction = brief.settling_error or brief.gain_error
    step = abs(req.gain) * (brief.signal_max - brief.signal_min)
    time = rel.settling_time(step, parts["slew"], parts["gbw"], req.noise_gain, fraction)
    return _budget("settling", parts, brief.settling_time or np.nan, time, applicable,
                   np.isnan(parts["slew"]) | np.isnan(parts["gbw"]))


# ------------------------------------------------------------------ filters
def _filter(name, parts, applicable, missing, passed):
    size = parts.size
    nan = _full(size, np.nan)
    return _result(name, size, applicable, missing, passed, nan, nan, nan)


@check("status", "filter", "", ("status",))
def status(req: Requirements, parts: Parts) -> CheckResult:
    codes, distinct = parts.lowered("status")
    return _filter("status", parts, True, (distinct == "")[codes],
                   np.isin(distinct, list(req.brief.status))[codes])


@check("package", "filter", "", ("package",))
def package(req: Requirements, parts: Parts) -> CheckResult:
    wanted = [p.lower() for p in (req.brief.packages or ())]
    codes, distinct = parts.lowered("package")
    return _filter("package", parts, bool(wanted), (distinct == "")[codes],
                   np.isin(distinct, wanted)[codes])


@check("cost", "filter", "count", ("unit_cost",))
def cost(req: Requirements, parts: Parts) -> CheckResult:
    limit = req.brief.max_unit_cost
    price = parts["unit_cost"]
    result = _filter("cost", parts, limit is not None, np.isnan(price),
                     price <= (limit or 0))
    if limit is not None:
        result.required, result.available = _full(parts.size, limit), price
    return result


CHECK_NAMES = [n for n, s in REGISTRY.items() if s.sense != "filter"]
FILTER_NAMES = [n for n, s in REGISTRY.items() if s.sense == "filter"]


def run_checks(req: Requirements, library: Library) -> dict[str, CheckResult]:
    """Evaluate every registered check and filter on every part."""
    parts = Parts(library)
    return {name: spec.function(req, parts) for name, spec in REGISTRY.items()}
