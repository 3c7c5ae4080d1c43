"""The benchmark's equivalence assertions at a small N (no timing here).

The engine's vectorised shortlist must give the identical qualifying set and order
as the straightforward per-row implementation in tests/bench/bench_reference.py, whose
loop-gain crossover comes from scipy.optimize.brentq per part (a reference root
finder, independent of the engine's bisection); its closed-form checks must select
the identical set as the same checks written as one SQL query and run by sqlite3 and
by DuckDB (reference query engines); the coverage grid must give the counts of a
shortlist per profile; the near-duplicate search must find the planted pairs.
The library is invented (selector.synth).
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent / "bench"))

import bench_reference as reference  # noqa: E402
import bench_sql  # noqa: E402
from selector import derive, load_brief, shortlist, synth  # noqa: E402

BRIEFS = Path(__file__).resolve().parent.parent / "demo" / "briefs"
NAMES = ("hydrophone", "vibration", "thermocouple")
N = 2000


@pytest.fixture(scope="module")
def generated():
    return synth.generate(N, seed=7)


@pytest.fixture(scope="module")
def library(generated):
    return generated.to_library("bench.csv")


@pytest.fixture(scope="module")
def frame(library):
    return bench_sql.parts_frame(library)


@pytest.fixture(scope="module", params=NAMES)
def req(request):
    return derive(load_brief(BRIEFS / f"{request.param}.toml"))


def test_reference_covers_every_registered_check():
    reference.assert_covers_engine()


def test_shortlist_matches_the_per_row_reference_in_set_and_order(req, library):
    engine = shortlist(req, library)
    rows = reference.shortlist_rows(req, library)
    assert len(rows) > 20  # the brief leaves a real shortlist to order
    assert list(engine.qualifying["part"]) == list(rows["part"])
    # scores agree to the root finder's tolerance (brentq xtol 1e-15 in log f)
    np.testing.assert_allclose(engine.qualifying["score"].to_numpy(), rows["score"],
                               rtol=1e-9)


def test_phase_margin_of_one_loop_matches_brentq_reference():
    # a single-pole part at NG = 1 has about 90° of margin (METHOD §6); a second pole
    # at f2 = GBW·tan(60°) takes atan(f_x/f2) of it: 30° if the crossover stayed at
    # GBW, less because the second pole also pulls the crossover down (textbook
    # two-pole loop), so the margin lands between 60° and 70°
    gbw, aol = 1e6, 1e5
    f2 = gbw * np.tan(np.radians(60))
    margin = reference.phase_margin_of(gbw, aol, 1.0, [f2])
    crossover = reference.crossover_brentq(gbw, aol, 1.0, [f2])
    # |L(f_x)| = 1 at the crossover
    inverse = reference._inverse_loop_magnitude(crossover, gbw, 1 / aol, 1.0, [f2])
    assert inverse == pytest.approx(1.0, rel=1e-12)
    expected = 180 - np.degrees(np.arctan(crossover * aol / gbw)) \
        - np.degrees(np.arctan(crossover / f2))
    assert margin == pytest.approx(expected, abs=1e-9)
    assert 60 < margin < 70  # the second pole lowers the crossover below GBW


def test_closed_form_checks_match_the_per_row_reference(req, library):
    engine = set(library.table["part"][reference.engine_qualifying(req, library)])
    assert len(engine) > 20
    assert engine == reference.qualifying_rows(req, library)


@pytest.mark.parametrize("engine_name", ["sqlite", "duckdb"])
def test_closed_form_checks_match_one_sql_query(engine_name, req, library, frame):
    if engine_name == "duckdb":
        pytest.importorskip("duckdb")  # the optional bench extra
    engine = set(library.table["part"][reference.engine_qualifying(req, library)])
    connection = getattr(bench_sql, f"{engine_name}_database")(frame)
    try:
        assert set(getattr(bench_sql, f"{engine_name}_qualifying")(connection, req)) == engine
    finally:
        connection.close()


def test_sql_query_rejects_a_part_with_a_missing_figure(library, frame):
    # NULL comparisons are never true: a part without a slew figure cannot pass a
    # brief that needs slew (the engine's "unknown" is never "pass")
    req = derive(load_brief(BRIEFS / "hydrophone.toml"))
    mask = reference.engine_qualifying(req, library)
    first = int(np.flatnonzero(mask)[0])
    altered = frame.copy()
    altered.loc[first, "slew"] = np.nan
    connection = bench_sql.sqlite_database(altered)
    try:
        found = set(bench_sql.sqlite_qualifying(connection, req))
    finally:
        connection.close()
    assert frame.loc[first, "part"] not in found
    assert len(found) == int(mask.sum()) - 1


def test_coverage_grid_counts_match_a_shortlist_per_profile(library):
    coverage = pytest.importorskip("selector.coverage")
    requirements = list(coverage.standard_requirements())[::9]  # 10 of the 90 profiles
    grid = coverage.coverage_grid(library, requirements)
    counts = [shortlist(r, library).counts["qualifying"] for r in requirements]
    assert list(grid["qualifying"]) == counts
    assert sum(counts) > 0


def test_near_duplicates_find_every_planted_pair(generated, library):
    audit = pytest.importorskip("selector.audit")
    found = audit.near_duplicates(library)
    pairs = set(zip(found["part_a"], found["part_b"]))
    pairs |= {(b, a) for a, b in pairs}
    planted = list(zip(generated.planted["key_a"], generated.planted["key_b"]))
    assert len(planted) == N // 500
    assert all(pair in pairs for pair in planted)
    assert found.attrs["pairs_compared"] < N * (N - 1) / 2 / 100
