"""Gain with offset (issue 4): the standard-value networks substituted back.

For random single-supply briefs (hypothesis) the chosen network is put back into
Kirchhoff's current law at the op-amp inputs with an ideal op-amp (V+ = V−, no input
current — textbook idealisation, common practice), written here independently of
selector.offset's own algebra.  The transfer line it gives must hit the wanted
endpoints within the solution's stated endpoint error, that error must be small, and
every reference and the input common-mode range must lie within the rails.
Briefs are invented.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from selector import network as net
from selector.brief import brief_from_dict, parse_brief
from selector.errors import InputError
from selector.offset import plan, realise
from selector.requirements import derive

from conftest import DEMO_BRIEFS


def kcl_output(solution, brief, x: float) -> float:
    """Output (V) of the solved network at input ``x`` by KCL, ideal op-amp."""
    s, rs = solution, brief.source_resistance
    rail = s.source_voltage
    if s.kind == "summing":
        # + node: (x − V)/(R1 + Rs) + (Vr − V)/R2 = 0; − node: V/Rg = (y − V)/Rf
        g1, g2 = 1 / (s.r1 + rs), 1 / s.r2
        v = (x * g1 + rail * g2) / (g1 + g2)
        return v + s.rf * v / s.rg
    if s.kind == "rg-to-reference":
        v = x  # − input follows +
        if s.ra is None:  # Rg straight to the reference
            return v + s.rf * (v - s.reference) / s.rg
        into_ground = v / s.rb if s.rb is not None else 0.0
        return v + s.rf * (into_ground + (v - rail) / s.ra)
    if s.kind == "reference-at-plus":
        v = rail * s.rb / (s.ra + s.rb) if s.ra is not None else s.reference
        return v - s.rf * (x - v) / (s.rg + rs)
    if brief.topology == "inverting":
        return -s.rf * x / (s.rg + rs)
    return x + s.rf * x / s.rg


def make_brief(topology, x_lo, span, y_lo, y_span, supply, rs):
    data = {"topology": topology,
            "signal": {"min": f"{x_lo} V", "max": f"{x_lo + span} V",
                       "frequency": "1 kHz", "source_resistance": f"{rs} ohm"},
            "output": {"min": f"{y_lo} V", "max": f"{y_lo + y_span} V"},
            "supply": {"positive": f"{supply} V", "negative": "0 V"}}
    return brief_from_dict(data, "<hypothesis>")


single_supply = st.tuples(
    st.sampled_from(["non-inverting", "inverting"]),
    st.floats(-1.0, 1.0), st.floats(0.02, 1.0),      # x_lo, x span (V)
    st.floats(0.05, 0.5), st.floats(0.5, 1.0),       # y_lo (V), share of the room
    st.sampled_from([3.3, 5.0, 12.0]), st.sampled_from([0, 100, 1000]))


@settings(max_examples=40, deadline=None,
          suppress_health_check=[HealthCheck.filter_too_much, HealthCheck.too_slow])
@given(single_supply)
def test_offset_networks_reproduce_the_wanted_line(case):
    topology, x_lo, span, y_lo, share, supply, rs = case
    y_span = share * (supply - 0.1 - y_lo)
    gain = y_span / span
    assume(1.2 <= gain <= 50)
    brief = make_brief(topology, round(x_lo, 4), round(span, 4), round(y_lo, 4),
                       round(y_span, 4), supply, rs)
    x = np.array([brief.signal_min, brief.signal_max])
    wanted = np.array([brief.output_min, brief.output_max])
    if topology == "inverting":
        wanted = wanted[::-1]
    g = (wanted[1] - wanted[0]) / (x[1] - x[0])
    c = wanted[0] - g * x[0]
    if topology == "inverting" and not 0 <= c / (1 - g) <= supply:
        # METHOD.md §1: Vref = c/NG outside the rails cannot be made at the + input
        with pytest.raises(InputError, match="outside the supply rails"):
            derive(brief)
        return
    solution = realise(brief, g, c, "E96")
    y = np.array([kcl_output(solution, brief, xi) for xi in x])
    assert np.allclose(y, solution.endpoints, atol=1e-9)       # what it says it makes
    assert np.max(np.abs(y - wanted)) <= solution.endpoint_error + 1e-9
    # E96 at nominal values: the gain within half a step of 10^(1/96) (IEC 60063
    # geometric series), and a divided reference off by at most its ratio's half step
    # plus three-figure rounding (bound stated in selector.offset.realise)
    step = 10 ** (1 / 96) - 1
    bound = 0.01 * (wanted.max() - wanted.min())
    if solution.ra is not None and solution.rb is not None:
        vr = solution.reference
        bound += solution.noise_gain * vr * (1 - vr / supply) * 1.25 * step
    if solution.kind == "summing":  # the offset rides on the R1/R2 ratio too
        bound += 1.25 * step * abs(c)
    assert solution.endpoint_error <= bound
    for value in (solution.reference, solution.source_voltage):
        if value is not None:
            assert 0 <= value <= supply
    assert 0 <= solution.common_mode[0] <= solution.common_mode[1] <= supply
    if solution.kind == "summing":
        # the + input sits at y/NG; the source sees R1 + R2 (Vr is an AC ground)
        assert solution.common_mode[1] == pytest.approx(y.max() / solution.noise_gain,
                                                        rel=1e-9)
        assert solution.input_impedance == pytest.approx(solution.r1 + solution.r2)


def test_bridge_demo_needs_and_gets_the_summing_network():
    brief = parse_brief((DEMO_BRIEFS / "bridge_offset.toml").read_text(), "bridge_offset")
    # METHOD.md §1: Rg to Vref would need Vref = −c/(G − 1) = −1.65/2.1 = −0.786 V
    ideal = plan(brief, 3.1, 1.65)
    assert ideal.kind == "summing"
    # summing algebra by hand: NG = G + c/Vr = 3.1 + 1.65/3.3 = 3.6, a = G/NG = 0.8611
    assert ideal.noise_gain == pytest.approx(3.6)
    assert ideal.attenuation == pytest.approx(3.1 / 3.6)
    req = derive(brief)
    # the op-amp input sees y/NG: 0.1/3.6 … 3.2/3.6 V, not the −0.5 … 0.5 V signal
    assert req.input_common_mode[0] == pytest.approx(0.1 / req.noise_gain, rel=0.01)
    assert req.input_common_mode[1] == pytest.approx(3.2 / req.noise_gain, rel=0.01)
    assert req.noise_gain == pytest.approx(3.6, rel=0.01)
    assert any("summing network" in n for n in req.notes)
    solution = req.offset_network
    y = [kcl_output(solution, brief, xi) for xi in (-0.5, 0.5)]
    assert y == pytest.approx([0.1, 3.2], abs=0.005)


def test_shortlist_uses_the_real_common_mode_range():
    from selector.checks import run_checks
    from selector.library import parse_library
    brief = parse_brief((DEMO_BRIEFS / "bridge_offset.toml").read_text(), "bridge_offset")
    # invented part: input range from 0 V (cm_low 0) to 1.5 V below V+; the signal
    # itself (−0.5 V) would be out of range, the summing node (0.03 … 0.89 V) is not
    library = parse_library(
        "part,supply_min [V],supply_max [V],cm_low [V],cm_high [V]\n"
        "ZT-7000,2.7,5.5,0,1.5\n", "<test>")
    result = run_checks(derive(brief), library)["input_common_mode"]
    assert result.status[0] == "pass"
    low_slack = derive(brief).input_common_mode[0] - 0.0
    assert result.margin[0] == pytest.approx(min(low_slack, 3.3 - 0.8888 - 1.5), abs=0.01)


def test_non_inverting_rg_to_a_divided_reference():
    # 0 … 1 V onto 0.5 … 4.5 V on 5 V: G = 4, c = 0.5 V > 0 … needs Vref = −0.167 V →
    # summing; but 0.2 … 1 V onto 0.3 … 4.3 V: G = 5, c = −0.7 V → Vref = 0.175 V,
    # inside the rails: Rg becomes a divider from 5 V (Thevenin: Ra ∥ Rb = Rg).
    brief = make_brief("non-inverting", 0.2, 0.8, 0.3, 4.0, 5.0, 0)
    solution = realise(brief, 5.0, -0.7, "E96")
    assert solution.kind == "rg-to-reference" and solution.ra and solution.rb
    assert solution.reference == pytest.approx(0.175, rel=0.02)
    y = [kcl_output(solution, brief, xi) for xi in (0.2, 1.0)]
    assert y == pytest.approx([0.3, 4.3], abs=0.02)
    assert solution.common_mode == (pytest.approx(0.2), pytest.approx(1.0))


def test_gain_one_with_an_offset_is_a_summing_network():
    # a follower-like gain of 1 with +1 V offset on 5 V: NG = 1 + 1/5 = 1.2, a = 1/1.2
    brief = make_brief("non-inverting", 0.0, 2.0, 1.0, 2.0, 5.0, 0)
    req = derive(brief)
    assert req.noise_gain == pytest.approx(1.2, rel=0.01)
    assert req.input_common_mode[0] == pytest.approx(1.0 / req.noise_gain, rel=1e-6)


def test_negative_offset_without_a_negative_rail_is_one_clear_error():
    # METHOD.md §1, inverting: c = NG·Vref.  −0.5 … 0.5 V onto 1.1 … 0.1 V: G = −1,
    # c = 0.6 V, Vref = 0.6/2 = 0.3 V — inside the 3.3 V rail.
    brief = make_brief("inverting", -0.5, 1.0, 0.1, 1.0, 3.3, 0)
    assert derive(brief, synthesise=False).reference == pytest.approx(0.3)
    # −2 … −1 V onto 1.1 … 0.1 V: c = 1.1 − 2 = −0.9 V needs Vref = −0.45 V
    brief = make_brief("inverting", -2.0, 1.0, 0.1, 1.0, 3.3, 0)
    with pytest.raises(InputError, match="outside the supply rails"):
        derive(brief)


def test_resistor_values_of_every_solution_are_standard():
    brief = parse_brief((DEMO_BRIEFS / "vibration.toml").read_text(), "vibration")
    solution = realise(brief, -3.1, 1.65, "E96")
    e96 = net.values("E96", 1, 1e8)
    for value in (solution.rf, solution.rg, solution.ra, solution.rb):
        assert np.isclose(e96, value, rtol=1e-12).any()
    assert solution.common_mode[0] == pytest.approx(solution.reference)
    assert 0 < solution.reference < 3.3
    assert math.isfinite(solution.input_impedance) and solution.input_impedance == solution.rg


def test_brief_network_must_make_the_summing_noise_gain():
    text = (DEMO_BRIEFS / "bridge_offset.toml").read_text()
    # NG = G + c/Vr = 3.1 + 1.65/3.3 = 3.6: Rf/Rg = 2k6/1k fits, 3k/1k (NG 4) does not
    good = text.replace('stray_capacitance = "2 pF"',
                        'stray_capacitance = "2 pF"\nrf = "2k6"\nrg = "1k"')
    req = derive(parse_brief(good, "good.toml"))
    assert req.noise_gain == pytest.approx(3.6) and req.network_source == "brief"
    assert req.input_common_mode == (pytest.approx(0.1 / 3.6), pytest.approx(3.2 / 3.6))
    with pytest.raises(InputError, match="noise gain of 3.6"):
        derive(parse_brief(good.replace('rf = "2k6"', 'rf = "3k"'), "bad.toml"))
