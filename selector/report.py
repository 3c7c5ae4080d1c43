"""Output: rich tables for people, JSON / CSV / Markdown for scripts and reviews.

JSON is in SI units with stable key order; NaN and infinity become null.  Terminal
tables show engineering notation (``1.26 V/µs``, ``2.4 MHz``).
"""
from __future__ import annotations

import csv
import io
import json
import math
import re
import sys
from typing import Iterable

import numpy as np

from .checks import NA, PASS, REGISTRY, UNKNOWN
from .ranking import Shortlist
from .requirements import Requirements
from .units import format_si

CAUTIONS = (
    "Datasheet figures are typical or at stated conditions; output swing, bias "
    "current and offset depend on load, supply and temperature (FET-input bias "
    "current roughly doubles every 10 °C). Verify the chosen part against its "
    "datasheet and on the bench. Where mains, high voltage or safety-rated sensing "
    "is involved, local codes, the standards that apply and licensed practice govern."
)

SI_UNIT = {"ratio": "V/V", "count": "", "ohm": "ohm"}

SHORT_NAMES = {
    "supply": "Supply", "slew": "Slew", "gain_accuracy": "Gain acc.",
    "output_swing": "Swing", "input_common_mode": "CM in", "dc_error": "DC err",
    "noise": "Noise", "phase_margin": "PM", "temperature": "Temp",
    "quiescent_current": "Iq", "output_drive": "Drive", "settling": "Settle",
}


def si_unit(dimension: str) -> str:
    return SI_UNIT.get(dimension, dimension)


def clean(value):
    """JSON-safe: NaN/inf → None, numpy scalars → Python."""
    if isinstance(value, dict):
        return {k: clean(v) for k, v in value.items()}
    if isinstance(value, np.ndarray):
        return clean(value.tolist())
    if isinstance(value, (list, tuple)):
        return [clean(v) for v in value]
    if isinstance(value, (np.floating, float)):
        value = float(value)
        return None if math.isnan(value) or math.isinf(value) else value
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.bool_):
        return bool(value)
    return value


def to_json(data) -> str:
    return json.dumps(clean(data), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


# ------------------------------------------------------------------ data shapes
DERIVED_KEYS = ("name", "topology", "gain", "noise_gain", "offset", "reference", "rf",
                "rg", "output_range", "input_common_mode", "supply_span", "output_peak",
                "slew_min", "closed_loop_bandwidth_min", "gbw_min", "dc_error_budget",
                "noise_budget", "temperature")


def derived_dict(req: Requirements) -> dict:
    """The ``derive`` JSON object: exactly :data:`DERIVED_KEYS`, SI units."""
    data = req.to_dict()
    return {key: data[key] for key in DERIVED_KEYS}


def entry_dict(shortlist: Shortlist, position: int, extra: dict | None = None) -> dict:
    """One part's entry: rank, part, score, binding, checks (SI)."""
    evaluation = shortlist.evaluation
    row = evaluation.parts.iloc[position]
    checks = {name: {k: v for k, v in check.items() if k != "columns"}
              for name, check in evaluation.checks_of(position).items()}
    for name, check in checks.items():
        check["unit"] = si_unit(check["unit"])
    entry = {"part": row["part"], "score": row["score"], "binding": row["binding"],
             "checks": checks}
    if extra:
        entry = {**extra, **entry}
    return entry


def shortlist_dict(shortlist: Shortlist, top: int | None = None) -> dict:
    """The stable JSON shape of ``selector shortlist``."""
    qualifying = shortlist.qualifying if top is None else shortlist.qualifying.head(top)
    near = shortlist.near_misses if top is None else shortlist.near_misses.head(top)
    evaluation = shortlist.evaluation
    return {
        "derived": derived_dict(shortlist.requirements),
        "library": {"path": evaluation.library.path, "parts": len(evaluation.library)},
        "counts": shortlist.counts,
        "shortlist": [entry_dict(shortlist, int(r.position), {"rank": int(r.rank)})
                      for r in qualifying.itertuples()],
        "near_misses": [{**entry_dict(shortlist, int(r.position)),
                         "failed": evaluation.names_of(r.failed_bits)}
                        for r in near.itertuples()],
        "notes": shortlist.requirements.notes,
        "cautions": CAUTIONS,
    }


# ------------------------------------------------------------------ words
def format_margin(sense: str, unit: str, status: str, margin) -> str:
    if status == NA:
        return "·"
    if status == UNKNOWN:
        return "?"
    if margin is None or (isinstance(margin, float) and math.isnan(margin)):
        return "✓" if status == PASS else "✗"
    if sense in ("min", "max"):
        text = "∞" if math.isinf(margin) else f"{margin:.2f}×"
    elif sense == "headroom":
        text = format_si(margin, unit)
    else:
        text = "ok" if status == PASS else "no"
    return text if status == PASS else f"✗ {text}"


def reason(name: str, check: dict) -> str:
    """One line in engineering terms for a failing or unknown check."""
    spec = REGISTRY[name]
    unit = check["unit"]
    req = format_si(check["required"], unit) if check["required"] is not None else "—"
    avail = format_si(check["available"], unit) if check["available"] is not None else "—"
    if check["status"] == UNKNOWN:
        return f"{name}: unknown, the library lacks {', '.join(spec.columns)}"
    if spec.sense == "min":
        return f"{name}: needs {req}, part gives {avail}"
    if spec.sense == "max":
        return f"{name}: part gives {avail}, budget is {req}"
    if spec.sense == "headroom":
        short = format_si(-check["margin"], unit) if check["margin"] is not None else "?"
        return f"{name}: short by {short} (needs {req}, has {avail})"
    return f"{name}: excluded by the brief's {name} filter"


def derived_rows(req: Requirements) -> list[tuple[str, str]]:
    f = format_si
    rows = [
        ("topology", req.topology),
        ("gain (noise gain)", f"{req.gain:.4g} V/V ({req.noise_gain:.4g})"),
        ("offset / reference", f"{f(req.offset, 'V')} / "
         + (f(req.reference, "V") if req.reference is not None else "none")),
        ("rf / rg", f"{f(req.rf, 'ohm')} / {f(req.rg, 'ohm')} ({req.network_source})"),
        ("output range", f"{f(req.output_range[0], 'V')} to {f(req.output_range[1], 'V')}"),
        ("input common mode", f"{f(req.input_common_mode[0], 'V')} to "
         f"{f(req.input_common_mode[1], 'V')}"),
        ("supply span", f(req.supply_span, "V")),
        ("output peak (AC)", f(req.output_peak, "V")),
        ("minimum slew", f(req.slew_min, "V/s") if req.slew_min else "n/a (no sine)"),
        ("closed-loop bandwidth", f(req.closed_loop_bandwidth_min, "Hz")
         if req.closed_loop_bandwidth_min else "n/a"),
        ("minimum GBW", f(req.gbw_min, "Hz") if req.gbw_min else
         f"n/a (DC: A_OL ≥ {f(req.aol_min, 'ratio')})"),
        ("DC error budget", f(req.dc_error_budget, "V") if req.dc_error_budget else "none"),
        ("noise budget", f(req.noise_budget, "V") + " rms" if req.noise_budget else "none"),
        ("temperature", f"{req.temperature[0]:g} to {req.temperature[1]:g} °C"
         if req.temperature else "not given"),
    ]
    return rows


# ------------------------------------------------------------------ renderers
def render_derive(req: Requirements, fmt: str, console=None) -> str | None:
    if fmt == "json":
        # the object has exactly the documented keys; notes go to stderr
        for note in req.notes:
            print(f"selector: note: {note}", file=sys.stderr)
        return to_json(derived_dict(req))
    rows = derived_rows(req)
    if fmt == "markdown":
        lines = [f"## Derived requirements: {req.name}", "", "| quantity | value |",
                 "|---|---|"] + [f"| {k} | {v} |" for k, v in rows]
        return "\n".join(lines + [""] + [f"- {n}" for n in req.notes]) + "\n"
    if fmt == "csv":
        return write_csv([("quantity", "value")] + rows)
    _print_derived(console, req, rows)
    return None


def _print_derived(console, req, rows) -> None:
    from rich.table import Table
    table = Table(title=f"Derived requirements — {req.name}", title_justify="left")
    table.add_column("quantity")
    table.add_column("value")
    for key, value in rows:
        table.add_row(key, value)
    console.print(table)
    for note in req.notes:
        console.print(f"[dim]note: {note}[/dim]")


def shortlist_rows(shortlist: Shortlist, frame, with_failed: bool) -> list[list[str]]:
    evaluation = shortlist.evaluation
    names = [n for n, s in REGISTRY.items() if s.sense != "filter"]
    rows = []
    for r in frame.itertuples():
        checks = evaluation.checks_of(int(r.position))
        cells = [str(getattr(r, "rank", "")), r.part]
        score = "∞" if math.isinf(r.score) else f"{r.score:.2f}×"
        cells += [score, r.binding or "—"]
        for name in names:
            c = checks[name]
            cells.append(format_margin(REGISTRY[name].sense, REGISTRY[name].unit,
                                       c["status"], c["margin"]))
        cost = evaluation.library.column("unit_cost")[int(r.position)]
        cells.append("—" if math.isnan(cost) else f"{cost:.2f}")
        if with_failed:
            cells.append("; ".join(reason(n, checks[n])
                                   for n in evaluation.names_of(r.failed_bits)))
        rows.append(cells)
    return rows


def render_shortlist(shortlist: Shortlist, fmt: str, top: int, console=None) -> str | None:
    if fmt == "json":
        return to_json(shortlist_dict(shortlist, top))
    names = [n for n, s in REGISTRY.items() if s.sense != "filter"]
    header = ["rank", "part", "score", "binding"] + [SHORT_NAMES[n] for n in names] + ["cost"]
    good = shortlist_rows(shortlist, shortlist.qualifying.head(top), False)
    near = shortlist_rows(shortlist, shortlist.near_misses.head(top), True)
    if fmt == "csv":
        flat = shortlist_dict(shortlist, top)
        return _shortlist_csv(flat)
    if fmt == "markdown":
        return _shortlist_markdown(shortlist, header, good, near)
    _print_shortlist(console, shortlist, header, good, near)
    return None


def _shortlist_csv(flat: dict) -> str:
    names = list(REGISTRY)
    header = ["group", "rank", "part", "score", "binding", "failed"]
    for name in names:
        header += [f"{name}_status", f"{name}_required", f"{name}_available",
                   f"{name}_margin", f"{name}_unit"]
    rows: list[Iterable] = [header]
    for group in ("shortlist", "near_misses"):
        for entry in flat[group]:
            row = [group, entry.get("rank", ""), entry["part"], clean(entry["score"]),
                   entry["binding"] or "", " ".join(entry.get("failed", []))]
            for name in names:
                c = entry["checks"][name]
                row += [c["status"], clean(c["required"]), clean(c["available"]),
                        clean(c["margin"]), c["unit"]]
            rows.append(row)
    return write_csv(rows)


def _shortlist_markdown(shortlist, header, good, near) -> str:
    req = shortlist.requirements
    lines = [f"## Shortlist: {req.name}", "",
             f"Library `{shortlist.evaluation.library.path}`: "
             + ", ".join(f"{v} {k}" for k, v in shortlist.counts.items()), ""]
    lines += ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    lines += ["| " + " | ".join(row) + " |" for row in good]
    if near:
        lines += ["", "### Near misses", "", "| part | failed because |", "|---|---|"]
        lines += [f"| {row[1]} | {row[-1]} |" for row in near]
    lines += [""] + [f"- note: {n}" for n in req.notes] + ["", f"> {CAUTIONS}", ""]
    return "\n".join(lines)


def _print_shortlist(console, shortlist, header, good, near) -> None:
    from rich.table import Table
    req = shortlist.requirements
    counts = shortlist.counts
    render_derive(req, "table", console)
    table = Table(title=f"Qualifying parts ({counts['qualifying']} of "
                  f"{counts['considered']}; {counts['unknown']} unknown, "
                  f"{counts['rejected']} rejected)", title_justify="left")
    for column in header:
        table.add_column(column, justify="right" if column not in ("part", "binding")
                         else "left", no_wrap=column == "part")
    for row in good:
        table.add_row(*row)
    console.print(table)
    if not good:
        console.print("[bold red]No part in the library meets this brief.[/bold red]")
    if near:
        misses = Table(title="Near misses (fail one or two checks)", title_justify="left")
        misses.add_column("part", no_wrap=True)
        misses.add_column("failed because")
        for row in near:
            misses.add_row(row[1], row[-1])
        console.print(misses)
    console.print("[dim]margins: ×: available/required or budget/actual (≥ 1 passes); "
                  "volts and °C: headroom left; ·: not asked; ?: data missing[/dim]")
    console.print(f"[yellow]caution:[/yellow] {CAUTIONS}")


# ------------------------------------------------------------------ CSV
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


# A plain decimal number (what a spreadsheet reads as a number, not a formula).
PLAIN_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")


def neutralise(cell):
    """One CSV cell made safe for a spreadsheet (SI numbers, text as text).

    A text cell starting with ``=``, ``+``, ``-``, ``@``, tab or carriage return is
    prefixed with ``'`` so a spreadsheet shows it instead of running it as a formula
    (spreadsheet formula injection); a text cell that is a plain decimal number such
    as ``-3.5e-6`` is left alone.  Numbers stay numbers; None, NaN and infinity
    become an empty cell (as null in JSON); booleans are written as true/false.
    """
    if cell is None:
        return ""
    if isinstance(cell, (bool, np.bool_)):
        return "true" if cell else "false"
    if isinstance(cell, (int, np.integer)):
        return int(cell)
    if isinstance(cell, (float, np.floating)):
        return "" if not math.isfinite(float(cell)) else float(cell)
    cell = str(cell)
    if cell.startswith(FORMULA_START) and not PLAIN_NUMBER.fullmatch(cell):
        return "'" + cell
    return cell


def write_csv(rows: Iterable[Iterable]) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    for row in rows:
        writer.writerow([neutralise(c) for c in row])
    return buffer.getvalue()


__all__ = ["CAUTIONS", "render_derive", "render_shortlist", "shortlist_dict", "to_json",
           "write_csv", "entry_dict", "reason"]
