"""Audit a parts library: data quality, duplicate keys, coverage and redundancy.

Each section is a function returning a pandas DataFrame, vectorised over the parts
table; :func:`audit` runs them all and :class:`Audit` holds the result with a summary
and the exit status (1 when there are data-quality errors or coverage gaps).

- :func:`data_quality`: one row per finding (row, column, part, severity, kind,
  message): the loader's problems (unparseable cells, wrong dimensions, impossible
  values), physically implausible figures, internally inconsistent rows, and empty
  cells that checks read (with the checks they leave undecided).
- :func:`exact_duplicates` and :func:`near_duplicates`: keys equal after normalising,
  and keys one edit apart (found through a one-deletion index, never all pairs) whose
  rows carry nearly the same figures.
- :func:`coverage_grid` (from :mod:`selector.coverage`): parts qualifying per profile.
- :func:`dominated`: active parts no better than another active part on every
  parameter the checks read, and no cheaper.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from rapidfuzz import fuzz
from rapidfuzz.process import cpdist

from .brief import Brief, load_brief
from .checks import REGISTRY
from .coverage import (coverage_grid, standard_grid, standard_profiles,  # noqa: F401
                       standard_requirements)
from .errors import InputError, Problem
from .library import COLUMNS, NUMERIC, Library, load_library, normalise_key

FINDING_COLUMNS = ["row", "column", "part", "severity", "kind", "message"]
ERROR, WARNING = "error", "warning"

# Plausibility limits (SI).
SLEW_OVERDRIVE = (5e-3, 5.0)  # V: SR/(2π·GBW), see _slew_vs_gbw
CIN_RANGE = (0.1e-12, 100e-12)  # F: input capacitance of a packaged op-amp
RAIL_TO_RAIL_HEADROOM = 0.5  # V: more than this from a rail is not rail-to-rail

NEAR_CUTOFF = 80.0  # fuzz.ratio of the normalised keys
FIGURE_TOLERANCE = 1e-3  # relative: two figures "agree" within 0.1 %
MAX_DIFFERING = (2, 0.2)  # near duplicate: at most max(2, 20 % of compared) differ
MIN_COMPARED = 5  # figures both rows must give before a pair is judged
MAX_GROUP = 64  # index groups larger than this are compared with their neighbours only
COMPARED_FIGURES = [c for c in NUMERIC if c != "stock"] + ["rri", "rro"]

# Parameter directions for dominance: larger is better / smaller is better.  Offset,
# drift and bias current are compared by magnitude (the DC-error budget uses |x|).
HIGHER_BETTER = {"gbw", "slew", "supply_max", "aol", "pm", "iout", "temp_max"}
LOWER_BETTER = {"supply_min", "swing_low", "swing_high", "cm_low", "cm_high", "vos",
                "vos_drift", "ib", "en", "in", "en_corner", "cin_cm", "cin_diff", "ro",
                "iq", "temp_min", "unit_cost"}
MAGNITUDE = {"vos", "vos_drift", "ib"}
DOMINANCE_BLOCK = 64  # candidate rows compared at once


# ------------------------------------------------------------------ data quality
def _findings(library: Library, index: np.ndarray, column: str, severity: str, kind: str,
              messages) -> pd.DataFrame:
    index = np.asarray(index, dtype=np.intp)
    if isinstance(messages, str):
        messages = [messages] * len(index)
    return pd.DataFrame({
        "row": library.rows[index].astype(np.int64), "column": column,
        "part": library.table["part"].to_numpy(dtype=object)[index],
        "severity": severity, "kind": kind, "message": list(messages)})


_WHERE_RE = re.compile(r"^row (\d+)(?:, column (?:'([^']*)'|(\d+)))?$")


def _loader_kind(message: str) -> str:
    if " is a " in message and "expected" in message:
        return "wrong dimension"
    if any(word in message for word in ("is not a", "no unit", "unknown unit",
                                        "decimal comma", "not a finite", "not yes/no",
                                        "header unit")):
        return "unparseable"
    if "duplicate" in message:
        return "duplicate key"
    return "impossible value"


def loader_findings(library: Library) -> pd.DataFrame:
    """The problems a lenient load found (:attr:`Library.problems`), as findings."""
    records = []
    part_of = dict(zip(library.rows.tolist(), library.table["part"].tolist()))
    for problem in library.problems:
        found = _WHERE_RE.match(problem.where)
        row = int(found.group(1)) if found else None
        column = (found.group(2) or found.group(3) or "") if found else ""
        records.append({"row": row, "column": column, "part": part_of.get(row, ""),
                        "severity": ERROR, "kind": _loader_kind(problem.message),
                        "message": problem.message})
    return pd.DataFrame(records, columns=FINDING_COLUMNS)


def _slew_vs_gbw(library: Library) -> pd.DataFrame:
    """Slew rate far from what the GBW suggests.

    For a single-pole voltage-feedback amplifier SR = 2π·GBW·(I/gm) of the input
    stage: about 2·V_T ≈ 52 mV for a bipolar pair, 0.1–1 V for MOS or degenerated
    stages, higher for slew-boosted ones (textbook relation, quoted from memory).
    Outside 5 mV to 5 V a unit slip (V/ms, kHz) is the likelier story: a warning.
    """
    slew, gbw = library.column("slew"), library.column("gbw")
    with np.errstate(divide="ignore", invalid="ignore"):
        overdrive = slew / (2 * np.pi * gbw)
    low, high = SLEW_OVERDRIVE
    bad = np.flatnonzero((overdrive < low) | (overdrive > high))
    from .units import format_si
    messages = [f"slew {format_si(slew[i], 'V/s')} is far from what GBW "
                f"{format_si(gbw[i], 'Hz')} suggests: SR/(2π·GBW) = "
                f"{format_si(overdrive[i], 'V')}, usually 5 mV to 5 V (a unit slip?)"
                for i in bad]
    return _findings(library, bad, "slew", WARNING, "implausible", messages)


def plausibility_findings(library: Library) -> pd.DataFrame:
    """Physically implausible and internally inconsistent figures (vectorised)."""
    from .units import format_si
    col = library.column
    frames = [_slew_vs_gbw(library)]
    flipped = np.flatnonzero(col("supply_min") >= col("supply_max"))
    frames.append(_findings(library, flipped, "supply_min", ERROR, "impossible value",
                            "supply_min is not below supply_max"))
    half = col("supply_max") / 2
    for name in ("swing_low", "swing_high"):
        bad = np.flatnonzero(col(name) > half)
        frames.append(_findings(library, bad, name, ERROR, "implausible", [
            f"output headroom {format_si(col(name)[i], 'V')} is more than half the "
            f"largest supply span ({format_si(col('supply_max')[i], 'V')}): the output "
            "could never reach mid-supply (mV written as V?)" for i in bad]))
    for name in ("en", "in", "en_corner"):
        bad = np.flatnonzero(col(name) < 0)
        frames.append(_findings(library, bad, name, ERROR, "impossible value",
                                "a noise figure cannot be negative"))
    low, high = CIN_RANGE
    for name in ("cin_cm", "cin_diff"):
        values = col(name)
        bad = np.flatnonzero((values < low) | (values > high))
        frames.append(_findings(library, bad, name, ERROR, "implausible", [
            f"input capacitance {format_si(values[i], 'F')} is outside 0.1 pF to 100 pF "
            "(nF or F written as pF?)" for i in bad]))
    for flag, pair, what in (("rri", ("cm_low", "cm_high"), "common-mode range"),
                             ("rro", ("swing_low", "swing_high"), "output swing")):
        marked = col(flag) == 1.0
        for name in pair:
            values = col(name)
            bad = np.flatnonzero(marked & (values > RAIL_TO_RAIL_HEADROOM))
            frames.append(_findings(library, bad, name, ERROR, "inconsistent", [
                f"{flag} = yes, but the {what} stops {format_si(values[i], 'V')} from "
                "the rail" for i in bad]))
    return pd.concat(frames, ignore_index=True)


def checks_reading() -> dict[str, list[str]]:
    """Library column → the checks and filters that read it (from the registry)."""
    readers: dict[str, list[str]] = {}
    for name, spec in REGISTRY.items():
        for column in spec.columns:
            readers.setdefault(column, []).append(name)
    return readers


def missing_findings(library: Library) -> pd.DataFrame:
    """Empty cells (and absent columns) that checks read, with the checks affected."""
    frames = []
    table = library.table
    for column, readers in checks_reading().items():
        names = ", ".join(readers)
        if column not in table:
            frames.append(pd.DataFrame([{
                "row": None, "column": column, "part": "", "severity": WARNING,
                "kind": "missing",
                "message": f"column absent: {names} cannot be decided for any part"}]))
            continue
        spec = COLUMNS.get(column)
        if spec is not None and spec.dimension == "text":
            empty = table[column].fillna("").astype(str).str.strip().eq("").to_numpy()
        else:
            empty = np.isnan(library.column(column))
        frames.append(_findings(library, np.flatnonzero(empty), column, WARNING, "missing",
                                f"empty: {names} will be unknown where a brief needs it"))
    return pd.concat(frames, ignore_index=True) if frames else \
        pd.DataFrame(columns=FINDING_COLUMNS)


def data_quality(library: Library) -> pd.DataFrame:
    """Every data-quality finding, errors first, then by row and column.

    The loader's problems come first; a plausibility or missing-value finding at a
    cell the loader already reported is not repeated.  Load the library with ``strict=False`` to
    see cells the loader would reject.
    """
    loader = loader_findings(library)
    seen = set(zip(loader["row"], loader["column"]))

    def unseen(frame: pd.DataFrame) -> pd.DataFrame:
        return frame[[(r, c) not in seen for r, c in zip(frame["row"], frame["column"])]]
    parts = [f for f in (loader, unseen(plausibility_findings(library)),
                         unseen(missing_findings(library))) if not f.empty]
    if not parts:
        return pd.DataFrame(columns=FINDING_COLUMNS)
    frame = pd.concat(parts, ignore_index=True)
    frame["_order"] = (frame["severity"] != ERROR).astype(int)
    frame["_row"] = pd.to_numeric(frame["row"], errors="coerce").fillna(0)
    frame = frame.sort_values(["_order", "_row", "column"], kind="mergesort")
    return frame.drop(columns=["_order", "_row"]).reset_index(drop=True)


# ------------------------------------------------------------------ duplicates
def exact_duplicates(library: Library) -> pd.DataFrame:
    """Parts whose keys are equal after normalising (case, spaces, dashes, dots):
    one row per later occurrence, with the first one it repeats."""
    normal = normalise_key(library.table["part"])
    first = normal.groupby(normal, sort=False).transform(lambda s: s.index[0])
    repeat = np.flatnonzero(normal.duplicated(keep="first").to_numpy())
    origin = first.to_numpy()[repeat].astype(np.intp)
    parts = library.table["part"].to_numpy(dtype=object)
    return pd.DataFrame({"row": library.rows[repeat], "part": parts[repeat],
                         "first_row": library.rows[origin], "first_part": parts[origin],
                         "key": normal.to_numpy()[repeat]})


_HASH_BASE = np.uint64(0x9E3779B97F4A7C15)  # odd: a polynomial hash modulo 2**64


def _deletion_index(normal: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """(variant hash, position), sorted, for each key and each key with one character
    deleted.  Two keys one insertion, deletion, substitution or adjacent swap apart
    share a variant (the symmetric-delete idea).

    Variants are never built as strings: a polynomial hash of the code points
    (modulo 2**64) gives every deletion from prefix and suffix sums, O(N·L) numpy
    work.  Two different strings with one hash only add a candidate pair (it is then
    scored), so a collision can never hide a duplicate.
    """
    count = len(normal)
    width = max(1, max(len(k) for k in normal))
    chars = np.array(normal, dtype=f"<U{width}").view(np.uint32).reshape(count, width)
    chars = chars.astype(np.uint64)
    length = (chars > 0).sum(axis=1)
    powers = np.ones(width + 1, dtype=np.uint64)
    with np.errstate(over="ignore"):
        for i in range(1, width + 1):
            powers[i] = powers[i - 1] * _HASH_BASE
        prefix = np.zeros((count, width + 1), dtype=np.uint64)  # Σ_{i<c} x_i·P^i
        for i in range(width):
            prefix[:, i + 1] = prefix[:, i] + chars[:, i] * powers[i]
        suffix = np.zeros((count, width + 1), dtype=np.uint64)  # Σ_{i≥c} x_i·P^(i−c)
        for i in range(width - 1, -1, -1):
            suffix[:, i] = chars[:, i] + suffix[:, i + 1] * _HASH_BASE
        hashes = [prefix[:, width]]
        positions = [np.arange(count)]
        for cut in range(width):
            keep = np.flatnonzero(length > cut)
            hashes.append(prefix[keep, cut] + suffix[keep, cut + 1] * powers[cut])
            positions.append(keep)
    variant = np.concatenate(hashes)
    position = np.concatenate(positions).astype(np.int64)
    order = np.lexsort((position, variant))
    variant, position = variant[order], position[order]
    fresh = np.concatenate([[True], (variant[1:] != variant[:-1])
                            | (position[1:] != position[:-1])])
    return variant[fresh], position[fresh]


def _sorted_unique(values: np.ndarray) -> np.ndarray:
    """Sorted distinct integers (a plain sort: faster here than np.unique's hashing)."""
    values = np.sort(values)
    return values[np.concatenate([[True], values[1:] != values[:-1]])] if len(values) \
        else values


def candidate_pairs(normal: pd.Series | list[str], max_group: int = MAX_GROUP) -> np.ndarray:
    """Unique (i, j), i < j, of keys sharing a one-deletion variant.  A group larger
    than ``max_group`` (very short keys) is compared with its ``max_group`` nearest
    neighbours in sorted order only, so the work stays O(N)."""
    normal = [str(k) for k in normal]
    if len(normal) < 2:
        return np.empty((0, 2), dtype=np.int64)
    variant, position = _deletion_index(normal)  # sorted by variant, then position
    starts = np.concatenate([[True], variant[1:] != variant[:-1]])
    group = np.cumsum(starts) - 1
    sizes = np.bincount(group)
    shared = sizes[group] > 1
    variant, position = group[shared], position[shared]
    found = []
    for offset in range(1, min(max_group, int(sizes.max()))):
        same = variant[:-offset] == variant[offset:]
        if not same.any():
            break
        found.append(np.stack([position[:-offset][same], position[offset:][same]], axis=1))
    if not found:
        return np.empty((0, 2), dtype=np.int64)
    pairs = np.concatenate(found)
    pairs = np.sort(pairs[pairs[:, 0] != pairs[:, 1]], axis=1)
    code = _sorted_unique(pairs[:, 0] * len(normal) + pairs[:, 1])
    return np.stack([code // len(normal), code % len(normal)], axis=1)


def near_duplicates(library: Library, cutoff: float = NEAR_CUTOFF) -> pd.DataFrame:
    """Pairs of parts whose keys are close and whose rows are nearly the same.

    Keys are normalised (:func:`normalise_key`); candidates come from the
    one-deletion index (:func:`candidate_pairs`), never from all N²/2 pairs, and are
    scored with rapidfuzz ``fuzz.ratio``.  A pair is kept when the score reaches
    ``cutoff`` and the rows agree: package and channel count not in conflict, at
    least :data:`MIN_COMPARED` figures given by both, and at most max(2, 20 %) of
    those differing by more than 0.1 %.  Keys equal after normalising are kept as
    ``kind = "exact"`` whatever their figures.

    Columns: ``row_a``, ``part_a``, ``row_b``, ``part_b``, ``score`` (0–100),
    ``kind`` (exact / near), ``compared`` (figures both give), ``differing`` (names
    of the figures that differ), ``one_empty`` (figures only one row gives).
    ``result.attrs["pairs_compared"]`` is the number of key pairs scored.
    """
    table = library.table
    normal = normalise_key(table["part"]).reset_index(drop=True)
    pairs = candidate_pairs(normal.tolist())
    first, second = pairs[:, 0], pairs[:, 1]
    keys = normal.to_numpy(dtype=object)
    scores = (cpdist(keys[first].tolist(), keys[second].tolist(), scorer=fuzz.ratio,
                     workers=-1) if len(pairs) else np.empty(0))
    scores = np.asarray(scores, dtype=float)
    key_code, _ = pd.factorize(normal)
    exact = key_code[first] == key_code[second]
    keep = exact | ((scores >= cutoff) & ~_conflict(table, first, second))
    first, second, scores, exact = first[keep], second[keep], scores[keep], exact[keep]

    figures = [c for c in COMPARED_FIGURES if c in table]
    values = np.column_stack([library.column(c) for c in figures]) if figures else \
        np.empty((len(table), 0))
    a, b = values[first], values[second]
    both = ~np.isnan(a) & ~np.isnan(b)
    with np.errstate(invalid="ignore"):
        close = (a == b) | np.isclose(a, b, rtol=FIGURE_TOLERANCE, atol=0.0)
    differ = both & ~close
    one_empty = np.isnan(a) ^ np.isnan(b)
    compared, n_differ = both.sum(axis=1), differ.sum(axis=1)
    allowed = np.maximum(MAX_DIFFERING[0], MAX_DIFFERING[1] * compared)
    agree = (compared >= MIN_COMPARED) & (n_differ <= allowed)
    keep = exact | agree
    first, second = first[keep], second[keep]
    parts = table["part"].to_numpy(dtype=object)
    result = pd.DataFrame({
        "row_a": library.rows[first], "part_a": parts[first],
        "row_b": library.rows[second], "part_b": parts[second],
        "score": np.round(scores[keep], 1), "kind": np.where(exact[keep], "exact", "near"),
        "compared": compared[keep], "differing": _names(differ[keep], figures),
        "one_empty": _names(one_empty[keep], figures)})
    result = result.sort_values(["kind", "score", "row_a"], ascending=[True, False, True],
                                kind="mergesort").reset_index(drop=True)
    result.attrs["pairs_compared"] = int(len(pairs))
    return result


def _conflict(table: pd.DataFrame, first: np.ndarray, second: np.ndarray) -> np.ndarray:
    """Pairs whose package or channel count (both given) differ."""
    conflict = np.zeros(len(first), dtype=bool)
    if "package" in table:
        text = table["package"].fillna("").astype(str).str.lower().str.replace(
            r"[\s\-_./]+", "", regex=True)
        package, names = pd.factorize(text)
        blank = np.flatnonzero(names == "")
        package = np.where(np.isin(package, blank), -1, package)
        pa, pb = package[first], package[second]
        conflict |= (pa >= 0) & (pb >= 0) & (pa != pb)
    if "channels" in table:
        channels = table["channels"].to_numpy(dtype=float)
        ca, cb = channels[first], channels[second]
        conflict |= ~np.isnan(ca) & ~np.isnan(cb) & (ca != cb)
    return conflict


def _names(mask: np.ndarray, names: list[str]) -> list[str]:
    """Comma-joined column names of each row of a boolean mask (joined once per
    distinct pattern)."""
    if mask.size == 0:
        return [""] * len(mask)
    weights = np.left_shift(np.int64(1), np.arange(mask.shape[1], dtype=np.int64))
    code = (mask.astype(np.int64) * weights).sum(axis=1)
    unique, inverse = np.unique(code, return_inverse=True)
    text = np.array([", ".join(n for i, n in enumerate(names) if int(u) >> i & 1)
                     for u in unique], dtype=object)
    return text[inverse.ravel()].tolist()


# ------------------------------------------------------------------ redundancy
def dominance_parameters() -> list[str]:
    """The numeric library columns the checks read (from the registry)."""
    used = {c for spec in REGISTRY.values() for c in spec.columns}
    return sorted(c for c in used if c in NUMERIC)


def goodness(library: Library, parameters: list[str]) -> np.ndarray:
    """(parts × parameters), oriented so that larger is better; missing = -inf
    (a figure the library lacks can never beat one it has).  A parameter with no
    known direction is kept as is and must be equal to count as "no better"."""
    columns = []
    for name in parameters:
        value = library.column(name)
        if name in MAGNITUDE:
            value = np.abs(value)
        if name in LOWER_BETTER:
            value = -value
        columns.append(np.where(np.isnan(value), -np.inf, value))
    return np.column_stack(columns) if columns else np.empty((len(library), 0))


def dominated(library: Library) -> pd.DataFrame:
    """Active parts dominated by another active part of the same package and channel
    count: the other is at least as good on every parameter the checks read
    (:func:`dominance_parameters`, cost included) and better on one; of identical
    rows the later is listed.  Columns: ``row``, ``part``, ``by_row``, ``by_part``
    (the first dominating part), ``dominators`` (how many), ``unit_cost``, ``by_cost``.

    Vectorised: parts are grouped by package and channels, then each block of
    candidates is compared with the whole group by numpy broadcasting, one parameter
    at a time, dropping group members that can no longer dominate any row of the
    block (memory: block × group booleans).
    """
    table = library.table
    status = table["status"].fillna("").astype(str).str.lower() if "status" in table \
        else pd.Series([""] * len(table))
    active = np.flatnonzero((status == "active").to_numpy())
    parameters = dominance_parameters()
    fixed = [p for p in parameters if p not in HIGHER_BETTER | LOWER_BETTER]
    good = goodness(library, parameters)
    package = (normalise_key(table["package"].fillna("").astype(str)) if "package" in table
               else pd.Series([""] * len(table))).to_numpy(dtype=object)
    channels = library.column("channels")
    group_key = pd.Series([f"{package[i]}|{channels[i]}" for i in active], dtype=object)
    found_rows, found_by, found_count = [], [], []
    fixed_index = [parameters.index(p) for p in fixed]
    for _, members in group_key.groupby(group_key, sort=False).groups.items():
        members = active[np.asarray(members)]
        if len(members) < 2:
            continue
        g = good[members]
        for start in range(0, len(members), DOMINANCE_BLOCK):
            block = g[start:start + DOMINANCE_BLOCK]
            others = np.arange(len(members))  # members still able to dominate a row
            at_least = np.ones((len(block), len(members)), dtype=bool)
            better = np.zeros_like(at_least)
            for k in range(g.shape[1]):
                column, candidate = g[others, k][None, :], block[:, k][:, None]
                if k in fixed_index:
                    at_least &= column == candidate
                else:
                    at_least &= column >= candidate
                    better |= column > candidate
                alive = np.flatnonzero(at_least.any(axis=0))  # drop hopeless members
                if len(alive) < len(others):
                    others, at_least, better = others[alive], at_least[:, alive], \
                        better[:, alive]
                if not len(others):
                    break
            order = others[None, :]
            mine = np.arange(start, start + len(block))[:, None]
            wins = at_least & (better | (order < mine)) & (order != mine)
            hit = np.flatnonzero(wins.any(axis=1))
            found_rows.extend(members[start + hit].tolist())
            found_by.extend(members[others[wins[hit].argmax(axis=1)]].tolist())
            found_count.extend(wins[hit].sum(axis=1).tolist())
    rows = np.asarray(found_rows, dtype=np.intp)
    by = np.asarray(found_by, dtype=np.intp)
    parts = table["part"].to_numpy(dtype=object)
    cost = library.column("unit_cost")
    result = pd.DataFrame({"row": library.rows[rows], "part": parts[rows],
                           "by_row": library.rows[by], "by_part": parts[by],
                           "dominators": np.asarray(found_count, dtype=np.int64),
                           "unit_cost": cost[rows], "by_cost": cost[by]})
    return result.sort_values("row", kind="mergesort").reset_index(drop=True)


# ------------------------------------------------------------------ the audit
@dataclass
class Audit:
    """Every section of one audit.  ``briefs``: the saved briefs used as the grid
    (None: the standard grid)."""

    library: Library
    quality: pd.DataFrame
    exact: pd.DataFrame
    near: pd.DataFrame
    coverage: pd.DataFrame
    dominated: pd.DataFrame
    briefs: list[Brief] | None = None

    @property
    def summary(self) -> dict[str, int]:
        severity = self.quality["severity"]
        coverage = self.coverage
        return {
            "parts": len(self.library),
            "errors": int((severity == ERROR).sum()),
            "warnings": int((severity == WARNING).sum()),
            "exact_duplicates": len(self.exact),
            "near_duplicates": int((self.near["kind"] == "near").sum()),
            "profiles": len(coverage),
            "gaps": int(coverage["gap"].sum()),
            "single_source": int(coverage["single_source"].sum()),
            "legacy_only": int(coverage["legacy_only"].sum()),
            "dominated": len(self.dominated),
        }

    @property
    def exit_status(self) -> int:
        """1 when there are data-quality errors or coverage gaps, else 0."""
        summary = self.summary
        return 1 if summary["errors"] or summary["gaps"] else 0

    def summary_line(self) -> str:
        s = self.summary
        grid = "briefs" if self.briefs is not None else "grid cells"
        return (f"audit: {s['parts']} parts; data quality {s['errors']} errors, "
                f"{s['warnings']} warnings; duplicates {s['exact_duplicates']} exact, "
                f"{s['near_duplicates']} near; coverage {s['profiles']} {grid}: "
                f"{s['gaps']} gaps, {s['single_source']} single-source, "
                f"{s['legacy_only']} legacy-only; {s['dominated']} dominated parts")


def load_briefs(folder: str | Path) -> list[Brief]:
    """Every ``*.toml`` brief in ``folder`` (sorted by name); problems in several
    files are reported together."""
    path = Path(folder)
    if not path.is_dir():
        raise InputError(Problem(str(folder), "", "not a folder (--briefs takes a folder "
                                 "of brief files)"))
    files = sorted(path.glob("*.toml"))
    if not files:
        raise InputError(Problem(str(folder), "", "no *.toml briefs in this folder"))
    briefs, problems = [], []
    for file in files:
        try:
            briefs.append(load_brief(file))
        except InputError as exc:
            problems.extend(exc.problems)
    if problems:
        raise InputError(problems)
    return briefs


def audit(library: Library | str | Path, briefs: list[Brief] | None = None,
          chunk: int | None = None) -> Audit:
    """Run every section.  A path is loaded leniently (``strict=False``) so that the
    problems become findings rather than an error."""
    if not isinstance(library, Library):
        library = load_library(library, strict=False)
    options = {} if chunk is None else {"chunk": chunk}
    return Audit(library, data_quality(library), exact_duplicates(library),
                 near_duplicates(library), coverage_grid(library, briefs, **options),
                 dominated(library), briefs)
