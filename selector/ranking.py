"""Evaluate a library against a brief and rank the parts (method §8).

A part qualifies when no check or filter fails and none is unknown.  Its score is
its weakest ratio margin (``min``/``max`` checks that apply); the check giving it is
the binding check.  Ties go to lower unit cost, then lower quiescent current.
Near misses are parts that fail one or two checks or filters and nothing is unknown.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .checks import (FAIL, PASS, RATIO_SENSES, STATUS_CODES, UNKNOWN, CheckResult,
                     run_checks)
from .library import Library
from .requirements import Requirements

NEAR_MISS_MAX_FAILED = 2


@dataclass
class Evaluation:
    """Every check on every part, plus the per-part verdict.

    ``parts``: one row per library part with columns ``part``, ``verdict``
    (qualifies / unknown / rejected), ``score``, ``binding``, ``n_failed``,
    ``n_unknown``, ``failed_bits`` / ``unknown_bits`` (bit i = i-th check, see
    :meth:`names_of`), ``unit_cost``, ``iq``.
    """

    requirements: Requirements
    library: Library
    checks: dict[str, CheckResult]
    parts: pd.DataFrame

    def frame(self) -> pd.DataFrame:
        """Wide table: index part, columns (check, status|required|available|margin)."""
        data = {}
        for name, result in self.checks.items():
            for field in ("status", "required", "available", "margin"):
                data[(name, field)] = getattr(result, field)
        frame = pd.DataFrame(data, index=self.parts["part"].to_numpy())
        frame.columns = pd.MultiIndex.from_tuples(frame.columns, names=["check", "field"])
        return frame

    def names_of(self, bits: int) -> list[str]:
        """Check names of the set bits of a ``failed_bits``/``unknown_bits`` value."""
        return [name for i, name in enumerate(self.checks) if int(bits) >> i & 1]

    def checks_of(self, position: int) -> dict[str, dict]:
        """The checks of the part at ``position``: name → status, required, ... (SI)."""
        return {name: {"status": r.status[position], "required": _num(r.required[position]),
                       "available": _num(r.available[position]),
                       "margin": _num(r.margin[position]), "unit": r.unit,
                       "columns": list(r.columns)}
                for name, r in self.checks.items()}


@dataclass
class Shortlist:
    """The outcome of one brief against one library."""

    evaluation: Evaluation
    qualifying: pd.DataFrame  # ranked; columns rank, part, score, binding, position
    near_misses: pd.DataFrame  # columns part, failed, n_failed, shortfall, position
    counts: dict[str, int]

    @property
    def requirements(self) -> Requirements:
        return self.evaluation.requirements


def _num(value) -> float | None:
    value = float(value)
    return None if np.isnan(value) else value


def evaluate(req: Requirements, library: Library) -> Evaluation:
    """Run every check on every part and give each part its verdict and score."""
    checks = run_checks(req, library)
    size = len(library)
    names = list(checks)
    codes = {n: _codes_of(checks[n]) for n in names}  # int8 per part: fast to combine
    code = (np.stack([codes[n] for n in names], axis=1) if names
            else np.empty((size, 0), dtype=np.int8))
    failed_mask = code == _FAIL_CODE
    unknown_mask = code == _UNKNOWN_CODE
    ratio_names = [n for n in names if checks[n].sense in RATIO_SENSES]
    margins = np.stack([np.where(codes[n] == _PASS_CODE, checks[n].margin, np.inf)
                        for n in ratio_names], axis=1)
    score = margins.min(axis=1)
    binding_index = margins.argmin(axis=1)
    binding = np.array(ratio_names, dtype=object)[binding_index]
    binding = np.where(np.isinf(score), None, binding)
    n_failed = failed_mask.sum(axis=1)
    n_unknown = unknown_mask.sum(axis=1)
    verdict = np.where(n_failed > 0, "rejected", np.where(n_unknown > 0, "unknown", "qualifies"))
    parts = pd.DataFrame({
        "part": library.table["part"].to_numpy(),
        "verdict": verdict,
        "score": score,
        "binding": binding,
        "n_failed": n_failed,
        "n_unknown": n_unknown,
        "failed_bits": _bits(failed_mask),
        "unknown_bits": _bits(unknown_mask),
        "unit_cost": library.column("unit_cost"),
        "iq": library.column("iq"),
    })
    return Evaluation(req, library, checks, parts)


_PASS_CODE, _FAIL_CODE, _UNKNOWN_CODE = (STATUS_CODES.index(s) for s in (PASS, FAIL, UNKNOWN))


def _codes_of(result: CheckResult) -> np.ndarray:
    """The int8 status codes of a check (computed from ``status`` if it has none)."""
    if result.code is not None:
        return result.code
    status = result.status
    return np.select([status == s for s in STATUS_CODES[:3]], [0, 1, 2], 3).astype(np.int8)


def _bits(mask: np.ndarray) -> np.ndarray:
    """Pack a (parts × checks) boolean mask into one integer per part."""
    # a float matrix-vector product is exact below 2**53 and far faster than an
    # integer multiply-and-sum (there are fewer than 53 checks)
    return (mask @ (2.0 ** np.arange(mask.shape[1]))).astype(np.int64)


def rank(evaluation: Evaluation) -> Shortlist:
    """Order the qualifying parts and collect the near misses."""
    parts = evaluation.parts.assign(position=np.arange(len(evaluation.parts)))
    verdict = parts["verdict"].to_numpy(dtype=object)  # compared as numpy, once each
    qualifies, rejected = verdict == "qualifies", verdict == "rejected"
    good = parts[qualifies]
    # score high first, then lower cost, lower iq (missing last), then part key; a
    # stable numpy lexsort (last key first) instead of a pandas multi-column sort
    order = _order_with_key_tiebreak(
        (good["iq"].fillna(np.inf).to_numpy(), good["unit_cost"].fillna(np.inf).to_numpy(),
         -good["score"].to_numpy()), good["part"])
    qualifying = good.iloc[order].reset_index(drop=True)
    qualifying.insert(0, "rank", np.arange(1, len(qualifying) + 1))

    near = parts[rejected & (parts["n_failed"] <= NEAR_MISS_MAX_FAILED).to_numpy()
                 & (parts["n_unknown"] == 0).to_numpy()]
    shortfall = _shortfall(evaluation, near["position"].to_numpy())
    near = near.assign(shortfall=shortfall)
    near = near.iloc[_order_with_key_tiebreak((-shortfall, near["n_failed"].to_numpy()),
                                              near["part"])]
    counts = {
        "considered": int(len(parts)),
        "qualifying": int(qualifies.sum()),
        "unknown": int((verdict == "unknown").sum()),
        "rejected": int(rejected.sum()),
    }
    return Shortlist(evaluation, qualifying, near.reset_index(drop=True), counts)


def _order_with_key_tiebreak(keys: tuple[np.ndarray, ...], text: pd.Series) -> np.ndarray:
    """Stable lexsort order on ``keys`` (last key most significant, as np.lexsort),
    with exact ties broken by ``text`` in code-point order.  Text is ranked only
    among the tied rows: sorting strings is the slow part at 10⁶ rows."""
    order = np.lexsort(keys)
    if len(order) < 2:
        return order
    sorted_keys = [k[order] for k in keys]
    same = np.logical_and.reduce([(k[1:] == k[:-1]) | (np.isnan(k[1:]) & np.isnan(k[:-1]))
                                  if k.dtype.kind == "f" else k[1:] == k[:-1]
                                  for k in sorted_keys])
    if not same.any():
        return order
    tied = np.zeros(len(order), dtype=bool)
    tied[1:] |= same
    tied[:-1] |= same
    rows = order[tied]
    text_rank = np.zeros(len(order), dtype=np.int64)
    text_rank[rows] = np.unique(text.to_numpy(dtype=object)[rows], return_inverse=True)[1].ravel()
    return np.lexsort((text_rank,) + tuple(keys))


def _shortfall(evaluation: Evaluation, positions: np.ndarray) -> np.ndarray:
    """How close a near miss comes: its worst failed ratio margin (filters and
    headroom failures count as 0), so larger is closer to qualifying."""
    worst = np.full(len(positions), np.inf)
    for result in evaluation.checks.values():
        failed = _codes_of(result)[positions] == _FAIL_CODE
        if result.sense in RATIO_SENSES:
            value = result.margin[positions]
        else:
            value = np.zeros(len(positions))
        worst = np.where(failed, np.minimum(worst, value), worst)
    return worst


def shortlist(req: Requirements, library: Library) -> Shortlist:
    """Evaluate and rank in one call."""
    return rank(evaluate(req, library))


__all__ = ["Evaluation", "Shortlist", "evaluate", "rank", "shortlist"]
