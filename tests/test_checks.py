"""Every check and filter on a small invented library, against hand formulas
(METHOD.md §2–§6, arithmetic in the comments) and python-control for phase margin."""
from __future__ import annotations

import math

import control
import numpy as np
import pytest
import scipy.constants

from selector import relations as rel
from selector.brief import parse_brief
from selector.checks import FAIL, NA, PASS, UNKNOWN, Parts, load_current, loop_of, run_checks
from selector.library import parse_library
from selector.requirements import derive

TWO_PI = 2 * math.pi
FOUR_KT = 4 * scipy.constants.k * 298.15

# Invented channel: ±0.1 V at 100 kHz from 1 kΩ, gain 10 (Rf 9k, Rg 1k), ±5 V,
# 1 kΩ ∥ 1 nF load, two channels.
BRIEF = """\
name = "check bench"
topology = "non-inverting"
channels = 2
[signal]
min = "-0.1 V"
max = "0.1 V"
frequency = "100 kHz"
source_resistance = "1k"
[output]
gain = 10
load_resistance = "1k"
load_capacitance = "1 nF"
[supply]
positive = "5 V"
negative = "-5 V"
[network]
rf = "9k"
rg = "1k"
stray_capacitance = "2 pF"
[limits]
dc_error = "10 mV"
noise = "100 uV"
noise_bandwidth = ["10 Hz", "10 kHz"]
phase_margin = "45 deg"
quiescent_current = "1 mA"
temperature_min = "-40 C"
temperature_max = "85 C"
[filters]
status = ["active"]
packages = ["SOIC-8", "MSOP-8"]
max_unit_cost = 2.0
"""

COLUMNS = ("part,gbw,slew,supply_min,supply_max,swing_low,swing_high,cm_low,cm_high,"
           "vos,vos_drift,ib,aol,pm,en,in,en_corner,cin_cm,cin_diff,ro,iout,iq,"
           "temp_min,temp_max,package,status,unit_cost")
PARTS = [
    # ZT-1001: meets everything
    "ZT-1001,10 MHz,1 V/us,4.5 V,12 V,1.2 V,1.5 V,2 V,1.5 V,100 uV,1 uV/C,1 nA,100 dB,"
    "60 deg,10 nV/rtHz,1 pA/rtHz,100 Hz,5 pF,3 pF,50 ohm,20 mA,300 uA,-40 C,125 C,"
    "SOIC-8,active,1.50",
    # ZT-1002: slow, high offset, wrong supply, hot only, filtered out
    "ZT-1002,50 kHz,0.5 V/us,12 V,36 V,0.5 V,0.5 V,0.5 V,0.5 V,1 mV,5 uV/C,100 nA,"
    "80 dB,50 deg,20 nV/rtHz,2 pA/rtHz,1 kHz,5 pF,3 pF,50 ohm,1 mA,800 uA,0 C,70 C,"
    "DIP-8,nrnd,3.00",
    # ZT-1003: gaps (swing_high, vos_drift, en_corner, cin_diff, slew, package missing)
    "ZT-1003,10 MHz,,4.5 V,12 V,1.2 V,,2 V,1.5 V,100 uV,,1 nA,100 dB,60 deg,10 nV/rtHz,"
    "1 pA/rtHz,,5 pF,,50 ohm,20 mA,300 uA,-40 C,125 C,,active,",
]


@pytest.fixture(scope="module")
def bench():
    req = derive(parse_brief(BRIEF))
    library = parse_library(COLUMNS + "\n" + "\n".join(PARTS) + "\n")
    return req, library, run_checks(req, library)


def figures(results, name):
    r = results[name]
    return list(r.status), r.required, r.available, r.margin


def test_supply(bench):
    # §3: span 10 V; ZT-1001 4.5–12 V: slack min(10 − 4.5, 12 − 10) = 2 V;
    # ZT-1002 12–36 V: 10 − 12 = −2 V (fails)
    status, _, _, margin = figures(bench[2], "supply")
    assert status == [PASS, FAIL, PASS]
    assert margin == pytest.approx([2.0, -2.0, 2.0])


def test_slew(bench):
    # §2: Vp = 10·0.2/2 = 1 V; SR_min = 2π·100 kHz·1 V = 0.62832 V/µs
    status, required, available, margin = figures(bench[2], "slew")
    assert required[0] == pytest.approx(TWO_PI * 1e5)
    assert status == [PASS, FAIL, UNKNOWN]        # missing slew is unknown, never pass
    assert margin[:2] == pytest.approx([1e6 / (TWO_PI * 1e5), 0.5e6 / (TWO_PI * 1e5)])


def test_gain_accuracy(bench):
    # §2 exact single pole with A_OL = 10^(100/20) = 1e5:
    # |1 + NG/A_OL + j·NG·f/GBW| = 1/(1 − ε) → GBW = NG·f / sqrt((0.99)^−2 − 1.0001²)
    # = 1 MHz / sqrt(1.020304 − 1.000200) = 1 MHz / 0.141789 = 7.0527 MHz
    need = 10 * 1e5 / math.sqrt(0.99 ** -2 - (1 + 10 / 1e5) ** 2)
    assert need == pytest.approx(7.0527e6, rel=1e-4)
    status, required, _, margin = figures(bench[2], "gain_accuracy")
    assert required[0] == pytest.approx(need, rel=1e-9)
    assert status == [PASS, FAIL, PASS]
    assert margin[0] == pytest.approx(10e6 / need, rel=1e-9)


def test_output_swing(bench):
    # §3: output ±1 V on ±5 V leaves 4 V each side; ZT-1001 needs 1.2 V / 1.5 V:
    # min(4 − 1.2, 4 − 1.5) = 2.5 V.  ZT-1003 lacks swing_high: unknown, even though
    # the low side has room
    status, required, available, margin = figures(bench[2], "output_swing")
    assert status == [PASS, PASS, UNKNOWN]
    assert margin[0] == pytest.approx(2.5)
    assert (required[0], available[0]) == pytest.approx((1.5, 4.0))


def test_input_common_mode(bench):
    # §3: CM ±0.1 V leaves 4.9 V each side; ZT-1001 needs 2 V / 1.5 V: min(2.9, 3.4)
    status, _, _, margin = figures(bench[2], "input_common_mode")
    assert status == [PASS, PASS, PASS]
    assert margin[0] == pytest.approx(2.9)


def test_dc_error(bench):
    # §4 non-inverting, NG 10, ΔT = 65 °C, Rs 1 kΩ, Rf 9 kΩ:
    # ZT-1001: 10·(100 µV + 65 µV + 1 nA·1k) + 1 nA·9k = 1.66 mV + 9 µV = 1.669 mV
    # ZT-1002: 10·(1 mV + 325 µV + 100 µV) + 0.9 mV = 15.15 mV (fails 10 mV)
    status, _, available, margin = figures(bench[2], "dc_error")
    assert available[:2] == pytest.approx([1.669e-3, 15.15e-3], rel=1e-9)
    assert margin[:2] == pytest.approx([10 / 1.669, 10 / 15.15], rel=1e-9)
    assert status == [PASS, FAIL, UNKNOWN]        # ZT-1003: no drift figure


def test_noise(bench):
    # §5 NG 10, Rs 1k, Req = 9k ∥ 1k = 900 Ω, band 10 Hz – 10 kHz.  ZT-1001:
    #   en²·(9990 + 100·ln 1000) = 1e-16·10 680.8 = 1.06808e-12 V²
    #   (4kT·1900 + 1e-24·(1e6 + 8.1e5))·9990 = (3.12847e-17 + 1.81e-18)·9990 = 3.30616e-13
    #   rms = 10·sqrt(1.39870e-12) = 11.827 µV
    req_r, band = 900.0, 10e3 - 10.0

    def hand(en, in_, corner):
        en2 = en ** 2 * (band + corner * math.log(10e3 / 10))
        rest = (FOUR_KT * (1e3 + req_r) + in_ ** 2 * (1e3 ** 2 + req_r ** 2)) * band
        return 10 * math.sqrt(en2 + rest)
    status, _, available, _ = figures(bench[2], "noise")
    assert available[0] == pytest.approx(hand(10e-9, 1e-12, 100.0), rel=1e-12)
    assert available[0] == pytest.approx(11.827e-6, rel=1e-4)
    # ZT-1002 is narrower than the brief's band: (π/2)·50 kHz/10 = 7.854 kHz bounds it
    enbw = math.pi / 2 * 5e3
    en2 = 20e-9 ** 2 * ((enbw - 10) + 1e3 * math.log(enbw / 10))
    rest = (FOUR_KT * 1900 + 2e-12 ** 2 * (1e6 + 810e3)) * (enbw - 10)
    assert available[1] == pytest.approx(10 * math.sqrt(en2 + rest), rel=1e-12)
    assert status == [PASS, PASS, UNKNOWN]        # ZT-1003: no 1/f corner


def _control_margin(gbw, aol, ng, poles, load_factor=1.0):
    # L(s) = load_factor·(A_OL/NG)/(1 + s·A_OL/(2π·GBW))·Π 1/(1 + s/(2π·p)), built in
    # python-control; load_factor = R'/(R' + Ro) is the output resistance's divider
    loop = control.tf([load_factor * aol / ng], [aol / (TWO_PI * gbw), 1.0])
    for p in poles:
        loop = loop * control.tf([1.0], [1 / (TWO_PI * p), 1.0])
    return control.stability_margins(loop)[1]


def test_phase_margin_against_python_control(bench):
    # §6 for ZT-1001: second pole 10 MHz·tan 60° = 17.32 MHz; feedback pole
    # 1/(2π·900 Ω·(5 + 3 + 2) pF) = 17.68 MHz.  The output resistance Ro = 50 Ω drives
    # R' = R_L ∥ (Rf + Rg) = 1 kΩ ∥ 10 kΩ = 909.09 Ω: the loop gain is scaled by
    # R'/(R' + Ro) = 909.09/959.09 = 0.94787, and the load pole is
    # 1/(2π·(Ro ∥ R')·C_L) = 1/(2π·47.393 Ω·1 nF) = 3.3582 MHz (not 1/(2π·50 Ω·1 nF)
    # = 3.1831 MHz: the resistive load lowers the resistance C_L sees)
    req, library, results = bench
    f2 = 10e6 * math.tan(math.radians(60))
    f_fb = 1 / (TWO_PI * 900 * 10e-12)
    r_load = 1 / (1 / 1e3 + 1 / 10e3)
    factor = r_load / (r_load + 50)
    f_load = 1 / (TWO_PI * (50 * r_load / (50 + r_load)) * 1e-9)
    assert (f_fb, r_load, factor, f_load) == pytest.approx(
        (17.684e6, 909.09, 0.94787, 3.3582e6), rel=1e-4)
    expected = _control_margin(10e6, 1e5, 10.0, [f2, f_fb, f_load], factor)
    crossover, margin, pole, _ = loop_of(req, Parts(library))
    assert pole[0] == pytest.approx(f_fb, rel=1e-9)
    assert margin[0] == pytest.approx(expected, abs=1e-3)
    # the crossover is where python-control's loop has |L| = 1
    loop = control.tf([factor * 1e5 / 10.0], [1e5 / (TWO_PI * 10e6), 1.0])
    for p in (f2, f_fb, f_load):
        loop = loop * control.tf([1.0], [1 / (TWO_PI * p), 1.0])
    gain_there = abs(complex(loop(1j * TWO_PI * crossover[0])))
    assert gain_there == pytest.approx(1.0, rel=1e-6)
    # a headroom in degrees above the brief's 45°, not a ratio
    status, required, available, headroom = figures(results, "phase_margin")
    assert results["phase_margin"].sense == "headroom"
    assert results["phase_margin"].unit == "deg"
    assert required[0] == 45.0
    assert available[0] == pytest.approx(expected, abs=1e-3)
    assert headroom[0] == pytest.approx(expected - 45.0, abs=1e-3)
    assert status[0] == PASS
    # ZT-1002 (50 kHz, 80 dB, PM1 50°, the same Ro = 50 Ω) from python-control as well
    expected_2 = _control_margin(50e3, 1e4, 10.0, [50e3 * math.tan(math.radians(50)),
                                                    f_fb, f_load], factor)
    assert available[1] == pytest.approx(expected_2, abs=1e-3)
    assert headroom[1] == pytest.approx(expected_2 - 45.0, abs=1e-3)
    assert status[2] == UNKNOWN                   # ZT-1003: cin_diff missing


def test_temperature(bench):
    # §3: −40…85 °C; ZT-1001 −40…125: slack min(0, 40) = 0 (passes); ZT-1002 0…70: −40
    status, _, _, margin = figures(bench[2], "temperature")
    assert status == [PASS, FAIL, PASS]
    assert margin[:2] == pytest.approx([0.0, -40.0])


def test_quiescent_current(bench):
    # §3: 2 channels · 300 µA = 600 µA in a 1 mA budget: 1.667×; 2·800 µA = 1.6 mA fails
    status, _, available, margin = figures(bench[2], "quiescent_current")
    assert available[:2] == pytest.approx([600e-6, 1.6e-3])
    assert margin[0] == pytest.approx(1 / 0.6)
    assert status == [PASS, FAIL, PASS]


def test_output_drive(bench):
    # §3: at y = ±1 V: 1 V/1 kΩ (load) + 1 V/(9k + 1k) (network) = 1.1 mA, plus the
    # load capacitance at 100 kHz: 2π·100 kHz·1 V·1 nF = 0.6283 mA → 1.7283 mA
    req = bench[0]
    current = 1e-3 + 1e-4 + TWO_PI * 1e5 * 1.0 * 1e-9
    assert load_current(req) == pytest.approx(current, rel=1e-12)
    status, required, _, margin = figures(bench[2], "output_drive")
    assert margin[:2] == pytest.approx([20e-3 / current, 1e-3 / current])
    assert status == [PASS, FAIL, PASS]


def test_filters(bench):
    results = bench[2]
    assert list(results["status"].status) == [PASS, FAIL, PASS]     # nrnd excluded
    assert list(results["package"].status) == [PASS, FAIL, UNKNOWN]
    assert list(results["cost"].status) == [PASS, FAIL, UNKNOWN]


def test_not_asked_is_na(bench):
    # a sine brief asks for no settling time
    assert set(bench[2]["settling"].status) == {NA}
    assert np.isnan(bench[2]["settling"].margin).all()


def test_settling_check_and_dc_gain_accuracy():
    # a step brief: 0…2 V out of a follower within 0.1 % in 5 µs.
    # Part: GBW 1 MHz, slew 0.5 V/µs.  τ = 1/(2π·1 MHz) = 159.15 ns; SR·τ = 79.6 mV;
    # t = (2 − 0.0796)/0.5e6 + τ·ln(0.0796/(0.001·2)) = 3.8408 µs + 0.5865 µs = 4.427 µs
    text = """\
topology = "follower"
[signal]
min = "0 V"
max = "2 V"
waveform = "step"
[supply]
positive = "5 V"
[limits]
settling_time = "5 us"
settling_error = "0.1 %"
gain_error = "0.1 %"
"""
    req = derive(parse_brief(text))
    library = parse_library(
        "part,gbw,slew,supply_min,supply_max,aol\n"
        "ZT-2001,1 MHz,0.5 V/us,2 V,6 V,100 dB\nZT-2002,1 MHz,0.2 V/us,2 V,6 V,\n")
    results = run_checks(req, library)
    tau = 1 / (TWO_PI * 1e6)
    knee = 0.5e6 * tau
    hand = (2 - knee) / 0.5e6 + tau * math.log(knee / (0.001 * 2))
    assert hand * 1e6 == pytest.approx(4.427, abs=1e-3)
    status, _, available, margin = figures(results, "settling")
    assert available[0] == pytest.approx(hand, rel=1e-12)
    assert margin[0] == pytest.approx(5e-6 / hand, rel=1e-12)
    assert status == [PASS, FAIL]                 # 0.2 V/µs needs ≈ 10 µs
    # DC gain accuracy: A_OL ≥ NG/(1/(1 − 0.001) − 1) = 999; 1e5/999 = 100.1×
    status, required, _, margin = figures(results, "gain_accuracy")
    assert required[0] == pytest.approx(999.0)
    assert margin[0] == pytest.approx(1e5 / 999.0)
    assert status == [PASS, UNKNOWN]              # no A_OL figure
    # a DC-only brief skips slew (§2)
    assert set(results["slew"].status) == {NA}


def test_relations_used_by_checks_are_vectorised(bench):
    # one call evaluates all parts: arrays of the library's length
    results = bench[2]
    assert all(len(r.status) == 3 for r in results.values())
    assert rel.second_pole(np.array([1e6, 2e6]), np.array([45.0, 90.0]))[0] == \
        pytest.approx(1e6)
