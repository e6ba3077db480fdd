"""Read, validate and summarise borehole logs: collars, intervals and samples.

Three comma-separated tables, UTF-8 (a byte-order mark is accepted), header on line 1,
columns in any order, header names matched without regard to case or surrounding spaces:

``collars.csv``
    ``borehole_id, x, y, ground_elev_m, total_depth_m`` — collar position in the project
    CRS (m), ground elevation (m) and total drilled depth below ground (m).
``intervals.csv``
    ``borehole_id, from_m, to_m, unit`` — depths below ground (m); ``unit`` is a code of the
    stack in ``project.toml``.
``samples.csv`` (optional)
    ``borehole_id, depth_m, d10_mm, d60_mm, porosity, k_lab_m_s`` — any value except
    ``borehole_id`` and ``depth_m`` may be blank (read as NaN). A value column missing from
    the header is read as blank, with a warning.

Extra columns are allowed and ignored (each gives a warning). Lines holding only
whitespace or only empty fields are skipped. Quoted fields follow RFC 4180 (a quoted field
may hold commas; a record spanning several physical lines is reported at its first line).

:func:`read_boreholes` checks every row and raises a single
:class:`~aquitardmap.errors.InputError` listing every problem with file, line (header =
line 1) and column (1 = first field; 0 when the problem concerns the whole file or a
missing column). :func:`column_table` turns the validated logs into one row per borehole
with the thickness of every unit of the protective column and whether that thickness is
complete (``full``), a lower bound (``lower_bound``) or not observed (``unknown``).

A hole that stops inside a unit does not measure that unit's thickness: it gives a lower
bound (a censored value), never a thickness. Treating it as a full thickness invents thin
zones (DOMAIN.md §3).
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd
from pyproj import CRS, Transformer
from pyproj.exceptions import ProjError

from aquitardmap.config.materials import match_material
from aquitardmap.config.project import Project
from aquitardmap.config.settings import DEFAULT_FILES
from aquitardmap.errors import Problem, ProblemList

#: Allowance (m) for ``to_m`` and sample depths beyond ``total_depth_m``: logs and collars
#: are commonly written to the centimetre (common practice).
TOTAL_DEPTH_TOLERANCE_M = 0.01
#: Two depths closer than this (m) are the same depth; it only absorbs float rounding.
SAME_DEPTH_M = 1e-6

#: Largest credible hydraulic conductivity (m/s): the top of the range of clean gravel in
#: Freeze & Cherry (1979), Table 2.2 (*from memory*). A larger lab value is refused with a
#: hint about units.
MAX_K_M_S = 1.0

COLLAR_COLUMNS = ("borehole_id", "x", "y", "ground_elev_m", "total_depth_m")
INTERVAL_COLUMNS = ("borehole_id", "from_m", "to_m", "unit")
SAMPLE_REQUIRED = ("borehole_id", "depth_m")
SAMPLE_VALUES = ("d10_mm", "d60_mm", "porosity", "k_lab_m_s")

#: Status of a thickness read from one hole.
FULL = "full"
LOWER_BOUND = "lower_bound"
UNKNOWN = "unknown"

#: Plain reasons used in ``column_table(...)["qa_flags"]``.
FLAG_ORDER = "unit order breaks the stack"
FLAG_GAP = "gap in log"
FLAG_NO_INTERVALS = "no intervals"
FLAG_SHORT_LOG = "log ends above total depth"

_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_NON_FINITE = re.compile(r"[+-]?(?:nan|inf|infinity)", re.IGNORECASE)
_MAX_ENCODING_LINES = 10


@dataclass(frozen=True)
class Boreholes:
    """Validated borehole tables.

    Attributes:
        collars: index ``borehole_id`` (str); columns ``x``, ``y`` (project CRS, m),
            ``ground_elev_m`` (m), ``total_depth_m`` (m below ground), ``line`` (source line
            in the collars file), ``source`` (name of that file, or ``book.xlsx[collars]``).
            Rows in file order.
        intervals: columns ``borehole_id``, ``from_m``, ``to_m`` (m below ground), ``unit``
            (stack code), ``line``, ``material`` (the description in words when the log
            gave one, else None), ``source``; sorted by ``borehole_id`` then ``from_m``.
        samples: columns ``borehole_id``, ``depth_m`` (m below ground), ``d10_mm``,
            ``d60_mm`` (mm), ``porosity`` (-), ``k_lab_m_s`` (m/s), ``unit`` (code of the
            interval holding ``depth_m``, None if none), ``line``, ``source``; blank values
            are NaN. Empty (with these columns) when there is no samples file.
        warnings: non-fatal findings, each with file, line and column.
    """

    collars: pd.DataFrame
    intervals: pd.DataFrame
    samples: pd.DataFrame
    warnings: tuple[Problem, ...] = field(default=())


# --------------------------------------------------------------------------------------------
# Reading one CSV file into text cells with their line and column.


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
class _Table:
    """Text cells of one table after its header was checked. ``columns`` maps header name
    to 1-based column; ``path`` is the label problems carry."""

    path: str
    columns: dict[str, int]
    rows: list[tuple[int, list[str]]]  # (physical line of the record's start, fields)

    def cell(self, fields: list[str], name: str) -> str:
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


def _check_header(raw: RawTable, required: Sequence[str], optional: Sequence[str],
                  problems: ProblemList, warnings: ProblemList,
                  either: Sequence[str] = ()) -> _Table | None:
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
    return _Table(path, columns, rows)


def _text(table: _Table, problems: ProblemList, line: int, fields: list[str],
          name: str) -> str | None:
    """Required text cell, or None after reporting a blank."""
    value = table.cell(fields, name)
    if not value:
        problems.add(table.path, line, table.columns[name], f"{name} is blank")
        return None
    return value


def _number(table: _Table, problems: ProblemList, line: int, fields: list[str], name: str,
            *, required: bool = True) -> float | None:
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


# --------------------------------------------------------------------------------------------
# The three tables.


@dataclass
class _Collar:
    line: int
    x: float
    y: float
    ground_elev_m: float
    total_depth_m: float
    id_column: int
    source: str = ""


def _crs_in_metres(project: Project) -> bool:
    axes = project.crs.axis_info
    return bool(axes) and axes[0].unit_name in ("metre", "meter")


def crs_extent_m(crs: CRS) -> tuple[float, float, float, float] | None:
    """Generous bounds (xmin, ymin, xmax, ymax) in metres of where a projected ``crs`` is
    meant to be used: its area of use (from the EPSG database, via pyproj) projected, then
    widened by half its size on every side, because projections such as UTM are often used
    beyond their nominal zone. None when the CRS declares no area of use.

    A collar outside these bounds is not where the CRS could place it: most often x and y
    are swapped, or the coordinates belong to another CRS.
    """
    aou = crs.area_of_use
    if aou is None:
        return None
    try:
        to_crs = Transformer.from_crs(CRS.from_epsg(4326), crs, always_xy=True)
        xmin, ymin, xmax, ymax = to_crs.transform_bounds(aou.west, aou.south, aou.east,
                                                         aou.north, densify_pts=21)
    except ProjError:
        return None
    if not all(math.isfinite(v) for v in (xmin, ymin, xmax, ymax)):
        return None
    w, h = xmax - xmin, ymax - ymin
    return (xmin - w / 2, ymin - h / 2, xmax + w / 2, ymax + h / 2)


def _read_collars(raw: RawTable, project: Project, problems: ProblemList,
                  warnings: ProblemList) -> tuple[dict[str, _Collar], set[str]] | None:
    """Valid collars by id, and every id named (valid or not); None if unreadable."""
    path = raw.label
    table = _check_header(raw, COLLAR_COLUMNS, (), problems, warnings)
    if table is None:
        return None
    if not table.rows:
        problems.add(path, 0, 0, "no collar rows below the header")
    collars: dict[str, _Collar] = {}
    first_line: dict[str, int] = {}
    metres = _crs_in_metres(project)
    extent = crs_extent_m(project.crs) if metres else None
    for line, fields in table.rows:
        bid = _text(table, problems, line, fields, "borehole_id")
        x = _number(table, problems, line, fields, "x")
        y = _number(table, problems, line, fields, "y")
        z = _number(table, problems, line, fields, "ground_elev_m")
        td = _number(table, problems, line, fields, "total_depth_m")
        ok = None not in (bid, x, y, z, td)
        if bid is not None:
            if bid in first_line:
                problems.add(path, line, table.columns["borehole_id"],
                             f"borehole id {bid!r} already used on line {first_line[bid]}")
                ok = False
            else:
                first_line[bid] = line
        if td is not None and td <= 0:
            problems.add(path, line, table.columns["total_depth_m"],
                         f"total_depth_m must be > 0, got {td:g}")
            ok = False
        if metres and x is not None and y is not None and abs(x) <= 180 and abs(y) <= 90:
            problems.add(path, line, table.columns["x"],
                         f"coordinates ({x:g}, {y:g}) look like degrees of longitude and "
                         f"latitude; give x and y in metres of the project CRS "
                         f"({project.crs.to_string()})")
            ok = False
        elif (extent is not None and x is not None and y is not None
              and not (extent[0] <= x <= extent[2] and extent[1] <= y <= extent[3])):
            problems.add(path, line, table.columns["x"],
                         f"coordinates ({x:g}, {y:g}) lie far outside the area where the "
                         f"project CRS {project.crs.to_string()} is used (x {extent[0]:.0f} "
                         f"to {extent[2]:.0f}, y {extent[1]:.0f} to {extent[3]:.0f} m): are "
                         "x and y swapped, or are they in another CRS?")
            ok = False
        if ok:
            collars[bid] = _Collar(line, x, y, z, td, table.columns["borehole_id"])
    return collars, set(first_line)


@dataclass
class _Interval:
    line: int
    borehole_id: str
    from_m: float
    to_m: float
    unit: str
    material: str | None = None
    source: str = ""


def _unknown_unit_message(code: str, codes: Sequence[str]) -> str:
    msg = f"unknown unit code {code!r}; known codes are {', '.join(codes)}"
    close = [c for c in codes if c.lower() == code.lower()]
    if close:
        msg += f" (did you mean {close[0]!r}? codes are case-sensitive)"
    return msg


def _not_in_collars(bid: str, collars_name: str, stored_ids: frozenset[str]) -> str:
    msg = f"borehole {bid!r} is not in {collars_name}"
    if bid in stored_ids:
        msg += (" (it is in the store; a batch carries whole boreholes: add its collar, "
                "intervals and samples together, with --replace to change it)")
    return msg


def _interval_unit(table: _Table, problems: ProblemList, line: int, fields: list[str],
                   project: Project, unmapped: dict[str, list[int]]
                   ) -> tuple[str | None, str | None, bool]:
    """(unit code, material text, ok) of one interval row.

    A non-blank ``unit`` wins; else the ``material`` text is mapped by the project's
    ``[[materials]]`` rules. A description no rule maps is collected in ``unmapped`` (never
    guessed) and the row is not ok.
    """
    codes = project.unit_codes
    unit = table.cell(fields, "unit") if "unit" in table.columns else ""
    material = table.cell(fields, "material") if "material" in table.columns else ""
    material = " ".join(material.split()) or None
    if unit:
        if unit not in codes:
            problems.add(table.path, line, table.columns["unit"],
                         _unknown_unit_message(unit, codes))
            return None, material, False
        return unit, material, True
    if material is None:
        if "material" in table.columns and "unit" in table.columns:
            problems.add(table.path, line, table.columns["unit"],
                         "unit and material are both blank")
        elif "unit" in table.columns:
            problems.add(table.path, line, table.columns["unit"], "unit is blank")
        else:
            problems.add(table.path, line, table.columns["material"], "material is blank")
        return None, None, False
    code = match_material(material, project.materials)
    if code is None:
        unmapped.setdefault(material.lower(), []).append(line)
        return None, material, False
    return code, material, True


def _report_unmapped(table: _Table, unmapped: dict[str, list[int]], rows: list,
                     project: Project, problems: ProblemList) -> None:
    """One problem per distinct unmapped description, at its first line, with its count."""
    col = table.columns["material"]
    if unmapped and not project.materials:
        problems.add(table.path, 0, col, "intervals describe materials in words but "
                     "project.toml has no [[materials]] rules to map them to unit codes")
    text = {}
    for _line, fields in rows:
        m = " ".join(table.cell(fields, "material").split())
        text.setdefault(m.lower(), m)
    for key, lines in sorted(unmapped.items(), key=lambda kv: (-len(kv[1]), kv[0])):
        n = len(lines)
        shown = ", ".join(str(ln) for ln in lines[:5]) + (", ..." if n > 5 else "")
        problems.add(table.path, lines[0], col,
                     f"material {text.get(key, key)!r} matches no [[materials]] rule: "
                     f"{n} interval{'s' if n != 1 else ''} (lines {shown}); add a rule "
                     "mapping it to a unit code (descriptions are never guessed)")


def _read_intervals(raw: RawTable, project: Project, collars: dict[str, _Collar] | None,
                    named: set[str] | None, collars_name: str, problems: ProblemList,
                    warnings: ProblemList, stored_ids: frozenset[str] = frozenset()
                    ) -> tuple[list[_Interval], dict[str, int]] | None:
    """Valid intervals and the header's column numbers; None if unreadable."""
    path = raw.label
    table = _check_header(raw, INTERVAL_COLUMNS[:3], (), problems, warnings,
                          either=("unit", "material"))
    if table is None:
        return None
    if not table.rows:
        problems.add(path, 0, 0, "no interval rows below the header")
    cols = table.columns
    out: list[_Interval] = []
    unmapped: dict[str, list[int]] = {}
    for line, fields in table.rows:
        bid = _text(table, problems, line, fields, "borehole_id")
        top = _number(table, problems, line, fields, "from_m")
        bottom = _number(table, problems, line, fields, "to_m")
        unit, material, unit_ok = _interval_unit(table, problems, line, fields, project,
                                                 unmapped)
        ok = None not in (bid, top, bottom) and unit_ok
        if bid is not None and named is not None and bid not in named:
            problems.add(path, line, cols["borehole_id"],
                         _not_in_collars(bid, collars_name, stored_ids))
            ok = False
        if top is not None and top < 0:
            problems.add(path, line, cols["from_m"], f"from_m must be >= 0, got {top:g}")
            ok = False
        if top is not None and bottom is not None and bottom <= top:
            kind = "zero-length" if bottom == top else "inverted"
            problems.add(path, line, cols["to_m"],
                         f"{kind} interval: to_m ({bottom:g}) must be greater than from_m "
                         f"({top:g})")
            ok = False
        collar = collars.get(bid) if collars is not None and bid is not None else None
        if (bottom is not None and collar is not None
                and bottom > collar.total_depth_m + TOTAL_DEPTH_TOLERANCE_M):
            problems.add(path, line, cols["to_m"],
                         f"to_m ({bottom:g}) is below the total depth of {bid} "
                         f"({collar.total_depth_m:g} m)")
            ok = False
        if ok:
            out.append(_Interval(line, bid, top, bottom, unit, material))
    if unmapped:
        _report_unmapped(table, unmapped, table.rows, project, problems)

    by_hole: dict[str, list[_Interval]] = {}
    for iv in out:
        by_hole.setdefault(iv.borehole_id, []).append(iv)
    for bid, ivs in by_hole.items():
        ivs.sort(key=lambda iv: (iv.from_m, iv.to_m))
        deepest = ivs[0]
        for iv in ivs[1:]:
            if iv.from_m < deepest.to_m - SAME_DEPTH_M:
                problems.add(path, iv.line, cols["from_m"],
                             f"interval {_depth(iv.from_m)}–{_depth(iv.to_m)} of {bid} "
                             f"overlaps {_depth(deepest.from_m)}–{_depth(deepest.to_m)} "
                             f"on line {deepest.line}")
            if iv.to_m > deepest.to_m:
                deepest = iv
    return out, cols


def _read_samples(raw: RawTable, collars: dict[str, _Collar] | None, named: set[str] | None,
                  collars_name: str, problems: ProblemList,
                  warnings: ProblemList, stored_ids: frozenset[str] = frozenset()
                  ) -> list[dict] | None:
    """Valid sample rows as dicts (blank values NaN); None if unreadable."""
    path = raw.label
    table = _check_header(raw, SAMPLE_REQUIRED, SAMPLE_VALUES, problems, warnings)
    if table is None:
        return None
    cols = table.columns
    out = []
    for line, fields in table.rows:
        bid = _text(table, problems, line, fields, "borehole_id")
        depth = _number(table, problems, line, fields, "depth_m")
        vals = {name: _number(table, problems, line, fields, name, required=False)
                for name in SAMPLE_VALUES}
        ok = bid is not None and depth is not None and None not in vals.values()
        if bid is not None and named is not None and bid not in named:
            problems.add(path, line, cols["borehole_id"],
                         _not_in_collars(bid, collars_name, stored_ids))
            ok = False
        if depth is not None and depth < 0:
            problems.add(path, line, cols["depth_m"], f"depth_m must be >= 0, got {depth:g}")
            ok = False
        collar = collars.get(bid) if collars is not None and bid is not None else None
        if (depth is not None and collar is not None
                and depth > collar.total_depth_m + TOTAL_DEPTH_TOLERANCE_M):
            problems.add(path, line, cols["depth_m"],
                         f"depth_m ({depth:g}) is below the total depth of {bid} "
                         f"({collar.total_depth_m:g} m)")
            ok = False
        por = vals["porosity"]
        if por is not None and not math.isnan(por) and not 0 < por < 1:
            problems.add(path, line, cols["porosity"],
                         f"porosity must be a fraction between 0 and 1 (exclusive), got "
                         f"{por:g}")
            ok = False
        for name in ("d10_mm", "d60_mm", "k_lab_m_s"):
            v = vals[name]
            if v is not None and not math.isnan(v) and v <= 0:
                problems.add(path, line, cols[name], f"{name} must be > 0, got {v:g}")
                ok = False
        k_lab = vals["k_lab_m_s"]
        if k_lab is not None and k_lab > MAX_K_M_S:
            problems.add(path, line, cols["k_lab_m_s"],
                         f"k_lab_m_s = {k_lab:g} is above {MAX_K_M_S:g} m/s, more than any "
                         "natural material; is the column in cm/s or m/day? (1 cm/s = 0.01 "
                         "m/s, 1 m/day = 1.157e-05 m/s)")
            ok = False
        d10, d60 = vals["d10_mm"], vals["d60_mm"]
        if (d10 is not None and d60 is not None and d10 > 0 and d60 > 0 and d10 > d60):
            problems.add(path, line, cols["d10_mm"],
                         f"d10_mm ({d10:g}) is larger than d60_mm ({d60:g}); D10 is the finer "
                         "size")
            ok = False
        if ok:
            out.append({"borehole_id": bid, "depth_m": depth, **vals, "line": line,
                        "depth_column": cols["depth_m"]})
    return out


# --------------------------------------------------------------------------------------------
# Per-hole log geometry shared by the reader's warnings and column_table.


@dataclass(frozen=True)
class _Gap:
    top_m: float
    bottom_m: float
    line: int  # line of the interval below the gap


def _gaps(ivs: Sequence[tuple[float, float, int]]) -> list[_Gap]:
    """Undescribed depth ranges between ground and the deepest interval.

    ``ivs`` are ``(from_m, to_m, line)`` sorted by ``from_m``. A log that starts below
    ground has a gap from 0 m.
    """
    gaps = []
    reached = 0.0
    for top, bottom, line in ivs:
        if top > reached + SAME_DEPTH_M:
            gaps.append(_Gap(reached, top, line))
        reached = max(reached, bottom)
    return gaps


def _depth(v: float) -> str:
    """Depth text with one or two decimals: 2 -> '2.0', 2.15 -> '2.15'."""
    s = f"{v:.2f}"
    return s[:-1] if s.endswith("0") else s


def _sample_unit(depth: float, ivs: Sequence[_Interval]) -> str | None:
    """Code of the interval with ``from_m <= depth < to_m``; a depth on the base of the
    deepest interval belongs to it. None when the depth is in no interval."""
    for iv in ivs:
        if iv.from_m - SAME_DEPTH_M <= depth < iv.to_m - SAME_DEPTH_M:
            return iv.unit
    for iv in ivs:
        if abs(depth - iv.to_m) <= SAME_DEPTH_M:
            return iv.unit
    return None


# --------------------------------------------------------------------------------------------
# Public API.


def _path(project: Project, key: str) -> Path:
    return project.files.get(key, project.root / DEFAULT_FILES[key])


def read_boreholes(project: Project) -> Boreholes:
    """Read and validate the collars, intervals and (optional) samples of ``project``.

    Every row of every file is checked; all problems are collected and raised together.

    Errors (raised as one :class:`~aquitardmap.errors.InputError`): missing or unreadable
    file, text not in UTF-8, empty file, missing or repeated header column, malformed
    quoting, a row with the wrong number of fields, blank required value, text in a numeric
    column, non-finite number, duplicate borehole id in collars, ``total_depth_m <= 0``,
    coordinates that look like degrees while the project CRS is in metres, coordinates far
    outside the area where the project CRS is used (:func:`crs_extent_m`), an interval or
    sample naming a borehole absent from collars, ``from_m < 0``, ``to_m <= from_m``,
    overlapping intervals in one hole, ``to_m`` or a sample depth more than
    :data:`TOTAL_DEPTH_TOLERANCE_M` below ``total_depth_m``, unknown unit code, sample
    ``depth_m < 0``, porosity outside (0, 1), ``d10_mm``, ``d60_mm`` or ``k_lab_m_s`` <= 0,
    ``k_lab_m_s`` above :data:`MAX_K_M_S` (with a hint about cm/s), ``d10_mm > d60_mm``.

    Warnings (returned in :attr:`Boreholes.warnings`): extra column, absent sample value
    column, a collar with no intervals, an undescribed depth range in a log (including a log
    that starts below ground), a log that ends more than the tolerance above the total
    depth, a sample in no interval, a ``[qa] exclude_boreholes`` id absent from collars.

    Raises:
        InputError: when any error is found (warnings are not included).
    """
    problems = ProblemList()
    collars_path = _path(project, "collars")
    intervals_path = _path(project, "intervals")
    samples_path = project.file("samples")
    raws: dict[str, RawTable | None] = {}
    for key, path in (("collars", collars_path), ("intervals", intervals_path)):
        if project.file(key) is None:
            problems.add(path, 0, 0, f"required input file {path.name} not found")
            raws[key] = None
        else:
            raws[key] = read_csv_cells(path, problems)
    raws["samples"] = read_csv_cells(samples_path, problems) if samples_path else None
    return validate_logs(project, raws["collars"], raws["intervals"], raws["samples"],
                         problems=problems, collars_name=collars_path.name,
                         intervals_name=intervals_path.name)


def validate_logs(project: Project, collars: RawTable | None, intervals: RawTable | None,
                  samples: RawTable | None = None, *, problems: ProblemList | None = None,
                  collars_name: str | None = None, intervals_name: str | None = None,
                  stored_ids: frozenset[str] = frozenset()) -> Boreholes:
    """Validate the text cells of collars, intervals and (optional) samples tables.

    The checks are those listed in :func:`read_boreholes`, whatever the tables came from
    (CSV files, workbook sheets, GeoPackage layers). Intervals may name their unit by code
    (``unit``) or describe it in words (``material``), mapped by the project's
    ``[[materials]]`` rules; a description no rule maps is an error, reported once per
    distinct description with its count.

    Args:
        collars, intervals, samples: the tables; None for a table that could not be read
            (its problems are already in ``problems``).
        problems: problems found earlier (e.g. while reading the files); all are raised
            together.
        collars_name, intervals_name: names used in messages (default: the labels).
        stored_ids: ids already in the project store; only used to explain why an
            interval or sample naming such an id without its collar is refused.

    Raises:
        InputError: every problem found.
    """
    problems = problems if problems is not None else ProblemList()
    warnings = ProblemList()
    collars_name = collars_name or (collars.label if collars else "collars")
    intervals_name = intervals_name or (intervals.label if intervals else "intervals")
    collar_result = (_read_collars(collars, project, problems, warnings)
                     if collars is not None else None)
    coll, named = collar_result if collar_result is not None else (None, None)
    interval_result = None
    if intervals is not None:
        interval_result = _read_intervals(intervals, project, coll, named, collars_name,
                                          problems, warnings, stored_ids)
    sample_rows = None
    if samples is not None:
        sample_rows = _read_samples(samples, coll, named, collars_name, problems, warnings,
                                    stored_ids)
    _sort_by_file(problems)
    problems.raise_if_any()
    assert coll is not None and interval_result is not None  # no problems => both read
    ivs, icols = interval_result
    for c in coll.values():
        c.source = collars.label
    for iv in ivs:
        iv.source = intervals.label
    for row in sample_rows or []:
        row["source"] = samples.label
    return _finish(project, coll, ivs, sample_rows or [], warnings,
                   {intervals.label: icols}, intervals_name, collars_name)


def _finish(project: Project, collars: dict[str, _Collar], intervals: list[_Interval],
            samples: list[dict], warnings: ProblemList, interval_columns: dict[str, dict],
            intervals_name: str, collars_name: str) -> Boreholes:
    """Per-hole warnings (no intervals, gaps, short logs, samples in no interval), the unit
    of each sample, and the frames."""
    def col(source: str, name: str) -> int:
        return interval_columns.get(source, {}).get(name, 0)

    by_hole: dict[str, list[_Interval]] = {bid: [] for bid in collars}
    for iv in sorted(intervals, key=lambda iv: (iv.borehole_id, iv.from_m)):
        by_hole[iv.borehole_id].append(iv)

    for bid, collar in collars.items():
        ivs = by_hole[bid]
        if not ivs:
            warnings.add(collar.source, collar.line, collar.id_column,
                         f"borehole {bid!r} has no intervals in {intervals_name}")
            continue
        for gap in _gaps([(iv.from_m, iv.to_m, iv.line) for iv in ivs]):
            below = next(iv for iv in ivs if iv.from_m == gap.bottom_m)
            warnings.add(below.source, gap.line, col(below.source, "from_m"),
                         f"log of {bid} has no interval from {_depth(gap.top_m)} to "
                         f"{_depth(gap.bottom_m)} m")
        end = max(iv.to_m for iv in ivs)
        if end < collar.total_depth_m - TOTAL_DEPTH_TOLERANCE_M:
            last = max(ivs, key=lambda iv: iv.to_m)
            warnings.add(last.source, last.line, col(last.source, "to_m"),
                         f"log of {bid} ends at {_depth(end)} m, above its total depth of "
                         f"{_depth(collar.total_depth_m)} m")

    sample_rows = []
    for row in samples:
        depth_col = row.pop("depth_column", 0)
        unit = _sample_unit(row["depth_m"], by_hole[row["borehole_id"]])
        if unit is None:
            warnings.add(row["source"], row["line"], depth_col,
                         f"sample of {row['borehole_id']} at {row['depth_m']:g} m lies in no "
                         "logged interval")
        sample_rows.append({**row, "unit": unit})

    for bid in project.qa.exclude_boreholes:
        if bid not in collars:
            warnings.add(project.root / "project.toml", 0, 0,
                         f"[qa] exclude_boreholes names {bid!r}, which is not in "
                         f"{collars_name}")
    _sort_by_file(warnings)
    return Boreholes(
        collars=_collar_frame(collars),
        intervals=_interval_frame(intervals),
        samples=_sample_frame(sample_rows),
        warnings=tuple(warnings.problems),
    )


def boreholes_from_frames(project: Project, collars: pd.DataFrame, intervals: pd.DataFrame,
                          samples: pd.DataFrame, *, collars_name: str = "collars",
                          intervals_name: str = "intervals") -> Boreholes:
    """:class:`Boreholes` from tables that were validated before (e.g. by the store).

    The frames have the columns of :class:`Boreholes` (``collars`` indexed by
    ``borehole_id``; the samples' ``unit`` is recomputed) including ``source`` and
    ``line``, which the per-hole warnings (gaps, short logs, samples in no interval) cite.
    """
    coll = {str(bid): _Collar(int(r["line"]), float(r["x"]), float(r["y"]),
                              float(r["ground_elev_m"]), float(r["total_depth_m"]), 0,
                              str(r["source"]))
            for bid, r in collars.iterrows()}
    ivs = [_Interval(int(r.line), str(r.borehole_id), float(r.from_m), float(r.to_m),
                     str(r.unit), None if pd.isna(r.material) else str(r.material),
                     str(r.source))
           for r in intervals.itertuples(index=False)]
    rows = [{"borehole_id": str(r["borehole_id"]), "depth_m": float(r["depth_m"]),
             **{k: float(r[k]) for k in SAMPLE_VALUES}, "line": int(r["line"]),
             "source": str(r["source"])}
            for r in samples.to_dict("records")]
    return _finish(project, coll, ivs, rows, ProblemList(), {}, intervals_name, collars_name)


def _sort_by_file(problems: ProblemList) -> None:
    """Order problems by file (in first-seen order), then line and column."""
    order: dict[str, int] = {}
    for p in problems.problems:
        order.setdefault(p.file, len(order))
    problems.problems.sort(key=lambda p: (order[p.file], p.line, p.column))


def _collar_frame(collars: dict[str, _Collar]) -> pd.DataFrame:
    frame = pd.DataFrame(
        {
            "x": [c.x for c in collars.values()],
            "y": [c.y for c in collars.values()],
            "ground_elev_m": [c.ground_elev_m for c in collars.values()],
            "total_depth_m": [c.total_depth_m for c in collars.values()],
            "line": [c.line for c in collars.values()],
            "source": [c.source for c in collars.values()],
        },
        index=pd.Index(list(collars), name="borehole_id", dtype=object),
    )
    return frame.astype({"x": float, "y": float, "ground_elev_m": float,
                         "total_depth_m": float, "line": int, "source": object})


def _interval_frame(intervals: Iterable[_Interval]) -> pd.DataFrame:
    ivs = sorted(intervals, key=lambda iv: (iv.borehole_id, iv.from_m))
    frame = pd.DataFrame({
        "borehole_id": pd.Series([iv.borehole_id for iv in ivs], dtype=object),
        "from_m": pd.Series([iv.from_m for iv in ivs], dtype=float),
        "to_m": pd.Series([iv.to_m for iv in ivs], dtype=float),
        "unit": pd.Series([iv.unit for iv in ivs], dtype=object),
        "line": pd.Series([iv.line for iv in ivs], dtype=int),
        "material": pd.Series([iv.material for iv in ivs], dtype=object),
        "source": pd.Series([iv.source for iv in ivs], dtype=object),
    })
    return frame


def _sample_frame(rows: list[dict]) -> pd.DataFrame:
    data = {
        "borehole_id": pd.Series([r["borehole_id"] for r in rows], dtype=object),
        "depth_m": pd.Series([r["depth_m"] for r in rows], dtype=float),
    }
    for name in SAMPLE_VALUES:
        data[name] = pd.Series([r[name] for r in rows], dtype=float)
    data["unit"] = pd.Series([r["unit"] for r in rows], dtype=object)
    data["line"] = pd.Series([r["line"] for r in rows], dtype=int)
    data["source"] = pd.Series([r["source"] for r in rows], dtype=object)
    return pd.DataFrame(data)


def _combined_status(statuses: Sequence[str]) -> str:
    """``full`` if every status is full (or there are none), ``unknown`` if any is
    unknown, else ``lower_bound``."""
    if any(s == UNKNOWN for s in statuses):
        return UNKNOWN
    if all(s == FULL for s in statuses):
        return FULL
    return LOWER_BOUND


def column_table(boreholes: Boreholes, project: Project) -> pd.DataFrame:
    """One row per collar summarising its log over the protective column.

    The protective column is the units above the first aquifer of the stack
    (``project.column_units``). Stack positions count from 0 at the top of the stack.

    Columns (index ``borehole_id``, collar order):

    ``x, y, ground_elev_m, total_depth_m``
        copied from the collars.
    ``excluded``
        the id is in ``[qa] exclude_boreholes`` (the row stays in the table).
    ``reached_aquifer``
        the log has an interval of the first aquifer or of any unit below it in the stack.
    ``bottom_unit``
        code of the deepest interval (largest ``to_m``); ``""`` without intervals.
    ``thickness_<C>_m`` and ``status_<C>`` for every column unit C
        The thickness is the summed length of C's intervals above ``depth_to_aquifer_m``
        (clay logged below the top of the aquifer does not protect it; such a log is also
        flagged as breaking the stack order); 0 when absent. The status says what that
        number means, with *deepest level* the lowest stack position of any unit in the log
        (for a log that follows the stack this is the position of ``bottom_unit``; taking
        the lowest position keeps, e.g., a sand lens at the bottom of a clay hole from
        hiding the clay above it):

        - ``full``: the hole reached the aquifer, or its deepest level is below C: the hole
          passed through C and the thickness is complete (0 is a real absence);
        - ``lower_bound``: the hole did not reach the aquifer and stopped at C's level: C is
          at least this thick (censored; never use it as a thickness);
        - ``unknown``: the hole stopped above C (or has no intervals); the thickness (0)
          says nothing about C.
    ``cover_thickness_m`` / ``status_cover``
        sum over the cover-role column units; status ``full`` if every cover unit is full
        (also when the stack has no cover unit), ``unknown`` if any is unknown, otherwise
        ``lower_bound``.
    ``aquitard_thickness_m`` / ``status_aquitard``
        sum over the aquitard-role column units; ``full`` if the hole reached the aquifer,
        ``unknown`` if its deepest level is above the first aquitard unit (it never entered
        the clay), otherwise ``lower_bound``. A ``full`` 0 m proves a window.
    ``depth_to_aquifer_m``
        top of the shallowest interval of the first aquifer or a unit below it (m below
        ground); NaN if not reached.
    ``qa_flags``
        ``"; "``-joined plain reasons, ``""`` if none: ``"unit order breaks the stack"`` (a
        unit logged below a unit that lies lower in the stack), ``"gap in log"`` (an
        undescribed depth range, including a log that starts below ground), ``"log ends
        above total depth"`` (by more than :data:`TOTAL_DEPTH_TOLERANCE_M`), ``"no
        intervals"``.
    ``log``
        compact text of the log, e.g. ``"0.0–2.1 SAND; 2.1–14.0 UMC; 14.0–20.0 GRAV"``.

    Raises:
        ValueError: if an interval names a unit that is not in the project's stack (the
            tables did not come from :func:`read_boreholes` for this project).
    """
    rank = {u.code: i for i, u in enumerate(project.units)}
    column = project.column_units
    aquifer_rank = len(column)
    cover = [u.code for u in column if u.role == "cover"]
    aquitard = [u.code for u in column if u.role == "aquitard"]
    first_aquitard_rank = min((rank[c] for c in aquitard), default=aquifer_rank)
    unknown = set(boreholes.intervals["unit"]) - set(rank)
    if unknown:
        raise ValueError(f"intervals name units not in the project stack: "
                         f"{', '.join(sorted(map(str, unknown)))}")
    excluded = set(project.qa.exclude_boreholes)
    groups = {bid: g for bid, g in boreholes.intervals.groupby("borehole_id", sort=False)}

    rows = []
    for bid, collar in boreholes.collars.iterrows():
        g = groups.get(bid)
        ivs = ([] if g is None else
               sorted(zip(g["from_m"], g["to_m"], g["unit"], g["line"], strict=True),
                      key=lambda t: (t[0], t[1])))
        row: dict[str, object] = {
            "x": collar["x"], "y": collar["y"], "ground_elev_m": collar["ground_elev_m"],
            "total_depth_m": collar["total_depth_m"], "excluded": bid in excluded,
        }
        ranks = [rank[u] for _, _, u, _ in ivs]
        reached = any(r >= aquifer_rank for r in ranks)
        deepest_level = max(ranks, default=-1)
        aquifer_top = min((t for (t, _, u, _) in ivs if rank[u] >= aquifer_rank),
                          default=math.nan)
        row["reached_aquifer"] = reached
        row["bottom_unit"] = max(ivs, key=lambda t: t[1])[2] if ivs else ""
        statuses: dict[str, str] = {}
        thickness: dict[str, float] = {}
        for u in column:
            c = u.code
            # Overlaps are rejected on reading, so an interval lies wholly above or
            # wholly below the aquifer top.
            thickness[c] = float(sum(b - t for t, b, unit, _ in ivs
                                     if unit == c and (not reached or t < aquifer_top)))
            if reached or deepest_level > rank[c]:
                statuses[c] = FULL
            elif deepest_level == rank[c]:
                statuses[c] = LOWER_BOUND
            else:
                statuses[c] = UNKNOWN
            row[f"thickness_{c}_m"] = thickness[c]
            row[f"status_{c}"] = statuses[c]
        row["cover_thickness_m"] = float(sum(thickness[c] for c in cover))
        row["status_cover"] = _combined_status([statuses[c] for c in cover])
        row["aquitard_thickness_m"] = float(sum(thickness[c] for c in aquitard))
        if reached:
            row["status_aquitard"] = FULL
        elif deepest_level < first_aquitard_rank:
            row["status_aquitard"] = UNKNOWN
        else:
            row["status_aquitard"] = LOWER_BOUND
        row["depth_to_aquifer_m"] = aquifer_top

        flags = []
        running = -1
        for r in ranks:
            if r < running:
                flags.append(FLAG_ORDER)
                break
            running = max(running, r)
        if _gaps([(t, b, ln) for t, b, _, ln in ivs]):
            flags.append(FLAG_GAP)
        if ivs and (max(b for _, b, _, _ in ivs)
                    < collar["total_depth_m"] - TOTAL_DEPTH_TOLERANCE_M):
            flags.append(FLAG_SHORT_LOG)
        if not ivs:
            flags.append(FLAG_NO_INTERVALS)
        row["qa_flags"] = "; ".join(flags)
        row["log"] = "; ".join(f"{_depth(t)}–{_depth(b)} {u}" for t, b, u, _ in ivs)
        rows.append(row)

    frame = pd.DataFrame(rows, index=pd.Index(list(boreholes.collars.index),
                                               name="borehole_id", dtype=object))
    if frame.empty:
        frame = pd.DataFrame(columns=_column_names(project), index=frame.index)
    frame["excluded"] = frame["excluded"].astype(bool)
    frame["reached_aquifer"] = frame["reached_aquifer"].astype(bool)
    return frame[_column_names(project)]


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
    table = _check_header(raw, cols, (), problems, warnings) if raw is not None else None
    rows: list[tuple[float, float, float, int]] = []
    if table is not None:
        if not table.rows:
            problems.add(path, 0, 0, "no rows below the header")
        for line, fields in table.rows:
            vals = [_number(table, problems, line, fields, c) for c in cols]
            if None not in vals:
                rows.append((*vals, line))
    return pd.DataFrame(rows, columns=[*cols, "line"]).astype(
        {"x": float, "y": float, value_column: float, "line": int})


def _column_names(project: Project) -> list[str]:
    names = ["x", "y", "ground_elev_m", "total_depth_m", "excluded", "reached_aquifer",
             "bottom_unit"]
    for u in project.column_units:
        names += [f"thickness_{u.code}_m", f"status_{u.code}"]
    return names + ["cover_thickness_m", "status_cover", "aquitard_thickness_m",
                    "status_aquitard", "depth_to_aquifer_m", "qa_flags", "log"]


__all__ = [
    "FULL", "LOWER_BOUND", "UNKNOWN", "Boreholes", "RawTable", "boreholes_from_frames",
    "column_table", "read_boreholes", "read_csv_cells", "validate_logs",
    "TOTAL_DEPTH_TOLERANCE_M",
]
