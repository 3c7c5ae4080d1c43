"""derive(): METHOD.md §1 transfer lines and §2/§3 derived limits, by hand.

Briefs are invented.  Tests of the assumed network (rg = 1 kΩ, exact rf) call
derive(..., synthesise=False); the others give [network] rf and rg explicitly.
"""
from __future__ import annotations

import math

import pytest

from selector.brief import parse_brief
from selector.errors import InputError
from selector.requirements import derive


def brief(topology, signal, output="", supply=("5 V", "-5 V"), network="", extra=""):
    lo, hi = signal
    text = (f'topology = "{topology}"\n{extra}\n[signal]\nmin = "{lo}"\nmax = "{hi}"\n'
            f'{output}\n[supply]\npositive = "{supply[0]}"\nnegative = "{supply[1]}"\n')
    if network:
        text += f"[network]\n{network}\n"
    return parse_brief(text)


def test_inverting_with_mid_scale_reference():
    # §1: ±0.5 V in → 3.2 V … 0.1 V out (inverting): G = −(3.2 − 0.1)/1 = −3.1;
    # c = y(x=0) = 1.65 V.  Rs = 100 Ω is in series with Rg: with the assumed
    # rg = 1 kΩ the exact rf = 3.1·1100 = 3410 Ω; NG = 1 + 3410/1100 = 4.1;
    # Vref = c/NG = 1.65/4.1 = 0.40244 V; CM = Vref (inverting)
    b = brief("inverting", ("-0.5 V", "0.5 V"),
              '[output]\nmin = "0.1 V"\nmax = "3.2 V"', supply=("3.3 V", "0 V"),
              extra="")
    b.source_resistance = 100.0
    r = derive(b, synthesise=False)
    assert r.gain == pytest.approx(-3.1)
    assert r.offset == pytest.approx(1.65)
    assert r.rg == 1e3 and r.rf == pytest.approx(3410.0)
    assert r.noise_gain == pytest.approx(4.1)
    assert r.reference == pytest.approx(1.65 / 4.1)
    assert r.input_common_mode == pytest.approx((0.402439, 0.402439), rel=1e-5)
    assert r.output_range == pytest.approx((0.1, 3.2))
    assert r.network_source == "assumed"
    assert any("assumed rg = 1 kΩ" in n for n in r.notes)
    # Req = Rf ∥ (Rg + Rs) = 3410·1100/4510 = 831.7 Ω (§5/§6)
    assert r.feedback_parallel == pytest.approx(3410 * 1100 / 4510)


def test_non_inverting_offset_from_reference():
    # §1: 0…1 V in → 0.5…4.5 V out: G = 4, c = 0.5 V; with Rg returned to Vref,
    # c = −(NG − 1)·Vref → Vref = −0.5/3 = −0.1667 V, inside a ±5 V supply
    b = brief("non-inverting", ("0 V", "1 V"), '[output]\nmin = "0.5 V"\nmax = "4.5 V"')
    r = derive(b, synthesise=False)
    assert r.gain == pytest.approx(4.0) and r.noise_gain == pytest.approx(4.0)
    assert r.reference == pytest.approx(-0.5 / 3)
    assert r.offset == pytest.approx(0.5)
    assert r.rf == pytest.approx(3e3) and r.rg == 1e3
    assert r.output_range == pytest.approx((0.5, 4.5))


def test_given_reference_makes_the_offset():
    # §1 inverting: c = NG·Vref; G = −Rf/Rg = −2, NG = 3, Vref = 1 V → c = 3 V;
    # ±0.5 V in → 4 V … 2 V out
    b = brief("inverting", ("-0.5 V", "0.5 V"), "", supply=("5 V", "0 V"),
              network='rf = "2k"\nrg = "1k"\nreference = "1 V"')
    r = derive(b)
    assert r.gain == pytest.approx(-2.0) and r.noise_gain == pytest.approx(3.0)
    assert r.offset == pytest.approx(3.0)
    assert r.output_range == pytest.approx((2.0, 4.0))
    assert r.input_common_mode == pytest.approx((1.0, 1.0))


def test_inverting_network_given_with_source_resistance():
    # §1: G = −Rf/(Rg + Rs) = −10k/(900 + 100) = −10; NG = 1 + 10k/1k = 11
    b = brief("inverting", ("-0.1 V", "0.1 V"), "", network='rf = "10k"\nrg = "900R"')
    b.source_resistance = 100.0
    r = derive(b)
    assert r.gain == pytest.approx(-10.0) and r.noise_gain == pytest.approx(11.0)
    assert r.offset == 0.0 and r.output_range == pytest.approx((-1.0, 1.0))
    assert r.network_source == "brief"


def test_follower():
    # §1: y = x, gain 1, noise gain 1, no network
    r = derive(brief("follower", ("-1 V", "2 V"), 'frequency = "1 kHz"'))
    assert (r.gain, r.noise_gain, r.rf, math.isinf(r.rg)) == (1.0, 1.0, 0.0, True)
    assert r.input_common_mode == (-1.0, 2.0) and r.output_range == (-1.0, 2.0)


def test_dynamic_limits_common_practice():
    # common practice: 20 kHz at 10 V peak needs 1.257 V/µs; §2 GBW_min = NG·f_c with
    # f_c = 7.02·f for 1 %: 2 · 7.0179 · 20 kHz = 280.7 kHz
    b = brief("non-inverting", ("-5 V", "5 V"), "[output]\ngain = 2",
              supply=("15 V", "-15 V"), network='rf = "1k"\nrg = "1k"')
    b.frequency, b.waveform = 20e3, "sine"
    r = derive(b)
    assert r.output_peak == pytest.approx(10.0)
    assert r.slew_min / 1e6 == pytest.approx(1.257, abs=5e-4)
    assert r.closed_loop_bandwidth_min == pytest.approx(7.0179 * 20e3, rel=1e-4)
    assert r.gbw_min == pytest.approx(2 * 7.0179 * 20e3, rel=1e-4)
    assert r.supply_span == 30.0


def test_margins_scale_the_limits():
    b = brief("non-inverting", ("-5 V", "5 V"), "[output]\ngain = 2",
              supply=("15 V", "-15 V"), network='rf = "1k"\nrg = "1k"',
              extra="")
    b.frequency, b.waveform, b.slew_margin, b.gbw_margin = 20e3, "sine", 2.0, 1.5
    r = derive(b)
    assert r.slew_min == pytest.approx(2 * 2 * math.pi * 20e3 * 10)
    assert r.gbw_min == pytest.approx(1.5 * 2 * 20e3 / math.sqrt(0.99 ** -2 - 1))


def test_dc_brief_has_no_dynamic_limits_and_delta_t():
    b = brief("non-inverting", ("0.5 mV", "40 mV"), "[output]\ngain = 100",
              supply=("5 V", "0 V"), network='rf = "99k"\nrg = "1k"')
    b.temperature_min, b.temperature_max = -40.0, 85.0
    r = derive(b)
    assert r.slew_min is None and r.gbw_min is None and r.closed_loop_bandwidth_min is None
    # §4: ΔT = max(|85 − 25|, |−40 − 25|) = 65 °C
    assert r.delta_t == 65.0
    # §2: A_OL for 1 % at NG 100 = 100/(1/0.99 − 1) = 9900
    assert r.aol_min == pytest.approx(9900.0)


def test_to_dict_keys():
    r = derive(brief("follower", ("-1 V", "1 V")))
    keys = set(r.to_dict())
    assert {"name", "topology", "gain", "noise_gain", "offset", "reference", "rf", "rg",
            "output_range", "input_common_mode", "supply_span", "output_peak",
            "slew_min", "closed_loop_bandwidth_min", "gbw_min", "dc_error_budget",
            "noise_budget", "temperature"} <= keys
    assert r.to_dict()["rg"] is None      # a follower has no Rg (∞ → null)


@pytest.mark.parametrize("topology, output, network, fragment", [
    ("follower", "[output]\ngain = 5", "", "a follower has gain 1"),
    ("non-inverting", "[output]\ngain = 0.5", "", "gain ≥ 1"),
    ("inverting", "[output]\ngain = 4", "", "negative gain"),
    ("non-inverting", "[output]\ngain = 10", 'rf = "10k"\nrg = "1k"', "within 0.5 %"),
    ("non-inverting", "[output]\ngain = 80", "", "outside the supply"),
])
def test_impossible_briefs(topology, output, network, fragment):
    with pytest.raises(InputError, match=fragment):
        derive(brief(topology, ("-0.1 V", "0.1 V"), output, network=network),
               synthesise=False)


def test_rf_rg_agreement_tolerance():
    # 0.5 % rule of §1: Rf/Rg = 9.09k/1k → G = 10.09 vs 10: 0.9 % → error;
    # 9.04k/1k → 10.04: 0.4 % → accepted
    with pytest.raises(InputError, match="network.rf"):
        derive(brief("non-inverting", ("-0.1 V", "0.1 V"), "[output]\ngain = 10",
                     network='rf = "9k09"\nrg = "1k"'))
    r = derive(brief("non-inverting", ("-0.1 V", "0.1 V"), "[output]\ngain = 10",
                     network='rf = "9.04k"\nrg = "1k"'))
    assert r.noise_gain == pytest.approx(10.04)
