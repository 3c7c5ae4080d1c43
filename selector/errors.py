"""Error types for bad input.

Every problem a user can fix is raised as :class:`InputError` (or a subclass),
carrying where it is (file, row, column or key).  The command line turns it into
one message on stderr and exit status 2; nothing else should reach the user as a
traceback.
"""
from __future__ import annotations

from dataclasses import dataclass, field


@dataclass(frozen=True)
class Problem:
    """One located problem: ``where`` is e.g. ``"row 12, column 'gbw'"``."""

    source: str
    where: str
    message: str

    def __str__(self) -> str:
        location = ", ".join(part for part in (self.source, self.where) if part)
        # one problem, one line: a cell or value with line breaks is shown escaped
        message = self.message.replace("\r", "\\r").replace("\n", "\\n")
        return f"{location}: {message}" if location else message


class InputError(Exception):
    """Bad input the user must fix.  Holds one or more :class:`Problem`."""

    def __init__(self, problems: list[Problem] | Problem | str, source: str = ""):
        if isinstance(problems, str):
            problems = [Problem(source, "", problems)]
        elif isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = list(problems)
        super().__init__(self.render())

    def render(self, limit: int = 50) -> str:
        lines = [str(p) for p in self.problems[:limit]]
        if len(self.problems) > limit:
            lines.append(f"... and {len(self.problems) - limit} more problems")
        if len(self.problems) > 1:
            lines.insert(0, f"{len(self.problems)} problems:")
            return "\n  ".join(lines)
        return lines[0] if lines else "bad input"


class UnitError(ValueError):
    """A quantity that cannot be parsed, or has the wrong dimension."""


@dataclass
class ProblemList:
    """Collects problems while reading a file, so all are reported at once."""

    source: str
    problems: list[Problem] = field(default_factory=list)

    def add(self, where: str, message: str) -> None:
        self.problems.append(Problem(self.source, where, message))

    def raise_if_any(self) -> None:
        if self.problems:
            raise InputError(self.problems)
