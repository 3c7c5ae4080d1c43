"""The solver against an independent circuit simulator (ngspice, batch mode).

The netlists come from selector.netlist (behavioural part model from invented table
figures); ngspice solves the circuit on its own, and its answers are compared with
the solver's figures from METHOD.md §2 and §6 (selector.relations, checks.loop_of).
Without ngspice these tests skip, unless SELECTOR_REQUIRE_NGSPICE=1 (CI), where they
fail.  Part keys and figures are invented.
"""
from __future__ import annotations

import math
import os

import numpy as np
import pytest

from selector import netlist as spice
from selector import relations as rel
from selector.brief import brief_from_dict
from selector.checks import Parts, loop_of
from selector.library import parse_library
from selector.network import PartFigures, bandwidth_3db
from selector.offset import OffsetSolution
from selector.requirements import derive

from conftest import DEMO_BRIEFS

pytestmark = pytest.mark.spice


def require_ngspice() -> None:
    """Skip without ngspice, or fail when SELECTOR_REQUIRE_NGSPICE=1 (CI)."""
    if spice.ngspice() is None:
        if os.environ.get("SELECTOR_REQUIRE_NGSPICE") == "1":
            pytest.fail("ngspice is required here (SELECTOR_REQUIRE_NGSPICE=1) but is "
                        "not installed")
        pytest.skip("ngspice is not installed (Debian: apt-get install ngspice); "
                    "CI sets SELECTOR_REQUIRE_NGSPICE=1 to make this a failure")


@pytest.fixture(autouse=True)
def need_ngspice():
    require_ngspice()


def part(**figures) -> PartFigures:
    base = dict(key="ZT-6100", gbw=10e6, aol=1e5, pm=90.0, slew=20e6, swing_low=0.05,
                swing_high=0.05, cin_cm=0.0, cin_diff=0.0, ro=1.0)
    base.update(figures)
    base["cin"] = base["cin_cm"] + base["cin_diff"]
    return PartFigures(**base)


def brief(frequency="1 kHz", amplitude=0.1, rf="9k", rg="1k", extra=None):
    data = {"topology": "non-inverting",
            "signal": {"min": f"{-amplitude} V", "max": f"{amplitude} V",
                       "frequency": frequency},
            "output": {"gain": 1 + float(rf.rstrip("k")) / float(rg.rstrip("k"))},
            "supply": {"positive": "5 V", "negative": "-5 V"},
            "network": {"rf": rf, "rg": rg}}
    for section, values in (extra or {}).items():
        data.setdefault(section, {}).update(values)
    return brief_from_dict(data, "<spice test>")


def network_of(b) -> OffsetSolution:
    return OffsetSolution("none", b.rf, b.rg, wanted=(1 + b.rf / b.rg, 0.0))


def magnitude(result):
    ac = result["ac"]
    return ac["frequency"], 10 ** (ac["vdb(out)"] / 20)


def crossing(frequency, values, level):
    """First frequency where ``values`` falls through ``level`` (log interpolation)."""
    below = np.flatnonzero(values < level)[0]
    f0, f1 = np.log10(frequency[below - 1]), np.log10(frequency[below])
    v0, v1 = values[below - 1], values[below]
    return 10 ** (f0 + (level - v0) / (v1 - v0) * (f1 - f0))


def sine_fit(time, values, frequency, periods=4):
    """Amplitude of the fundamental over the last ``periods`` and the rms residual
    left after removing it (least squares on sin, cos and a constant)."""
    keep = time >= time[-1] - periods / frequency
    t, v = time[keep], values[keep]
    basis = np.column_stack([np.sin(2 * np.pi * frequency * t),
                             np.cos(2 * np.pi * frequency * t), np.ones_like(t)])
    coefficients, *_ = np.linalg.lstsq(basis, v, rcond=None)
    residual = v - basis @ coefficients
    return math.hypot(*coefficients[:2]), float(np.sqrt(np.mean(residual ** 2)))


def test_low_frequency_gain_and_bandwidth_match_the_single_pole_model():
    b, p = brief(), part()
    result = spice.simulate(spice.build(b, network_of(b), p))
    f, mag = magnitude(result)
    # METHOD.md §2: A_cl = G/(1 + NG/A(jf)); at 1 Hz essentially G/(1 + NG/A_OL)
    predicted = abs(rel.closed_loop_gain(1.0, 10.0, 10.0, p.gbw, p.aol))
    assert mag[0] == pytest.approx(predicted, rel=2e-4)
    # closed-loop bandwidth f_c = GBW/NG = 1 MHz (METHOD.md §2)
    f3 = crossing(f, mag, mag[0] / math.sqrt(2))
    assert f3 == pytest.approx(p.gbw / 10, rel=0.02)


def test_bandwidth_with_second_pole_and_input_capacitance():
    b = brief(rf="20k", rg="5k")
    p = part(pm=55.0, cin_cm=4e-12, cin_diff=3e-12)
    result = spice.simulate(spice.build(b, network_of(b), p))
    f, mag = magnitude(result)
    f3 = crossing(f, mag, mag[0] / math.sqrt(2))
    # the + input drives the 3 pF between the inputs, so it is a feed-forward path
    predicted = bandwidth_3db(p, "non-inverting", 20e3, 5e3, cin=7e-12, cin_diff=3e-12)[0]
    assert f3 == pytest.approx(predicted, rel=0.03)


def test_output_amplitude_at_the_signal_frequency_shows_the_gain_error():
    b, p = brief(frequency="300 kHz"), part()
    result = spice.simulate(spice.build(b, network_of(b), p))
    tran = result["tran"]
    amplitude, _ = sine_fit(tran["time"], tran["v(out)"], 300e3)
    # METHOD.md §2: ε(f) = 1 − |A_cl|/|G|; at f = 0.3·f_c it is about 4.2 %
    error = rel.gain_error(300e3, 10.0, 10.0, p.gbw, p.aol)
    assert 0.035 < error < 0.05
    assert amplitude == pytest.approx(10 * 0.1 * (1 - error), rel=0.003)


def _slew_case(slew):
    b = brief(frequency="100 kHz")
    p = part(gbw=50e6, slew=slew)
    req = derive(b)
    result = spice.simulate(spice.build(b, network_of(b), p))
    tran = result["tran"]
    keep = tran["time"] >= tran["time"][-1] - 4 / 100e3
    out = tran["v(out)"][keep]
    slope = np.max(np.abs(np.diff(out) / np.diff(tran["time"][keep])))
    amplitude, residual = sine_fit(tran["time"], tran["v(out)"], 100e3)
    return req, out, slope, amplitude, residual


def test_slew_limited_part_distorts_as_the_solver_predicts():
    # SR_min = 2π·f·Vp = 2π·100 kHz·1 V = 0.628 V/µs (METHOD.md §2)
    req, out, slope, amplitude, residual = _slew_case(0.2e6)
    assert req.slew_min == pytest.approx(2 * math.pi * 100e3 * 1.0, rel=1e-9)
    assert 0.2e6 < req.slew_min  # the solver fails this part on slew
    peak = (out.max() - out.min()) / 2
    assert peak < 0.6 * 1.0  # short of G·Vin = 1 V
    # a slewing output is a triangle: its slope is the slew rate, its peak SR/(4f)
    assert slope == pytest.approx(0.2e6, rel=0.03)
    assert peak == pytest.approx(0.2e6 / (4 * 100e3), rel=0.05)
    # Fourier series of a triangle of peak P: fundamental 8P/π², rms P/√3, so the
    # harmonics carry 1 − 96/π⁴ of the power and leave 12 % of the rms
    triangle_rms = peak / math.sqrt(3)
    assert residual / triangle_rms == pytest.approx(math.sqrt(1 - 96 / math.pi ** 4), rel=0.1)


def test_part_with_enough_slew_passes_cleanly():
    req, out, slope, amplitude, residual = _slew_case(5e6)
    assert 5e6 > req.slew_min
    predicted = 1.0 * (1 - rel.gain_error(100e3, 10.0, 10.0, 50e6, 1e5))
    assert amplitude == pytest.approx(predicted, rel=0.003)
    assert residual < 0.002 * amplitude
    assert slope < 5e6


def test_phase_margin_from_the_simulated_loop_gain():
    # gain 2 with 10k/10k, C_in = 10 pF: feedback pole 1/(2π·5k·10p) = 3.2 MHz near the
    # 5 MHz crossover; 200 pF load through Ro ∥ R' = 50 Ω ∥ (10k ∥ 20k) = 49.6 Ω adds a
    # pole at 16.0 MHz, and Ro into R' scales the loop gain by 0.993 (METHOD.md §6 and
    # the R' refinement in selector.checks.loop_of)
    b = brief(rf="10k", rg="10k", extra={"output": {"load_resistance": "10k",
                                                    "load_capacitance": "200 pF"},
                                         "limits": {"phase_margin": "45 deg"}})
    row = dict(gbw=10e6, aol=10 ** (100 / 20), pm=60.0, slew=20e6, cin_cm=6e-12,
               cin_diff=4e-12, ro=50.0)
    p = part(**row)
    library = parse_library(
        "part,gbw [MHz],aol [V/V],pm [deg],slew [V/us],supply_min [V],supply_max [V],"
        "cin_cm [pF],cin_diff [pF],ro [ohm]\n"
        "ZT-6100,10,100000,60,20,4,12,6,4,50\n", "<spice test>")
    req = derive(b)
    crossover, margin, f_fb, missing = loop_of(req, Parts(library))
    assert not missing[0]
    result = spice.simulate(spice.build(b, network_of(b), p, loop=True), loop=True)
    ac = result["ac"]
    out = ac["real(v(out))"] + 1j * ac["imag(v(out))"]
    fb = ac["real(v(fb))"] + 1j * ac["imag(v(fb))"]
    loop = -out / fb                          # T = −V(out)/V(fb), voltage injection
    f = ac["frequency"]
    f_x = crossing(f, np.abs(loop), 1.0)
    phase = np.degrees(np.unwrap(np.angle(loop)))
    simulated = 180 + np.interp(np.log10(f_x), np.log10(f), phase)
    assert f_x == pytest.approx(crossover[0], rel=0.03)
    assert simulated == pytest.approx(margin[0], abs=2.0)
    assert 20 < simulated < 60  # the poles really cost margin here


def test_netlist_command_output_runs_in_ngspice(cli):
    code, out, err = cli("netlist", DEMO_BRIEFS / "hydrophone.toml", "--part", "KL-7110")
    assert code == 0 and out.startswith("*") and ".ac" in out and ".tran" in out
    result = spice.simulate(out)
    _, mag = magnitude(result)
    # the brief's network: G = 1 + 9k53/499R = 20.098; A_OL = 95 dB (library row)
    predicted = abs(rel.closed_loop_gain(1.0, 1 + 9530 / 499, 1 + 9530 / 499, 100e6,
                                         10 ** (95 / 20)))
    # Ro = 20 Ω into 1 kΩ ∥ 10 kΩ is inside the loop: no visible loss at 1 Hz
    assert mag[0] == pytest.approx(predicted, rel=2e-3)
    tran = result["tran"]
    amplitude, _ = sine_fit(tran["time"], tran["v(out)"], 200e3)
    assert amplitude == pytest.approx(1.0, rel=0.03)


@pytest.mark.parametrize("name, part_key", [("bridge_offset", "FH-3420"),
                                            ("vibration", "TW-3500")])
def test_offset_networks_in_the_simulator(cli, name, part_key):
    """The level-shifting networks (summing; + input on a divider) reach the brief's
    output range in ngspice, and the op-amp input sits where the solver says."""
    from selector.commands.netlist import stage_solution
    from selector.library import load_library
    from selector.stage import find_part
    from selector.brief import load_brief
    from conftest import DEMO_LIBRARY
    b = load_brief(DEMO_BRIEFS / f"{name}.toml")
    p, _ = find_part(load_library(DEMO_LIBRARY), part_key)
    solution = stage_solution(b, p)
    result = spice.simulate(spice.build(b, solution, p))
    tran = result["tran"]
    keep = tran["time"] >= tran["time"][-1] - 2 / b.frequency
    out = tran["v(out)"][keep]
    # the brief asks 0.1 V … 3.2 V; the stage's realised endpoints (KCL with standard
    # values) are within endpoint_error of that, and the simulator agrees to 0.5 %
    # of the span (finite loop gain at the signal frequency is the difference)
    low, high = sorted(solution.endpoints)
    assert out.min() == pytest.approx(low, abs=0.005 * 3.1)
    assert out.max() == pytest.approx(high, abs=0.005 * 3.1)
    assert abs(out.min() - 0.1) < 0.02 and abs(out.max() - 3.2) < 0.02
    req = derive(b)
    assert req.input_common_mode[0] >= 0 and req.input_common_mode[1] <= 3.3
