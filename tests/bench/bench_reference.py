"""The benchmark's per-row reference: the shortlist written the straightforward way.

One Python loop over the parts, one ``math`` expression per check, the loop-gain
crossover found per part with ``scipy.optimize.brentq`` (a root finder on
log-frequency: an independent way to the number the engine's vectorised bisection
finds).  It implements the relations of METHOD.md §2–§8 as the engine's checks do,
so the benchmark can require the identical qualifying set and order, and it takes
every derived figure (gain, noise gain, rf, network parallel resistance, reference,
ranges, budgets) from the engine's own ``Requirements`` so that only the evaluation
over the parts is compared.  Two figures of the loop and the bias-current paths are
worked out here from the resistor values instead: the resistance the + input sees
(Rs; (R1 + Rs) ∥ R2 through a summing network; Ra ∥ Rb of an inverting stage's
reference divider, else 0) and the resistive load R' = R_L ∥ (feedback network) the
output resistance drives.

The phase margin is a headroom in degrees (PM − PM_min, passes at ≥ 0) and does not
enter the score; the score is the weakest margin of the ratio checks.

Not a test module (pytest does not collect this folder); tests/test_bench_equivalence.py
imports it.
"""
from __future__ import annotations

import math

import numpy as np
import pandas as pd

from selector import checks as engine_checks
from selector.relations import BOLTZMANN, DEFAULT_NOISE_LOW_HZ, ROOM_KELVIN
from selector.requirements import Requirements

PASS, FAIL, UNKNOWN, NA = "pass", "fail", "unknown", "n/a"
NAN, INF = math.nan, math.inf

RATIO_CHECKS = ("slew", "gain_accuracy", "dc_error", "noise",
                "quiescent_current", "output_drive", "settling")
# phase margin is a headroom in degrees (PM − PM_min): bounded, so kept out of the score
HEADROOM_CHECKS = ("supply", "output_swing", "input_common_mode", "phase_margin",
                   "temperature")
FILTERS = ("status", "package", "cost")
IMPLEMENTED = set(RATIO_CHECKS + HEADROOM_CHECKS + FILTERS)
CLOSED_FORM = tuple(n for n in RATIO_CHECKS + HEADROOM_CHECKS + FILTERS
                    if n != "phase_margin")  # everything without a root find

NUMERIC = ("gbw", "slew", "supply_min", "supply_max", "swing_low", "swing_high",
           "cm_low", "cm_high", "vos", "vos_drift", "ib", "aol", "pm", "en", "in",
           "en_corner", "cin_cm", "cin_diff", "ro", "iout", "iq", "temp_min", "temp_max",
           "unit_cost")


class ReferenceOutOfDate(AssertionError):
    """The engine registers a check this reference does not implement."""


def assert_covers_engine() -> None:
    engine = set(engine_checks.REGISTRY)
    if engine != IMPLEMENTED:
        raise ReferenceOutOfDate(
            f"engine checks {sorted(engine - IMPLEMENTED)} not in the reference; "
            f"reference has {sorted(IMPLEMENTED - engine)} the engine lacks")


def rows_of(library) -> list[dict]:
    """One dict per part: numeric figures as floats (NaN = missing), text as str."""
    table = library.table
    columns = {name: library.column(name).tolist() for name in NUMERIC}
    for name in ("part", "status", "package"):
        columns[name] = (table[name].fillna("").astype(str).tolist() if name in table
                         else [""] * len(table))
    names = list(columns)
    return [dict(zip(names, values)) for values in zip(*columns.values())]


def _isnan(x: float) -> bool:
    return x != x


def _status(missing: bool, passed: bool) -> str:
    return UNKNOWN if missing else (PASS if passed else FAIL)


def _ratio(available: float, required: float, missing: bool = False):
    try:
        margin = available / required
    except ZeroDivisionError:
        margin = INF if available > 0 else NAN
    missing = missing or _isnan(margin)
    return _status(missing, margin >= 1), margin


def _budget(budget: float, actual: float, missing: bool = False):
    if actual == 0:
        margin = INF
    else:
        margin = budget / actual
    missing = missing or _isnan(margin)
    return _status(missing, margin >= 1), margin


def _headroom(low_left, low_need, high_left, high_need, missing=False):
    low, high = low_left - low_need, high_left - high_need
    margin = low if low <= high else high
    missing = missing or _isnan(low) or _isnan(high)
    return _status(missing, margin >= 0), margin


def _nan_to_zero(x: float) -> float:
    return 0.0 if _isnan(x) else x


def plus_resistance(req: Requirements) -> float:
    """Resistance (Ω) the + input sees, from the resistor values: the source Rs for a
    follower or non-inverting stage; (R1 + Rs) ∥ R2 when a summing network brings
    the signal through R1 and the reference through R2; for an inverting stage the
    Thevenin resistance Ra ∥ Rb of a reference divider at +, Ra alone when Rb is
    absent, and 0 when + goes straight to ground or to a stiff reference."""
    rs = req.brief.source_resistance
    net = req.offset_network
    kind = None if net is None else net.kind
    if kind == "summing" and net.r1 and net.r2:
        a, b = net.r1 + rs, net.r2
        return a * b / (a + b)
    if req.topology == "inverting":
        if kind == "reference-at-plus" and net.ra:
            return net.ra if net.rb is None else net.ra * net.rb / (net.ra + net.rb)
        return 0.0
    return rs


def resistive_load(req: Requirements) -> float:
    """R' (Ω) the output drives: R_L ∥ the feedback network (Rf for an inverting
    stage, whose other end is a virtual ground; Rf + Rg for a non-inverting one;
    none for a follower).  inf when neither is there."""
    if req.topology == "follower" or req.rf == 0:
        network = INF
    else:
        network = req.rf if req.topology == "inverting" else req.rf + req.rg
    conductance = sum(1 / r for r in (req.brief.load_resistance, network)
                      if math.isfinite(r))
    return INF if conductance == 0 else 1 / conductance


# ------------------------------------------------------------------ loop gain
def _inverse_loop_magnitude(f, gbw, inv_aol, noise_gain, poles):
    """1/|L(jf)| for L = A(jf)/NG · Π 1/(1 + jf/p), A = 1/(1/A_OL + jf/GBW)."""
    value = abs(complex(inv_aol, f / gbw)) * noise_gain
    for pole in poles:
        value *= abs(complex(1.0, f / pole))
    return value


def crossover_brentq(gbw, aol, noise_gain, poles):
    """Crossover (Hz) by scipy's brentq on log10 f in [-6, 13]; None if |L| < 1 at
    1 µHz already (no crossover: the engine's convention is then PM = 180°)."""
    from scipy.optimize import brentq
    inv_aol = 1 / aol if math.isfinite(aol) else 0.0

    def log_gain(x):
        return -math.log(_inverse_loop_magnitude(10.0 ** x, gbw, inv_aol, noise_gain, poles))

    if log_gain(-6.0) < 0:
        return None
    if log_gain(13.0) > 0:
        return 1e13
    return 10.0 ** brentq(log_gain, -6.0, 13.0, xtol=1e-15, rtol=8.9e-16, maxiter=200)


def phase_margin_of(gbw, aol, noise_gain, poles) -> float:
    """Phase margin (degrees) = 180° + arg L at the crossover (METHOD §6)."""
    crossover = crossover_brentq(gbw, aol, noise_gain, poles)
    if crossover is None:
        return 180.0
    if math.isfinite(aol):
        phase = -math.degrees(math.atan(crossover * aol / gbw))
    else:
        phase = -90.0
    for pole in poles:
        phase -= math.degrees(math.atan(crossover / pole))
    return 180.0 + phase


# ------------------------------------------------------------------ one part
def check_part(req: Requirements, p: dict, names=None) -> dict[str, tuple[str, float]]:
    """Status and margin of every check on one part (METHOD §2–§6)."""
    brief = req.brief
    ng = req.noise_gain
    out: dict[str, tuple[str, float]] = {}
    want = set(names) if names is not None else IMPLEMENTED

    if "supply" in want:
        span = req.supply_span
        out["supply"] = _headroom(span, p["supply_min"], -span, -p["supply_max"])
    if "slew" in want:
        out["slew"] = (_ratio(p["slew"], req.slew_min) if req.slew_min is not None
                       else (NA, NAN))
    if "gain_accuracy" in want:
        aol = INF if _isnan(p["aol"]) else p["aol"]
        if req.frequency > 0 and brief.waveform == "sine":
            real = 1 + (ng / aol if math.isfinite(aol) else 0.0)
            room = (1 - brief.gain_error) ** -2 - real ** 2
            needed = ng * req.frequency / math.sqrt(room) if room > 0 else INF
            out["gain_accuracy"] = _ratio(p["gbw"], needed * brief.gbw_margin)
        else:
            out["gain_accuracy"] = _ratio(p["aol"], req.aol_min)
    if "output_swing" in want:
        y_lo, y_hi = req.output_range
        out["output_swing"] = _headroom(y_lo - brief.supply_negative, p["swing_low"],
                                        brief.supply_positive - y_hi, p["swing_high"])
    if "input_common_mode" in want:
        cm_lo, cm_hi = req.input_common_mode
        out["input_common_mode"] = _headroom(cm_lo - brief.supply_negative, p["cm_low"],
                                             brief.supply_positive - cm_hi, p["cm_high"])
    if "dc_error" in want:
        out["dc_error"] = _dc_error(req, p)
    if "noise" in want:
        out["noise"] = _noise(req, p)
    if "phase_margin" in want:
        out["phase_margin"] = _phase_margin(req, p)
    if "temperature" in want:
        if req.temperature is None:
            out["temperature"] = (NA, NAN)
        else:
            t_lo, t_hi = req.temperature
            out["temperature"] = _headroom(t_lo, p["temp_min"], -t_hi, -p["temp_max"])
    if "quiescent_current" in want:
        budget = brief.quiescent_current
        out["quiescent_current"] = (_budget(budget, p["iq"] * brief.channels)
                                    if budget is not None else (NA, NAN))
    if "output_drive" in want:
        current = engine_checks.load_current(req)  # a derived figure of the brief
        out["output_drive"] = _ratio(p["iout"], current) if current > 0 else (NA, NAN)
    if "settling" in want:
        out["settling"] = _settling(req, p)
    if "status" in want:
        text = p["status"].lower()
        out["status"] = (_status(text == "", text in brief.status), NAN)
    if "package" in want:
        wanted = [w.lower() for w in (brief.packages or ())]
        text = p["package"].lower()
        out["package"] = (_status(text == "", text in wanted), NAN) if wanted else (NA, NAN)
    if "cost" in want:
        limit = brief.max_unit_cost
        price = p["unit_cost"]
        out["cost"] = ((_status(_isnan(price), price <= limit), NAN) if limit is not None
                       else (NA, NAN))
    return out


def _dc_error(req, p):
    """METHOD §4: worst-case output DC error against the budget."""
    budget = req.dc_error_budget
    if budget is None:
        return (NA, NAN)
    r_plus = plus_resistance(req)  # the bias current of + flows through it
    needs_drift = req.delta_t > 0
    needs_ib = req.rf > 0 or r_plus > 0
    vos, drift, ib = p["vos"], p["vos_drift"], p["ib"]
    missing = (_isnan(vos) or (needs_drift and _isnan(drift))
               or (needs_ib and _isnan(ib)))
    drift = drift if needs_drift else _nan_to_zero(drift)
    ib = ib if needs_ib else _nan_to_zero(ib)
    vos, drift, ib = abs(vos), abs(drift), abs(ib)
    # every topology: NG·(|Vos| + |drift|·ΔT + |Ib|·R+) + |Ib|·Rf (R+ = 0 for an
    # inverting stage whose + input is grounded)
    error = req.noise_gain * (vos + drift * req.delta_t + ib * r_plus) + ib * req.rf
    return _budget(budget, error, missing)


def noise_band_of(req, gbw):
    """(f_low, f_high) of the noise integral for a part of ``gbw`` (METHOD §5)."""
    band = req.brief.noise_band
    low = band[0] if band is not None and band[0] is not None else DEFAULT_NOISE_LOW_HZ
    enbw = math.pi / 2 * (gbw / req.noise_gain)
    if band is None:
        return low, enbw
    high = band[1] if _isnan(enbw) else min(enbw, band[1])
    return low, max(high, low)


def _noise(req, p):
    """METHOD §5: output-referred rms noise against the budget."""
    budget = req.noise_budget
    if budget is None:
        return (NA, NAN)
    req_r = req.feedback_parallel
    source = plus_resistance(req)  # the + input's resistance: its noise and in·R+
    resistive = source > 0 or req_r > 0
    f_low, f_high = noise_band_of(req, p["gbw"])
    en, in_, corner = p["en"], p["in"], p["en_corner"]
    missing = _isnan(en) or _isnan(corner) or _isnan(f_high) or (resistive and _isnan(in_))
    in_ = in_ if resistive else _nan_to_zero(in_)
    johnson = (4 * BOLTZMANN * ROOM_KELVIN * (source + req_r)
               + in_ ** 2 * (source ** 2 + req_r ** 2))
    if missing:
        return (UNKNOWN, NAN)
    power = (en ** 2 * ((f_high - f_low) + corner * math.log(f_high / f_low))
             + johnson * (f_high - f_low))
    rms = req.noise_gain * math.sqrt(power)
    return _budget(budget, rms, missing)


def _phase_margin(req, p):
    """METHOD §6: phase margin of the loop against the brief's minimum, as a
    headroom in degrees (PM − PM_min)."""
    brief = req.brief
    gbw, pm, aol = p["gbw"], p["pm"], p["aol"]
    missing = _isnan(gbw) or _isnan(pm)
    if _isnan(pm):
        second = INF
    elif pm >= 90:
        second = INF
    else:
        second = gbw * math.tan(math.radians(min(pm, 89.999)))
    poles = [second]
    if req.feedback_parallel > 0:
        c_in = p["cin_cm"] + p["cin_diff"] + brief.stray_capacitance
        missing = missing or _isnan(c_in)
        denominator = 2 * math.pi * req.feedback_parallel * c_in
        poles.append(INF if denominator == 0 else 1 / denominator)
    # the output resistance into R' = R_L ∥ network: the loop gain is scaled by
    # R'/(R' + Ro) (as a larger noise gain NG·(R' + Ro)/R') and C_L sees Ro ∥ R'
    ro, load = p["ro"], resistive_load(req)
    noise_gain = req.noise_gain
    if not _isnan(ro) and math.isfinite(load):
        noise_gain = noise_gain * (load + ro) / load
    if brief.load_capacitance > 0:
        missing = missing or _isnan(ro)
        driving = ro if not math.isfinite(load) else ro * load / (ro + load)
        denominator = 2 * math.pi * driving * brief.load_capacitance
        poles.append(INF if denominator == 0 else 1 / denominator)
    if missing:
        return (UNKNOWN, NAN)
    poles = [INF if _isnan(x) else x for x in poles]
    margin = phase_margin_of(gbw, INF if _isnan(aol) else aol, noise_gain, poles)
    slack = margin - brief.phase_margin  # degrees above the brief's minimum
    return _status(_isnan(slack), slack >= 0), slack


def _settling(req, p):
    """METHOD §2: slew, then linear settling, against the brief's settling time."""
    brief = req.brief
    if brief.waveform != "step":
        return (NA, NAN)
    slew, gbw = p["slew"], p["gbw"]
    if _isnan(slew) or _isnan(gbw):
        return (UNKNOWN, NAN)
    fraction = brief.settling_error or brief.gain_error
    step = abs(abs(req.gain) * (brief.signal_max - brief.signal_min))
    tau = req.noise_gain / (2 * math.pi * gbw)
    knee = slew * tau
    if step > knee:
        if knee < fraction * step:
            time = (1 - fraction) * step / slew
        else:
            time = (step - knee) / slew + tau * math.log(knee / (fraction * step))
    else:
        time = tau * math.log(1 / fraction)
    return _budget(brief.settling_time, time)


# ------------------------------------------------------------------ the shortlist
def verdict_of(results: dict[str, tuple[str, float]]) -> tuple[str, float]:
    """(verdict, score): rejected if any check fails, unknown if any lacks data,
    else qualifies; the score is the weakest ratio margin of the passing checks."""
    statuses = [status for status, _ in results.values()]
    score = min((margin for name, (status, margin) in results.items()
                 if name in RATIO_CHECKS and status == PASS), default=INF)
    if FAIL in statuses:
        return "rejected", score
    if UNKNOWN in statuses:
        return "unknown", score
    return "qualifies", score


def shortlist_rows(req: Requirements, library) -> pd.DataFrame:
    """The qualifying parts in rank order (columns part, score): score high first,
    then lower unit cost, lower iq, part key (METHOD §8)."""
    assert_covers_engine()
    found = []
    for position, part in enumerate(rows_of(library)):
        verdict, score = verdict_of(check_part(req, part))
        if verdict == "qualifies":
            cost = INF if _isnan(part["unit_cost"]) else part["unit_cost"]
            iq = INF if _isnan(part["iq"]) else part["iq"]
            found.append((-score, cost, iq, part["part"], position, score))
    found.sort(key=lambda item: item[:5])
    return pd.DataFrame({"part": [f[3] for f in found], "score": [f[5] for f in found]})


def qualifying_rows(req: Requirements, library, names=CLOSED_FORM) -> set[str]:
    """Parts that pass every check in ``names`` (the closed-form ones by default)."""
    return {part["part"] for part in rows_of(library)
            if verdict_of(check_part(req, part, names))[0] == "qualifies"}


def engine_qualifying(req: Requirements, library, names=CLOSED_FORM) -> np.ndarray:
    """The engine restricted to ``names``: those registered checks run on every part
    at once, and the parts none of them fails or leaves unknown (boolean mask)."""
    parts = engine_checks.Parts(library)
    ok = np.ones(len(library), dtype=bool)
    for name in names:
        result = engine_checks.REGISTRY[name].function(req, parts)
        if result.code is not None:  # int8: 0 pass, 3 n/a (selector.checks.STATUS_CODES)
            ok &= (result.code == 0) | (result.code == 3)
        else:
            ok &= (result.status == PASS) | (result.status == NA)
    return ok
