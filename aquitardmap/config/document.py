"""The text of ``project.toml`` under review: where each key stands, which keys the readers
asked for, and the problems found, each pinned to a line and column.

The section readers (:mod:`aquitardmap.config.sections`) take a :class:`ConfigDocument`
and report through it, so that every message names the file, line and column of the key
it is about.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Any

from aquitardmap.errors import ProblemList


def locate_key(text: str, key: str, table: str | None = None,
               index: int = 0) -> tuple[int, int]:
    """Best-effort (line, column) of ``key = ...`` inside ``[table]`` or the ``index``-th
    ``[[table]]``; (0, 0) when it cannot be found. Used only to point messages.

    With ``key == ""`` the table's header line is given."""
    lines = text.splitlines()
    start = 0
    if table is not None:
        header = re.compile(r"^\s*\[\[\s*" + re.escape(table) + r"\s*\]\]|^\s*\[\s*"
                            + re.escape(table) + r"\s*\]")
        seen = -1
        start = None
        for i, ln in enumerate(lines):
            if header.match(ln):
                seen += 1
                if seen == index:
                    start = i
                    break
        if start is None:
            return (0, 0)
        if key == "":
            return (start + 1, 1)
    pat = re.compile(r"^(\s*)" + re.escape(key) + r"\s*=")
    for i in range(start + (1 if table else 0), len(lines)):
        if table is not None and re.match(r"^\s*\[", lines[i]):
            break
        m = pat.match(lines[i])
        if m:
            return (i + 1, len(m.group(1)) + 1)
    return (start + 1, 1) if table is not None else (0, 0)


class Table(dict):
    """A TOML table that remembers which keys the reader asked for, so that every key it
    never asked for (a typo such as ``thin_thicknes_m``) can be reported instead of being
    silently ignored while its default is used."""

    def __init__(self, data: dict[str, Any], name: str, index: int | None = None) -> None:
        super().__init__(data)
        self.name = name
        self.index = index
        self.asked: set[str] = set()

    def get(self, key: str, default: Any = None) -> Any:
        self.asked.add(key)
        return super().get(key, default)

    def __getitem__(self, key: str) -> Any:
        self.asked.add(key)
        return super().__getitem__(key)

    def __contains__(self, key: object) -> bool:
        self.asked.add(str(key))
        return super().__contains__(key)


class ConfigDocument:
    """One ``project.toml`` being read: its path and text, the problems found so far and
    the tracked tables whose unasked keys are reported at the end.

    Args:
        path: the file (messages name it).
        text: its decoded text (messages point into it).
        problems: where the problems go.
    """

    def __init__(self, path: Path, text: str, problems: ProblemList) -> None:
        self.path = path
        self.text = text
        self.problems = problems
        self.tables: list[Table] = []

    def locate(self, key: str, table: str | None = None, index: int = 0) -> tuple[int, int]:
        """(line, column) of ``key`` in ``[table]`` (see :func:`locate_key`)."""
        return locate_key(self.text, key, table, index)

    def add(self, where: tuple[int, int], message: str) -> None:
        """Report ``message`` at ``where`` = (line, column) of this file."""
        self.problems.add(self.path, *where, message)

    def section(self, cfg: dict[str, Any], key: str) -> Table:
        """``cfg[key]`` as a tracked table; a value that is not a table is reported."""
        value = dict.get(cfg, key, {})
        if not isinstance(value, dict):
            self.add(self.locate(key), f"{key} must be a table ([{key}] followed by its "
                     f"keys), got {value!r}")
            value = {}
        return self.track(value, key)

    def track(self, value: dict[str, Any], name: str, index: int | None = None) -> Table:
        """``value`` as a tracked table named ``name`` (the ``index``-th ``[[name]]``)."""
        tbl = Table(value, name, index)
        self.tables.append(tbl)
        return tbl

    def report_unknown_keys(self) -> None:
        """Report every key of every tracked table that the readers never asked for."""
        for tbl in self.tables:
            unknown = [k for k in dict.keys(tbl) if k not in tbl.asked]
            where = (f"[[{tbl.name}]] {tbl.index + 1}" if tbl.index is not None
                     else f"[{tbl.name}]")
            for k in unknown:
                self.add(self.locate(k, tbl.name, tbl.index or 0),
                         f"unknown key {k!r} in {where}; expected one of "
                         f"{', '.join(sorted(tbl.asked))}")

    def number(self, tbl: dict[str, Any], key: str, default: float, table: str,
               index: int = 0, *, low: float | None = None, high: float | None = None,
               low_open: bool = False, integer: bool = False) -> float:
        """``tbl[key]`` (or ``default``) as a finite number within the bounds; a value that
        is not one is reported (and ``default`` returned when it is no finite number)."""
        value = tbl.get(key, default)
        where = self.locate(key, table, index)
        if isinstance(value, bool) or not isinstance(value, int | float):
            self.add(where, f"[{table}] {key} must be a number, got {value!r}")
            return float(default)
        value = float(value)
        if not math.isfinite(value):
            self.add(where, f"[{table}] {key} must be a finite number, got {value}")
            return float(default)
        if integer and value != int(value):
            self.add(where, f"[{table}] {key} must be a whole number, got {value:g}")
            return float(default)
        if low is not None and (value <= low if low_open else value < low):
            rel = ">" if low_open else ">="
            self.add(where, f"[{table}] {key} must be {rel} {low}, got {value}")
        if high is not None and value > high:
            self.add(where, f"[{table}] {key} must be <= {high}, got {value}")
        return value

    def flag(self, tbl: dict[str, Any], key: str, default: bool, table: str) -> bool:
        """``tbl[key]`` (or ``default``) as true or false."""
        value = tbl.get(key, default)
        if not isinstance(value, bool):
            self.add(self.locate(key, table), f"[{table}] {key} must be true or false, got "
                     f"{value!r}")
            return default
        return value

    def choice(self, tbl: dict[str, Any], key: str, default: str, table: str,
               choices: tuple[str, ...]) -> str:
        """``tbl[key]`` (or ``default``), which must be one of ``choices``."""
        value = tbl.get(key, default)
        if value not in choices:
            self.add(self.locate(key, table), f"[{table}] {key} must be one of "
                     f"{', '.join(choices)}, got {value!r}")
            return default
        return value
