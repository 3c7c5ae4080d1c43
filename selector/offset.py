"""Gain with offset: realise y = G·x + c with standard resistors (method §1, §7).

Four cases, by topology and by where the reference would have to be:

- ``none``: no offset; Rf and Rg only.
- ``rg-to-reference`` (non-inverting, Rg returned to Vref): c = −(NG − 1)·Vref.
  Vref is the given reference, or made from a supply rail by splitting Rg into a
  divider Ra (to the rail) and Rb (to ground) with Ra ∥ Rb = Rg.
- ``reference-at-plus`` (inverting, + input at Vref): c = NG·Vref; Vref is the given
  reference or a divider from a rail (Thevenin resistance near Rf ∥ (Rg + Rs), which
  balances the bias currents — common practice), bypassed by a capacitor.
- ``summing`` (non-inverting, when the Rg-to-reference form would need a reference
  outside the rails): the signal through R1 and the available voltage Vr through R2
  meet at the + input, V+ = a·x + (1 − a)·Vr with a = R2/(R1 + Rs + R2); Rf/Rg set
  NG, so G = NG·a and c = NG·(1 − a)·Vr.  Hence NG = G + c/Vr and a = G/NG.

:func:`plan` gives the ideal solution (exact values, for the requirement solver);
:func:`realise` the standard-value one with its realised line, endpoint error, the
input impedance the source sees and the common-mode range at the op-amp input.
All values SI (V, Ω).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from . import network as net
from . import relations as rel
from .brief import Brief
from .errors import InputError


@dataclass
class OffsetPlan:
    """The ideal (exact-value) offset solution of a brief."""

    kind: str
    noise_gain: float            # the noise gain the Rf/Rg pair must make
    reference: float | None      # V: Vref (rg-to-reference, reference-at-plus) or Vr
    attenuation: float = 1.0     # a of the summing network
    common_mode: tuple[float, float] | None = None  # V at the op-amp + input
    source_voltage: float | None = None  # V: the available voltage it is made from


@dataclass
class OffsetSolution:
    """A standard-value network for y = G·x + c (SI).  Absent resistors are None."""

    kind: str
    rf: float
    rg: float
    r1: float | None = None      # summing: signal → + input
    r2: float | None = None      # summing: Vr → + input
    ra: float | None = None      # divider: rail → reference node
    rb: float | None = None      # divider: reference node → ground
    source_voltage: float | None = None  # V, the supply or given reference used
    reference: float | None = None       # V, realised reference (Thevenin) voltage
    gain: float = 1.0            # realised G
    offset: float = 0.0          # realised c (V)
    noise_gain: float = 1.0
    wanted: tuple[float, float] = (0.0, 0.0)      # (G, c) asked
    endpoints: tuple[float, float] = (0.0, 0.0)   # realised y at x_lo, x_hi (V)
    wanted_endpoints: tuple[float, float] = (0.0, 0.0)
    endpoint_error: float = 0.0  # V, largest |realised − wanted| endpoint
    input_impedance: float = math.inf  # Ω seen by the source
    common_mode: tuple[float, float] = (0.0, 0.0)  # V at the op-amp inputs
    pair: net.PairChoice | None = None
    notes: list[str] = field(default_factory=list)


def _rails(brief: Brief) -> tuple[float, float]:
    return brief.supply_negative, brief.supply_positive


def summing_voltage(brief: Brief, offset: float) -> float:
    """The available voltage Vr of a summing network: the given reference, else the
    rail whose sign matches the offset.  Raises InputError when there is none."""
    if brief.reference is not None and brief.reference * offset > 0:
        return brief.reference
    low, high = _rails(brief)
    if offset > 0 and high > 0:
        return high
    if offset < 0 and low < 0:
        return low
    raise InputError(f"{brief.source}: key 'output.min': the offset of {offset:.4g} V "
                     "needs a reference of that sign for a summing network, and neither "
                     "the supply nor network.reference gives one")


def plan(brief: Brief, gain: float, offset: float) -> OffsetPlan:
    """Which network makes the offset, with exact values (see the module text)."""
    low, high = _rails(brief)
    x_lo, x_hi = brief.signal_min, brief.signal_max
    if offset == 0.0:
        return OffsetPlan("none", _noise_gain_of(brief, gain), brief.reference)
    if brief.topology == "inverting":
        ng = _noise_gain_of(brief, gain)
        vref = offset / ng
        if not low <= vref <= high:
            raise InputError(f"{brief.source}: key 'output.min': the offset of "
                             f"{offset:.4g} V needs a reference of {vref:.4g} V at the + "
                             f"input of this inverting stage, outside the supply rails "
                             f"({low:g} V to {high:g} V): this topology cannot make that "
                             "offset alone (a summing network is needed)")
        return OffsetPlan("reference-at-plus", ng, vref, 1.0, (vref, vref))
    if gain > 1 + 1e-12:
        vref = -offset / (gain - 1)
        if low <= vref <= high:
            return OffsetPlan("rg-to-reference", gain, vref, 1.0, (x_lo, x_hi))
    vr = summing_voltage(brief, offset)
    ng = gain + offset / vr
    a = gain / ng
    cm = (a * x_lo + (1 - a) * vr, a * x_hi + (1 - a) * vr)
    return OffsetPlan("summing", ng, vr, a, (min(cm), max(cm)), vr)


def _noise_gain_of(brief: Brief, gain: float) -> float:
    return 1 + abs(gain) if brief.topology == "inverting" else gain


def stage_of(brief: Brief, noise_gain: float, output_range, network_end: float = 0.0,
             input_range=None) -> net.Stage:
    """The :class:`selector.network.Stage` of a brief (for the level effects)."""
    f_c = None
    if brief.waveform == "sine" and brief.frequency > 0:
        f_c = float(rel.bandwidth_for_gain_error(brief.frequency, brief.gain_error))
    return net.Stage(
        topology=brief.topology, noise_gain=noise_gain,
        output_range=tuple(output_range),
        input_range=tuple(input_range or (brief.signal_min, brief.signal_max)),
        network_end=network_end, source=brief.source_resistance,
        load_resistance=brief.load_resistance, load_capacitance=brief.load_capacitance,
        stray=brief.stray_capacitance, phase_margin_min=brief.phase_margin,
        dc_budget=brief.dc_error, bandwidth_needed=f_c)


def realise(brief: Brief, gain: float, offset: float, series: str = "E96",
            tolerance: float | None = None, part: net.PartFigures | None = None
            ) -> OffsetSolution:
    """Standard-value network for y = ``gain``·x + ``offset`` on ``brief``'s rails.

    ``series="auto"`` takes E96, or E192 when E96's nearest ratio is off by more
    than a quarter of the brief's gain-error limit or its endpoints by more than
    0.25 % of the output span.

    Accuracy at nominal values: the gain is within half a series step of the wanted
    one; a divided reference adds at most NG·Vref·(1 − Vref/Vrail)·1.25·s, where
    s = 10^(1/n) − 1 is the series step (two values' ratio is within half a step,
    plus their own rounding to three figures); ``endpoint_error`` is the actual figure.
    """
    if series == "auto":
        first = realise(brief, gain, offset, "E96", tolerance, part)
        span = abs(gain) * (brief.signal_max - brief.signal_min)
        if (abs(first.pair.error) <= brief.gain_error / 4
                and first.endpoint_error <= 0.0025 * span):
            return first
        second = realise(brief, gain, offset, "E192", tolerance, part)
        return second if second.endpoint_error < first.endpoint_error else first
    ideal = plan(brief, gain, offset)
    x = np.array([brief.signal_min, brief.signal_max])
    wanted_y = gain * x + offset
    out_range = (float(wanted_y.min()), float(wanted_y.max()))
    rs = brief.source_resistance
    if ideal.kind == "none" or ideal.kind == "rg-to-reference":
        end = ideal.reference if ideal.kind == "rg-to-reference" else 0.0
        stage = stage_of(brief, ideal.noise_gain, out_range, end or 0.0)
        pair = net.choose_pair(ideal.noise_gain - 1, stage, part, series, tolerance)
        solution = OffsetSolution(ideal.kind, pair.rf, pair.rg, pair=pair,
                                  wanted=(gain, offset), notes=list(pair.assumptions))
        if ideal.kind == "none":
            solution.reference = ideal.reference
            _finish(solution, 1 + pair.rf / pair.rg, 0.0, x, wanted_y, math.inf, (x[0], x[1]))
            return solution
        return _rg_to_reference(brief, solution, ideal, series, x, wanted_y)
    if ideal.kind == "reference-at-plus":
        vref = ideal.reference
        stage = stage_of(brief, ideal.noise_gain, out_range, vref)
        pair = net.choose_pair(abs(gain), stage, part, series, tolerance)
        solution = OffsetSolution(ideal.kind, pair.rf, pair.rg, pair=pair,
                                  wanted=(gain, offset), notes=list(pair.assumptions))
        return _reference_at_plus(brief, solution, vref, series, x, wanted_y)
    stage = stage_of(brief, ideal.noise_gain, out_range, 0.0)
    pair = net.choose_pair(ideal.noise_gain - 1, stage, part, series, tolerance)
    solution = OffsetSolution("summing", pair.rf, pair.rg, pair=pair, wanted=(gain, offset),
                              notes=list(pair.assumptions))
    return _summing(brief, solution, ideal, series, x, wanted_y, rs)


def _finish(solution: OffsetSolution, g: float, c: float, x, wanted_y, z_in, cm) -> None:
    y = g * x + c
    solution.gain, solution.offset = float(g), float(c)
    solution.endpoints = (float(y[0]), float(y[1]))
    solution.wanted_endpoints = (float(wanted_y[0]), float(wanted_y[1]))
    solution.endpoint_error = float(np.max(np.abs(y - wanted_y)))
    solution.input_impedance = float(z_in)
    solution.common_mode = (float(min(cm)), float(max(cm)))
    if solution.kind == "reference-at-plus" or g < 0:
        solution.noise_gain = float(1 - g)
    else:
        solution.noise_gain = float(1 + solution.rf / solution.rg)


def _rail_for(brief: Brief, voltage: float) -> float:
    low, high = _rails(brief)
    rail = high if voltage > 0 else low
    if rail == 0 or not 0 < voltage / rail <= 1:
        raise InputError(f"{brief.source}: key 'network.reference': a reference of "
                         f"{voltage:.4g} V cannot be divided from the rails "
                         f"({low:g} V, {high:g} V)")
    return rail


def _levels(series: str, centre: float, spread: float = 3.0) -> np.ndarray:
    grid = net.values(series, 1.0, 100e6)
    return grid[(grid >= centre / spread) & (grid <= centre * spread)]


def _neighbours(wanted: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """The two grid values around each wanted value: shape (2, n)."""
    right = np.clip(np.searchsorted(grid, wanted), 1, len(grid) - 1)
    return np.stack([grid[right - 1], grid[right]])


def _rg_to_reference(brief, solution, ideal, series, x, wanted_y) -> OffsetSolution:
    gain, offset = solution.wanted
    vref = ideal.reference
    if brief.reference is not None and abs(brief.reference - vref) <= max(1e-3, 5e-3 * abs(vref)):
        solution.source_voltage = solution.reference = brief.reference
        ratio = solution.rf / solution.rg
        _finish(solution, 1 + ratio, -ratio * brief.reference, x, wanted_y, math.inf, x)
        solution.notes.append("Rg returns to the given reference")
        return solution
    rail = _rail_for(brief, vref)
    grid = net.values(series, 1.0, 100e6)
    rf = _levels(series, solution.rf)
    rth = rf / (gain - 1)
    ra = _neighbours(rth * rail / vref, grid)           # (2, n)
    rb = _neighbours(rth * rail / (rail - vref), grid) if vref != rail else None
    if rb is None:  # the reference is the rail itself: Rg straight to it
        ra_all, rb_all, rf_all = ra.ravel(), np.full(ra.size, np.inf), np.tile(rf, 2)
    else:
        ra_all = np.repeat(ra, 2, axis=0).ravel()
        rb_all = np.tile(rb, (2, 1)).ravel()
        rf_all = np.tile(rf, 4)
    rth_all = rel.parallel(ra_all, rb_all)
    vth = rail * np.where(np.isinf(rb_all), 1.0, rb_all / (ra_all + rb_all))
    g = 1 + rf_all / rth_all
    c = -(rf_all / rth_all) * vth
    error = np.max(np.abs(g[:, None] * x[None, :] + c[:, None] - wanted_y[None, :]), axis=1)
    best = int(np.argmin(error))
    solution.rf, solution.rg = float(rf_all[best]), float(rth_all[best])
    solution.ra = float(ra_all[best])
    solution.rb = None if math.isinf(rb_all[best]) else float(rb_all[best])
    solution.source_voltage, solution.reference = rail, float(vth[best])
    _finish(solution, g[best], c[best], x, wanted_y, math.inf, x)
    solution.notes.append(
        f"Rg is a divider from the {rail:g} V rail: Ra to the rail, Rb to ground, "
        f"Ra ∥ Rb = {solution.rg:.4g} Ω making {solution.reference:.4g} V; "
        "supply ripple reaches the output × (NG − 1)·Rb/(Ra + Rb)")
    return solution


def _reference_at_plus(brief, solution, vref, series, x, wanted_y) -> OffsetSolution:
    rs = brief.source_resistance
    ng = 1 + solution.rf / (solution.rg + rs)
    g = -solution.rf / (solution.rg + rs)
    if brief.reference is not None and abs(brief.reference - vref) <= max(1e-3, 5e-3 * abs(vref)):
        solution.source_voltage = solution.reference = brief.reference
        _finish(solution, g, ng * brief.reference, x, wanted_y, solution.rg,
                (brief.reference, brief.reference))
        return solution
    rail = _rail_for(brief, vref)
    grid = net.values(series, 1.0, 100e6)
    level = rel.parallel(solution.rf, solution.rg + rs).item()
    rth = _levels(series, level)
    ra = _neighbours(rth * rail / vref, grid)
    rb = _neighbours(rth * rail / (rail - vref), grid)
    ra_all, rb_all = np.repeat(ra, 2, axis=0).ravel(), np.tile(rb, (2, 1)).ravel()
    vth = rail * rb_all / (ra_all + rb_all)                              # (k,)
    # joint search: pairs near the chosen level × dividers, on the endpoint error
    rf_c, rg_c = _near_pairs(solution)
    ng_c, g_c = 1 + rf_c / (rg_c + rs), -rf_c / (rg_c + rs)              # (p,)
    y = g_c[:, None, None] * x + (ng_c[:, None] * vth[None, :])[..., None]
    error = np.max(np.abs(y - wanted_y), axis=2)                         # (p, k)
    balance = np.abs(np.log10(rel.parallel(ra_all, rb_all) / level))
    score = error * (1 + 0.05 * balance[None, :])
    i, j = np.unravel_index(int(np.argmin(score)), score.shape)
    solution.rf, solution.rg = float(rf_c[i]), float(rg_c[i])
    solution.ra, solution.rb = float(ra_all[j]), float(rb_all[j])
    solution.source_voltage, solution.reference = rail, float(vth[j])
    _finish(solution, g_c[i], ng_c[i] * vth[j], x, wanted_y, solution.rg, (vth[j], vth[j]))
    solution.notes.append(
        f"+ input at {solution.reference:.4g} V from a divider on the {rail:g} V rail "
        "(Ra to the rail, Rb to ground); bypass that node with a capacitor "
        "(e.g. 100 nF) so rail ripple and divider noise do not reach the output × NG")
    return solution


def _near_pairs(solution, count: int = 12):
    """(rf, rg) arrays of the acceptable pairs nearest the chosen level."""
    table = solution.pair.table
    ok = table[net.acceptable(table)]
    near = ok.iloc[np.argsort(np.abs(np.log(ok["rg"].to_numpy(float) / solution.rg)))[:count]]
    return near["rf"].to_numpy(float), near["rg"].to_numpy(float)


def _summing(brief, solution, ideal, series, x, wanted_y, rs) -> OffsetSolution:
    gain, offset = solution.wanted
    vr = ideal.reference
    grid = net.values(series, 1.0, 100e6)
    rf_c, rg_c = _near_pairs(solution)                                     # (p,)
    level = rel.parallel(solution.rf, solution.rg).item()
    q = ideal.attenuation / (1 - ideal.attenuation)                       # R2/(R1+Rs)
    r1 = _levels(series, max(level * (1 + q) / q, 10.0), 10.0)           # (m,)
    r2 = _neighbours(q * (r1 + rs), grid)                                 # (2, m)
    r1_all, r2_all = np.tile(r1, 2), r2.ravel()                           # (k,)
    a = r2_all / (r1_all + rs + r2_all)
    ng = 1 + rf_c / rg_c
    g = ng[:, None] * a[None, :]
    c = ng[:, None] * (1 - a[None, :]) * vr
    y = g[..., None] * x + c[..., None]
    error = np.max(np.abs(y - wanted_y), axis=2)                          # (p, k)
    balance = np.abs(np.log10(rel.parallel(r1_all + rs, r2_all) / level))
    score = error * (1 + 0.05 * balance[None, :])
    i, j = np.unravel_index(int(np.argmin(score)), score.shape)
    solution.rf, solution.rg = float(rf_c[i]), float(rg_c[i])
    solution.r1, solution.r2 = float(r1_all[j]), float(r2_all[j])
    solution.source_voltage = solution.reference = vr
    a_best = a[j]
    cm = (a_best * x[0] + (1 - a_best) * vr, a_best * x[1] + (1 - a_best) * vr)
    _finish(solution, g[i, j], c[i, j], x, wanted_y, solution.r1 + solution.r2, cm)
    what = "the supply" if brief.reference is None else "the given reference"
    solution.notes.append(
        f"summing network: signal through R1, {vr:g} V ({what}) through R2 into the + "
        f"input; Rg to ground.  The source sees R1 + R2 = "
        f"{solution.input_impedance:.4g} Ω; {what}'s noise and ripple reach the output "
        f"× {solution.noise_gain * (1 - a_best):.3g}")
    return solution
