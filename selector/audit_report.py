"""Output of ``selector audit``: rich tables with a coloured coverage matrix, or
JSON, Markdown and CSV.  The data come from :mod:`selector.audit`."""
from __future__ import annotations

import math

import pandas as pd

from .audit import ERROR, Audit
from .report import clean, to_json, write_csv

CALLOUTS = 8  # single-source cells named in the text
TABLE_ROWS = 40  # findings shown in the terminal; the machine formats give all
# Our coverage scheme, from "nothing" to "plenty" (rich styles).
CELL_STYLES = [(0, "bold white on dark_red"), (1, "bold black on dark_orange"),
               (2, "black on light_goldenrod2"), (4, "black on dark_sea_green3"),
               (8, "white on steel_blue")]
SECTIONS = ("quality", "exact", "near", "coverage", "dominated")


def cell_style(count: int) -> str:
    style = CELL_STYLES[0][1]
    for floor, name in CELL_STYLES:
        if count >= floor:
            style = name
    return style


def _records(frame: pd.DataFrame) -> list[dict]:
    return [{k: clean(v) for k, v in row.items()} for row in frame.to_dict("records")]


def coverage_records(audit: Audit) -> list[dict]:
    return _records(audit.coverage)


def audit_dict(audit: Audit) -> dict:
    """The JSON shape: summary, then one list per section (SI units)."""
    return {
        "library": {"path": audit.library.path, "parts": len(audit.library)},
        "summary": audit.summary,
        "exit_status": audit.exit_status,
        "data_quality": _records(audit.quality),
        "duplicates": {"exact": _records(audit.exact),
                       "near": _records(audit.near[audit.near["kind"] == "near"]),
                       "pairs_compared": audit.near.attrs.get("pairs_compared")},
        "coverage": {"grid": "briefs" if audit.briefs is not None else "standard",
                     "profiles": coverage_records(audit)},
        "dominated": _records(audit.dominated),
    }


def render_audit(audit: Audit, fmt: str, console=None) -> str | None:
    if fmt == "json":
        return to_json(audit_dict(audit))
    if fmt == "csv":
        return _csv(audit)
    if fmt == "markdown":
        return _markdown(audit)
    _print(audit, console)
    return None


# ------------------------------------------------------------------ CSV / Markdown
def _csv(audit: Audit) -> str:
    """Long format: one row per finding, pair, grid cell or dominated part."""
    rows = [["section", "row", "column", "part", "other", "severity", "kind", "count",
             "detail"]]
    for f in audit.quality.itertuples():
        rows.append(["data_quality", _int(f.row), f.column, f.part, "", f.severity, f.kind,
                     "", f.message])
    for d in audit.exact.itertuples():
        rows.append(["exact_duplicate", d.row, "part", d.part, d.first_part, ERROR, "exact",
                     "", f"same key as row {d.first_row} after normalising"])
    for d in audit.near[audit.near["kind"] == "near"].itertuples():
        rows.append(["near_duplicate", d.row_b, "part", d.part_b, d.part_a, "warning",
                     "near", d.score, f"differs: {d.differing or 'nothing'}"])
    for c in audit.coverage.itertuples():
        flags = [n for n in ("gap", "single_source", "legacy_only") if getattr(c, n)]
        rows.append(["coverage", "", "", c.sources, "", "", " ".join(flags),
                     c.qualifying, f"{c.profile}: {c.nrnd} nrnd, {c.obsolete} obsolete, "
                     f"{c.unknown} unknown"])
    for d in audit.dominated.itertuples():
        rows.append(["dominated", d.row, "", d.part, d.by_part, "", "dominated",
                     d.dominators, f"no better than {d.by_part} (row {d.by_row}) on any "
                     "checked figure, and no cheaper"])
    return write_csv(rows)


def _int(value):
    return "" if value is None or (isinstance(value, float) and math.isnan(value)) \
        else int(value)


def _md_table(header: list[str], rows: list[list]) -> list[str]:
    lines = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    lines += ["| " + " | ".join(str(c).replace("|", "\\|") for c in row) + " |"
              for row in rows]
    return lines


def _markdown(audit: Audit) -> str:
    lines = [f"# Library audit: {audit.library.path}", "", f"**{audit.summary_line()}**",
             "", "## Data quality", ""]
    q = audit.quality
    lines += _md_table(["row", "column", "part", "severity", "kind", "message"],
                       [[_int(r.row), r.column, r.part, r.severity, r.kind, r.message]
                        for r in q.itertuples()]) if len(q) else ["No findings."]
    lines += ["", "## Duplicates", ""]
    near = audit.near[audit.near["kind"] == "near"]
    rows = [[d.part, d.first_part, "exact", "100", "same key after normalising"]
            for d in audit.exact.itertuples()]
    rows += [[d.part_a, d.part_b, "near", f"{d.score:g}", d.differing or "—"]
             for d in near.itertuples()]
    lines += _md_table(["part", "other", "kind", "score", "differing figures"], rows) \
        if rows else ["None found."]
    lines += ["", "## Coverage", ""] + _coverage_markdown(audit)
    lines += ["", "## Redundancy (dominated active parts)", ""]
    d = audit.dominated
    lines += _md_table(["part", "dominated by", "cost", "their cost"],
                       [[r.part, r.by_part, _cost(r.unit_cost), _cost(r.by_cost)]
                        for r in d.itertuples()]) if len(d) else ["None."]
    return "\n".join(lines) + "\n"


def _cost(value) -> str:
    return "—" if value is None or math.isnan(value) else f"{value:.2f}"


def _matrix(audit: Audit) -> tuple[list[str], list[tuple[str, str, list]]]:
    """Standard grid as (bandwidth labels, [(precision, supply, [cell rows])])."""
    from .coverage import BANDWIDTHS, PRECISIONS, SUPPLY_CLASSES
    cells = audit.coverage.set_index(["precision", "supply", "bandwidth"])
    rows = [(p, s, [cells.loc[(p, s, b)] for b in BANDWIDTHS])
            for p in PRECISIONS for s in SUPPLY_CLASSES]
    return list(BANDWIDTHS), rows


def _cell_text(cell) -> str:
    text = str(int(cell["qualifying"]))
    if cell["legacy_only"]:
        text += f" (L{int(cell['nrnd'] + cell['obsolete'])})"
    return text


def _coverage_markdown(audit: Audit) -> list[str]:
    if "supply" not in audit.coverage:
        return _md_table(["brief", "qualifying", "unknown", "nrnd", "obsolete", "parts"],
                         [[c.profile, c.qualifying, c.unknown, c.nrnd, c.obsolete,
                           c.sources] for c in audit.coverage.itertuples()])
    widths, rows = _matrix(audit)
    lines = ["Active parts qualifying; gain 10 non-inverting, output 10–90 % of the "
             "rails, 0–70 °C. (Ln): a gap only n nrnd/obsolete parts would fill.", ""]
    lines += _md_table(["DC error", "supply"] + widths,
                       [[p, s] + [_cell_text(c) for c in cells] for p, s, cells in rows])
    return lines + [""] + _callouts(audit)


def _callouts(audit: Audit) -> list[str]:
    c = audit.coverage
    lines = []
    single = c[c["single_source"]]
    if len(single):
        shown = "; ".join(f"{r.profile} ({r.sources})" for r in single.head(CALLOUTS)
                          .itertuples())
        more = f"; … and {len(single) - CALLOUTS} more" if len(single) > CALLOUTS else ""
        lines.append(f"Single-source cells ({len(single)}): {shown}{more}")
    legacy = c[c["legacy_only"]]
    if len(legacy):
        lines.append("Covered only by nrnd/obsolete parts: " + "; ".join(
            r.profile for r in legacy.itertuples()))
    gaps = int(c["gap"].sum())
    if gaps:
        lines.append(f"Gaps (no active part qualifies): {gaps} of {len(c)} cells")
    return lines


# ------------------------------------------------------------------ terminal
def _print(audit: Audit, console) -> None:
    from rich.table import Table
    console.print(f"[bold]Library audit — {audit.library.path}[/bold] "
                  f"({len(audit.library)} parts)")
    q = audit.quality
    table = Table(title=f"Data quality ({(q['severity'] == ERROR).sum()} errors, "
                  f"{(q['severity'] != ERROR).sum()} warnings)", title_justify="left")
    for column in ("row", "column", "part", "severity", "kind", "message"):
        table.add_column(column, no_wrap=column != "message")
    for r in q.head(TABLE_ROWS).itertuples():
        table.add_row(str(_int(r.row)), r.column, r.part, r.severity, r.kind, r.message,
                      style="red" if r.severity == ERROR else None)
    console.print(table)
    if len(q) > TABLE_ROWS:
        console.print(f"[dim]… {len(q) - TABLE_ROWS} more findings (--format csv lists "
                      "them all)[/dim]")

    near = audit.near[audit.near["kind"] == "near"]
    dup = Table(title=f"Duplicates ({len(audit.exact)} exact, {len(near)} near; "
                f"{audit.near.attrs.get('pairs_compared', 0)} key pairs compared)",
                title_justify="left")
    for column in ("part", "other", "kind", "score", "differing figures", "empty in one"):
        dup.add_column(column)
    for d in audit.exact.itertuples():
        dup.add_row(f"{d.part} (row {d.row})", f"{d.first_part} (row {d.first_row})",
                    "exact", "100", "", "", style="red")
    for d in near.head(TABLE_ROWS).itertuples():
        dup.add_row(f"{d.part_a} (row {d.row_a})", f"{d.part_b} (row {d.row_b})", "near",
                    f"{d.score:g}", d.differing or "—", d.one_empty or "—")
    console.print(dup)
    _print_coverage(audit, console)

    dom = Table(title=f"Redundancy: {len(audit.dominated)} active parts dominated "
                "(no better on any checked figure, no cheaper, same package and "
                "channels)", title_justify="left")
    for column in ("part", "dominated by", "cost", "their cost"):
        dom.add_column(column)
    for r in audit.dominated.head(TABLE_ROWS).itertuples():
        dom.add_row(f"{r.part} (row {r.row})", f"{r.by_part} (row {r.by_row})",
                    _cost(r.unit_cost), _cost(r.by_cost))
    console.print(dom)
    style = "bold red" if audit.exit_status else "bold green"
    console.print(f"[{style}]{audit.summary_line()}[/]")


def _print_coverage(audit: Audit, console) -> None:
    from rich.table import Table
    from rich.text import Text
    c = audit.coverage
    if "supply" not in c:
        table = Table(title="Coverage of the saved briefs (active parts qualifying)",
                      title_justify="left")
        for column in ("brief", "qualifying", "unknown", "nrnd", "obsolete", "parts"):
            table.add_column(column, justify="left" if column in ("brief", "parts")
                             else "right")
        for r in c.itertuples():
            table.add_row(r.profile, Text(f" {r.qualifying} ", style=cell_style(r.qualifying)),
                          str(r.unknown), str(r.nrnd), str(r.obsolete), r.sources)
        console.print(table)
    else:
        widths, rows = _matrix(audit)
        table = Table(title="Coverage: active parts qualifying per cell (gain 10 "
                      "non-inverting, output 10–90 % of the rails, 0–70 °C)",
                      title_justify="left")
        table.add_column("DC error")
        table.add_column("supply")
        for width in widths:
            table.add_column(width, justify="center")
        last = None
        for precision, supply, cells in rows:
            table.add_row(precision if precision != last else "", supply,
                          *[Text(f" {_cell_text(cell)} ", style=cell_style(
                              int(cell["qualifying"]))) for cell in cells],
                          end_section=supply == rows[-1][1])
            last = precision
        console.print(table)
        legend = Text("key: ")
        for floor, style in CELL_STYLES:
            label = {0: "gap", 1: "single source", 2: "2–3", 4: "4–7", 8: "8+"}[floor]
            legend.append(f" {label} ", style=style)
            legend.append(" ")
        legend.append(" (Ln): only n nrnd/obsolete parts")
        console.print(legend)
    for line in _callouts(audit):
        console.print(line)
