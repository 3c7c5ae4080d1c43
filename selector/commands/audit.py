"""Audit a parts library: data quality (per row and column), duplicate and
near-duplicate keys, coverage of a standard requirement grid (or of the team's
saved briefs with --briefs), and dominated parts that could be dropped.

The library is read leniently, so unreadable cells become findings instead of an
error.  Exit status 1 when there are data-quality errors or coverage gaps, 0
otherwise, 2 on bad input."""
from __future__ import annotations

from ..audit import audit, load_briefs
from ..audit_report import render_audit
from pathlib import Path

from ..cli import add_common, emit, library_path

EXAMPLE = ("example: selector audit\n"
           "         selector audit --library parts.csv --briefs designs/ --plot cover.png\n"
           "         selector audit --library demo/defects_library.csv --format json")


def add_arguments(parser) -> None:
    add_common(parser)
    parser.add_argument("--briefs", metavar="DIR", default=None,
                        help="use the saved briefs in DIR as the coverage grid")
    parser.add_argument("--plot", metavar="FILE", default=None,
                        help="also write the coverage heat-map to FILE (.png or .svg; "
                        "needs matplotlib; --force to replace a file)")


def _inputs(args) -> list[str]:
    """The files this run reads (never to be written over by --plot)."""
    inputs = [library_path(args)]
    if args.briefs and Path(args.briefs).is_dir():
        inputs += [str(p) for p in Path(args.briefs).glob("*.toml")]
    return inputs


def run(args, console) -> int:
    if args.plot:
        from ..plot import check_plot_path
        check_plot_path(args.plot, args.force, _inputs(args))
    briefs = load_briefs(args.briefs) if args.briefs else None
    result = audit(library_path(args), briefs)
    emit(render_audit(result, args.format, console))
    if args.plot:
        from ..plot import write_heatmap
        write_heatmap(result, args.plot, args.force, _inputs(args))
        import sys
        print(f"selector: wrote {args.plot}", file=sys.stderr)
    return result.exit_status
