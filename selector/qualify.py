"""Qualify one stocked part for a brief, and re-check saved designs in bulk.

:func:`qualify` answers "does this part still meet this channel, and by how much?":
it matches the typed name to a library key (:mod:`selector.matching`), runs the
brief's shortlist over the library (the same checks and ranking as ``shortlist``)
and returns that part's every check, failing ones first with a reason in
engineering terms, plus the best three alternatives.

:func:`recheck` re-qualifies saved designs: briefs that record their part with a
top-level ``part = "…"``.  Each design is evaluated on its own part's row only.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from .brief import Brief, load_brief
from .checks import FAIL, NA, PASS, REGISTRY, RATIO_SENSES, UNKNOWN
from .coverage import library_slice
from .errors import InputError, Problem
from .library import Library, normalise_key
from .matching import Match, candidates, library_packages, match_part
from .ranking import Shortlist, evaluate, rank, shortlist
from .report import entry_dict, reason
from .requirements import Requirements, derive
from .units import format_si

ALTERNATIVES = 3
CLOSEST_SHOWN = 60.0  # fuzz.ratio below which a "closest key" is not worth naming
_ORDER = {FAIL: 0, UNKNOWN: 1, PASS: 2, NA: 3}
VERDICT = {"qualifies": "qualifies", "unknown": "unknown", "rejected": "fails"}
# recheck statuses
QUALIFIES, FAILS, UNKNOWN_DATA = "qualifies", "fails", "unknown data"
MISSING_PART, NOT_ACTIVE = "part missing from library", "part not active"


# ------------------------------------------------------------------ reasons
def _empty_columns(library: Library, position: int, columns) -> list[str]:
    """The columns among ``columns`` that are empty for the part at ``position``."""
    empty = []
    for column in columns:
        if column not in library.table:
            empty.append(column)
            continue
        value = library.table[column].iloc[position]
        if value is None or (isinstance(value, float) and math.isnan(value)) or \
                (isinstance(value, str) and not value.strip()):
            empty.append(column)
    return empty


def explain(name: str, check: dict, library: Library, position: int,
            brief: Brief) -> str:
    """One line in engineering terms for a failing or unknown check of one part.

    Range checks and filters get wording of their own; the ratio checks use
    :func:`selector.report.reason` ("needs 1.9 V/µs, part gives 1.2 V/µs").
    """
    status = check["status"]
    unit = check["unit"]
    if status == UNKNOWN:
        empty = _empty_columns(library, position, REGISTRY[name].columns)
        lacking = ", ".join(empty) if empty else ", ".join(REGISTRY[name].columns)
        return f"{name}: unknown, the library row has no {lacking}"
    if status != FAIL:
        return ""

    def f(value):
        return format_si(value, unit) if value is not None else "—"
    required, available, margin = check["required"], check["available"], check["margin"]
    if name == "supply" and required is not None and available is not None:
        side = "at least" if available > required else "at most"
        return (f"supply: the design gives {f(required)} of supply span, the part "
                f"works with {side} {f(available)}")
    if name == "temperature" and required is not None and available is not None:
        return (f"temperature: the brief needs {f(required)}, the part is rated to "
                f"{f(available)} only")
    if name in ("output_swing", "input_common_mode") and margin is not None:
        what = "output" if name == "output_swing" else "input common mode"
        return (f"{name}: the {what} comes within {f(available)} of a rail, the part "
                f"needs {f(required)} (short by {f(-margin)})")
    if name == "status":
        value = _text(library, "status", position) or "empty"
        return f"status: the part is {value}, the brief accepts {', '.join(brief.status)}"
    if name == "package":
        value = _text(library, "package", position) or "no package given"
        return (f"package: the part is in {value}, the brief accepts "
                f"{', '.join(brief.packages or ())}")
    if name == "cost":
        return f"cost: the part costs {available:g}, the brief's limit is {required:g}"
    return reason(name, check)


def _text(library: Library, column: str, position: int) -> str:
    if column not in library.table:
        return ""
    value = library.table[column].iloc[position]
    return "" if value is None or (isinstance(value, float) and math.isnan(value)) \
        else str(value)


# ------------------------------------------------------------------ qualify
@dataclass
class Qualification:
    """One part against one brief.  ``position``: the part's row position in the
    library table; ``shortlist``: the brief's full shortlist (for alternatives)."""

    match: Match
    shortlist: Shortlist
    position: int

    @property
    def part(self) -> str:
        return self.match.key

    @property
    def verdict(self) -> str:
        """``qualifies``, ``fails`` or ``unknown`` (no check fails, data missing)."""
        row = self.shortlist.evaluation.parts.iloc[self.position]
        return VERDICT[row["verdict"]]

    @property
    def exit_status(self) -> int:
        """0 when the part qualifies, 1 when it fails or any check is unknown."""
        return 0 if self.verdict == "qualifies" else 1

    def checks(self) -> pd.DataFrame:
        """Every check and filter, failing first, then unknown, pass, n/a.

        Columns: ``check``, ``kind`` (check / filter), ``status``, ``required``,
        ``available``, ``margin`` (SI; ratio or headroom, see checks), ``unit``,
        ``sense``, ``columns`` (library columns read), ``reason``.
        """
        evaluation = self.shortlist.evaluation
        brief = self.shortlist.requirements.brief
        rows = []
        for order, (name, check) in enumerate(evaluation.checks_of(self.position).items()):
            sense = REGISTRY[name].sense
            rows.append({
                "check": name, "kind": "filter" if sense == "filter" else "check",
                "status": check["status"], "required": check["required"],
                "available": check["available"], "margin": check["margin"],
                "unit": check["unit"], "sense": sense,
                "columns": ", ".join(check["columns"]),
                "reason": explain(name, check, evaluation.library, self.position, brief),
                "_order": (_ORDER.get(check["status"], 4), order)})
        frame = pd.DataFrame(rows).sort_values("_order", kind="mergesort")
        return frame.drop(columns="_order").reset_index(drop=True)

    def alternatives(self, count: int = ALTERNATIVES) -> pd.DataFrame:
        """The top ``count`` of the shortlist other than this part: ``rank``,
        ``part``, ``score``, ``binding``, ``unit_cost``."""
        ranked = self.shortlist.qualifying
        others = ranked[ranked["position"] != self.position].head(count)
        return others[["rank", "part", "score", "binding", "unit_cost"]].reset_index(drop=True)

    def rank(self) -> int | None:
        """The part's rank in the shortlist (None when it does not qualify)."""
        ranked = self.shortlist.qualifying
        found = ranked[ranked["position"] == self.position]
        return int(found["rank"].iloc[0]) if len(found) else None

    def to_dict(self) -> dict:
        """One shortlist entry (``report.entry_dict``: part, score, binding, checks in
        SI) plus ``query``, ``matched``, ``match_score``, ``alternatives`` and the
        ``verdict``, ``rank``, ``failed`` and ``unknown`` check names."""
        checks = self.checks()
        entry = entry_dict(self.shortlist, self.position, {"rank": self.rank()})
        return {
            "query": self.match.query, "matched": self.match.key,
            "match_score": self.match.score, "verdict": self.verdict, **entry,
            "failed": checks.loc[checks["status"] == FAIL, "check"].tolist(),
            "unknown": checks.loc[checks["status"] == UNKNOWN, "check"].tolist(),
            "reasons": [r for r in checks["reason"] if r],
            "alternatives": [
                {"rank": int(r.rank), "part": r.part, "score": float(r.score),
                 "binding": r.binding}
                for r in self.alternatives().itertuples()],
        }


def library_warning(library: Library) -> str | None:
    """A one-line note when a leniently loaded library had problems: those cells
    are treated as missing, so the checks reading them are unknown (never a pass)."""
    if not library.problems:
        return None
    count = len(library.problems)
    return (f"{library.path}: {count} problem{'s' if count > 1 else ''} in the library "
            f"(first: {library.problems[0].where}: {library.problems[0].message}); "
            "those cells count as missing; run 'selector audit' for the list")


def find_part(query: str, library: Library) -> Match:
    """Match ``query`` to the library (see :func:`selector.matching.match_part`)."""
    return match_part(query, library.table["part"], library_packages(library.table),
                      source=library.path)


def qualify(query: str, brief: Brief | Requirements, library: Library) -> Qualification:
    """Qualify the part named ``query`` for ``brief``.  Raises :class:`InputError`
    when the name is ambiguous or matches no part well enough."""
    match = find_part(query, library)
    requirements = brief if isinstance(brief, Requirements) else derive(brief)
    return Qualification(match, shortlist(requirements, library), match.position)


# ------------------------------------------------------------------ recheck
RECHECK_COLUMNS = ["design", "file", "part", "matched", "status", "margin", "sense",
                   "unit", "binding", "reason"]


def design_files(paths) -> list[Path]:
    """Brief files named on the command line: files as given, folders expanded to
    their ``*.toml`` files (recursively, sorted)."""
    files: list[Path] = []
    problems = []
    for given in paths:
        path = Path(given)
        if path.is_dir():
            found = sorted(path.rglob("*.toml"))
            if not found:
                problems.append(Problem(str(path), "", "no *.toml designs in this folder"))
            files.extend(found)
        elif path.exists():
            files.append(path)
        else:
            problems.append(Problem(str(path), "", "no such file or folder"))
    if problems:
        raise InputError(problems)
    return files


def load_designs(paths) -> list[Brief]:
    """Every saved design (a brief with ``part``); problems in all files are
    reported together."""
    briefs, problems = [], []
    for file in design_files(paths):
        try:
            brief = load_brief(file)
        except InputError as exc:
            problems.extend(exc.problems)
            continue
        if not brief.part:
            problems.append(Problem(str(file), "key 'part'", "a saved design records its "
                                    "part: add part = \"…\" at the top level"))
            continue
        briefs.append(brief)
    if problems:
        raise InputError(problems)
    return briefs


def recheck_one(brief: Brief, library: Library, plain_keys: np.ndarray) -> dict:
    """Re-qualify one saved design: evaluated on its own part's row only."""
    row = {"design": brief.name, "file": brief.source, "part": brief.part,
           "matched": None, "status": None, "margin": None, "sense": None, "unit": None,
           "binding": None, "reason": ""}
    wanted = normalise_key(pd.Series([brief.part])).iloc[0]
    hits = np.flatnonzero(plain_keys == wanted)
    if len(hits) != 1:
        near = candidates(brief.part, library.table["part"],
                          library_packages(library.table), limit=2) if len(library) else []
        row["status"] = MISSING_PART
        near = [(k, s) for k, s, _ in near if s >= CLOSEST_SHOWN]
        row["reason"] = ("no such key; closest: " + ", ".join(f"{k} ({s:.0f})" for k, s in near)
                         if near else "no such key, and none similar")
        if len(hits) > 1:
            row["reason"] = "several library rows have this key after normalising"
        return row
    position = int(hits[0])
    row["matched"] = str(library.table["part"].iloc[position])
    one = rank(evaluate(derive(brief), library_slice(library, position, position + 1)))
    checks = one.evaluation.checks_of(0)
    verdict = one.evaluation.parts.iloc[0]
    if checks["status"]["status"] == FAIL:
        row["status"] = NOT_ACTIVE
        row["reason"] = explain("status", checks["status"], one.evaluation.library, 0, brief)
        return row
    if verdict["verdict"] == "qualifies":
        row.update(status=QUALIFIES, margin=float(verdict["score"]), sense="ratio",
                   binding=verdict["binding"])
        return row
    failing = [(n, c) for n, c in checks.items() if c["status"] == FAIL]
    unknown = [(n, c) for n, c in checks.items() if c["status"] == UNKNOWN]
    if failing:
        name, check = min(failing, key=lambda item: _severity(item[0], item[1]))
        row.update(status=FAILS, margin=check["margin"], binding=name,
                   sense="ratio" if REGISTRY[name].sense in RATIO_SENSES else "headroom",
                   unit=check["unit"],
                   reason="; ".join(explain(n, c, one.evaluation.library, 0, brief)
                                    for n, c in failing))
        return row
    row.update(status=UNKNOWN_DATA, binding=unknown[0][0],
               reason="; ".join(explain(n, c, one.evaluation.library, 0, brief)
                                for n, c in unknown))
    return row


def _severity(name: str, check: dict) -> float:
    """How badly a failed check misses: ratio margins as they are, headroom and
    filter failures first (they cannot be fixed by a better figure of the same kind)."""
    if REGISTRY[name].sense in RATIO_SENSES and check["margin"] is not None:
        return float(check["margin"])
    return -math.inf


def recheck(paths, library: Library) -> pd.DataFrame:
    """Re-qualify every saved design under ``paths`` (files or folders) against
    ``library``: one row per design with columns :data:`RECHECK_COLUMNS`.

    ``status``: qualifies, fails, unknown data, part missing from library or part
    not active.  ``margin`` is the weakest ratio margin of a qualifying design, or
    the margin of the worst failing check (ratio, or headroom in ``unit``);
    ``binding`` names that check.
    """
    designs = load_designs(paths)
    plain = normalise_key(library.table["part"]).to_numpy()
    rows = [recheck_one(brief, library, plain) for brief in designs]
    return pd.DataFrame(rows, columns=RECHECK_COLUMNS)


def recheck_exit_status(frame: pd.DataFrame) -> int:
    """0 when every design still qualifies, else 1."""
    return 0 if (frame["status"] == QUALIFIES).all() else 1
