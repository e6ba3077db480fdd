"""Read and validate borehole logs: collars, intervals and samples, into :class:`Boreholes`.

Three comma-separated tables, read by the rules of :mod:`aquitardmap.inputs.tables` (UTF-8,
header on line 1, columns in any order, extra columns warned about and ignored):

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

:func:`read_boreholes` checks every row and raises a single
:class:`~aquitardmap.errors.InputError` listing every problem with file, line (header =
line 1) and column (1 = first field; 0 when the problem concerns the whole file or a
missing column). The per-hole column table made from the result is
:func:`aquitardmap.inputs.columns.column_table`.
"""

from __future__ import annotations

import math
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
from aquitardmap.inputs.tables import (
    CheckedTable,
    RawTable,
    check_header,
    number_cell,
    read_csv_cells,
    sort_by_file,
    text_cell,
)

#: Allowance (m) for ``to_m`` and sample depths beyond ``total_depth_m``: logs and collars
#: are commonly written to the centimetre (common practice).
TOTAL_DEPTH_TOLERANCE_M = 0.01
#: Two depths closer than this (m) are the same depth; it only absorbs float rounding.
SAME_DEPTH_M = 1e-6
#: Deepest credible ``total_depth_m`` (m) of a water well or geotechnical hole through
#: post-glacial clays and the aquifer below them: such holes stop within a few hundred metres
#: (common practice). A deeper collar is kept, with a warning (a unit slip, e.g. mm, or a
#: typo) and the ``qa_flags`` reason :data:`aquitardmap.inputs.columns.FLAG_DEEP`.
MAX_PLAUSIBLE_DEPTH_M = 2000.0

#: Largest credible hydraulic conductivity (m/s): the top of the range of clean gravel in
#: Freeze & Cherry (1979), Table 2.2 (*from memory*). A larger lab value is refused with a
#: hint about units.
MAX_K_M_S = 1.0

COLLAR_COLUMNS = ("borehole_id", "x", "y", "ground_elev_m", "total_depth_m")
INTERVAL_COLUMNS = ("borehole_id", "from_m", "to_m", "unit")
SAMPLE_REQUIRED = ("borehole_id", "depth_m")
SAMPLE_VALUES = ("d10_mm", "d60_mm", "porosity", "k_lab_m_s")


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
    table = check_header(raw, COLLAR_COLUMNS, (), problems, warnings)
    if table is None:
        return None
    if not table.rows:
        problems.add(path, 0, 0, "no collar rows below the header")
    collars: dict[str, _Collar] = {}
    first_line: dict[str, int] = {}
    metres = _crs_in_metres(project)
    extent = crs_extent_m(project.crs) if metres else None
    for line, fields in table.rows:
        bid = text_cell(table, problems, line, fields, "borehole_id")
        x = number_cell(table, problems, line, fields, "x")
        y = number_cell(table, problems, line, fields, "y")
        z = number_cell(table, problems, line, fields, "ground_elev_m")
        td = number_cell(table, problems, line, fields, "total_depth_m")
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
        elif td is not None and td > MAX_PLAUSIBLE_DEPTH_M:
            warnings.add(path, line, table.columns["total_depth_m"],
                         f"total_depth_m = {td:g} m is deeper than any water well or "
                         f"geotechnical hole reaches (more than {MAX_PLAUSIBLE_DEPTH_M:g} m): "
                         "a unit slip (mm or cm?) or a typo; used as given, and flagged in "
                         "the borehole table's qa_flags")
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


@dataclass(frozen=True)
class _Holes:
    """The collars that interval and sample rows are checked against.

    Attributes:
        collars: the valid collars by id (None when the collars could not be read).
        named: every id the collars table names, valid or not (None likewise).
        collars_name: the collars table as messages name it.
        stored_ids: ids already in the project store (they explain a refusal).
    """

    collars: dict[str, _Collar] | None
    named: set[str] | None
    collars_name: str
    stored_ids: frozenset[str] = frozenset()

    def check_hole_and_top(self, table: CheckedTable, problems: ProblemList, line: int,
                           bid: str | None, name: str, depth_m: float | None) -> bool:
        """The row's hole is in the collars and its depth column ``name`` is not negative;
        False after reporting either."""
        ok = True
        if bid is not None and self.named is not None and bid not in self.named:
            msg = f"borehole {bid!r} is not in {self.collars_name}"
            if bid in self.stored_ids:
                msg += (" (it is in the store; a batch carries whole boreholes: add its "
                        "collar, intervals and samples together, with --replace to change "
                        "it)")
            problems.add(table.path, line, table.columns["borehole_id"], msg)
            ok = False
        if depth_m is not None and depth_m < 0:
            problems.add(table.path, line, table.columns[name],
                         f"{name} must be >= 0, got {depth_m:g}")
            ok = False
        return ok

    def check_within_hole(self, table: CheckedTable, problems: ProblemList, line: int,
                          bid: str | None, name: str, depth_m: float | None) -> bool:
        """The depth column ``name`` is not below the total depth of the row's hole (beyond
        :data:`TOTAL_DEPTH_TOLERANCE_M`); False after reporting it."""
        collar = (self.collars.get(bid) if self.collars is not None and bid is not None
                  else None)
        if (depth_m is not None and collar is not None
                and depth_m > collar.total_depth_m + TOTAL_DEPTH_TOLERANCE_M):
            problems.add(table.path, line, table.columns[name],
                         f"{name} ({depth_m:g}) is below the total depth of {bid} "
                         f"({collar.total_depth_m:g} m)")
            return False
        return True


def _interval_unit(table: CheckedTable, problems: ProblemList, line: int, fields: list[str],
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


def _report_unmapped(table: CheckedTable, unmapped: dict[str, list[int]], rows: list,
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


def _read_intervals(raw: RawTable, project: Project, holes: _Holes, problems: ProblemList,
                    warnings: ProblemList) -> tuple[list[_Interval], dict[str, int]] | None:
    """Valid intervals and the header's column numbers; None if unreadable."""
    path = raw.label
    table = check_header(raw, INTERVAL_COLUMNS[:3], (), problems, warnings,
                         either=("unit", "material"))
    if table is None:
        return None
    if not table.rows:
        problems.add(path, 0, 0, "no interval rows below the header")
    cols = table.columns
    out: list[_Interval] = []
    unmapped: dict[str, list[int]] = {}
    for line, fields in table.rows:
        bid = text_cell(table, problems, line, fields, "borehole_id")
        top = number_cell(table, problems, line, fields, "from_m")
        bottom = number_cell(table, problems, line, fields, "to_m")
        unit, material, unit_ok = _interval_unit(table, problems, line, fields, project,
                                                 unmapped)
        ok = None not in (bid, top, bottom) and unit_ok
        ok = holes.check_hole_and_top(table, problems, line, bid, "from_m", top) and ok
        if top is not None and bottom is not None and bottom <= top:
            kind = "zero-length" if bottom == top else "inverted"
            problems.add(path, line, cols["to_m"],
                         f"{kind} interval: to_m ({bottom:g}) must be greater than from_m "
                         f"({top:g})")
            ok = False
        ok = holes.check_within_hole(table, problems, line, bid, "to_m", bottom) and ok
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
                             f"interval {depth_text(iv.from_m)}–{depth_text(iv.to_m)} of "
                             f"{bid} overlaps {depth_text(deepest.from_m)}–"
                             f"{depth_text(deepest.to_m)} on line {deepest.line}")
            if iv.to_m > deepest.to_m:
                deepest = iv
    return out, cols


def _read_samples(raw: RawTable, holes: _Holes, problems: ProblemList,
                  warnings: ProblemList) -> list[dict] | None:
    """Valid sample rows as dicts (blank values NaN); None if unreadable."""
    path = raw.label
    table = check_header(raw, SAMPLE_REQUIRED, SAMPLE_VALUES, problems, warnings)
    if table is None:
        return None
    cols = table.columns
    out = []
    for line, fields in table.rows:
        bid = text_cell(table, problems, line, fields, "borehole_id")
        depth = number_cell(table, problems, line, fields, "depth_m")
        vals = {name: number_cell(table, problems, line, fields, name, required=False)
                for name in SAMPLE_VALUES}
        ok = bid is not None and depth is not None and None not in vals.values()
        ok = holes.check_hole_and_top(table, problems, line, bid, "depth_m", depth) and ok
        ok = holes.check_within_hole(table, problems, line, bid, "depth_m", depth) and ok
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
# Per-hole log geometry shared by the reader's warnings and the column table.


@dataclass(frozen=True)
class LogGap:
    """An undescribed depth range of one log (m below ground)."""

    top_m: float
    bottom_m: float
    line: int  # line of the interval below the gap


def log_gaps(ivs: Sequence[tuple[float, float, int]]) -> list[LogGap]:
    """Undescribed depth ranges between ground and the deepest interval.

    ``ivs`` are ``(from_m, to_m, line)`` sorted by ``from_m``. A log that starts below
    ground has a gap from 0 m.
    """
    gaps = []
    reached = 0.0
    for top, bottom, line in ivs:
        if top > reached + SAME_DEPTH_M:
            gaps.append(LogGap(reached, top, line))
        reached = max(reached, bottom)
    return gaps


def depth_text(v: float) -> str:
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
    holes = _Holes(coll, named, collars_name, stored_ids)
    interval_result = None
    if intervals is not None:
        interval_result = _read_intervals(intervals, project, holes, problems, warnings)
    sample_rows = None
    if samples is not None:
        sample_rows = _read_samples(samples, holes, problems, warnings)
    sort_by_file(problems)
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
        for gap in log_gaps([(iv.from_m, iv.to_m, iv.line) for iv in ivs]):
            below = next(iv for iv in ivs if iv.from_m == gap.bottom_m)
            warnings.add(below.source, gap.line, col(below.source, "from_m"),
                         f"log of {bid} has no interval from {depth_text(gap.top_m)} to "
                         f"{depth_text(gap.bottom_m)} m")
        end = max(iv.to_m for iv in ivs)
        if end < collar.total_depth_m - TOTAL_DEPTH_TOLERANCE_M:
            last = max(ivs, key=lambda iv: iv.to_m)
            warnings.add(last.source, last.line, col(last.source, "to_m"),
                         f"log of {bid} ends at {depth_text(end)} m, above its total depth of "
                         f"{depth_text(collar.total_depth_m)} m")

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
    sort_by_file(warnings)
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


__all__ = [
    "TOTAL_DEPTH_TOLERANCE_M", "Boreholes", "boreholes_from_frames", "crs_extent_m",
    "depth_text", "log_gaps", "read_boreholes", "validate_logs",
]
