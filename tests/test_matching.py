"""Fuzzy part matching (selector.matching).  All keys are invented.

Scores are checked against Python's difflib.SequenceMatcher, an independent
implementation of the same similarity 2·M/T (M matching characters, T the total
length), which equals rapidfuzz's fuzz.ratio (normalised Indel similarity) for
these strings.
"""
from __future__ import annotations

import difflib

import pandas as pd
import pytest

from selector.errors import InputError
from selector.matching import (ACCEPT, LEAD, match_part, normalise_part,
                               strip_package)

KEYS = pd.Series(["ZT-4410", "ZT-4412", "QV-2318", "QV-2319", "KX-7100", "MRW-5160",
                  "BW-6021", "BW-6021B"])
PACKAGES = ["sot235", "soic8", "tssop14"]


def reference_ratio(a: str, b: str) -> float:
    """2·M/T as a percentage, from the standard library (outside rapidfuzz)."""
    return 100 * difflib.SequenceMatcher(None, a, b).ratio()


@pytest.mark.parametrize("typed", ["ZT-4410", "zt-4410", "zt 4410", "ZT4410", " Zt_4410 ",
                                   "zt.4410"])
def test_case_space_dash_variants_match_silently(typed):
    match = match_part(typed, KEYS, PACKAGES)
    assert match.key == "ZT-4410"
    assert match.exact and match.score == 100.0
    assert match.note() is None


@pytest.mark.parametrize("typed", ["QV-2318-SOIC8", "QV2318/TSSOP-14", "qv-2318 sot23-5",
                                   "QV-2318 SOIC-8", "QV-2318-QFN16"])
def test_package_suffixes_are_ignored(typed):
    match = match_part(typed, KEYS, PACKAGES)
    assert match.key == "QV-2318" and match.exact


def test_suffix_letter_is_part_of_the_key_not_a_package():
    # "B" is a grade letter, not a package: BW-6021B must stay distinct from BW-6021
    assert match_part("bw6021b", KEYS, PACKAGES).key == "BW-6021B"
    assert match_part("BW-6021", KEYS, PACKAGES).key == "BW-6021"
    assert strip_package("bw6021b", PACKAGES) == "bw6021b"


def test_strip_package_never_eats_a_whole_key():
    assert strip_package("soic8") == "soic8"  # no digit would be left
    assert strip_package("zt4410soic8") == "zt4410"
    assert normalise_part("ZT-4410 / TSSOP-14") == "zt4410"


def test_close_match_is_used_with_a_visible_note():
    match = match_part("MRW-516", KEYS, PACKAGES)
    assert match.key == "MRW-5160" and not match.exact
    # 'mrw516' vs 'mrw5160': M = 6, T = 13 → 92.3 (difflib, independent)
    assert match.score == pytest.approx(reference_ratio("mrw516", "mrw5160"), abs=1e-9)
    assert match.score == pytest.approx(200 * 6 / 13, abs=1e-9)
    assert match.note() == "matched 'MRW-516' to MRW-5160 (score 92)"


def test_typo_in_a_digit_is_accepted_when_clearly_ahead():
    match = match_part("KX-71O0", KEYS, PACKAGES)  # letter O for zero
    assert match.key == "KX-7100"
    assert match.score == pytest.approx(reference_ratio("kx71o0", "kx7100"), abs=1e-9)
    assert match.score >= ACCEPT


def test_ambiguous_input_lists_the_candidates_with_scores():
    with pytest.raises(InputError) as caught:
        match_part("QV-231", KEYS, PACKAGES, source="lib.csv")
    message = caught.value.render()
    assert "ambiguous" in message and "lib.csv" in message and "part 'QV-231'" in message
    score = reference_ratio("qv231", "qv2318")  # 2·5/11 = 90.9 for both keys
    assert f"QV-2318 ({score:.0f})" in message and f"QV-2319 ({score:.0f})" in message


def test_near_tie_between_grades_is_ambiguous_not_a_guess():
    # 'bw6021c' is 92.3 from BW-6021 and 85.7 from BW-6021B: a lead under LEAD points
    lead = reference_ratio("bw6021c", "bw6021") - reference_ratio("bw6021c", "bw6021b")
    assert 0 < lead < LEAD
    with pytest.raises(InputError, match="ambiguous"):
        match_part("BW-6021C", KEYS, PACKAGES)


def test_no_match_is_an_error_naming_the_closest():
    with pytest.raises(InputError) as caught:
        match_part("HP-9", KEYS, PACKAGES)
    message = caught.value.render()
    assert "no part of that name" in message and "closest:" in message


def test_empty_query_and_empty_library_are_errors():
    with pytest.raises(InputError, match="empty part name"):
        match_part("  ", KEYS)
    with pytest.raises(InputError, match="no parts"):
        match_part("ZT-4410", pd.Series([], dtype=object))


def test_keys_equal_after_normalising_are_ambiguous():
    keys = pd.Series(["ZT-4410", "zt 4410"])
    with pytest.raises(InputError, match="same after normalising"):
        match_part("ZT4410", keys)
    # spelled exactly as one of them: that one, without asking
    assert match_part("zt 4410", keys).position == 1
