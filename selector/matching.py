"""Match a part name as a person types it to the library's part keys.

Both sides are normalised the same way: case, spaces, dashes, dots, underscores and
slashes are ignored (:func:`selector.library.normalise_key`), and a trailing package
suffix (``-SOIC8``, ``/SOT23-5``, ``TSSOP14``, or any package named in the library's
``package`` column) is dropped.  Then:

- the key spelled exactly as given, or else one key equal after normalising: used
  silently (score 100);
- otherwise rapidfuzz's ``fuzz.ratio`` (0–100) against every key: the best is used,
  with a visible note, when it scores at least :data:`ACCEPT` and leads the runner-up
  by at least :data:`LEAD` points;
- anything else (ambiguous, weak, nothing near) is an :class:`InputError` listing the
  best candidates with their scores.  There is no silent guess.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Iterable

import numpy as np
import pandas as pd
from rapidfuzz import fuzz, process

from .errors import InputError, Problem
from .library import normalise_key

ACCEPT = 80.0  # lowest fuzz.ratio score used without asking
LEAD = 8.0  # points the best candidate must lead the runner-up by
SHOWN = 5  # candidates listed in an error message

# Package families, normalised (lower case, no separators); a pin count may follow.
_PACKAGE_WORDS = ("soic", "sot23", "sot", "sc70", "msop", "tssop", "ssop", "dfn", "qfn",
                  "son", "pdip", "dip", "wlcsp", "csp", "bga", "to92", "to220", "so")
_PACKAGE_RE = re.compile(rf"(?=(?:{'|'.join(_PACKAGE_WORDS)})\d*$)")
_STEM_END_RE = re.compile(r"\d[a-z]?$")  # a key stem ends in digits, maybe a grade letter


@dataclass
class Match:
    """The library key a query resolved to.

    ``position``: row position in ``library.table``; ``score``: 0–100 (100 for a match
    after normalising); ``exact``: True when no fuzzy step was needed; ``candidates``:
    the best (key, score) pairs considered, best first.
    """

    query: str
    key: str
    position: int
    score: float
    exact: bool
    candidates: list[tuple[str, float]] = field(default_factory=list)

    def note(self) -> str | None:
        """The line to show the user for a fuzzy match (None for an exact one)."""
        if self.exact:
            return None
        return f"matched '{self.query}' to {self.key} (score {self.score:.0f})"


def strip_package(normal: str, packages: Iterable[str] = ()) -> str:
    """Drop a trailing package suffix from a normalised key (``qs2318soic8`` →
    ``qs2318``).  ``packages`` are extra normalised package names to recognise.
    The stem left must still hold a digit, so a key is never eaten whole."""
    for package in sorted(set(packages), key=len, reverse=True):
        if package and normal.endswith(package):
            stem = normal[: -len(package)]
            if re.search(r"\d", stem):
                return stem
    for found in _PACKAGE_RE.finditer(normal):  # earliest start first: the longest suffix
        stem = normal[:found.start()]
        if _STEM_END_RE.search(stem):
            return stem
    return normal


def normalise_part(text: str, packages: Iterable[str] = ()) -> str:
    """The form keys are compared in: :func:`normalise_key` then :func:`strip_package`."""
    return strip_package(normalise_key(pd.Series([str(text)])).iloc[0], packages)


def library_packages(table: pd.DataFrame) -> list[str]:
    """The library's package names, normalised (``SOT23-5`` → ``sot235``)."""
    if "package" not in table:
        return []
    values = table["package"].fillna("").astype(str)
    return [p for p in pd.unique(normalise_key(values)) if p]


def candidates(query: str, keys: pd.Series, packages: Iterable[str] = (),
               limit: int = SHOWN) -> list[tuple[str, float, int]]:
    """The best ``limit`` keys for ``query``: (key, fuzz.ratio score, position)."""
    packages = list(packages)
    normal = normalise_part(query, packages)
    forms = [strip_package(k, packages) for k in normalise_key(keys.astype(str))]
    found = process.extract(normal, forms, scorer=fuzz.ratio, limit=limit)
    return [(str(keys.iloc[i]), float(score), int(i)) for _, score, i in found]


def match_part(query: str, keys: pd.Series | Iterable[str], packages: Iterable[str] = (),
               source: str = "") -> Match:
    """Resolve ``query`` to one of ``keys`` (see the module docstring).

    Raises :class:`InputError` (located at the ``PART`` argument of ``source``) when the
    query is empty, ambiguous, or matches nothing well enough.
    """
    keys = pd.Series(list(keys), dtype=object) if not isinstance(keys, pd.Series) \
        else keys.reset_index(drop=True)
    where = f"part '{query}'"
    if not str(query).strip():
        raise InputError(Problem(source, "PART", "empty part name"))
    if keys.empty:
        raise InputError(Problem(source, where, "the library has no parts"))
    packages = list(packages)
    verbatim = np.flatnonzero(keys.astype(str).str.strip().to_numpy() == str(query).strip())
    if len(verbatim) == 1:  # spelled exactly as the library spells it
        position = int(verbatim[0])
        return Match(str(query), str(keys.iloc[position]), position, 100.0, True,
                     [(str(keys.iloc[position]), 100.0)])
    plain = normalise_key(keys.astype(str)).to_numpy()
    query_plain = normalise_key(pd.Series([str(query)])).iloc[0]
    hits = np.flatnonzero(plain == query_plain)
    if len(hits) == 0:
        stripped = np.array([strip_package(k, packages) for k in plain], dtype=object)
        hits = np.flatnonzero(stripped == strip_package(query_plain, packages))
    if len(hits) == 1:
        position = int(hits[0])
        return Match(str(query), str(keys.iloc[position]), position, 100.0, True,
                     [(str(keys.iloc[position]), 100.0)])
    if len(hits) > 1:
        listed = ", ".join(str(keys.iloc[i]) for i in hits[:SHOWN])
        raise InputError(Problem(source, where, f"ambiguous: {len(hits)} library keys "
                                 f"are the same after normalising ({listed}); give the "
                                 "key exactly as the library spells it"))
    best = candidates(query, keys, packages, limit=SHOWN)
    listed = ", ".join(f"{k} ({s:.0f})" for k, s, _ in best)
    top_key, top_score, top_position = best[0]
    runner_up = best[1][1] if len(best) > 1 else 0.0
    if top_score >= ACCEPT and top_score - runner_up >= LEAD:
        return Match(str(query), top_key, top_position, top_score, False,
                     [(k, s) for k, s, _ in best])
    if top_score >= ACCEPT:
        message = f"ambiguous: several keys are as close; best candidates: {listed}"
    else:
        message = f"no part of that name in the library; closest: {listed}"
    raise InputError(Problem(source, where, message))
