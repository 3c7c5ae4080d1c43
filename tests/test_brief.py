"""The brief: valid values in SI, and every bad input through the command line →
one message naming the file and key, exit status 2, no traceback.  Invented briefs."""
from __future__ import annotations

import math

import pytest

from selector.brief import parse_brief

from conftest import BASIC_BRIEF


def test_basic_brief_in_si():
    b = parse_brief(BASIC_BRIEF)
    assert (b.signal_min, b.signal_max, b.frequency, b.waveform) == (-0.1, 0.1, 1e3, "sine")
    assert (b.supply_positive, b.supply_negative, b.supply_span) == (5.0, -5.0, 10.0)
    assert (b.rf, b.rg, b.gain) == (9e3, 1e3, 10.0)
    # defaults of issue 2 item 4
    assert b.gain_error == 0.01 and b.phase_margin == 45.0
    assert b.slew_margin == b.gbw_margin == 1.0 and b.status == ("active",)
    assert math.isinf(b.load_resistance)


def test_units_and_dB_in_a_brief():
    text = BASIC_BRIEF.replace("gain = 10", 'gain = "20 dB"') + (
        '[limits]\nnoise_bandwidth = ["10 Hz", "20 kHz"]\ngain_error = "500 ppm"\n'
        'temperature_min = "233.15 K"\ntemperature_max = "85 C"\n')
    b = parse_brief(text)
    assert b.gain == pytest.approx(10.0)      # IEC 60027-3: 20 dB = 10 V/V
    assert b.noise_band == (10.0, 20e3)
    assert b.gain_error == pytest.approx(5e-4)
    assert b.temperature_min == pytest.approx(-40.0)


def _set(text: str, section: str, line: str) -> str:
    """Add ``line`` to ``[section]`` of ``text`` (appending the section if absent)."""
    header = f"[{section}]\n" if section else ""
    if section and header in text:
        return text.replace(header, header + line + "\n", 1)
    if not section:
        return line + "\n" + text
    return text + header + line + "\n"


def _replace(old: str, new: str):
    return lambda text: text.replace(old, new)


BAD_BRIEFS = [
    # (description, edit, key named in the message, fragment of the message)
    ("unknown key, did-you-mean", lambda t: _set(t, "signal", 'frequncy = "2 kHz"'),
     "signal.frequncy", "did you mean 'frequency'"),
    ("unknown section", lambda t: t + '[sigal]\nmin = "1 V"\n', "[sigal]",
     "unknown section (did you mean 'signal'"),
    ("wrong type, whole number", lambda t: _set(t, "", 'channels = "two"'),
     "channels", "expected a whole number"),
    ("wrong type, text", _replace('topology = "non-inverting"', "topology = 3"),
     "topology", "expected text"),
    ("wrong type, true/false", _replace('min = "-0.1 V"', "min = true"),
     "signal.min", "expected a quantity with its unit, got true/false"),
    ("wrong type, list", lambda t: t + '[limits]\nnoise_bandwidth = ["1 kHz"]\n',
     "limits.noise_bandwidth", "[low, high]"),
    ("channels below 1", lambda t: _set(t, "", "channels = 0"), "channels",
     "at least 1"),
    ("wrong unit", _replace('frequency = "1 kHz"', 'frequency = "1 V"'),
     "signal.frequency", "expected frequency"),
    ("bare number", _replace('positive = "5 V"', "positive = 5"),
     "supply.positive", "has no unit"),
    ("min > max", _replace('max = "0.1 V"', 'max = "-0.2 V"'),
     "signal.min", "must be below signal.max"),
    ("output min > max", _replace("gain = 10", 'min = "1 V"\nmax = "-1 V"'),
     "output.min", "must be below output.max"),
    ("follower gain 5", lambda t: t.replace('"non-inverting"', '"follower"')
     .replace("gain = 10", "gain = 5").replace('rf = "9k"\nrg = "1k"\n', ""),
     "output.gain", "a follower has gain 1"),
    ("non-inverting gain < 1", lambda t: t.replace("gain = 10", "gain = 0.5")
     .replace('rf = "9k"\nrg = "1k"\n', ""), "output.gain", "gain ≥ 1"),
    ("inverting with positive gain", _replace('"non-inverting"', '"inverting"'),
     "output.gain", "negative gain"),
    ("output outside the rails", lambda t: t.replace("gain = 10", "gain = 80")
     .replace('rf = "9k"', 'rf = "79k"'), "output.gain", "outside the supply rails"),
    ("Rf/Rg disagree > 0.5 %", _replace('rf = "9k"', 'rf = "9k2"'),
     "network.rf", "within 0.5 %"),
    # ±0.1 V → ±1 V asks for G = 10; 1 + 9.1k/1k = 10.1 is 1 % off
    ("Rf/Rg disagree with the output range", lambda t: t.replace(
        "gain = 10", 'min = "-1 V"\nmax = "1 V"').replace('rf = "9k"', 'rf = "9k1"'),
     "network.rf", "output.min/max asks for 10"),
    ("reference outside the rails", lambda t: _set(t, "network", 'reference = "7 V"'),
     "network.reference", "outside the supply rails"),
    ("zero frequency with a sine", lambda t: t.replace('frequency = "1 kHz"',
     'frequency = "0 Hz"\nwaveform = "sine"'), "signal.frequency", "above 0 Hz"),
    ("negative frequency", _replace('frequency = "1 kHz"', 'frequency = "-1 kHz"'),
     "signal.frequency", "must be positive"),
    ("negative source resistance", lambda t: _set(t, "signal",
     'source_resistance = "-1k"'), "signal.source_resistance", "must not be negative"),
    ("negative rg", _replace('rg = "1k"', 'rg = "-1k"'), "network.rg", "above 0"),
    ("temperature min > max", lambda t: t + '[limits]\ntemperature_min = "85 C"\n'
     'temperature_max = "-40 C"\n', "limits.temperature_min", "must not exceed"),
    ("gain error over 100 %", lambda t: t + '[limits]\ngain_error = "150 %"\n',
     "limits.gain_error", "between 0 and 100 %"),
    ("margin below 1", lambda t: t + "[margins]\nslew = 0.5\n", "margins.slew", "≥ 1"),
    ("bad status filter", lambda t: t + '[filters]\nstatus = ["current"]\n',
     "filters.status", "not one of active, nrnd, obsolete"),
    ("missing topology", _replace('topology = "non-inverting"\n', ""),
     "topology", "missing required key"),
    ("bad topology, did-you-mean", _replace('"non-inverting"', '"noninverting"'),
     "topology", "did you mean 'non-inverting'"),
    ("invalid TOML", lambda t: t + "this is = = not toml\n", "", "invalid TOML"),
]


@pytest.mark.parametrize("edit, key, fragment",
                         [case[1:] for case in BAD_BRIEFS],
                         ids=[case[0] for case in BAD_BRIEFS])
def test_bad_brief_exits_2_with_one_located_message(cli, write, edit, key, fragment):
    path = write("bad.toml", edit(BASIC_BRIEF))
    before = path.read_bytes()
    code, out, err = cli("derive", path)
    assert code == 2
    assert out == ""
    assert "Traceback" not in err
    assert err.startswith("selector: error: ")
    assert str(path) in err                      # the file
    if key:
        assert (f"key '{key}'" in err) or (key in err)   # the key
    assert fragment in err
    assert len(err.strip().splitlines()) == 1    # one message
    assert path.read_bytes() == before           # the brief is never written


def test_good_brief_through_the_command_line(cli, write):
    code, data = cli.json("derive", write("good.toml", BASIC_BRIEF))
    assert code == 0
    # §2: 1 kHz at Vp = 10·0.2/2 = 1 V: SR_min = 2π·1e3·1 = 6283.2 V/s
    assert data["slew_min"] == pytest.approx(2 * math.pi * 1e3)
    assert data["gain"] == 10 and data["noise_gain"] == 10
