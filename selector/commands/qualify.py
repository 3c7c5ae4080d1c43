"""Qualify one stocked part for a brief: every check and filter with its required
and available figures, margin, unit and the library columns it read, failing checks
first with the reason, and the best alternatives from the same library.

PART is matched to the library's keys ignoring case, spaces, dashes and package
suffixes; a close but inexact match is used with a "matched" note on stderr, an
ambiguous or weak one is an error listing the candidates.

Exit status 0 when the part qualifies, 1 when it fails or a check is unknown
(missing data), 2 on bad input."""
from __future__ import annotations

import sys

from ..brief import load_brief
from ..cli import add_common, emit, library_path
from ..library import load_library
from ..qualify import library_warning
from ..qualify import qualify
from ..qualify_report import render_qualify

EXAMPLE = ("example: selector qualify KL-3320 demo/briefs/vibration.toml\n"
           "         selector qualify 'qs2318 soic8' my_brief.toml --library parts.csv "
           "--format json")


def add_arguments(parser) -> None:
    parser.add_argument("part", metavar="PART", help="part key as you would type it")
    parser.add_argument("brief", metavar="BRIEF", help="brief file (TOML)")
    add_common(parser)


def run(args, console) -> int:
    brief = load_brief(args.brief)
    library = load_library(library_path(args), strict=False)
    warning = library_warning(library)
    if warning:
        print(f"selector: warning: {warning}", file=sys.stderr)
    result = qualify(args.part, brief, library)
    note = result.match.note()
    if note:
        print(f"selector: {note}", file=sys.stderr)
    emit(render_qualify(result, args.format, console))
    return result.exit_status
