"""The ``selector`` command: a thin layer over the library API.

Each command parses its arguments, calls the API and renders.  Results go to
stdout, messages to stderr.  Exit status: 0 success (a part qualifies), 1 a
negative answer (no part qualifies, a part fails), 2 bad input, 130 interrupted,
70 an internal error (a bug: one line, or the traceback with SELECTOR_DEBUG=1).
A closed pipe (``selector ... | head``) ends the run quietly with status 0.
``--output FILE`` (every command) writes the results through :mod:`selector.safeio`.
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
    """Options every command shares: library, format, colour and ``--output``."""
    if library:
        parser.add_argument("--library", metavar="CSV", default=None,
                            help="parts library CSV (default: the bundled demo library)")
    parser.add_argument("--format", choices=FORMATS, default="table",
                        help="output format (default: table)")
    parser.add_argument("--no-color", action="store_true",
                        help="no colour in terminal output (NO_COLOR is honoured too)")
    parser.add_argument("--output", "-o", metavar="FILE", default=None,
                        help="write the results to FILE instead of stdout (written to a "
                        "temporary file and renamed into place; never over an input)")
    parser.add_argument("--force", action="store_true",
                        help="allow --output to replace an existing file")


# Each command module adds its sub-parser here: name -> (module, help).  A command
# module has ``add_arguments(parser)`` and ``run(args, console) -> int``.
COMMANDS: dict[str, tuple[str, str]] = {
    "derive": ("selector.commands.derive", "derive the requirements of a brief"),
    "shortlist": ("selector.commands.shortlist", "rank the library's parts for a brief"),
    "network": ("selector.commands.network", "choose Rf/Rg and any offset network from standard values"),
    "netlist": ("selector.commands.netlist", "write a SPICE netlist of the stage with a part model"),
    "qualify": ("selector.commands.qualify", "check one stocked part against a brief"),
    "recheck": ("selector.commands.recheck", "re-qualify saved designs against the library"),
    "audit": ("selector.commands.audit", "audit the library: data, duplicates, coverage"),
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


class _Console:
    """Factory for the rich console: a closed pipe is reported as BrokenPipeError
    (handled once, in :func:`main`) instead of rich's own exit."""

    @staticmethod
    def make(**options):
        from rich.console import Console

        class QuietConsole(Console):
            def on_broken_pipe(self) -> None:
                raise BrokenPipeError

        return QuietConsole(**options)


def colour_disabled(args) -> bool:
    """``--no-color``, or NO_COLOR set to anything but the empty string (no-color.org)."""
    return bool(getattr(args, "no_color", False)) or bool(os.environ.get("NO_COLOR"))


# Where results go for this run: stdout, or a buffer written to --output at the end.
_SINK: list = []


def make_console(args):
    """The console a command renders tables on (stdout, or the --output buffer)."""
    sink = _SINK[-1] if _SINK else None
    if sink is not None:
        return _Console.make(file=sink, no_color=True, color_system=None,
                             highlight=False, soft_wrap=False, width=200)
    return _Console.make(no_color=colour_disabled(args), highlight=False,
                         soft_wrap=False, width=None if sys.stdout.isatty() else 200)


def library_path(args) -> str:
    return args.library or str(DEMO_LIBRARY)


def emit(text: str | None) -> None:
    """Write a command's results (stdout, or the --output buffer)."""
    if text is None:
        return
    sink = _SINK[-1] if _SINK else None
    if sink is not None:
        sink.write(text)
        return
    sys.stdout.write(text)
    sys.stdout.flush()


def input_paths(args) -> list[str]:
    """Every existing file or folder named on the command line (and the default
    library): what this run reads, which it must never write over."""
    paths = []
    for name, value in vars(args).items():
        if name == "output" or callable(value):
            continue
        for item in value if isinstance(value, (list, tuple)) else [value]:
            if isinstance(item, (str, os.PathLike)) and str(item) and Path(item).exists():
                paths.append(str(item))
    if "library" in vars(args) and not args.library:
        paths.append(str(DEMO_LIBRARY))
    return paths


def _run(args) -> int:
    output = getattr(args, "output", None)
    if output is None or output == "-":  # "-o -": stdout, as usual for Unix tools
        return args.run(args, make_console(args))
    import io

    from . import safeio
    inputs = input_paths(args)
    safeio.check_destination(output, args.force, inputs)  # fail before the work
    buffer = io.StringIO()
    _SINK.append(buffer)
    try:
        status = args.run(args, make_console(args))
    finally:
        _SINK.pop()
    safeio.write_text(output, buffer.getvalue(), args.force, inputs)
    print(f"selector: wrote {output}", file=sys.stderr)
    return status


def _quiet_stdout() -> None:
    """After a closed pipe: point stdout at /dev/null so the final flush is silent."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status (see the module docstring)."""
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        if not getattr(args, "run", None):
            parser.print_help(sys.stderr)
            return 2
        return _run(args)
    except InputError as exc:
        print(f"selector: error: {exc.render()}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("selector: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # the reader went away (`selector ... | head`): leave quietly
        _quiet_stdout()
        return 0
    except Exception as exc:  # a bug, not bad input: one line unless debugging
        if os.environ.get("SELECTOR_DEBUG"):
            raise
        print(f"selector: internal error: {type(exc).__name__}: {exc} (this is a bug; "
              "set SELECTOR_DEBUG=1 to see where)", file=sys.stderr)
        return 70


def entry() -> None:
    sys.exit(main())
