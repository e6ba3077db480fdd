"""Tables of text cells with the place of every cell, and the checks every input table
shares: reading a CSV, its header, a required text cell, a numeric cell.

A CSV is UTF-8 (a byte-order mark is accepted), comma-separated, header on line 1, columns
in any order, header names matched without regard to case or surrounding spaces. Extra
columns are allowed and ignored (each gives a warning). Lines holding only whitespace or
only empty fields are skipped. Quoted fields follow RFC 4180 (a quoted field may hold
commas; a record spanning several physical lines is reported at its first line). Every
problem names the file, line (header = line 1) and column (1 = first field; 0 when the
problem concerns the whole file or a missing column).
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from aquitardmap.errors import ProblemList

_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_NON_FINITE = re.compile(r"[+-]?(?:nan|inf|infinity)", re.IGNORECASE)
_MAX_ENCODING_LINES = 10


@dataclass(frozen=True)
class RawTable:
    """The cells of one input table as text, before any check.

    Attributes:
        label: what problems name as the file: a file name (``collars.csv``) or a table
            inside a file (``logs.xlsx[collars]``).
        records: ``(line, fields)`` with the header record first; ``line`` is what problems
            report as the line (a CSV's physical line, a sheet's row, a layer's feature id)
            and field positions are reported as columns (1 = first field).
    """

    label: str
    records: list[tuple[int, list[str]]]


@dataclass
class CheckedTable:
    """Text cells of one table after its header was checked (:func:`check_header`).
    ``columns`` maps header name to 1-based column; ``path`` is the label problems carry."""

    path: str
    columns: dict[str, int]
    rows: list[tuple[int, list[str]]]  # (physical line of the record's start, fields)

    def cell(self, fields: list[str], name: str) -> str:
        """The stripped text of column ``name`` in ``fields``; "" when absent."""
        col = self.columns.get(name)
        if col is None or col > len(fields):
            return ""
        return fields[col - 1].strip()


def _decode(path: Path, raw: bytes, problems: ProblemList) -> str | None:
    """UTF-8 text of ``raw`` (BOM removed) or None after reporting each undecodable line."""
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        problems.add(path, 1, 0, "file is UTF-16 text; save it as UTF-8")
        return None
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        pass
    bad = []
    for number, line in enumerate(raw.split(b"\n"), start=1):
        try:
            line.decode("utf-8")
        except UnicodeDecodeError as exc:
            bad.append((number, line[exc.start]))
    for number, byte in bad[:_MAX_ENCODING_LINES]:
        problems.add(path, number, 0, f"line is not valid UTF-8 (byte 0x{byte:02x}); save the "
                     "file as UTF-8")
    if len(bad) > _MAX_ENCODING_LINES:
        problems.add(path, bad[_MAX_ENCODING_LINES][0], 0,
                     f"... and {len(bad) - _MAX_ENCODING_LINES} more lines that are not UTF-8")
    return None


def read_csv_cells(path: str | Path, problems: ProblemList) -> RawTable | None:
    """Read a CSV file (UTF-8, comma-separated, header first) into text cells.

    Problems (unreadable file, bad encoding, empty file, malformed quoting) are added to
    ``problems`` with file, line and column; returns None when the file cannot be read at
    all. Lines holding only whitespace or empty fields are skipped.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        problems.add(path, 0, 0, f"cannot read file: {exc.strerror or exc}")
        return None
    text = _decode(path, raw, problems)
    if text is None:
        return None
    if not text.strip():
        problems.add(path, 0, 0, "file is empty; it needs a header line and data rows")
        return None

    reader = csv.reader(io.StringIO(text, newline=""), strict=True, skipinitialspace=True)
    records: list[tuple[int, list[str]]] = []
    prev = 0
    while True:
        try:
            fields = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            problems.add(path, prev + 1, 0, f"malformed CSV record ({exc}); check the quotes")
            prev = reader.line_num
            continue
        start, prev = prev + 1, reader.line_num
        if all(not f.strip() for f in fields):
            continue
        records.append((start, fields))
    if not records:
        problems.add(path, 0, 0, "file is empty; it needs a header line and data rows")
        return None
    return RawTable(path.name, records)


def check_header(raw: RawTable, required: Sequence[str], optional: Sequence[str],
                 problems: ProblemList, warnings: ProblemList,
                 either: Sequence[str] = ()) -> CheckedTable | None:
    """Check the header of ``raw`` and the field count of each record.

    ``either`` names columns of which at least one must be present (all are then used).
    Returns None when a required column is missing or repeated.
    """
    path = raw.label
    records = raw.records
    if not records:
        problems.add(path, 0, 0, "table is empty; it needs a header and data rows")
        return None
    header_line, header = records[0]
    columns: dict[str, int] = {}
    ok = True
    for col, name in enumerate(header, start=1):
        key = name.strip().lower()
        if not key:
            warnings.add(path, header_line, col, "column without a name is ignored")
        elif key in columns:
            problems.add(path, header_line, col,
                         f"column {key!r} appears twice in the header (first at column "
                         f"{columns[key]})")
            ok = False
        else:
            columns[key] = col
    missing = [c for c in required if c not in columns]
    for name in missing:
        problems.add(path, header_line, 0, f"missing required column {name!r}; the header "
                     f"must name {', '.join(required)}")
    if either and not any(c in columns for c in either):
        missing.append(either[0])
        problems.add(path, header_line, 0, "missing required column "
                     + " or ".join(repr(c) for c in either))
    if missing and len(header) == 1:
        for sep, label in ((";", "semicolons"), ("\t", "tabs")):
            if sep in header[0]:
                problems.add(path, header_line, 1,
                             f"the header seems to be separated by {label}; use commas")
    if missing or not ok:
        return None
    for name in optional:
        if name not in columns:
            warnings.add(path, header_line, 0,
                         f"column {name!r} is absent; its values are read as blank")
    used = set(required) | set(optional) | set(either)
    for name, col in columns.items():
        if name not in used:
            warnings.add(path, header_line, col, f"extra column {name!r} is ignored")

    rows = []
    for line, fields in records[1:]:
        if len(fields) != len(header):
            problems.add(path, line, min(len(fields), len(header)) + 1,
                         f"line has {len(fields)} fields but the header has {len(header)}")
            continue
        rows.append((line, fields))
    return CheckedTable(path, columns, rows)


def text_cell(table: CheckedTable, problems: ProblemList, line: int, fields: list[str],
              name: str) -> str | None:
    """Required text cell, or None after reporting a blank."""
    value = table.cell(fields, name)
    if not value:
        problems.add(table.path, line, table.columns[name], f"{name} is blank")
        return None
    return value


def number_cell(table: CheckedTable, problems: ProblemList, line: int, fields: list[str],
                name: str, *, required: bool = True) -> float | None:
    """Numeric cell. Returns NaN for an allowed blank, None after reporting a problem."""
    if name not in table.columns:
        return math.nan
    col = table.columns[name]
    value = table.cell(fields, name)
    if not value:
        if required:
            problems.add(table.path, line, col, f"{name} is blank; a number is required")
            return None
        return math.nan
    if _NON_FINITE.fullmatch(value):
        problems.add(table.path, line, col, f"{name} must be a finite number, got {value!r}")
        return None
    if not _NUMBER.fullmatch(value):
        problems.add(table.path, line, col, f"{name} must be a number, got text {value!r}")
        return None
    number = float(value)
    if not math.isfinite(number):
        problems.add(table.path, line, col, f"{name} must be a finite number, got {value!r}")
        return None
    return number


def sort_by_file(problems: ProblemList) -> None:
    """Order problems by file (in first-seen order), then line and column."""
    order: dict[str, int] = {}
    for p in problems.problems:
        order.setdefault(p.file, len(order))
    problems.problems.sort(key=lambda p: (order[p.file], p.line, p.column))


def read_point_values(path: str | Path, value_column: str, problems: ProblemList,
                      warnings: ProblemList) -> pd.DataFrame:
    """Read a CSV of points ``x, y, <value_column>`` (project CRS, m; value a number).

    Same reading rules and messages as the borehole tables (UTF-8, header on line 1, every
    problem with file, line and column added to ``problems``; extra columns warned about).

    Returns:
        Columns ``x``, ``y``, ``value_column`` and ``line``; only rows without problems.
    """
    path = Path(path)
    cols = ("x", "y", value_column)
    raw = read_csv_cells(path, problems)
    table = check_header(raw, cols, (), problems, warnings) if raw is not None else None
    rows: list[tuple[float, float, float, int]] = []
    if table is not None:
        if not table.rows:
            problems.add(path, 0, 0, "no rows below the header")
        for line, fields in table.rows:
            vals = [number_cell(table, problems, line, fields, c) for c in cols]
            if None not in vals:
                rows.append((*vals, line))
    return pd.DataFrame(rows, columns=[*cols, "line"]).astype(
        {"x": float, "y": float, value_column: float, "line": int})


__all__ = ["CheckedTable", "RawTable", "check_header", "number_cell", "read_csv_cells",
           "read_point_values", "sort_by_file", "text_cell"]
