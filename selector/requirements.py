"""From a brief to the requirements every part is checked against (method §1–§4).

``derive(brief)`` solves the transfer line y = G·x + c for the topology, picks or
checks the gain network, finds the reference that makes the offset, and turns the
signal into the minimum slew rate, bandwidth and the budgets.  Values are SI.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

from . import relations as rel
from .brief import Brief
from .errors import InputError, Problem

ASSUMED_RG = 1e3  # Ω, used when the brief gives no network
GAIN_AGREEMENT = 0.005  # output range and Rf/Rg must agree within 0.5 %
ROOM_C = 25.0


@dataclass
class Requirements:
    """Everything derived from one brief.  ``None`` means "not applicable"."""

    brief: Brief
    gain: float
    noise_gain: float
    offset: float
    reference: float | None
    rf: float
    rg: float
    network_source: str  # "brief", "assumed" or "synthesised"
    output_range: tuple[float, float]
    input_common_mode: tuple[float, float]
    supply_span: float
    output_peak: float
    slew_min: float | None
    closed_loop_bandwidth_min: float | None
    gbw_min: float | None
    aol_min: float | None
    dc_error_budget: float | None
    noise_budget: float | None
    temperature: tuple[float, float] | None
    delta_t: float
    feedback_parallel: float
    notes: list[str] = field(default_factory=list)
    offset_network: object | None = None  # selector.offset.OffsetSolution when synthesised

    @property
    def name(self) -> str:
        return self.brief.name

    @property
    def topology(self) -> str:
        return self.brief.topology

    @property
    def frequency(self) -> float:
        return self.brief.frequency

    @property
    def plus_input_resistance(self) -> float:
        """Resistance (Ω) the + input sees, for bias-current error and noise: the
        source for a follower or non-inverting stage, (R1 + Rs) ∥ R2 through a
        summing network, the reference divider Ra ∥ Rb of an inverting stage (0 when
        the + input is tied straight to ground or a stiff reference)."""
        net, rs = self.offset_network, self.brief.source_resistance
        kind = getattr(net, "kind", None)
        if kind == "summing" and net.r1 and net.r2:
            return (net.r1 + rs) * net.r2 / (net.r1 + rs + net.r2)
        if self.topology == "inverting":
            if kind == "reference-at-plus" and net.ra:
                return net.ra if net.rb is None else net.ra * net.rb / (net.ra + net.rb)
            return 0.0
        return rs

    @property
    def feedback_load(self) -> float:
        """Resistance (Ω) the feedback network puts on the output (to the reference)."""
        if self.topology == "follower" or self.rf == 0:
            return math.inf
        return self.rf if self.topology == "inverting" else self.rf + self.rg

    def to_dict(self) -> dict:
        """The stable JSON shape of ``selector derive`` (SI units, None → null)."""
        return {
            "name": self.name, "topology": self.topology, "gain": self.gain,
            "noise_gain": self.noise_gain, "offset": self.offset,
            "reference": self.reference, "rf": self.rf,
            "rg": None if math.isinf(self.rg) else self.rg,
            "network_source": self.network_source,
            "output_range": list(self.output_range),
            "input_common_mode": list(self.input_common_mode),
            "supply_span": self.supply_span, "output_peak": self.output_peak,
            "slew_min": self.slew_min,
            "closed_loop_bandwidth_min": self.closed_loop_bandwidth_min,
            "gbw_min": self.gbw_min, "aol_min": self.aol_min,
            "dc_error_budget": self.dc_error_budget, "noise_budget": self.noise_budget,
            "temperature": list(self.temperature) if self.temperature else None,
            "notes": list(self.notes),
        }


def derive(brief: Brief, network: tuple[float, float] | None = None,
           network_source: str = "synthesised", synthesise: bool = True) -> Requirements:
    """Derive the requirements of ``brief``.

    ``network`` = (rf, rg) in Ω is used when the brief gives none.  Without either,
    ``synthesise`` picks standard values (selector.network); ``synthesise=False``
    assumes rg = 1 kΩ and the exact rf.  Raises :class:`InputError` for briefs that
    cannot be built as stated.
    """
    problems: list[Problem] = []
    src = brief.source

    def fail(key: str, message: str) -> None:
        problems.append(Problem(src, f"key '{key}'", message))

    x_lo, x_hi = brief.signal_min, brief.signal_max
    rs = brief.source_resistance
    topology = brief.topology
    notes: list[str] = []

    gain, offset = _transfer_line(brief, fail)
    if problems:
        raise InputError(problems)

    # level shifting and standard values (selector.offset / selector.network, issue 4)
    plan = _offset_plan(brief, gain, offset)
    summing = plan is not None and plan.kind == "summing"
    wanted_ng = plan.noise_gain if summing else gain
    if summing and brief.rf is not None and brief.rg is not None:
        made = 1 + brief.rf / brief.rg
        if abs(made - wanted_ng) > GAIN_AGREEMENT * wanted_ng:
            fail("network.rf", f"the offset needs a summing network whose Rf/Rg make a "
                 f"noise gain of {wanted_ng:.5g} (G + c/Vr with Vr = {plan.reference:g} "
                 f"V), but network.rf/network.rg make {made:.5g}")
            raise InputError(problems)
    offset_network = None
    if (synthesise and network is None and brief.rf is None and brief.rg is None
            and gain is not None and topology != "follower" and abs(wanted_ng - 1) > 1e-12):
        from .offset import realise
        offset_network = realise(brief, gain, offset or 0.0, series="auto")
        network, network_source = (offset_network.rf, offset_network.rg), "synthesised"
        notes.extend(_synthesis_notes(offset_network))
    rf, rg, noise_gain, source = _network(brief, wanted_ng, network, network_source, fail,
                                          notes)
    if problems:
        raise InputError(problems)
    if gain is None:  # gain from the network alone
        gain = 1 + rf / rg if topology == "non-inverting" else -rf / (rg + rs)
        offset = 0.0

    reference = None if summing else _reference(brief, gain, noise_gain, offset, fail)
    if problems:
        raise InputError(problems)
    if offset == 0.0 and reference:
        offset = (-(noise_gain - 1) * reference if topology == "non-inverting"
                  else noise_gain * reference)

    ends = (gain * x_lo + offset, gain * x_hi + offset)
    y_lo, y_hi = min(ends), max(ends)
    if y_lo < brief.supply_negative - 1e-12 or y_hi > brief.supply_positive + 1e-12:
        side = "min" if y_lo < brief.supply_negative else "max"
        key = (f"output.{side}" if brief.output_min is not None
               else "output.gain" if brief.gain is not None
               else "network.rf" if brief.rf is not None else f"signal.{side}")
        fail(key,
             f"the output must reach {y_lo:g} V to {y_hi:g} V, outside the supply "
             f"rails {brief.supply_negative:g} V to {brief.supply_positive:g} V: "
             "no part can swing beyond its rails")
        raise InputError(problems)

    if topology == "inverting":
        cm = (reference or 0.0, reference or 0.0)
        feedback_parallel = rel.parallel(rf, rg + rs).item()
    elif summing:  # the + input sees y/NG, not the signal
        cm = (y_lo / noise_gain, y_hi / noise_gain)
        feedback_parallel = rel.parallel(rf, rg).item()
        notes.append(f"summing network from {plan.reference:g} V: the op-amp input sees "
                     f"{cm[0]:.4g} V to {cm[1]:.4g} V (not the signal's range); the "
                     "source sees R1 + R2 and the + input (R1 + Rs) ∥ R2")
    else:
        cm = (x_lo, x_hi)
        feedback_parallel = 0.0 if rf == 0 else rel.parallel(rf, rg).item()

    peak = abs(gain) * (x_hi - x_lo) / 2
    dynamic = brief.waveform == "sine"
    f_c = (rel.bandwidth_for_gain_error(brief.frequency, brief.gain_error).item()
           if dynamic else None)
    temperature = None
    delta_t = 0.0
    if brief.temperature_min is not None:
        temperature = (brief.temperature_min, brief.temperature_max)
        delta_t = max(abs(brief.temperature_max - ROOM_C), abs(brief.temperature_min - ROOM_C))
    else:
        notes.append("no temperature range given: offset drift is not counted and the "
                     "temperature check is not applied")
    return Requirements(
        brief=brief, gain=float(gain), noise_gain=float(noise_gain), offset=float(offset),
        reference=reference, rf=float(rf), rg=float(rg), network_source=source,
        output_range=(float(y_lo), float(y_hi)),
        input_common_mode=(float(cm[0]), float(cm[1])), supply_span=brief.supply_span,
        output_peak=float(peak),
        slew_min=(rel.slew_min(brief.frequency, peak).item() * brief.slew_margin
                  if dynamic else None),
        closed_loop_bandwidth_min=f_c,
        gbw_min=noise_gain * f_c * brief.gbw_margin if dynamic else None,
        aol_min=rel.aol_for_gain_error(brief.gain_error, noise_gain).item(),
        dc_error_budget=brief.dc_error, noise_budget=brief.noise,
        temperature=temperature, delta_t=delta_t,
        feedback_parallel=float(feedback_parallel), notes=notes,
        offset_network=offset_network,
    )


def _offset_plan(brief: Brief, gain, offset):
    """The ideal offset network (selector.offset.plan) when there is an offset."""
    if gain is None or not offset or brief.topology == "follower":
        return None
    from .offset import plan  # lazy: selector.offset builds on this module's neighbours
    return plan(brief, gain, offset)


def _synthesis_notes(solution) -> list[str]:
    from .network import resistor_code
    parts = [f"{name} = {resistor_code(value)}" for name, value in
             (("rf", solution.rf), ("rg", solution.rg), ("r1", solution.r1),
              ("r2", solution.r2), ("ra", solution.ra), ("rb", solution.rb))
             if value is not None]
    pair = solution.pair
    return [f"network synthesised from {pair.series} values ({solution.kind}): "
            + ", ".join(parts)
            + f"; gain {solution.gain:.5g} for {solution.wanted[0]:.5g} wanted, "
            f"endpoints within {solution.endpoint_error * 1e3:.3g} mV "
            "(see 'selector network' for the trade-offs)"]


def _transfer_line(brief: Brief, fail) -> tuple[float | None, float | None]:
    """Gain G and offset c of y = G·x + c, or (None, None) to take them from Rf/Rg."""
    topology = brief.topology
    x_lo, x_hi = brief.signal_min, brief.signal_max
    if brief.output_min is not None:
        y_lo, y_hi = brief.output_min, brief.output_max
        magnitude = (y_hi - y_lo) / (x_hi - x_lo)
        if topology == "inverting":
            gain, offset = -magnitude, y_hi + magnitude * x_lo
        else:
            gain, offset = magnitude, y_lo - magnitude * x_lo
    elif brief.gain is not None:
        gain, offset = brief.gain, 0.0
    elif topology == "follower":
        gain, offset = 1.0, 0.0
    else:
        return None, None
    if abs(offset) < 1e-9 * max(abs(gain * x_lo), abs(gain * x_hi), 1e-3):
        offset = 0.0
    key = "output.gain" if brief.output_min is None else "output.min"
    if topology == "follower" and abs(gain - 1) > GAIN_AGREEMENT:
        fail(key, f"a follower has gain 1, but the brief asks for gain {gain:.4g}; "
             "use topology = \"non-inverting\" or \"inverting\"")
    elif topology == "follower" and offset != 0.0:
        fail(key, f"a follower cannot add an offset ({offset:g} V asked)")
    elif topology == "non-inverting" and gain < 1 - 1e-9:
        fail(key, f"a non-inverting stage has gain ≥ 1, but the brief asks for "
             f"{gain:.4g}; attenuate first or use an inverting stage")
    elif topology == "inverting" and gain >= 0:
        fail(key, f"an inverting stage has negative gain; give output.gain as a "
             f"negative number (got {gain:.4g})")
    if topology == "follower":
        gain = 1.0
    return gain, offset


def _network(brief: Brief, gain, network, network_source, fail, notes):
    """Rf, Rg (Ω), noise gain and where the network came from."""
    topology, rs = brief.topology, brief.source_resistance
    if topology == "follower" or (gain is not None and topology == "non-inverting"
                                  and abs(gain - 1) < 1e-12):
        return 0.0, math.inf, 1.0, "brief"
    if brief.rf is not None or brief.rg is not None:
        if brief.rf is None or brief.rg is None:
            fail("network.rf" if brief.rf is None else "network.rg",
                 "give both network.rf and network.rg")
            return 0, 0, 0, ""
        rf, rg = brief.rf, brief.rg
        made = 1 + rf / rg if topology == "non-inverting" else -rf / (rg + rs)
        if gain is not None and abs(made - gain) > GAIN_AGREEMENT * abs(gain):
            where = "output.gain" if brief.output_min is None else "output.min/max"
            fail("network.rf", f"network.rf/network.rg make gain {made:.5g}, but "
                 f"{where} asks for {gain:.5g} (they must agree within 0.5 %)")
        source = "brief"
    elif network is not None:
        rf, rg = network
        source = network_source
        notes.append(f"network {source}: rf = {rf:g} Ω, rg = {rg:g} Ω")
    else:
        rg = ASSUMED_RG
        rf = (gain - 1) * rg if topology == "non-inverting" else -gain * (rg + rs)
        source = "assumed"
        notes.append(f"no network given: assumed rg = 1 kΩ and the exact rf = {rf:.6g} Ω")
    noise_gain = 1 + rf / rg if topology == "non-inverting" else 1 + rf / (rg + rs)
    return rf, rg, noise_gain, source


def _reference(brief: Brief, gain, noise_gain, offset, fail) -> float | None:
    """Reference voltage that makes the offset c (method §1), checked against rails."""
    topology = brief.topology
    given = brief.reference
    low, high = brief.supply_negative, brief.supply_positive
    if offset == 0.0:
        if given not in (None, 0.0) and brief.output_min is not None:
            fail("network.reference", f"the output range needs no offset, but a "
                 f"reference of {given:g} V would shift it")
        elif given is not None and not low <= given <= high:
            fail("network.reference", f"the reference of {given:g} V is outside the "
                 f"supply rails ({low:g} V to {high:g} V): this topology cannot use it "
                 "alone, a summing network or a divider from the rails is needed")
        return given
    if noise_gain <= 1:
        fail("output.min", f"a gain-1 stage cannot add an offset ({offset:.4g} V "
             "asked): a summing network is needed")
        return None
    if topology == "non-inverting":
        needed = -offset / (noise_gain - 1)
    else:
        needed = offset / noise_gain
    if given is not None and abs(given - needed) > max(1e-3, GAIN_AGREEMENT * abs(needed)):
        fail("network.reference", f"the output range needs a reference of {needed:.4g} V, "
             f"but network.reference is {given:g} V")
    if not low <= needed <= high:
        fail("output.min", f"the offset of {offset:.4g} V needs a reference of "
             f"{needed:.4g} V for this {topology} stage, outside the supply rails "
             f"({low:g} V to {high:g} V): this topology cannot make that offset alone, "
             "a summing network is needed")
    return needed
