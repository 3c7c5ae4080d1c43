"""The ``selector`` command: a thin layer over the library API.

Each command parses its arguments, calls the API and renders.  Results go to
stdout, messages to stderr.  Exit status: 0 success (a part qualifies), 1 a
negative answer (no part qualifies, a part fails), 2 bad input, 130 interrupted.
"""
from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from . import __version__
from .errors import InputError

FORMATS = ("table", "json", "csv", "markdown")
DEMO_LIBRARY = Path(__file__).resolve().parent.parent / "data" / "demo_library.csv"


class UsageError(InputError):
    """A command-line mistake (exit 2)."""


class Parser(argparse.ArgumentParser):
    """argparse that reports usage errors as one line and exit status 2."""

    def error(self, message: str):
        raise UsageError(f"{self.prog}: {message} (see '{self.prog} --help')")


def positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be at least 1, got {value}")
    return value


def add_common(parser: argparse.ArgumentParser, library: bool = True) -> None:
    if library:
        parser.add_argument("--library", metavar="CSV", default=None,
                            help="parts library CSV (default: the bundled demo library)")
    parser.add_argument("--format", choices=FORMATS, default="table",
                        help="output format (default: table)")
    parser.add_argument("--no-color", action="store_true",
                        help="no colour in terminal output (NO_COLOR is honoured too)")


# Each command module adds its sub-parser here: name -> (module, help).  A command
# module has ``add_arguments(parser)`` and ``run(args, console) -> int``.
COMMANDS: dict[str, tuple[str, str]] = {
    "derive": ("selector.commands.derive", "derive the requirements of a brief"),
    "shortlist": ("selector.commands.shortlist", "rank the library's parts for a brief"),
}


def build_parser() -> Parser:
    import importlib
    parser = Parser(prog="selector", description=(
        "Pick op-amps for a sensor front end: derive a channel's requirements from "
        "its brief and rank a parts library against them."),
        epilog="example: selector shortlist demo/briefs/vibration.toml --top 5")
    parser.add_argument("--version", action="version", version=f"selector {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=Parser)
    for name, (module_name, help_text) in COMMANDS.items():
        module = importlib.import_module(module_name)
        command = sub.add_parser(name, help=help_text, description=module.__doc__,
                                 epilog=getattr(module, "EXAMPLE", None),
                                 formatter_class=argparse.RawDescriptionHelpFormatter)
        module.add_arguments(command)
        command.set_defaults(run=module.run)
    return parser


def make_console(args):
    from rich.console import Console
    no_color = getattr(args, "no_color", False) or "NO_COLOR" in os.environ
    return Console(no_color=no_color, highlight=False, soft_wrap=False,
                   width=None if sys.stdout.isatty() else 200)


def library_path(args) -> str:
    return args.library or str(DEMO_LIBRARY)


def emit(text: str | None) -> None:
    if text is not None:
        sys.stdout.write(text)
        sys.stdout.flush()


def main(argv: list[str] | None = None) -> int:
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        if not getattr(args, "run", None):
            parser.print_help(sys.stderr)
            return 2
        return args.run(args, make_console(args))
    except InputError as exc:
        print(f"selector: error: {exc.render()}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("selector: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # the reader went away (`selector ... | head`): leave quietly
        try:
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
        except OSError:
            pass
        return 0


def entry() -> None:
    sys.exit(main())
