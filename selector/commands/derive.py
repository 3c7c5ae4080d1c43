"""Derive the requirements of a brief: gain, noise gain, offset and reference,
minimum slew rate and GBW, ranges and budgets (SI units in JSON)."""
from __future__ import annotations

from ..brief import load_brief
from ..cli import add_common, emit
from ..report import render_derive
from ..requirements import derive

EXAMPLE = "example: selector derive demo/briefs/hydrophone.toml --format json"


def add_arguments(parser) -> None:
    parser.add_argument("brief", help="brief file (TOML)")
    add_common(parser, library=False)


def run(args, console) -> int:
    requirements = derive(load_brief(args.brief))
    emit(render_derive(requirements, args.format, console))
    return 0
