"""qualify and recheck on hand-computed cases.  Every part and figure is invented.

The channel: a gain-10 non-inverting stage (Rf = 9 kΩ, Rg = 1 kΩ) taking a ±0.45 V,
10 kHz sine to ±4.5 V on ±5 V rails into 10 kΩ, gain error ≤ 1 % (the default).
"""
from __future__ import annotations

import math

import control
import numpy as np
import pytest
from scipy.optimize import brentq

from selector.brief import parse_brief
from selector.errors import InputError
from selector.library import parse_library
from selector.qualify import (FAILS, MISSING_PART, NOT_ACTIVE, QUALIFIES, UNKNOWN_DATA,
                              qualify, recheck)

HEADER = ("part,gbw [MHz],slew [V/us],supply_min [V],supply_max [V],swing_low [mV],"
          "swing_high [mV],cm_low [V],cm_high [V],vos [uV],vos_drift [uV/C],ib [pA],"
          "aol [dB],pm [deg],en [nV/rtHz],in [fA/rtHz],en_corner [Hz],cin_cm [pF],"
          "cin_diff [pF],ro [ohm],iout [mA],iq [uA],temp_min [C],temp_max [C],package,"
          "status,unit_cost")
GOOD = "10,2.0,4.5,36,100,100,1.0,1.0,500,2,10,120,60,10,10,100,3,3,100,20,1000,-40,125"
LIBRARY = "\n".join([
    HEADER,
    f"ZT-1001,{GOOD},SOIC-8,active,1.00",
    f"ZT-1002,{GOOD.replace('10,2.0,', '10,0.2,', 1)},SOIC-8,active,0.90",
    "ZT-1003,10,2.0,4.5,36,100,1200,1.0,1.0,500,2,10,120,60,10,10,100,3,3,100,20,1000,"
    "-40,125,SOIC-8,active,0.80",
    "ZT-1004,10,2.0,4.5,36,100,100,1.0,1.0,500,2,10,120,,10,10,100,3,3,100,20,1000,"
    "-40,125,SOIC-8,active,0.70",
    f"ZT-1005,{GOOD.replace('10,2.0,', '20,4.0,', 1)},SOIC-8,active,0.60",
    f"ZT-1006,{GOOD},SOIC-8,nrnd,0.50",
]) + "\n"
BRIEF = """\
name = "invented gain-10 sine channel"
topology = "non-inverting"
[signal]
min = "-0.45 V"
max = "0.45 V"
frequency = "10 kHz"
[output]
gain = 10
load_resistance = "10k"
[supply]
positive = "5 V"
negative = "-5 V"
[network]
rf = "9k"
rg = "1k"
"""
FREQUENCY, PEAK, NOISE_GAIN, EPSILON = 1e4, 4.5, 10.0, 0.01


@pytest.fixture
def library():
    return parse_library(LIBRARY, "invented.csv")


@pytest.fixture
def brief():
    return parse_brief(BRIEF, "invented.toml")


def check(result, name):
    frame = result.checks()
    return frame[frame["check"] == name].iloc[0]


def required_gbw_by_control(aol: float) -> float:
    """GBW (Hz) at which the closed-loop amplitude error at 10 kHz is exactly 1 %,
    from python-control's frequency response of A(s) = A_OL/(1 + s·A_OL/(2π·GBW)) in
    the loop G/(1 + NG/A), solved with scipy's brentq (METHOD §2, outside check)."""
    def error(gbw):
        amp = control.tf([aol], [aol / (2 * np.pi * gbw), 1])
        closed = control.feedback(amp, 1 / NOISE_GAIN)  # A/(1 + A/NG) = NG·(1/(1+NG/A))
        magnitude = abs(complex(closed(2j * np.pi * FREQUENCY)))
        return 1 - magnitude / NOISE_GAIN - EPSILON
    return brentq(error, 1e5, 1e9, xtol=1e-6)


def test_pass_with_hand_margins(library, brief):
    result = qualify("ZT-1001", brief, library)
    assert result.verdict == "qualifies" and result.exit_status == 0
    # slew: SR_min = 2π·f·Vp = 2π·10 kHz·4.5 V = 282.7 kV/s (METHOD §2; textbook)
    slew_min = 2 * math.pi * FREQUENCY * PEAK
    row = check(result, "slew")
    assert row["required"] == pytest.approx(slew_min, rel=1e-12)
    assert row["margin"] == pytest.approx(2.0e6 / slew_min, rel=1e-12)  # 7.07×
    # gain accuracy against python-control + brentq with A_OL = 120 dB = 1e6
    row = check(result, "gain_accuracy")
    assert row["margin"] == pytest.approx(10e6 / required_gbw_by_control(1e6), rel=1e-6)
    # output swing: 0.5 V left to each rail, part needs 0.1 V → 0.4 V (METHOD §3)
    assert check(result, "output_swing")["margin"] == pytest.approx(0.4, abs=1e-12)
    # input common mode: −0.45 V is 4.55 V above V−, part needs 1.0 V → 3.55 V
    assert check(result, "input_common_mode")["margin"] == pytest.approx(3.55, abs=1e-12)
    # drive: 4.5 V/10 kΩ load + 4.5 V/(9 k + 1 k) network = 0.9 mA; 20 mA / 0.9 mA
    assert check(result, "output_drive")["margin"] == pytest.approx(20e-3 / 0.9e-3, rel=1e-9)
    frame = result.checks()
    assert set(frame["status"]) <= {"pass", "n/a"}
    assert frame.loc[frame["check"] == "slew", "columns"].iloc[0] == "slew"
    # alternatives: the top three of the shortlist other than the part itself
    alternatives = result.alternatives()
    assert "ZT-1001" not in set(alternatives["part"])
    assert len(alternatives) == 1  # only ZT-1005 also qualifies (1002/1003 fail, 1004 unknown)


def test_fail_by_slew_with_reason(library, brief):
    result = qualify("zt1002", brief, library)
    assert result.verdict == "fails" and result.exit_status == 1
    frame = result.checks()
    assert frame.iloc[0]["check"] == "slew" and frame.iloc[0]["status"] == "fail"
    slew_min = 2 * math.pi * FREQUENCY * PEAK
    assert frame.iloc[0]["margin"] == pytest.approx(0.2e6 / slew_min, rel=1e-12)  # 0.707×
    assert frame.iloc[0]["reason"] == "slew: needs 0.283 V/µs, part gives 0.2 V/µs"
    alternatives = result.alternatives()
    assert set(alternatives["part"]) == {"ZT-1001", "ZT-1005"}  # the two that qualify
    assert alternatives["score"].is_monotonic_decreasing  # best first


def test_fail_by_swing_with_reason(library, brief):
    result = qualify("ZT-1003", brief, library)
    first = result.checks().iloc[0]
    assert first["check"] == "output_swing" and first["status"] == "fail"
    # high side: 0.5 V left below V+, part needs 1.2 V → −0.7 V (METHOD §3)
    assert first["margin"] == pytest.approx(-0.7, abs=1e-12)
    assert first["reason"] == ("output_swing: the output comes within 500 mV of a rail, "
                               "the part needs 1.2 V (short by 700 mV)")


def test_unknown_by_missing_data(library, brief):
    result = qualify("ZT-1004", brief, library)
    assert result.verdict == "unknown" and result.exit_status == 1
    first = result.checks().iloc[0]
    assert first["check"] == "phase_margin" and first["status"] == "unknown"
    assert first["reason"] == "phase_margin: unknown, the library row has no pm"


def test_json_shape_is_a_shortlist_entry_plus_match(library, brief):
    data = qualify("ZT-1O01", brief, library).to_dict()  # letter O: a fuzzy match
    assert data["query"] == "ZT-1O01" and data["matched"] == "ZT-1001"
    assert 80 <= data["match_score"] < 100
    for key in ("part", "score", "binding", "checks", "alternatives", "verdict"):
        assert key in data
    assert data["checks"]["slew"]["unit"] == "V/s"
    assert [a["part"] for a in data["alternatives"]] == ["ZT-1005"]


def test_cli_exit_statuses_and_match_note(cli, write, library):
    lib = write("invented.csv", LIBRARY)
    brief = write("channel.toml", BRIEF)
    code, out, err = cli("qualify", "ZT-1001", brief, "--library", lib, "--no-color")
    assert code == 0 and "QUALIFIES" in out and err == ""
    code, out, err = cli("qualify", "zt 1002 soic-8", brief, "--library", lib)
    assert code == 1 and "matched" not in err  # exact after normalising: silent
    code, out, err = cli("qualify", "ZT-1O02", brief, "--library", lib)
    assert code == 1 and "matched 'ZT-1O02' to ZT-1002" in err
    code, out, err = cli("qualify", "ZT-100", brief, "--library", lib)
    assert code == 2 and "ambiguous" in err and "Traceback" not in err
    code, data = cli.json("qualify", "ZT-1004", brief, "--library", lib)
    assert code == 1 and data["unknown"] == ["phase_margin"]
    code, out, _ = cli("qualify", "ZT-1003", brief, "--library", lib, "--format", "csv")
    assert code == 1 and out.splitlines()[1].startswith("output_swing,check,fail")


# ------------------------------------------------------------------ recheck
def design(write, name, part):
    return write(f"{name}.toml", f'part = "{part}"\n' + BRIEF.replace(
        'name = "invented gain-10 sine channel"', f'name = "{name}"'))


def test_recheck_statuses(tmp_path, write, library):
    for name, part in [("a", "ZT-1001"), ("b", "ZT-1002"), ("c", "ZT-9999"),
                       ("d", "ZT-1006"), ("e", "ZT-1004")]:
        design(write, name, part)
    frame = recheck([tmp_path], library).set_index("design")
    assert frame.loc["a", "status"] == QUALIFIES
    assert frame.loc["a", "binding"] == qualify("ZT-1001", parse_brief(BRIEF), library) \
        .shortlist.qualifying.set_index("part").loc["ZT-1001", "binding"]
    assert frame.loc["b", "status"] == FAILS and frame.loc["b", "binding"] == "slew"
    slew_min = 2 * math.pi * FREQUENCY * PEAK
    assert frame.loc["b", "margin"] == pytest.approx(0.2e6 / slew_min, rel=1e-12)
    assert frame.loc["c", "status"] == MISSING_PART
    assert frame.loc["d", "status"] == NOT_ACTIVE
    assert frame.loc["e", "status"] == UNKNOWN_DATA


def test_recheck_cli_exit_statuses(cli, write, tmp_path):
    lib = write("invented.csv", LIBRARY)
    good = design(write, "good", "ZT-1001")
    assert cli("recheck", good, "--library", lib)[0] == 0
    design(write, "bad", "ZT-1002")
    code, data = cli.json("recheck", tmp_path, "--library", lib)
    assert code == 1 and data["all_qualify"] is False
    assert sorted(d["status"] for d in data["designs"]) == [FAILS, QUALIFIES]
    plain = write("plain.toml", BRIEF)
    code, out, err = cli("recheck", plain, "--library", lib)
    assert code == 2 and "key 'part'" in err


def test_recheck_reports_every_bad_file(write, library):
    broken = write("broken.toml", 'part = "ZT-1001"\ntopology = "sideways"\n')
    with pytest.raises(InputError) as caught:
        recheck([broken, broken.parent / "absent.toml"], library)
    text = caught.value.render()
    assert "absent.toml" in text and "no such file" in text
