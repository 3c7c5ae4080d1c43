"""Output of ``qualify`` and ``recheck``: rich tables, JSON, CSV and Markdown.

JSON is in SI units (NaN and infinity become null); tables show engineering
notation.  The data come from :mod:`selector.qualify`.
"""
from __future__ import annotations

import math

import pandas as pd

from .checks import FAIL, PASS, UNKNOWN
from .qualify import QUALIFIES, Qualification
from .report import CAUTIONS, clean, format_margin, si_unit, to_json, write_csv
from .units import format_si

_STYLE = {PASS: "green", FAIL: "bold red", UNKNOWN: "yellow", "n/a": "dim"}
_VERDICT_STYLE = {"qualifies": "bold green", "fails": "bold red", "unknown": "bold yellow"}


def _missing(value) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value))


def _value(value, unit: str) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "—"
    return format_si(value, unit)


def check_cells(row) -> list[str]:
    """Table cells of one check row of :meth:`Qualification.checks`."""
    if row.kind == "filter":
        required = "" if _missing(row.required) else f"{row.required:g}"
        available = "" if _missing(row.available) else f"{row.available:g}"
    else:
        required, available = _value(row.required, row.unit), _value(row.available, row.unit)
    if row.status == UNKNOWN:
        available = "?"  # computed from a missing figure: not a value to read
    margin = format_margin(row.sense, row.unit, row.status, row.margin)
    if row.status == FAIL and margin.startswith("✗ "):
        margin = margin[2:]
    return [row.check, row.status, required, available, margin, row.columns, row.reason]


def headline(q: Qualification) -> str:
    """One line: the part, the brief and the verdict with its weakest margin."""
    row = q.shortlist.evaluation.parts.iloc[q.position]
    brief = q.shortlist.requirements.name
    if q.verdict == "qualifies":
        score = "∞" if math.isinf(row["score"]) else f"{row['score']:.2f}×"
        return (f"{q.part} QUALIFIES for '{brief}': rank {q.rank()} of "
                f"{q.shortlist.counts['qualifying']}, weakest margin {score} "
                f"({row['binding']})")
    checks = q.checks()
    failed = (checks["status"] == FAIL).sum()
    unknown = (checks["status"] == UNKNOWN).sum()
    if q.verdict == "fails":
        return f"{q.part} FAILS '{brief}': {failed} check(s) fail, {unknown} unknown"
    return f"{q.part} is UNKNOWN for '{brief}': no check fails, {unknown} lack data"


def render_qualify(q: Qualification, fmt: str, console=None) -> str | None:
    """Render one qualification in ``fmt`` (table, json, csv, markdown)."""
    if fmt == "json":
        return to_json(q.to_dict())
    checks = q.checks()
    header = ["check", "status", "required", "available", "margin", "columns", "reason"]
    rows = [check_cells(r) for r in checks.itertuples()]
    alternatives = q.alternatives()
    if fmt == "csv":
        out = [["check", "kind", "status", "required", "available", "margin", "unit",
                "columns", "reason"]]
        for r in checks.itertuples():
            out.append([r.check, r.kind, r.status, clean(r.required), clean(r.available),
                        clean(r.margin), si_unit(r.unit), r.columns, r.reason])
        return write_csv(out)
    if fmt == "markdown":
        lines = [f"## Qualify: {q.part}", "", f"**{headline(q)}**", "",
                 "| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
        lines += ["| " + " | ".join(c.replace("|", "\\|") for c in row) + " |" for row in rows]
        lines += ["", "### Alternatives", ""] + [
            f"{a.rank}. {a.part}: {a.score:.2f}× ({a.binding})"
            for a in alternatives.itertuples()] + ["", f"> {CAUTIONS}", ""]
        return "\n".join(lines)
    from rich.table import Table
    console.print(f"[{_VERDICT_STYLE[q.verdict]}]{headline(q)}[/]")
    table = Table(title=f"Checks and filters — {q.part} "
                  f"(library {q.shortlist.evaluation.library.path})", title_justify="left")
    for column in header:
        table.add_column(column, justify="right" if column in
                         ("required", "available", "margin") else "left",
                         no_wrap=column != "reason")
    for row, status in zip(rows, checks["status"]):
        table.add_row(*row, style=_STYLE.get(status))
    console.print(table)
    if len(alternatives):
        alt = Table(title="Alternatives from the same library (top of the shortlist)",
                    title_justify="left")
        for column in ("rank", "part", "score", "binding", "cost"):
            alt.add_column(column)
        for a in alternatives.itertuples():
            cost = "—" if math.isnan(a.unit_cost) else f"{a.unit_cost:.2f}"
            alt.add_row(str(a.rank), a.part, f"{a.score:.2f}×", a.binding or "—", cost)
        console.print(alt)
    else:
        console.print("[bold red]No part in the library qualifies for this brief.[/]")
    console.print(f"[yellow]caution:[/yellow] {CAUTIONS}")
    return None


def _margin_text(row: dict) -> str:
    margin = row["margin"]
    if margin is None or (isinstance(margin, float) and math.isnan(margin)):
        return "—"
    if row["sense"] == "ratio":
        return "∞" if math.isinf(margin) else f"{margin:.2f}×"
    return format_si(margin, row["unit"] or "V")


def _rows(frame: pd.DataFrame) -> list[dict]:
    """Records with NaN turned into None (pandas stores a missing cell as NaN)."""
    return [{k: (None if isinstance(v, float) and math.isnan(v) else v)
             for k, v in r.items()} for r in frame.to_dict("records")]


def render_recheck(frame: pd.DataFrame, fmt: str, console=None) -> str | None:
    """Render the recheck table in ``fmt``."""
    records = _rows(frame)
    if fmt == "json":
        return to_json({"designs": [clean(r) for r in records],
                        "all_qualify": bool((frame["status"] == QUALIFIES).all())})
    header = ["design", "part", "status", "weakest margin", "binding check", "reason"]
    rows = [[r["design"], r["part"], r["status"], _margin_text(r), r["binding"] or "—",
             r["reason"] or ""] for r in records]
    if fmt == "csv":
        out = [["design", "file", "part", "matched", "status", "margin", "margin_kind",
                "unit", "binding", "reason"]]
        out += [[r["design"], r["file"], r["part"], r["matched"] or "", r["status"],
                 clean(r["margin"]), r["sense"] or "",
                 si_unit(r["unit"]) if r["unit"] else "", r["binding"] or "",
                 r["reason"] or ""] for r in records]
        return write_csv(out)
    good = int((frame["status"] == QUALIFIES).sum())
    summary = f"{good} of {len(frame)} saved designs still qualify"
    if fmt == "markdown":
        lines = ["## Recheck", "", summary, "", "| " + " | ".join(header) + " |",
                 "|" + "---|" * len(header)]
        lines += ["| " + " | ".join(str(c).replace("|", "\\|") for c in row) + " |"
                  for row in rows]
        return "\n".join(lines) + "\n"
    from rich.table import Table
    table = Table(title=f"Saved designs re-checked ({summary})", title_justify="left")
    for column in header:
        table.add_column(column, no_wrap=column != "reason")
    for row, status in zip(rows, frame["status"]):
        table.add_row(*row, style="green" if status == QUALIFIES else "bold red")
    console.print(table)
    return None
