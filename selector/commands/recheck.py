"""Re-check saved designs against the current library: every brief that records
its part (``part = "…"`` at the top level) is re-qualified, one row per design with
the part, its status (qualifies, fails, unknown data, part missing from library,
part not active), the weakest margin and the binding check.

Folders are searched for *.toml files.  Exit status 0 when every design still
qualifies, 1 when any does not (for a CI job on library changes), 2 on bad input."""
from __future__ import annotations

import sys

from ..cli import add_common, emit, library_path
from ..library import load_library
from ..qualify import library_warning
from ..qualify import recheck, recheck_exit_status
from ..qualify_report import render_recheck

EXAMPLE = ("example: selector recheck demo/designs\n"
           "         selector recheck designs/ extra.toml --library parts.csv --format csv")


def add_arguments(parser) -> None:
    parser.add_argument("paths", metavar="DIR_OR_FILE", nargs="+",
                        help="saved design briefs, or folders of them")
    add_common(parser)


def run(args, console) -> int:
    library = load_library(library_path(args), strict=False)
    warning = library_warning(library)
    if warning:
        print(f"selector: warning: {warning}", file=sys.stderr)
    frame = recheck(args.paths, library)
    emit(render_recheck(frame, args.format, console))
    return recheck_exit_status(frame)
