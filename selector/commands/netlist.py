"""Write a SPICE netlist of the stage for a brief and a part: the brief's source and
network (the brief's Rf/Rg, or the synthesised standard values with any reference or
summing network), the load, and a behavioural model of the part built from its
library row (GBW, A_OL, second pole from pm, slew limit, output swing, input
capacitance, output resistance), with .ac and (for a sine) .tran analyses.

The netlist goes to stdout, or with --output to a file written atomically."""
from __future__ import annotations

import math

from ..brief import load_brief
from ..cli import add_common, emit, library_path

EXAMPLE = ("example: selector netlist demo/briefs/hydrophone.toml --part KL-7110 > stage.cir\n"
           "         ngspice -b stage.cir")


def add_arguments(parser) -> None:
    parser.add_argument("brief", help="brief file (TOML)")
    parser.add_argument("--part", metavar="PART", required=True,
                        help="the part to model (its library key)")
    add_common(parser)
    parser.add_argument("--cf", metavar="CAP", default=None,
                        help="a feedback capacitor across Rf, e.g. 4.7pF")
    parser.add_argument("--loop", action="store_true",
                        help="put the AC stimulus in the loop (Vinj) to measure the loop "
                        "gain T = -V(out)/V(fb)")


def run(args, console) -> int:
    from ..library import load_library
    from ..netlist import build
    from ..stage import find_part
    from ..units import parse_quantity
    from ..errors import InputError, UnitError
    brief = load_brief(args.brief)
    part, note = find_part(load_library(library_path(args)), args.part)
    cf = None
    if args.cf is not None:
        try:
            cf = parse_quantity(args.cf, "F")
        except UnitError as exc:
            raise InputError(f"--cf: {exc}") from None
    solution = stage_solution(brief, part)
    netlist = build(brief, solution, part, cf=cf, loop=args.loop)
    text = netlist.text
    if note:
        text = f"* {note}\n" + text
    if args.format == "json":
        from ..report import to_json
        emit(to_json({"netlist": text, "notes": netlist.notes + solution.notes}))
    else:
        emit(text)
    return 0


def stage_solution(brief, part):
    """The network the netlist draws: the brief's Rf/Rg when it gives them (no
    offset), else the synthesised one for this part."""
    from ..offset import OffsetSolution
    from ..stage import design
    if brief.topology == "follower":
        return OffsetSolution("none", 0.0, float("inf"), wanted=(1.0, 0.0),
                              common_mode=(brief.signal_min, brief.signal_max))
    result = design(brief, part)
    solution = result.solution
    if brief.rf is not None and brief.rg is not None and solution.kind in ("none",):
        import numpy as np
        from ..offset import _finish
        solution.rf, solution.rg = brief.rf, brief.rg
        rs = brief.source_resistance
        gain = (1 + brief.rf / brief.rg if brief.topology == "non-inverting"
                else -brief.rf / (brief.rg + rs))
        x = np.array([brief.signal_min, brief.signal_max])
        wanted = np.array(solution.wanted_endpoints)
        z_in = math.inf if brief.topology == "non-inverting" else brief.rg
        _finish(solution, gain, 0.0, x, wanted, z_in, tuple(solution.common_mode))
        solution.notes.append("network from the brief")
    return solution
