"""Coverage: how many parts qualify for each profile of a requirement grid, in one
vectorised evaluation of (profiles × parts).

The grid reuses the registered checks (:data:`selector.checks.REGISTRY`) unchanged,
so it agrees with ``derive`` + ``ranking.shortlist`` profile by profile.  What makes
it fast is that a check's result depends on the part columns and on only a few
requirement fields, and most profiles of a grid share those fields (every profile
at ±15 V has the same swing check; the phase-margin loop is the same for every
profile with the same network).  So:

1. every profile is derived once (``derive``: its rf, rg and noise gain are whatever
   the solver picks);
2. each check is run once on a few parts with a recording proxy of each profile's
   Requirements, which notes every requirement field the check reads; profiles that
   agree on those fields form one group for that check;
3. over chunks of parts (bounding memory at ``profiles × chunk``), each check is
   evaluated once per group on the whole chunk (numpy over parts), the group results
   are broadcast to a (profiles × parts) status array by fancy indexing, and the
   arrays are combined and counted with numpy.

Checks never branch on part data (they are numpy expressions over whole columns), so
the fields read on a few parts are the fields read on all of them.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pandas as pd

from .brief import Brief, brief_from_dict
from .checks import FAIL, REGISTRY, UNKNOWN, Parts
from .errors import InputError
from .library import STATUSES, Library
from .requirements import Requirements, derive

CELLS_PER_CHUNK = 4_000_000  # profiles × parts cells per pass (int8 masks)
LEGACY = ("nrnd", "obsolete")
SOURCES_LISTED = 3  # qualifying part keys kept per profile (to name single sources)

#: supply class label -> (V+, V−)
SUPPLY_CLASSES: dict[str, tuple[float, float]] = {
    "1.8 V": (1.8, 0.0), "3.3 V": (3.3, 0.0), "5 V": (5.0, 0.0),
    "±5 V": (5.0, -5.0), "±12 V": (12.0, -12.0), "±15 V": (15.0, -15.0),
}
#: bandwidth label -> sine frequency in Hz (0: a DC channel)
BANDWIDTHS: dict[str, float] = {"DC": 0.0, "1 kHz": 1e3, "10 kHz": 1e4,
                                "100 kHz": 1e5, "1 MHz": 1e6}
#: precision class label -> output-referred DC error budget in V
PRECISIONS: dict[str, float] = {"1 mV": 1e-3, "10 mV": 1e-2, "100 mV": 0.1}
GRID_GAIN = 10.0  # non-inverting
GRID_SWING = (0.1, 0.9)  # full-scale output from 10 % to 90 % of the supply span
GRID_LOAD = "10k"  # a typical next stage or converter input (common practice)
# A fixed E96 gain-10 network (1 + 9.09k/1.01k = 10.00): every cell loads the output
# and sees the feedback pole alike, and deriving the grid needs no network search.
GRID_NETWORK = ("9k09", "1k01")
GRID_TEMPERATURE = ("0 C", "70 C")  # so offset drift counts (ΔT = 45 °C)


def standard_grid() -> pd.DataFrame:
    """The standard grid: one row per profile with columns ``supply``,
    ``bandwidth``, ``precision`` (labels) and ``brief`` (a validated :class:`Brief`).

    Every profile is a gain-10 non-inverting stage whose output spans 10 %–90 % of
    the rails (input = output / 10, no offset), with Rf = 9.09 kΩ and Rg = 1.01 kΩ,
    into 10 kΩ, over 0–70 °C, with the default 1 % gain error and 45° phase margin,
    active parts only.
    """
    rows = []
    for supply, (v_pos, v_neg) in SUPPLY_CLASSES.items():
        span = v_pos - v_neg
        y_lo, y_hi = v_neg + GRID_SWING[0] * span, v_neg + GRID_SWING[1] * span
        for bandwidth, frequency in BANDWIDTHS.items():
            for precision, budget in PRECISIONS.items():
                signal = {"min": f"{y_lo / GRID_GAIN:.9g} V",
                          "max": f"{y_hi / GRID_GAIN:.9g} V"}
                if frequency > 0:
                    signal["frequency"] = f"{frequency:g} Hz"
                else:
                    signal["waveform"] = "dc"
                data = {
                    "name": f"{supply}, {bandwidth}, {precision}",
                    "topology": "non-inverting",
                    "signal": signal,
                    "output": {"gain": GRID_GAIN, "load_resistance": GRID_LOAD},
                    "network": {"rf": GRID_NETWORK[0], "rg": GRID_NETWORK[1]},
                    "supply": {"positive": f"{v_pos:g} V", "negative": f"{v_neg:g} V"},
                    "limits": {"dc_error": f"{budget:g} V",
                               "temperature_min": GRID_TEMPERATURE[0],
                               "temperature_max": GRID_TEMPERATURE[1]},
                }
                brief = brief_from_dict(data, source="<standard grid>")
                rows.append({"supply": supply, "bandwidth": bandwidth,
                             "precision": precision, "brief": brief})
    return pd.DataFrame(rows)


def standard_profiles() -> list[Brief]:
    """The standard grid's profiles as :class:`Brief` objects, in grid order."""
    return list(standard_grid()["brief"])


@lru_cache(maxsize=1)
def standard_requirements() -> tuple[Requirements, ...]:
    """``derive`` of every standard profile, computed once per process."""
    return tuple(derive(brief) for brief in standard_profiles())


# ------------------------------------------------------------------ recording
_NAN = ("nan",)


def _freeze(value):
    """A hashable, NaN-safe form of a requirement value."""
    if isinstance(value, float) and math.isnan(value):
        return _NAN
    if isinstance(value, np.ndarray):
        return tuple(_freeze(v) for v in value.tolist())
    if isinstance(value, (list, tuple)):
        return tuple(_freeze(v) for v in value)
    if isinstance(value, dict):
        return tuple(sorted((k, _freeze(v)) for k, v in value.items()))
    if isinstance(value, np.generic):
        return _freeze(value.item())
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    return ("object", id(value))  # anything else: only the very same object is equal


class _Recorder:
    """Stands in for a Requirements (or its Brief) and logs every field read."""

    def __init__(self, target, prefix: str, log: dict):
        object.__setattr__(self, "_target", target)
        object.__setattr__(self, "_prefix", prefix)
        object.__setattr__(self, "_log", log)

    def __getattr__(self, name: str):
        value = getattr(self._target, name)
        path = self._prefix + name
        if isinstance(value, Brief):
            return _Recorder(value, path + ".", self._log)
        if callable(value):  # a method: its result depends on everything
            self._log[path] = ("object", id(self._target))
            return value
        self._log[path] = _freeze(value)
        return value


@dataclass
class CheckPlan:
    """One check's grouping of the profiles: ``groups[p]`` is the group of profile p
    and ``representatives[g]`` the Requirements evaluated for group g."""

    name: str
    groups: np.ndarray
    representatives: list[Requirements]


def plan(requirements: list[Requirements], library: Library) -> list[CheckPlan]:
    """Group the profiles per check by the requirement fields the check reads.

    A profile whose values agree with an existing group on every field that group's
    check read takes the same path through the check, so it joins the group without
    running the check again; only a profile that matches no group is recorded.
    """
    probe = Parts(library_slice(library, 0, min(len(library), 2)))
    plans = []
    for name, spec in REGISTRY.items():
        known: list[tuple[tuple[str, ...], tuple]] = []  # (fields read, their values)
        groups = np.empty(len(requirements), dtype=np.intp)
        representatives: list[Requirements] = []
        for index, req in enumerate(requirements):
            group = next((g for g, (paths, values) in enumerate(known)
                          if _values(req, paths) == values), None)
            if group is None:
                log: dict = {}
                spec.function(_Recorder(req, "", log), probe)
                paths = tuple(sorted(log))
                group = len(known)
                known.append((paths, tuple(log[p] for p in paths)))
                representatives.append(req)
            groups[index] = group
        plans.append(CheckPlan(name, groups, representatives))
    return plans


def _values(req: Requirements, paths: tuple[str, ...]) -> tuple:
    """The frozen values of ``req`` at dotted ``paths`` (as the recorder logs them)."""
    values = []
    for path in paths:
        target = req
        for step in path.split("."):
            target = getattr(target, step)
        values.append(("object", None) if callable(target) else _freeze(target))
    return tuple(values)


def library_slice(library: Library, start: int, stop: int) -> Library:
    """Rows ``start:stop`` of ``library`` as a Library of their own."""
    table = library.table.iloc[start:stop].reset_index(drop=True)
    return Library(library.path, table, library.rows[start:stop], library.extra,
                   library.units, [])


# ------------------------------------------------------------------ evaluation
def coverage_grid(library: Library, profiles: list[Brief | Requirements] | None = None,
                  chunk: int | None = None) -> pd.DataFrame:
    """Count the parts that qualify for each profile (one row per profile).

    ``profiles``: briefs to use as the grid (or their ``derive`` results, to time the
    evaluation alone); None for :func:`standard_grid` (whose label columns
    ``supply``, ``bandwidth``, ``precision`` are then included; its derivation is
    done once per process).
    Columns: ``profile`` (name), ``qualifying`` (parts the shortlist would list, the
    brief's own status filter applied), ``unknown`` (no check fails but some data is
    missing), ``active`` / ``nrnd`` / ``obsolete`` (parts of that status passing
    every check and every other filter: the status filter waived), ``gap``
    (qualifying = 0), ``single_source`` (qualifying = 1), ``legacy_only`` (a gap
    that only nrnd or obsolete parts would fill) and ``sources`` (up to three
    qualifying part keys).  ``chunk`` bounds memory: parts per pass (default: about
    4 million profile × part cells per pass).
    """
    labels = None
    if chunk is not None and chunk < 1:
        raise InputError(f"coverage: chunk must be at least 1, got {chunk}")
    if profiles is None:
        labels = standard_grid().drop(columns="brief")
        requirements = list(standard_requirements())
    else:
        if not len(profiles):
            raise InputError("coverage: no profiles to evaluate")
        requirements = [p if isinstance(p, Requirements) else derive(p) for p in profiles]
    size, count = len(library), len(requirements)
    chunk = chunk or max(1024, CELLS_PER_CHUNK // count)
    plans = plan(requirements, library)
    status_text = (library.table["status"].fillna("").astype(str).str.lower().to_numpy()
                   if "status" in library.table else np.full(size, "", dtype=object))
    keys = library.table["part"].astype(str).to_numpy()
    totals = {k: np.zeros(count, dtype=np.int64)
              for k in ("qualifying", "unknown") + STATUSES}
    sources: list[list[str]] = [[] for _ in range(count)]
    for start in range(0, size, chunk):
        stop = min(size, start + chunk)
        verdict = _evaluate_chunk(plans, library_slice(library, start, stop), count)
        qualifies = ~(verdict["fail"] | verdict["unknown"])
        totals["qualifying"] += qualifies.sum(axis=1)
        totals["unknown"] += (~verdict["fail"] & verdict["unknown"]).sum(axis=1)
        waived = ~(verdict["other_fail"] | verdict["other_unknown"])
        chunk_status = status_text[start:stop]
        for status in STATUSES:
            totals[status] += (waived & (chunk_status == status)).sum(axis=1)
        for profile in np.flatnonzero(qualifies.any(axis=1)):
            room = SOURCES_LISTED - len(sources[profile])
            if room > 0:
                found = np.flatnonzero(qualifies[profile])[:room] + start
                sources[profile].extend(keys[found].tolist())
    frame = pd.DataFrame({"profile": [r.name for r in requirements], **totals})
    frame["gap"] = frame["qualifying"] == 0
    frame["single_source"] = frame["qualifying"] == 1
    frame["legacy_only"] = frame["gap"] & ((frame["nrnd"] + frame["obsolete"]) > 0)
    frame["sources"] = [", ".join(s) for s in sources]
    if labels is not None:
        frame = pd.concat([labels.reset_index(drop=True), frame], axis=1)
    frame.attrs["parts"] = size
    return frame


def _evaluate_chunk(plans: list[CheckPlan], chunk: Library, count: int) -> dict:
    """(profiles × parts) masks: any check failing / unknown, with and without the
    status filter."""
    parts = Parts(chunk)
    shape = (count, len(chunk))
    others = np.zeros(shape, dtype=np.int8)  # bit 0: a check fails, bit 1: unknown
    status_bits = np.zeros(shape, dtype=np.int8)
    for item in plans:
        function = REGISTRY[item.name].function
        codes = np.empty((len(item.representatives), len(chunk)), dtype=np.int8)
        for group, req in enumerate(item.representatives):
            status = function(req, parts).status
            codes[group] = (status == FAIL) | ((status == UNKNOWN) << 1)
        target = status_bits if item.name == "status" else others
        target |= codes[item.groups]  # broadcast the group results to every profile
    every = others | status_bits
    return {"fail": (every & 1).astype(bool), "unknown": (every & 2).astype(bool),
            "other_fail": (others & 1).astype(bool),
            "other_unknown": (others & 2).astype(bool)}
