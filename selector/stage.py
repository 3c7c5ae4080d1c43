"""The resistor side of a stage, designed for a brief (and optionally a part).

:func:`design` solves the transfer line (selector.offset), picks the Rf/Rg level
(selector.network), and returns a :class:`StageDesign`: the offset network, one
candidate pair per Rg decade plus the chosen one (and the brief's own pair when it
gives one) with every level effect, and the Monte Carlo spread of each shown pair.
SI units throughout.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import network as net
from .brief import Brief
from .errors import InputError
from .library import Library
from .offset import OffsetSolution, realise, stage_of
from .requirements import _transfer_line


@dataclass
class StageDesign:
    """A designed stage.  ``candidates``: one row per shown pair (see
    :func:`selector.network.level_effects` for the columns) plus ``mc_low``,
    ``mc_high`` (99 % interval of the relative gain error), ``mc_std``, ``code_rf``,
    ``code_rg``, ``label`` ("chosen", "brief" or ""), ``code_cf``."""

    brief: Brief
    part: net.PartFigures | None
    solution: OffsetSolution
    candidates: pd.DataFrame
    series: str
    tolerance: float
    notes: list[str] = field(default_factory=list)


def find_part(library: Library, key: str) -> tuple[net.PartFigures, str | None]:
    """The figures of part ``key`` (fuzzy match through selector.matching), and the
    note to show when the match was not exact."""
    from .matching import match_part
    match = match_part(key, library.table["part"], source=library.path)
    row = library.table.iloc[match.position]
    return net.PartFigures.from_row(row), match.note()


def wanted_line(brief: Brief) -> tuple[float, float]:
    """(G, c) of the brief's transfer line; raises InputError like ``derive``."""
    from .errors import Problem
    problems = []

    def fail(key, message):
        problems.append(Problem(brief.source, f"key '{key}'", message))

    gain, offset = _transfer_line(brief, fail)
    if problems:
        raise InputError(problems)
    if gain is None:  # network only: the brief's pair sets the gain
        rs = brief.source_resistance
        gain = (1 + brief.rf / brief.rg if brief.topology == "non-inverting"
                else -brief.rf / (brief.rg + rs))
        offset = 0.0
    return gain, offset or 0.0


def design(brief: Brief, part: net.PartFigures | None = None, series: str = "auto",
           tolerance: float | None = None) -> StageDesign:
    """Design the network of ``brief`` (see the module text)."""
    if brief.topology == "follower":
        raise InputError(f"{brief.source}: key 'topology': a follower has no gain "
                         "network to design")
    gain, offset = wanted_line(brief)
    solution = realise(brief, gain, offset, series, tolerance, part)
    pair = solution.pair
    t = pair.tolerance
    table = pair.table
    shown = net.by_decade(table)
    same = np.flatnonzero((table["rf"].to_numpy() == solution.rf)
                          & (table["rg"].to_numpy() == solution.rg))
    chosen_row = table.iloc[[int(same[0]) if len(same) else pair.chosen]]
    frames = [chosen_row.assign(label="chosen"),
              shown.drop(index=shown.index.intersection(chosen_row.index)).assign(label="")]
    notes = list(solution.notes)
    if brief.rf is not None and brief.rg is not None:
        frames.insert(0, _brief_row(brief, solution, part, t, pair.series))
        if solution.kind != "none":
            notes.append("the brief's rf/rg are shown for comparison; the offset "
                         "network is designed with the chosen pair")
    if (solution.rf, solution.rg) != (pair.rf, pair.rg) and not len(same):
        notes.append(f"Rg is made as Ra ∥ Rb = {solution.rg:.4g} Ω (the chosen row shows "
                     f"the nearest single Rg, {net.resistor_code(pair.rg)})")
    candidates = pd.concat(frames, ignore_index=True)
    candidates = candidates.sort_values(
        "label", key=lambda s: s.map({"brief": 0, "chosen": 1, "": 2})).reset_index(drop=True)
    _add_spread(candidates, brief, t)
    candidates["code_rf"] = [net.resistor_code(v) for v in candidates["rf"]]
    candidates["code_rg"] = [net.resistor_code(v) for v in candidates["rg"]]
    return StageDesign(brief, part, solution, candidates, pair.series, t, notes)


def _brief_row(brief, solution, part, tolerance, series) -> pd.DataFrame:
    rs = brief.source_resistance if brief.topology == "inverting" else 0.0
    frame = pd.DataFrame({"rg": [brief.rg], "rf": [brief.rf]})
    frame["ratio"] = frame["rf"] / (frame["rg"] + rs)
    wanted = solution.pair.table.attrs["wanted"]
    frame["gain"] = net._gain(frame["rf"], frame["rg"], 1.0, rs, brief.topology)
    frame["error"] = frame["gain"] / wanted - 1
    low, high = net.worst_case_gain(frame["rf"], frame["rg"], tolerance, brief.topology, rs)
    frame["worst"] = np.maximum(np.abs(low / wanted - 1), np.abs(high / wanted - 1))
    noise_gain = 1 + brief.rf / (brief.rg + rs)
    stage = stage_of(brief, noise_gain, sorted(solution.wanted_endpoints),
                     solution.reference or 0.0)
    effects = net.level_effects(frame, stage, part or net.TYPICAL)
    return effects.assign(label="brief")


def _add_spread(candidates: pd.DataFrame, brief: Brief, tolerance: float) -> None:
    rs = brief.source_resistance if brief.topology == "inverting" else 0.0
    wanted = candidates["gain"].to_numpy(float) / (1 + candidates["error"].to_numpy(float))
    low, high, std = net.monte_carlo(candidates["rf"], candidates["rg"], wanted, tolerance,
                                     brief.topology, rs)
    candidates["mc_low"], candidates["mc_high"], candidates["mc_std"] = low, high, std


def to_dict(result: StageDesign) -> dict:
    """JSON shape of ``selector network`` (SI units)."""
    s = result.solution
    keep = ["label", "rf", "rg", "code_rf", "code_rg", "gain", "error", "worst", "mc_low",
            "mc_high", "i_network", "i_total", "p_rf", "p_rg", "req", "noise_resistors",
            "noise_amp", "bias_error", "f_fb", "crossover", "pm", "cf", "f_cf", "pm_cf",
            "bw", "bw_cf", "figure"]
    return {
        "brief": result.brief.name, "part": result.part.key if result.part else None,
        "series": result.series, "tolerance": result.tolerance,
        "network": {
            "kind": s.kind, "rf": s.rf, "rg": s.rg, "r1": s.r1, "r2": s.r2, "ra": s.ra,
            "rb": s.rb, "source_voltage": s.source_voltage, "reference": s.reference,
            "gain": s.gain, "offset": s.offset, "noise_gain": s.noise_gain,
            "wanted_gain": s.wanted[0], "wanted_offset": s.wanted[1],
            "endpoints": list(s.endpoints), "wanted_endpoints": list(s.wanted_endpoints),
            "endpoint_error": s.endpoint_error, "input_impedance": s.input_impedance,
            "input_common_mode": list(s.common_mode)},
        "candidates": result.candidates[keep].to_dict(orient="records"),
        "notes": result.notes,
    }


def resistor_list(solution: OffsetSolution) -> list[tuple[str, float]]:
    """(name, Ω) of every resistor of the solution, in drawing order."""
    names = ("rf", "rg", "r1", "r2", "ra", "rb")
    return [(name.capitalize() if len(name) == 2 else name, getattr(solution, name))
            for name in names if getattr(solution, name) is not None
            and math.isfinite(getattr(solution, name))
            and not (name == "rg" and solution.kind == "rg-to-reference"
                     and solution.ra is not None)]
