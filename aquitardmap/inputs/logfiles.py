"""Read a batch of borehole logs from files: CSV tables, a GeoPackage or an .xlsx workbook.

Whatever the format, the result is the text cells of up to three tables — ``collars``,
``intervals`` and ``samples`` (see :mod:`aquitardmap.inputs.logs` for their columns) — which
:func:`aquitardmap.inputs.logs.validate_logs` then checks exactly as it checks the project's CSVs.

- **CSV files**: the table is told by the file name (a name containing ``collar``,
  ``interval`` or ``sample``, e.g. ``collars_2024.csv``), else by its header (``x``/``y``
  → collars, ``from_m``/``to_m`` → intervals, ``depth_m`` → samples). Lines are the file's
  physical lines.
- **.xlsx workbook**: sheets named ``collars``, ``intervals``, ``samples`` (case ignored), the
  header in the first non-empty row. Problems cite ``book.xlsx[collars]``, with the sheet's
  row number as the line and its column number as the column.
- **GeoPackage**: layers named ``collars``, ``intervals``, ``samples``. Problems cite
  ``logs.gpkg[collars]`` with the feature id as the line and the field position as the
  column. A collars layer without ``x``/``y`` fields takes them from its point geometry,
  transformed to the project CRS when the layer has another CRS.

Numbers read from a workbook or a GeoPackage keep every digit (they are passed on as the
shortest text that reads back to the same double).
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

from aquitardmap.errors import ProblemList
from aquitardmap.files import file_sha256
from aquitardmap.inputs.tables import RawTable, read_csv_cells

KINDS = ("collars", "intervals", "samples")
_HEADER_HINTS = {
    "collars": {"x", "y", "total_depth_m"},
    "intervals": {"from_m", "to_m"},
    "samples": {"depth_m"},
}


@dataclass(frozen=True)
class SourceFile:
    """One input file of a batch: its name, SHA-256 and the tables it gave."""

    path: Path
    sha256: str
    tables: tuple[str, ...]


@dataclass
class LogTables:
    """The tables of one batch, as text cells, and the files they came from."""

    tables: dict[str, RawTable] = field(default_factory=dict)
    sources: list[SourceFile] = field(default_factory=list)


def _cell_text(value: object) -> str:
    """Text of one workbook or layer value; numbers as the shortest exact text."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return str(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return "" if math.isnan(value) else repr(value)
    if isinstance(value, dt.datetime | dt.date | dt.time):
        return value.isoformat()
    try:  # numpy scalars
        import numpy as np
        if isinstance(value, np.integer):
            return str(int(value))
        if isinstance(value, np.floating):
            return "" if np.isnan(value) else repr(float(value))
    except ImportError:  # pragma: no cover - numpy is a dependency
        pass
    return str(value)


def _kind_of_csv(path: Path, raw: RawTable) -> str | None:
    name = path.stem.lower()
    by_name = [k for k in KINDS if k[:-1] in name]
    if len(by_name) == 1:
        return by_name[0]
    header = {f.strip().lower() for f in raw.records[0][1]} if raw.records else set()
    by_header = [k for k, cols in _HEADER_HINTS.items() if cols <= header]
    if "collars" in by_header:
        return "collars"
    return by_header[0] if len(by_header) == 1 else None


def _read_xlsx(path: Path, problems: ProblemList) -> dict[str, RawTable]:
    try:
        import openpyxl
    except ImportError:  # pragma: no cover - a declared dependency
        problems.add(path, 0, 0, "reading .xlsx needs the openpyxl package")
        return {}
    try:
        book = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # noqa: BLE001 - any reader failure is an input problem
        problems.add(path, 0, 0, f"cannot read the workbook: {exc}")
        return {}
    out: dict[str, RawTable] = {}
    try:
        sheets = {ws.title.strip().lower(): ws for ws in book.worksheets}
        for kind in KINDS:
            ws = sheets.get(kind)
            if ws is None:
                continue
            label = f"{path.name}[{ws.title}]"
            records = []
            for row_no, row in enumerate(ws.iter_rows(values_only=True), start=1):
                fields = [_cell_text(v) for v in row]
                while fields and not fields[-1].strip():
                    fields.pop()
                if not any(f.strip() for f in fields):
                    continue
                records.append((row_no, fields))
            if records:
                width = len(records[0][1])
                records = [(n, (f + [""] * (width - len(f))) if len(f) < width else f)
                           for n, f in records]
            out[kind] = RawTable(label, records)
    finally:
        book.close()
    if not out:
        problems.add(path, 0, 0, "the workbook has no sheet named collars, intervals or "
                     f"samples (sheets: {', '.join(ws.title for ws in book.worksheets)})")
    return out


def _read_gpkg(path: Path, project_crs, problems: ProblemList) -> dict[str, RawTable]:
    import pyogrio

    try:
        layers = {str(name).lower(): str(name) for name, _ in pyogrio.list_layers(path)}
    except Exception as exc:  # noqa: BLE001 - any reader failure is an input problem
        problems.add(path, 0, 0, f"cannot read the GeoPackage: {exc}")
        return {}
    out: dict[str, RawTable] = {}
    for kind in KINDS:
        name = layers.get(kind)
        if name is None:
            continue
        label = f"{path.name}[{name}]"
        try:
            df = pyogrio.read_dataframe(path, layer=name, fid_as_index=True)
        except Exception as exc:  # noqa: BLE001
            problems.add(label, 0, 0, f"cannot read the layer: {exc}")
            continue
        geom = df.geometry if "geometry" in df.columns and hasattr(df, "crs") else None
        cols = [c for c in df.columns if c != "geometry"]
        lower = {c.lower() for c in cols}
        xy = None
        if kind == "collars" and geom is not None and not {"x", "y"} <= lower:
            g = geom
            if df.crs is not None and project_crs is not None and not df.crs.equals(project_crs):
                g = geom.to_crs(project_crs)
            xy = (g.x, g.y)
            cols_out = cols + ["x", "y"]
        else:
            cols_out = cols
        records = [(0, [str(c) for c in cols_out])]
        for i, (fid, row) in enumerate(df[cols].iterrows()):
            fields = [_cell_text(v) for v in row.tolist()]
            if xy is not None:
                gx, gy = xy[0].iloc[i], xy[1].iloc[i]
                fields += [_cell_text(float(gx)), _cell_text(float(gy))]
            records.append((int(fid), fields))
        out[kind] = RawTable(label, records)
    if not out:
        problems.add(path, 0, 0, "the GeoPackage has no layer named collars, intervals or "
                     f"samples (layers: {', '.join(layers.values())})")
    return out


def read_log_files(paths: Sequence[str | Path], project_crs=None) -> tuple[LogTables,
                                                                            ProblemList]:
    """Read the tables of a batch from ``paths`` (CSV files, ``.gpkg``, ``.xlsx``).

    Returns the tables found and the problems met (unreadable files, a table given twice,
    a CSV whose table cannot be told). The tables are not validated here.
    """
    problems = ProblemList()
    result = LogTables()
    for p in map(Path, paths):
        if not p.is_file():
            problems.add(p, 0, 0, "file not found")
            continue
        suffix = p.suffix.lower()
        if suffix == ".xlsx":
            found = _read_xlsx(p, problems)
        elif suffix == ".gpkg":
            found = _read_gpkg(p, project_crs, problems)
        elif suffix in (".csv", ".txt"):
            raw = read_csv_cells(p, problems)
            found = {}
            if raw is not None:
                kind = _kind_of_csv(p, raw)
                if kind is None:
                    problems.add(p, 1, 0, "cannot tell which table this CSV holds: name it "
                                 "like collars*.csv, intervals*.csv or samples*.csv")
                else:
                    found[kind] = raw
        else:
            problems.add(p, 0, 0, f"unsupported file type {p.suffix or '(none)'}: give CSV "
                         "files, a .gpkg or an .xlsx workbook")
            continue
        for kind, raw in found.items():
            if kind in result.tables:
                problems.add(raw.label, 0, 0, f"a second {kind} table in one batch (the "
                             f"first is {result.tables[kind].label}); add them separately "
                             "or merge them")
                continue
            result.tables[kind] = raw
        result.sources.append(SourceFile(p, file_sha256(p), tuple(found)))
    return result, problems


__all__ = ["KINDS", "LogTables", "SourceFile", "read_log_files"]
