"""Input problems that are the user's to fix, each pinned to a file, line and column.

Every reader in the package collects :class:`Problem` records instead of stopping at the
first one, then raises a single :class:`InputError` that lists them all. The command line
turns that into exit status 2 and a readable list; nothing is written.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path


@dataclass(frozen=True)
class Problem:
    """One problem in one input file.

    ``line`` and ``column`` are 1-based; ``line`` counts physical lines in the file (the CSV
    header is line 1); ``column`` is the column number in a CSV (1 = first field) or the
    character position in a TOML line. Either may be 0 when the problem concerns the file
    as a whole.
    """

    file: str
    line: int
    column: int
    message: str

    def __str__(self) -> str:
        where = self.file
        if self.line:
            where += f", line {self.line}"
        if self.column:
            where += f", column {self.column}"
        return f"{where}: {self.message}"


@dataclass
class InputError(Exception):
    """Raised when one or more inputs are unusable. ``problems`` lists every one found."""

    problems: list[Problem] = field(default_factory=list)

    def __str__(self) -> str:
        n = len(self.problems)
        head = f"{n} problem{'s' if n != 1 else ''} in the inputs:"
        return "\n".join([head, *(f"  - {p}" for p in self.problems)])


class ProblemList:
    """Collects problems while reading; ``raise_if_any`` ends the read if there were any."""

    def __init__(self) -> None:
        self.problems: list[Problem] = []

    def add(self, file: str | Path, line: int, column: int, message: str) -> None:
        self.problems.append(Problem(Path(file).name if file else "", line, column, message))

    def extend(self, other: ProblemList | InputError) -> None:
        self.problems.extend(other.problems)

    def __bool__(self) -> bool:
        return bool(self.problems)

    def raise_if_any(self) -> None:
        if self.problems:
            raise InputError(list(self.problems))
