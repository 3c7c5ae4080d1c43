"""Choose the gain network from standard resistor values (IEC 60063) for a brief:
the pairs nearest the wanted gain over the decades with their nominal, worst-case
and Monte Carlo gain error, and beside each the effects of its impedance level
(network current and resistor power at full swing, resistor noise, bias-current
error, feedback pole and phase margin, and the feedback capacitor that restores a
short margin).  With an offset it also designs the reference or summing network and
reports the input impedance and the common-mode range the op-amp sees.

Resistor codes are printed as on a drawing (IEC 60062: 4k7 = 4.7 kΩ)."""
from __future__ import annotations

import math

from ..brief import load_brief
from ..cli import add_common, emit, library_path
from ..errors import InputError
from ..units import format_si, parse_quantity, UnitError

EXAMPLE = ("example: selector network demo/briefs/bridge_offset.toml --part FH-3420\n"
           "         selector network demo/briefs/hydrophone.toml --series E192 "
           "--tolerance 0.1% --schematic stage.svg")

SERIES = ("auto", "E6", "E12", "E24", "E48", "E96", "E192")


def add_arguments(parser) -> None:
    parser.add_argument("brief", help="brief file (TOML)")
    add_common(parser)
    parser.add_argument("--part", metavar="PART", default=None,
                        help="use this part's en, in, ib, C_in, iout and loop figures")
    parser.add_argument("--series", choices=SERIES, default="auto",
                        help="resistor series (default auto: E96, or E192 when E96 "
                        "cannot reach the brief's gain error)")
    parser.add_argument("--tolerance", metavar="TOL", default=None,
                        help="resistor tolerance such as 1%% or 0.1%% (default: the "
                        "series' usual one)")
    parser.add_argument("--schematic", metavar="FILE.svg", default=None,
                        help="draw the chosen stage as an SVG (needs the 'schematic' "
                        "extra); an existing file needs --force")


def parse_tolerance(text: str | None) -> float | None:
    if text is None:
        return None
    try:
        value = parse_quantity(text, "fraction")
    except UnitError as exc:
        raise InputError(f"--tolerance: {exc} (write it like '1%')") from None
    if not 0 < value < 0.5:
        raise InputError(f"--tolerance: must be between 0 and 50 %, got {text}")
    return value


def run(args, console) -> int:
    from ..stage import design, find_part, to_dict
    brief = load_brief(args.brief)
    tolerance = parse_tolerance(args.tolerance)
    part, note = None, None
    if args.part:
        from ..library import load_library
        part, note = find_part(load_library(library_path(args)), args.part)
    if args.schematic:  # refuse a bad destination before the work
        from ..safeio import check_destination
        check_destination(args.schematic, args.force, [args.brief, library_path(args)])
    result = design(brief, part, args.series, tolerance)
    if note:
        result.notes.insert(0, note)
    if args.schematic:
        from ..schematic import write_svg
        write_svg(result, args.schematic, args.force, [args.brief, library_path(args)])
        result.notes.append(f"schematic written to {args.schematic}")
    if args.format == "json":
        from ..report import to_json
        emit(to_json(to_dict(result)))
    elif args.format == "csv":
        from ..report import write_csv
        rows = to_dict(result)["candidates"]
        emit(write_csv([list(rows[0])] + [list(r.values()) for r in rows]))
    elif args.format == "markdown":
        emit(render_text(result, markdown=True))
    else:
        _print(console, result)
    return 0


def _f(value, dimension, digits=3):
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "—"
    return format_si(value, dimension, digits)


def rows(result) -> tuple[list[str], list[list[str]]]:
    """Header and one row of display strings per candidate."""
    header = ["", "Rf", "Rg", "gain", "nominal", "worst", "MC 99 %", "I net", "P max",
              "noise (R)", "Ib·Rf", "f_fb", "PM", "Cf → PM, BW", "BW"]
    body = []
    for _, c in result.candidates.iterrows():
        cf = "—"
        if isinstance(c.cf, float) and math.isfinite(c.cf):
            cf = f"{_f(c.cf, 'F', 2)} → {c.pm_cf:.0f}°, {_f(c.bw_cf, 'Hz')}"
        body.append([
            c.label, f"{c.code_rf} ({_f(c.rf, 'ohm', 4)})", f"{c.code_rg} ({_f(c.rg, 'ohm', 4)})",
            f"{c.gain:.5g}", f"{c.error * 100:+.2f} %", f"±{c.worst * 100:.2f} %",
            f"{c.mc_low * 100:+.2f}…{c.mc_high * 100:+.2f} %", _f(c.i_network, "A"),
            _f(max(c.p_rf, c.p_rg), "W"), _f(c.noise_resistors, "V/rtHz"),
            _f(c.bias_error, "V"), _f(c.f_fb, "Hz"), f"{c.pm:.0f}°", cf, _f(c.bw, "Hz")])
    return header, body


def network_lines(result) -> list[str]:
    from ..network import resistor_code
    from ..stage import resistor_list
    s = result.solution
    parts = ", ".join(f"{name} = {resistor_code(v)}" for name, v in resistor_list(s))
    lines = [f"network ({s.kind}): {parts}",
             f"realised line: y = {s.gain:.5g}·x {'+' if s.offset >= 0 else '−'} "
             f"{abs(s.offset):.4g} V (wanted {s.wanted[0]:.5g}·x + {s.wanted[1]:.4g} V); "
             f"endpoints {s.endpoints[0]:.4g} V, {s.endpoints[1]:.4g} V, within "
             f"{_f(s.endpoint_error, 'V')} of the brief",
             f"noise gain {s.noise_gain:.4g}; the source sees "
             + ("a high-impedance input" if math.isinf(s.input_impedance)
                else _f(s.input_impedance, "ohm")) +
             f"; the op-amp input sits at {s.common_mode[0]:.4g} V to "
             f"{s.common_mode[1]:.4g} V"]
    if s.reference is not None:
        made = (f" made from {s.source_voltage:g} V" if s.source_voltage is not None
                and s.source_voltage != s.reference else "")
        lines.append(f"reference {s.reference:.4g} V{made}")
    return lines


def render_text(result, markdown: bool = False) -> str:
    header, body = rows(result)
    out = [f"# network for {result.brief.name}", ""] if markdown else []
    out += [f"- {line}" for line in network_lines(result)] + [""]
    out.append("| " + " | ".join(header) + " |")
    out.append("|" + "---|" * len(header))
    out += ["| " + " | ".join(r) + " |" for r in body]
    out += [""] + [f"- note: {n}" for n in result.notes] + [""]
    return "\n".join(out)


def _print(console, result) -> None:
    from rich.table import Table
    part = result.part.key if result.part and result.part.key else "typical figures"
    console.print(f"[bold]{result.brief.name}[/bold] — {result.series} resistors at "
                  f"±{result.tolerance * 100:g} %, level judged with {part}")
    for line in network_lines(result):
        console.print(f"  {line}")
    header, body = rows(result)
    table = Table(title="Rf/Rg candidates (one per Rg decade; effects at full swing)",
                  title_justify="left")
    for name in header:
        table.add_column(name, no_wrap=True)
    for row in body:
        style = "bold" if row[0] == "chosen" else None
        table.add_row(*row, style=style)
    console.print(table)
    console.print("[dim]nominal: gain error of the standard values; worst: at the "
                  "tolerance (both resistors at their limits); MC 99 %: uniform within "
                  "tolerance, 10 000 draws, fixed seed; noise (R): resistor thermal and "
                  "current noise at the output; f_fb: feedback pole with C_in[/dim]")
    for n in result.notes:
        console.print(f"note: {n}")
