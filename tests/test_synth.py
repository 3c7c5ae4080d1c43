"""The synthetic library generator (selector.synth).  All parts are invented.

The generated figures are checked against what the trade expects of op-amp families
(common practice: slew rate and supply current grow with GBW, zero-drift parts have
µV offsets and nV/°C drift, CMOS inputs have pA bias) and against physics (current
noise from the shot noise of the bias current, 2qI, with q from scipy.constants).
"""
from __future__ import annotations

import io
import re
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from scipy import constants, stats

from selector import synth
from selector.library import COLUMNS, normalise_key

N = 3000


@pytest.fixture(scope="module")
def generated():
    return synth.generate(N, seed=11)


@pytest.fixture(scope="module")
def library(generated):
    return generated.to_library("synthetic.csv")  # strict: raises on any problem


def text_of(generated) -> str:
    return generated.to_text()


def test_same_seed_same_file_other_seed_other_file():
    assert text_of(synth.generate(400, seed=3)) == text_of(synth.generate(400, seed=3))
    assert text_of(synth.generate(400, seed=3)) != text_of(synth.generate(400, seed=4))


def test_columns_are_those_of_the_demo_library(generated):
    with open(synth.__file__.replace("selector/synth.py", "data/demo_library.csv"),
              encoding="utf-8") as demo:
        demo_header = demo.readline().strip().split(",")
    assert generated.header() == demo_header
    assert set(generated.cells.columns) <= set(COLUMNS)


def test_loads_strictly_with_every_row_and_no_problem(library):
    assert len(library) == N
    assert library.problems == []


def test_keys_are_invented_letters_dash_digits_and_distinct(generated):
    keys = pd.Series(generated.cells["part"])
    # the project's key form LETTERS-DIGITS (a planted copy may carry one suffix letter)
    assert keys.str.fullmatch(r"[A-Z]{2,3}-\d{4,6}[A-Z]?").all()
    assert not normalise_key(keys).duplicated().any()
    assert set(keys.str.split("-").str[0]) <= set(synth.PREFIXES)


def test_cells_are_written_in_the_mixed_notations_people_type(generated):
    gbw, slew = generated.cells["gbw"], generated.cells["slew"]
    bare = gbw[gbw != ""].str.fullmatch(r"[\d.]+")
    assert 0.5 < bare.mean() < 0.9  # most cells are bare numbers under the header unit
    for pattern in (r"\dMHz$", r"\d MHz$", r"\d kHz$", r"\dkHz$"):
        assert gbw.str.contains(pattern).sum() > 10, pattern
    for pattern in (r"\d V/µs$", r"\dV/us$", r"\d V/us$", r"\d V/ms$"):
        assert slew.str.contains(pattern).sum() > 10, pattern


def test_cells_parse_back_to_the_generated_figures(generated, library):
    # 3 significant figures: rounding error at most half a unit in the third digit,
    # i.e. a relative error below 0.5 % (arithmetic of rounding)
    for name in ("gbw", "slew", "vos", "vos_drift", "ib", "en", "in", "iq", "ro",
                 "cin_cm", "swing_low", "iout", "aol", "unit_cost"):
        parsed = library.column(name)
        drawn = generated.values[name].to_numpy(dtype=float)
        assert np.array_equal(np.isnan(parsed), np.isnan(drawn)), name
        present = ~np.isnan(drawn)
        assert np.max(np.abs(parsed[present] / drawn[present] - 1)) <= 5e-3, name
    assert np.array_equal(library.column("temp_min"), generated.values["temp_min"])


def test_optional_fields_are_sometimes_missing_required_never(library):
    table = library.table
    for name, share in synth.MISSING.items():
        if COLUMNS[name].dimension in ("text",):
            empty = (table[name] == "").mean()
        else:
            empty = np.isnan(library.column(name)).mean()
        # binomial spread at N = 3000 is below 0.6 % for these shares
        assert abs(empty - share) < 0.02, name
    for name in ("part", "supply_min", "supply_max"):
        assert not (table[name].isna() | (table[name].astype(str) == "")).any()


def test_slew_and_supply_current_track_gbw(library):
    gbw, slew, iq = (np.log10(library.column(c)) for c in ("gbw", "slew", "iq"))
    both = ~np.isnan(gbw) & ~np.isnan(slew)
    # common practice: slew rate scales with GBW within a family (SR ≈ 0.5–1.5 V/µs per
    # MHz); across the families the log-log correlation is strong
    assert stats.pearsonr(gbw[both], slew[both]).statistic > 0.9
    both = ~np.isnan(gbw) & ~np.isnan(iq)
    assert stats.pearsonr(gbw[both], iq[both]).statistic > 0.6


def test_family_figures_are_those_of_the_trade(library):
    table = library.table
    family = table["family"]
    zero = (family == "zero-drift precision").to_numpy()
    cmos = (family == "low-power CMOS RRIO").to_numpy()
    bipolar = (family == "general-purpose bipolar").to_numpy()
    vos, drift, ib = (library.column(c) for c in ("vos", "vos_drift", "ib"))
    # zero-drift: offset of a few µV, drift in the tens of nV/°C (common practice)
    assert np.nanmedian(vos[zero]) < 20e-6 and np.nanmedian(drift[zero]) < 0.2e-6
    assert np.nanmedian(vos[bipolar]) > 200e-6 and np.nanmedian(drift[bipolar]) > 1e-6
    # CMOS inputs: pA bias; bipolar inputs: tens of nA (common practice)
    assert np.nanmedian(ib[cmos]) < 10e-12
    assert 10e-9 < np.nanmedian(ib[bipolar]) < 500e-9
    # rail-to-rail flags agree with the headroom figures
    rri, cm_low = library.column("rri"), library.column("cm_low")
    given = (rri == 1) & ~np.isnan(cm_low)
    assert given.sum() > 100 and np.all(cm_low[given] < 0)


def test_current_noise_follows_the_shot_noise_of_the_bias_current(library):
    ib, in_ = library.column("ib"), library.column("in")
    both = ~np.isnan(ib) & ~np.isnan(in_)
    shot = np.sqrt(2 * constants.e * ib[both])  # Schottky: i_n = sqrt(2 q I_b)
    ratio = in_[both] / shot
    assert 0.5 < np.median(ratio) < 5


def test_planted_near_duplicates_are_known_and_close(generated):
    planted = generated.planted
    assert len(planted) == N // 500
    keys = set(generated.cells["part"])
    assert set(planted["key_a"]) <= keys and set(planted["key_b"]) <= keys
    assert set(planted["kind"]) <= {"suffix", "swap", "extra"}
    values = generated.values.set_index("part")
    for a, b in zip(planted["key_a"], planted["key_b"]):
        assert normalise_key(pd.Series([a]))[0] != normalise_key(pd.Series([b]))[0]
        # one character inserted, or two adjacent digits swapped
        assert abs(len(a) - len(b)) <= 1
        same = [c for c in ("gbw", "slew", "supply_min", "aol", "iq", "ro")
                if np.isnan(values.at[a, c]) or np.isnan(values.at[b, c])
                or values.at[a, c] == values.at[b, c]]
        assert len(same) == 6


def test_command_line_writes_the_csv_and_the_planted_pairs(tmp_path):
    planted = tmp_path / "planted.csv"
    result = subprocess.run([sys.executable, "-m", "selector.synth", "600", "--seed", "2",
                             "--planted", str(planted)], capture_output=True, text=True,
                            check=False)
    assert result.returncode == 0
    frame = pd.read_csv(io.StringIO(result.stdout), dtype=str, keep_default_na=False)
    assert len(frame) == 600
    assert re.search(r"600 parts, 1 planted", result.stderr)
    assert list(pd.read_csv(planted).columns) == ["key_a", "key_b", "kind"]
    bad = subprocess.run([sys.executable, "-m", "selector.synth", "0"], capture_output=True,
                         text=True, check=False)
    assert bad.returncode == 2 and "Traceback" not in bad.stderr
