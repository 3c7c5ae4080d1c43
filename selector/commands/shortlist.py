"""Rank the parts of a library for a brief: the qualifying parts with the margin on
every check and the binding check, then the near misses and why they fail.

Exit status 0 when at least one part qualifies, 1 when none does, 2 on bad input."""
from __future__ import annotations

from ..brief import load_brief
from ..cli import add_common, emit, library_path, positive_int
from ..library import load_library
from ..ranking import shortlist
from ..report import render_shortlist
from ..requirements import derive

EXAMPLE = ("example: selector shortlist demo/briefs/vibration.toml --top 5\n"
           "         selector shortlist my_brief.toml --library parts.csv --format json")


def add_arguments(parser) -> None:
    parser.add_argument("brief", help="brief file (TOML)")
    add_common(parser)
    parser.add_argument("--top", type=positive_int, default=10,
                        help="how many parts to list (default 10)")


def run(args, console) -> int:
    requirements = derive(load_brief(args.brief))
    library = load_library(library_path(args))
    result = shortlist(requirements, library)
    emit(render_shortlist(result, args.format, args.top, console))
    return 0 if result.counts["qualifying"] else 1
