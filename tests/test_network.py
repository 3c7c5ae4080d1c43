"""Standard values, resistor codes and the gain-network search (issue 4).

Every check names its outside source.  Part keys and figures are invented.
"""
from __future__ import annotations

import math

import control
import numpy as np
import pandas as pd
import pytest
import scipy.constants

from selector import network as net
from selector.brief import parse_brief
from selector.requirements import derive
from selector.units import parse_resistor_code

from conftest import DEMO_BRIEFS

# IEC 60063 E24 decade, typed from memory of the standard's table.
E24_TABLE = [1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9,
             4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1]
# IEC 60063 E96 decade (three figures), typed from memory of the standard's table.
E96_TABLE = [int(v) / 100 for v in """
100 102 105 107 110 113 115 118 121 124 127 130 133 137 140 143 147 150 154 158 162 165
169 174 178 182 187 191 196 200 205 210 215 221 226 232 237 243 249 255 261 267 274 280
287 294 301 309 316 324 332 340 348 357 365 374 383 392 402 412 422 432 442 453 464 475
487 499 511 523 536 549 562 576 590 604 619 634 649 665 681 698 715 732 750 768 787 806
825 845 866 887 909 931 953 976""".split()]


def test_e24_matches_the_typed_iec60063_table():
    assert list(net.decade("E24")) == E24_TABLE  # IEC 60063, from memory


def test_e24_departs_from_the_generation_rule_where_the_standard_does():
    # IEC 60063 (from memory): E24 keeps the older values 2.7, 3.0, 3.3, 3.6, 3.9, 4.3,
    # 4.7 and 8.2 where round(10^(i/24), 1) gives 2.6, 2.9, 3.2, 3.5, 3.8, 4.2, 4.6, 8.3.
    rule = np.round(10.0 ** (np.arange(24) / 24), 1)
    differs = [E24_TABLE[i] for i in range(24) if abs(rule[i] - E24_TABLE[i]) > 1e-9]
    assert differs == [2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2]


def test_e96_matches_the_typed_table_and_the_rule():
    assert len(E96_TABLE) == 96
    assert np.array_equal(net.decade("E96"), E96_TABLE)  # IEC 60063, from memory
    # E48 and up follow round(10^(i/n), 2) (IEC 60063; E96 has no exception)
    assert np.allclose(np.round(10.0 ** (np.arange(96) / 96), 2), E96_TABLE)


def test_e192_rule_with_its_known_exception_and_nesting():
    e192 = net.decade("E192")
    rule = np.round(10.0 ** (np.arange(192) / 192), 2)
    # IEC 60063 (from memory): E192 lists 9.20 where the rule gives 9.19 — the one
    # exception in the three-figure series
    assert rule[185] == pytest.approx(9.19) and e192[185] == pytest.approx(9.20)
    assert np.flatnonzero(~np.isclose(rule, e192)).tolist() == [185]
    # each series is every other value of the next (structure of IEC 60063)
    assert np.array_equal(e192[::2], net.decade("E96"))
    assert np.array_equal(net.decade("E96")[::2], net.decade("E48"))
    assert np.array_equal(net.decade("E24")[::2], net.decade("E12"))
    assert np.array_equal(net.decade("E12")[::2], net.decade("E6"))


@pytest.mark.parametrize("code, ohms", [
    # IEC 60062 letter-and-digit code (from memory of its examples): the letter marks
    # the decimal point and the multiplier
    ("R47", 0.47), ("4R7", 4.7), ("47R", 47.0), ("470R", 470.0), ("4k7", 4.7e3),
    ("47k", 47e3), ("470k", 470e3), ("4M7", 4.7e6), ("1k0", 1e3), ("1M0", 1e6),
    ("9k09", 9.09e3), ("2G2", 2.2e9)])
def test_resistor_codes_follow_iec60062(code, ohms):
    assert net.resistor_code(ohms) == code
    assert parse_resistor_code(code) == pytest.approx(ohms)


def test_every_e192_value_round_trips_through_its_code():
    values = net.values("E192", 1.0, 10e6)
    assert len(values) == 192 * 7 + 1
    back = np.array([parse_resistor_code(net.resistor_code(v)) for v in values])
    assert np.allclose(back, values, rtol=1e-12)


def test_worst_case_gain_is_method_section_7():
    # METHOD.md §7 by hand: Rf = 9k, Rg = 1k, t = 1 %:
    # G_max = 1 + 9·1.01/0.99 = 10.18182, G_min = 1 + 9·0.99/1.01 = 9.82178
    low, high = net.worst_case_gain(9e3, 1e3, 0.01)
    assert high == pytest.approx(10.181818, rel=1e-6)
    assert low == pytest.approx(9.821782, rel=1e-6)


def test_pair_search_finds_exact_ratios_and_bounds_the_error():
    # 1 + 9k09/1k = 10.09 exactly in E96; every E96 ratio lands within half a step
    # (10^(1/96) ≈ 1.0243 → ±1.2 %) of the wanted one.
    frame = net.pair_candidates(9.09, "E96")
    assert frame["error"].abs().min() == pytest.approx(0.0, abs=1e-12)
    frame = net.pair_candidates(4.321, "E96")
    assert frame["error"].abs().max() < 0.0122 * 4.321 / 5.321 + 1e-9


def test_monte_carlo_spread_against_first_order_propagation():
    # GUM (JCGM 100:2008, 5.1.2) first-order propagation: G = 1 + Rf/Rg, each
    # resistor uniform ±t has σ = t/√3, so σ_G/G = (G − 1)/G · √2 · t/√3.
    t = 0.01
    low, high, std = net.monte_carlo([9e3], [1e3], 10.0, t)
    assert std[0] == pytest.approx(0.9 * math.sqrt(2) * t / math.sqrt(3), rel=0.03)
    g_low, g_high = net.worst_case_gain(9e3, 1e3, t)
    assert g_low / 10 - 1 < low[0] < 0 < high[0] < g_high / 10 - 1  # inside §7 bounds
    again = net.monte_carlo([9e3], [1e3], 10.0, t)
    assert again[0][0] == low[0]  # fixed seed


def test_resistor_noise_column_uses_the_boltzmann_constant():
    # 4kTR with k from scipy.constants (CODATA 2018, exact in the 2019 SI)
    stage = net.Stage("non-inverting", 10.0, (-1.0, 1.0), (-0.1, 0.1))
    part = net.PartFigures(key="ZT-1000", en=5e-9, in_=0.0, cin=0.0, iout=0.02,
                           gbw=10e6, aol=1e6, pm=60.0)
    effects = net.level_effects(pd.DataFrame({"rf": [9e3], "rg": [1e3]}), stage, part)
    req = 9e3 * 1e3 / 10e3
    expected = 10 * math.sqrt(4 * scipy.constants.k * 298.15 * req)
    assert effects["noise_resistors"][0] == pytest.approx(expected, rel=1e-9)
    # about 3.8 nV/√Hz for 900 Ω (METHOD.md: 1 kΩ gives 4.06 nV/√Hz), times NG 10
    assert effects["noise_resistors"][0] == pytest.approx(38.5e-9, rel=0.01)
    # drive: 1 V across 10 kΩ; power in Rf: (0.9 V)²/9 kΩ (Ohm's law)
    assert effects["i_network"][0] == pytest.approx(1e-4)
    assert effects["p_rf"][0] == pytest.approx(0.81 / 9e3)


def _control_loop(part, rf, rg, cin, cf=0.0):
    """L(s) = A(s)·H2(s)·β(s) built in python-control from the same figures."""
    s = control.tf("s")
    p1 = part.gbw / part.aol
    f2 = part.gbw * math.tan(math.radians(part.pm))
    amp = part.aol / (1 + s / (2 * math.pi * p1)) / (1 + s / (2 * math.pi * f2))
    yg = 1 / rg + s * cin
    yf = 1 / rf + s * cf
    return amp * yf / (yf + yg)


@pytest.mark.parametrize("cf", [0.0, 2.2e-12])
def test_phase_margin_agrees_with_python_control(cf):
    part = net.PartFigures(key="ZT-2200", gbw=20e6, aol=10 ** (100 / 20), pm=60.0)
    rf, rg, cin = 100e3, 11e3, 20e-12
    crossover, pm = net.loop_margin(part, rf, rg, cin, cf)
    _, reference_pm, _, wc = control.margin(_control_loop(part, rf, rg, cin, cf))
    assert pm[0] == pytest.approx(reference_pm, abs=0.2)
    assert crossover[0] == pytest.approx(wc / (2 * math.pi), rel=0.005)
    if cf == 0.0:
        assert pm[0] < 45  # the feedback pole at 1/(2π·9.9k·20p) ≈ 800 kHz bites
    else:
        assert pm[0] > 55  # Cf ≈ Rg·C_in/Rf = 2.2 pF restores it (METHOD.md §6)


def test_closed_loop_bandwidth_agrees_with_python_control():
    part = net.PartFigures(key="ZT-2200", gbw=20e6, aol=1e5, pm=70.0)
    rf, rg, cin = 9e3, 1e3, 5e-12
    bw = net.bandwidth_3db(part, "non-inverting", rf, rg, cin=cin)
    loop = _control_loop(part, rf, rg, cin)
    s = control.tf("s")
    p1 = part.gbw / part.aol
    f2 = part.gbw * math.tan(math.radians(part.pm))
    amp = part.aol / (1 + s / (2 * math.pi * p1)) / (1 + s / (2 * math.pi * f2))
    closed = control.minreal(amp / (1 + loop), verbose=False)
    assert bw[0] == pytest.approx(control.bandwidth(closed) / (2 * math.pi), rel=0.01)
    # and close to the single-pole GBW/NG = 2 MHz of METHOD.md §2
    assert bw[0] == pytest.approx(2e6, rel=0.15)


def test_feedback_capacitor_is_rounded_to_e12():
    # Cf = Rg·C_in/Rf = 10k·10p/90k = 1.11 pF → nearest E12 in ratio is 1.2 pF
    # (1.2/1.11 = 1.08 against 1.11/1.0 = 1.11); 3.6 pF → 3.9 pF (1.083 vs 1.091)
    assert float(net.capacitor_nearest_e12(1.111e-12)) == pytest.approx(1.2e-12, rel=1e-9)
    assert float(net.capacitor_nearest_e12(3.6e-12)) == pytest.approx(3.9e-12, rel=1e-9)
    stage = net.Stage("non-inverting", 10.0, (-1.0, 1.0), (-0.1, 0.1),
                      phase_margin_min=60.0)
    part = net.PartFigures(key="ZT-3300", en=5e-9, in_=1e-15, cin=10e-12, iout=0.02,
                           gbw=50e6, aol=1e6, pm=60.0)
    effects = net.level_effects(pd.DataFrame({"rf": [90e3], "rg": [10e3]}), stage, part)
    assert effects["pm"][0] < 60
    assert effects["cf"][0] == pytest.approx(1.2e-12, rel=1e-9)
    assert effects["pm_cf"][0] > effects["pm"][0]
    # Cf puts a pole in the signal path at 1/(2π·Rf·Cf) = 1.47 MHz
    assert effects["f_cf"][0] == pytest.approx(1 / (2 * math.pi * 90e3 * 1.2e-12), rel=1e-9)


def test_level_choice_balances_drive_against_noise():
    # a quiet part: low resistor values win until the network current bites
    stage = net.Stage("non-inverting", 20.0, (-1.0, 1.0), (-0.05, 0.05))
    quiet = net.PartFigures(key="ZT-5100", en=2e-9, in_=1e-12, cin=2e-12, iout=0.05,
                            gbw=200e6, aol=1e5, pm=60.0)
    noisy = net.PartFigures(key="ZT-5200", en=60e-9, in_=1e-15, cin=2e-12, iout=0.005,
                            gbw=200e6, aol=1e5, pm=60.0)
    low = net.choose_pair(19.0, stage, quiet)
    high = net.choose_pair(19.0, stage, noisy)
    assert low.rg < high.rg
    chosen = low.table.iloc[low.chosen]
    assert chosen["i_network"] <= 0.1 * quiet.iout  # the drive share is respected
    assert abs(low.error) < 0.005 and abs(high.error) < 0.005


def test_derive_says_which_network_it_synthesised():
    brief = parse_brief((DEMO_BRIEFS / "vibration.toml").read_text(), "vibration.toml")
    req = derive(brief)
    assert req.network_source == "synthesised"
    assert any("network synthesised from E96" in n for n in req.notes)
    assert req.gain == pytest.approx(-3.1)
    # the synthesised pair is made of E96 values
    e96 = net.values("E96", 1, 1e7)
    assert np.isclose(e96, req.rf).any() and np.isclose(e96, req.rg).any()
    assumed = derive(brief, synthesise=False)
    assert assumed.rg == 1e3 and assumed.network_source == "assumed"


@pytest.mark.parametrize("name", ["hydrophone", "thermocouple", "vibration", "bridge_offset"])
def test_network_command_on_each_demo_brief(cli, name):
    code, data = cli.json("network", DEMO_BRIEFS / f"{name}.toml")
    assert code == 0
    chosen = [c for c in data["candidates"] if c["label"] == "chosen"][0]
    assert abs(chosen["error"]) < 0.005
    assert chosen["pm"] > 45 and chosen["noise_resistors"] > 0
    assert parse_resistor_code(chosen["code_rf"]) == pytest.approx(chosen["rf"])
    assert data["network"]["endpoint_error"] < 0.01


def test_network_command_with_a_part_and_a_schematic(cli, tmp_path):
    target = tmp_path / "stage.svg"
    brief = DEMO_BRIEFS / "bridge_offset.toml"
    code, out, err = cli("network", brief, "--part", "FH-3420", "--schematic", target,
                         "--series", "E96", "--tolerance", "1%")
    assert code == 0, err
    svg = target.read_text()
    assert svg.lstrip().startswith("<") and "<svg" in svg and "R1" in svg and "R2" in svg
    assert "summing" in out
    code, out, err = cli("network", brief, "--schematic", target)
    assert code == 2 and "--force" in err  # never overwrites silently
    code, out, err = cli("network", brief, "--schematic", target, "--force")
    assert code == 0


@pytest.mark.parametrize("argv, message", [
    (["--tolerance", "lots"], "--tolerance"),
    (["--tolerance", "70%"], "between 0 and 50"),
    (["--part", "QQ-0000"], "QQ-0000"),
])
def test_network_command_bad_input_is_one_message(cli, argv, message):
    code, out, err = cli("network", DEMO_BRIEFS / "hydrophone.toml", *argv)
    assert code == 2 and message in err and "Traceback" not in err


def test_netlist_command_writes_atomically_and_never_over_a_file(cli, tmp_path):
    target = tmp_path / "stage.cir"
    brief = DEMO_BRIEFS / "bridge_offset.toml"
    code, out, err = cli("netlist", brief, "--part", "FH-3420", "--output", target)
    assert code == 0 and out == ""
    text = target.read_text()
    # the summing network as designed: R1 from the source, R2 from the 3.3 V rail
    assert "R1 src inp" in text and "R2 vpos inp" in text and ".tran" in text
    assert not list(tmp_path.glob(".*tmp"))  # no temporary file left behind
    code, out, err = cli("netlist", brief, "--part", "FH-3420", "--output", target)
    assert code == 2 and "--force" in err
    code, out, err = cli("netlist", brief, "--part", "FH-3420", "--output", brief)
    assert code == 2 and "input" in err          # never over the brief
    code, out, err = cli("netlist", brief, "--part", "FH-3420", "--cf", "lots")
    assert code == 2 and "--cf" in err and "Traceback" not in err


def test_missing_simulator_fails_in_ci_and_skips_locally(monkeypatch):
    from test_spice import require_ngspice
    from selector import netlist
    monkeypatch.setattr(netlist.shutil, "which", lambda name: None)
    monkeypatch.setenv("SELECTOR_REQUIRE_NGSPICE", "1")
    with pytest.raises(pytest.fail.Exception, match="SELECTOR_REQUIRE_NGSPICE=1"):
        require_ngspice()
    monkeypatch.delenv("SELECTOR_REQUIRE_NGSPICE")
    with pytest.raises(pytest.skip.Exception, match="not installed"):
        require_ngspice()
