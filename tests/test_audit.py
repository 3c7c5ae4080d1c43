"""The library audit: data quality, duplicates, coverage and redundancy.

Every part and figure here is invented (demo/defects_library.csv plants one defect
of each kind; the random libraries are generated in the tests).  Coverage counts and
dominance are checked against brute-force evaluations: the single-brief solver
(derive + ranking.shortlist) run once per profile, and a plain pairwise loop.
"""
from __future__ import annotations

import dataclasses
import difflib
import math

import numpy as np
import pandas as pd
import pytest
from rapidfuzz.distance import OSA
from rapidfuzz.process import cdist

from selector.audit import (audit, candidate_pairs, data_quality, dominance_parameters,
                            dominated, exact_duplicates, goodness, near_duplicates,
                            plausibility_findings)
from selector.coverage import coverage_grid, standard_grid, standard_profiles
from selector.library import STATUSES, Library, load_library
from selector.ranking import shortlist
from selector.requirements import derive

from conftest import DEMO_BRIEFS, DEMO_LIBRARY, ROOT

DEFECTS = ROOT / "demo" / "defects_library.csv"

# (row, column, kind) of every planted defect in demo/defects_library.csv
PLANTED = [
    (3, "part", "duplicate key"), (5, "gbw", "unparseable"), (6, "gbw", "unparseable"),
    (7, "slew", "wrong dimension"), (8, "supply_min", "impossible value"),
    (9, "swing_low", "implausible"), (10, "en", "impossible value"),
    (11, "cin_cm", "implausible"), (11, "cin_diff", "implausible"),
    (12, "cm_high", "inconsistent"), (13, "slew", "implausible"),
    (14, "vos_drift", "missing"), (14, "pm", "missing"), (14, "en_corner", "missing"),
    (15, "status", "impossible value"), (18, "swing_high", "inconsistent"),
    (19, "rri", "unparseable"), (20, "iq", "unparseable"),
]


@pytest.fixture(scope="module")
def defects():
    return load_library(DEFECTS, strict=False)


@pytest.fixture(scope="module")
def demo():
    return load_library(DEMO_LIBRARY)


# ------------------------------------------------------------------ data quality
def test_every_planted_defect_is_found_with_row_and_column(defects):
    found = data_quality(defects)
    located = set(zip(found["row"], found["column"], found["kind"]))
    for planted in PLANTED:
        assert planted in located, planted
    errors = found[found["severity"] == "error"]
    assert (14, "pm") not in set(zip(errors["row"], errors["column"]))  # missing: a warning
    # the part column names the row's key
    assert found.loc[(found["row"] == 13) & (found["column"] == "slew"), "part"].item() \
        == "YGZ-4063"


def test_plausibility_checks_stand_on_their_own(defects):
    own = plausibility_findings(defects)
    located = set(zip(own["row"], own["column"]))
    for cell in [(9, "swing_low"), (11, "cin_cm"), (11, "cin_diff"), (12, "cm_high"),
                 (13, "slew"), (18, "swing_high")]:
        assert cell in located, cell
    # values the lenient loader blanks are still caught when a table carries them
    table = pd.DataFrame({"part": ["ZT-1", "ZT-2", "ZT-3"],
                          "supply_min": [12.0, 1.8, 1.8], "supply_max": [5.0, 5.5, 5.5],
                          "en": [8e-9, -8e-9, 8e-9], "in": [1e-15, 1e-15, -1e-15],
                          "cin_cm": [3e-12, 3e-12, 0.0]})
    raw = plausibility_findings(Library("<raw>", table, np.array([2, 3, 4])))
    assert {(2, "supply_min"), (3, "en"), (4, "in"), (4, "cin_cm")} <= set(
        zip(raw["row"], raw["column"]))
    message = own.loc[(own["row"] == 13) & (own["column"] == "slew"), "message"].item()
    # SR/(2π·GBW) = 10 kV/s / (2π·500 MHz) = 3.18 µV (hand computation)
    assert f"{1e4 / (2 * math.pi * 500e6) * 1e6:.3g} µV" in message


def test_missing_fields_name_the_checks_they_disable(defects):
    found = data_quality(defects)
    row = found[(found["row"] == 14) & (found["column"] == "pm")].iloc[0]
    assert "phase_margin" in row["message"]
    row = found[(found["row"] == 14) & (found["column"] == "vos_drift")].iloc[0]
    assert "dc_error" in row["message"]


def test_a_cell_is_reported_once(defects):
    found = data_quality(defects)
    assert not found.duplicated(["row", "column"]).any()


# ------------------------------------------------------------------ duplicates
def test_exact_and_near_duplicates_in_the_defects_library(defects):
    exact = exact_duplicates(defects)
    assert exact[["row", "first_row"]].values.tolist() == [[3, 2]]
    near = near_duplicates(defects)
    pair = near[(near["part_a"] == "ZT-4410") & (near["part_b"] == "ZT-4410A")].iloc[0]
    # 'zt4410' vs 'zt4410a': 2·6/13 = 92.3 (difflib, independent of rapidfuzz)
    reference = 100 * difflib.SequenceMatcher(None, "zt4410", "zt4410a").ratio()
    assert pair["score"] == pytest.approx(reference, abs=0.05)
    assert pair["kind"] == "near" and pair["differing"] == "vos, unit_cost"
    assert near.attrs["pairs_compared"] < len(defects) * (len(defects) - 1) / 2


def random_library(count: int, planted: int, seed: int = 7):
    """An invented library of ``count`` parts, ``planted`` of them re-entered copies
    under a near key (suffix letter, last two digits swapped, a digit added)."""
    rng = np.random.default_rng(seed)
    prefixes = np.array(["QX", "ZV", "JW", "XKQ", "VZ"])
    numbers = rng.choice(np.arange(1000, 99999), size=count - planted, replace=False)
    keys = [f"{prefixes[i % len(prefixes)]}-{n}" for i, n in enumerate(numbers)]
    columns = ["gbw", "slew", "vos", "ib", "en", "in", "iq", "aol", "cin_cm", "iout"]
    values = {c: rng.lognormal(0, 1, count - planted) for c in columns}
    source = rng.choice(count - planted, size=planted, replace=False)
    new, pairs = [], []
    taken = {k.lower().replace("-", "") for k in keys}
    for i, s in enumerate(source):
        head, digits = keys[s].split("-")
        options = [f"{head}-{digits}{'ABCRX'[i % 5]}",
                   f"{head}-{digits[:-2]}{digits[-1]}{digits[-2]}",
                   f"{head}-{digits}{i % 10}"]
        key = next(o for o in options[i % 3:] + options
                   if o.lower().replace("-", "") not in taken and o != keys[s])
        taken.add(key.lower().replace("-", ""))
        new.append(key)
        pairs.append((keys[s], key))
    table = pd.DataFrame({c: np.concatenate([v, v[source]]) for c, v in values.items()})
    table.loc[count - planted:, "vos"] *= 1.2  # a re-entered row: one figure differs
    table.insert(0, "part", keys + new)
    table["package"] = "SOIC-8"
    table["channels"] = 1.0
    table["status"] = "active"
    return Library("<random>", table, np.arange(2, count + 2)), pairs


def test_near_duplicates_recall_and_indexing():
    library, planted = random_library(4000, 80)
    near = near_duplicates(library)
    found = set(zip(near["part_a"], near["part_b"])) | set(zip(near["part_b"], near["part_a"]))
    assert all(p in found for p in planted)  # recall 100 % of the planted pairs
    assert len(near) == len(planted)  # and no unrelated pair with other figures
    # an index, not all pairs: a few per key instead of N(N−1)/2 ≈ 8 million
    assert near.attrs["pairs_compared"] <= 20 * len(library)


def test_candidate_index_misses_no_pair_one_edit_apart():
    library, _ = random_library(400, 10, seed=3)
    keys = library.table["part"].str.lower().str.replace("-", "").tolist()
    found = {tuple(p) for p in candidate_pairs(keys).tolist()}
    # brute force over all pairs: optimal string alignment distance (insertion,
    # deletion, substitution, adjacent swap) from rapidfuzz's distance module
    distance = cdist(keys, keys, scorer=OSA.distance, dtype=np.int32)
    brute = {(i, j) for i, j in zip(*np.nonzero(distance <= 1)) if i < j}
    assert brute and brute <= found


# ------------------------------------------------------------------ coverage
def brute_force_counts(brief, library):
    """The single-brief solver, once with the brief's status filter and once with
    every status allowed (grouped by status)."""
    plain = shortlist(derive(brief), library)
    every = shortlist(derive(dataclasses.replace(brief, status=STATUSES)), library)
    status = library.table["status"].to_numpy()[every.qualifying["position"].to_numpy()]
    return (plain.counts["qualifying"], plain.counts["unknown"],
            *(int((status == s).sum()) for s in STATUSES))


@pytest.fixture(scope="module")
def small(demo):
    """26 parts of the demo library, legacy parts and missing data included."""
    picked = demo.table.index[::2][:26]
    table = demo.table.loc[picked].reset_index(drop=True)
    return Library("<small>", table, demo.rows[picked])


def test_standard_grid_matches_the_single_brief_solver_cell_by_cell(small):
    grid = coverage_grid(small, chunk=7)  # several chunks, the last one short
    assert len(grid) == 6 * 5 * 3
    for brief, row in zip(standard_profiles(), grid.itertuples()):
        got = (row.qualifying, row.unknown, row.active, row.nrnd, row.obsolete)
        assert got == brute_force_counts(brief, small), row.profile
    assert grid["gap"].equals(grid["qualifying"] == 0)


def test_saved_briefs_as_the_grid_match_the_solver(small):
    from selector.audit import load_briefs
    briefs = load_briefs(DEMO_BRIEFS)
    grid = coverage_grid(small, briefs)
    for brief, row in zip(briefs, grid.itertuples()):
        got = (row.qualifying, row.unknown, row.active, row.nrnd, row.obsolete)
        assert got == brute_force_counts(brief, small), row.profile


def test_standard_profiles_span_the_grid():
    grid = standard_grid()
    row = grid[(grid["supply"] == "±15 V") & (grid["bandwidth"] == "1 MHz")
               & (grid["precision"] == "1 mV")].iloc[0]
    req = derive(row["brief"])
    # output 10 %–90 % of a 30 V span: −12 V to +12 V, gain 10 (from the issue)
    assert req.output_range == pytest.approx((-12.0, 12.0))
    assert req.gain == pytest.approx(10.0)
    # SR_min = 2π·1 MHz·12 V = 75.4 V/µs (METHOD §2)
    assert req.slew_min == pytest.approx(2 * math.pi * 1e6 * 12.0, rel=1e-12)
    assert req.dc_error_budget == pytest.approx(1e-3)


# ------------------------------------------------------------------ redundancy
def brute_dominated(library):
    """Pairwise definition: same package and channels, both active, B no better than
    A on every checked figure (and no cheaper), A better on one or earlier."""
    parameters = dominance_parameters()
    good = goodness(library, parameters)
    table = library.table
    active = table["status"].str.lower() == "active"
    out = set()
    for b in range(len(table)):
        for a in range(len(table)):
            if a == b or not (active[a] and active[b]):
                continue
            if table["package"][a].lower() != table["package"][b].lower():
                continue
            if table["channels"][a] != table["channels"][b]:
                continue
            if all(good[a, k] >= good[b, k] for k in range(len(parameters))) and (
                    any(good[a, k] > good[b, k] for k in range(len(parameters))) or a < b):
                out.add(table["part"][b])
    return out


def test_dominance_matches_a_pairwise_loop(demo):
    assert set(dominated(demo)["part"]) == brute_dominated(demo)


def test_dominance_matches_a_pairwise_loop_on_a_random_library():
    # invented figures on coarse grids, so ties, equal rows and gaps are common
    rng = np.random.default_rng(11)
    count = 80
    table = pd.DataFrame({
        "part": [f"ZQ-{1000 + i}" for i in range(count)],
        "gbw": rng.choice([1e6, 2e6, 4e6], count), "slew": rng.choice([1e6, 2e6], count),
        "supply_min": rng.choice([1.8, 2.7], count), "supply_max": 5.5,
        "vos": rng.choice([1e-4, -2e-4, 5e-4, np.nan], count),
        "iq": rng.choice([1e-4, 2e-4], count), "unit_cost": rng.choice([0.5, 1.0], count),
        "package": rng.choice(["SOT23-5", "sot23-5", "MSOP-8"], count),
        "channels": rng.choice([1.0, 2.0], count),
        "status": rng.choice(["active", "active", "active", "nrnd"], count)})
    library = Library("<random>", table, np.arange(2, count + 2))
    found = dominated(library)
    assert len(found) > 5  # the coarse grid makes dominance common
    assert set(found["part"]) == brute_dominated(library)


def test_dominance_includes_cost_and_every_checked_column():
    parameters = dominance_parameters()
    for column in ("unit_cost", "gbw", "slew", "vos", "pm", "iq", "temp_max"):
        assert column in parameters


# ------------------------------------------------------------------ whole audit
def test_demo_library_audit_shows_the_planted_cases(demo):
    result = audit(DEMO_LIBRARY)
    near = result.near[result.near["kind"] == "near"]
    assert {"BW-6021", "BW-6021B"} == set(near.iloc[0][["part_a", "part_b"]])
    row = result.dominated.set_index("part").loc["TW-3425"]
    assert row["by_part"] == "FH-3420"
    summary = result.summary
    assert summary["gaps"] >= 1 and summary["single_source"] >= 1
    assert summary["errors"] == 0
    assert result.exit_status == 1  # gaps exist


CLEAN = """\
part,gbw [MHz],slew [V/us],supply_min [V],supply_max [V],swing_low [mV],swing_high [mV],cm_low [V],cm_high [V],rri,rro,vos [uV],vos_drift [uV/C],ib [pA],aol [dB],pm [deg],en [nV/rtHz],in [fA/rtHz],en_corner [Hz],cin_cm [pF],cin_diff [pF],ro [ohm],iout [mA],iq [mA],temp_min [C],temp_max [C],channels,package,status,unit_cost
ZT-9001,300,300,1.6,40,5,5,-0.1,-0.1,yes,yes,5,0.01,5,140,70,5,10,10,2,2,20,100,5,-40,125,1,SOIC-8,active,9.00
KQ-5530,320,280,1.6,40,6,6,-0.1,-0.1,yes,yes,4,0.02,8,138,72,6,12,12,2,2,25,90,5.5,-40,125,1,SOT23-5,active,9.50
"""


def test_clean_library_exits_zero(cli, write):
    path = write("clean.csv", CLEAN)
    result = audit(path)
    assert result.summary["errors"] == 0 and result.summary["gaps"] == 0
    code, out, err = cli("audit", "--library", path)
    assert code == 0 and err == ""


def test_cli_audit_of_the_defects_library(cli):
    code, data = cli.json("audit", "--library", DEFECTS)
    assert code == 1
    assert data["summary"]["errors"] >= 14 and data["summary"]["exact_duplicates"] == 1
    located = {(f["row"], f["column"]) for f in data["data_quality"]}
    assert all((r, c) in located for r, c, _ in PLANTED)
    assert {"exact", "near", "pairs_compared"} <= set(data["duplicates"])
    code, out, _ = cli("audit", "--library", DEFECTS, "--format", "csv")
    assert code == 1 and out.startswith("section,row,column,part")
    code, out, _ = cli("audit", "--library", DEFECTS, "--format", "markdown")
    assert "## Coverage" in out and "| 1 mV | ±15 V |" in out


def test_plot_is_written_atomically_and_never_over_a_file(cli, tmp_path):
    pytest.importorskip("matplotlib")
    target = tmp_path / "coverage.png"
    code, _, err = cli("audit", "--plot", target)
    assert code == 1 and target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature
    assert sorted(p.name for p in tmp_path.iterdir()) == ["coverage.png"]  # no leftovers
    before = target.read_bytes()
    code, _, err = cli("audit", "--plot", target)
    assert code == 2 and "--force" in err and target.read_bytes() == before
    code, _, _ = cli("audit", "--plot", target, "--force")
    assert code == 1
    code, _, err = cli("audit", "--plot", tmp_path / "coverage.gif")
    assert code == 2 and ".png or .svg" in err
    svg = tmp_path / "briefs.svg"
    code, _, _ = cli("audit", "--briefs", DEMO_BRIEFS, "--plot", svg)
    assert code == 0 and svg.read_text().lstrip().startswith(("<?xml", "<svg"))
