"""The project store: the project's boreholes in a GeoPackage, added in batches, with history.

A project keeps its boreholes in ``PROJECT/boreholes_store.gpkg`` (``[files] store`` may
name another file inside the folder). The store is a GeoPackage (OGC 12-128r, version 1.2):
an SQLite database that GIS software opens as it is. Its tables:

``collars`` (point layer, project CRS)
    ``borehole_id`` (unique), ``x``, ``y``, ``ground_elev_m``, ``total_depth_m``,
    ``batch_id`` (the batch that added it), ``source`` and ``line`` (where it was read).
``intervals``, ``samples`` (attribute tables)
    the columns of the CSV contract (intervals also keep the ``material`` words of a
    free-text log) plus ``batch_id``, ``source``, ``line``.
``batches``
    one row per batch: ``added_utc``, ``note``, ``files``, counts (boreholes added, replaced,
    already stored; intervals; samples) and ``undone_utc`` once undone.
``batch_files``
    each file of each batch with its SHA-256.
``history_collars``, ``history_intervals``, ``history_samples``
    records that left the live tables: ``reason`` is ``replaced`` (a later batch's
    ``--replace`` won; ``by_batch`` names it) or ``undone`` (their batch was undone).

Every change (:func:`add_files`, :func:`undo_batch`) is one SQLite transaction: after a
crash or a kill the store holds what it held before or what it holds after, never a mix
(SQLite's rollback journal; https://www.sqlite.org/atomiccommit.html). A new store is built
in a temporary file and renamed into place, so it appears whole or not at all.

A batch carries whole boreholes: the collar, intervals and samples of every hole it names.
A hole already stored with identical data is counted as ``unchanged``; with different data
it is a conflict, reported with both versions, unless ``replace`` is given, in which case
the new version wins and the stored one moves to history. :func:`undo_batch` removes a
batch's boreholes and restores the versions it replaced.

Once a store exists, :func:`project_boreholes` (used by the pipeline) reads the boreholes
from it instead of the project's CSV files.
"""

from __future__ import annotations

import math
import os
import sqlite3
import struct
import tempfile
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

import pandas as pd

from aquitardmap.config.project import Project
from aquitardmap.config.settings import DEFAULT_FILES
from aquitardmap.errors import InputError, Problem, ProblemList
from aquitardmap.files import file_sha256
from aquitardmap.inputs.logfiles import LogTables, SourceFile, read_log_files
from aquitardmap.inputs.logs import (
    SAMPLE_VALUES,
    Boreholes,
    boreholes_from_frames,
    read_boreholes,
    validate_logs,
)

STORE_FILE = DEFAULT_FILES["store"]
_GPKG_APPLICATION_ID = 0x47504B47  # "GPKG" (GeoPackage 1.2, clause 1.1.1.1.1)
_GPKG_USER_VERSION = 10200
_CUSTOM_SRS_ID = 100000

_COLLAR_COLS = ("borehole_id", "x", "y", "ground_elev_m", "total_depth_m")
_INTERVAL_COLS = ("borehole_id", "from_m", "to_m", "unit", "material")
_SAMPLE_COLS = ("borehole_id", "depth_m", *SAMPLE_VALUES)
_META = ("batch_id", "source", "line")
_TABLE_COLS = {"collars": _COLLAR_COLS, "intervals": _INTERVAL_COLS, "samples": _SAMPLE_COLS}
_TEXT = {"borehole_id", "unit", "material", "source"}


# --------------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True)
class Batch:
    """One batch of the store."""

    batch_id: int
    added_utc: str
    note: str
    files: tuple[tuple[str, str], ...]  # (file name, sha256)
    n_added: int
    n_replaced: int
    n_unchanged: int
    n_intervals: int
    n_samples: int
    undone_utc: str | None = None

    @property
    def live(self) -> bool:
        return self.undone_utc is None


@dataclass(frozen=True)
class AddResult:
    """What :func:`add_files` did.

    ``batch`` is None when nothing was committed (the files were already added, or every
    borehole was already stored identically); ``message`` says which in plain words.
    ``initial`` is the batch that imported the project's CSV files when the store was
    created by this call.
    """

    batch: Batch | None
    added: tuple[str, ...]
    replaced: tuple[str, ...]
    unchanged: tuple[str, ...]
    message: str
    initial: Batch | None = None
    warnings: tuple[Problem, ...] = field(default=())


# --------------------------------------------------------------------------------------------
# GeoPackage plumbing


def store_path(project: Project) -> Path:
    """Path of the project's store (it may not exist yet)."""
    return project.files.get("store", project.root / STORE_FILE)


def has_store(project: Project) -> bool:
    """True when the project's store file exists."""
    return store_path(project).is_file()


def _point_blob(x: float, y: float, srs_id: int) -> bytes:
    """GeoPackage geometry blob of a 2-D point (GeoPackage 1.2, clause 2.1.3): header
    ``GP``, version 0, flags (little-endian, no envelope), srs_id; then WKB (ISO 13249)."""
    return b"GP" + struct.pack("<BBi", 0, 0b00000001, srs_id) + struct.pack("<BIdd", 1, 1, x, y)


def _srs(project: Project) -> tuple[int, str, int, str]:
    """(srs_id, organization, organization_coordsys_id, WKT) of the project CRS."""
    code = project.crs.to_epsg()
    wkt = project.crs.to_wkt("WKT1_GDAL")
    if code is not None:
        return code, "EPSG", code, wkt
    return _CUSTOM_SRS_ID, "NONE", _CUSTOM_SRS_ID, wkt


def _script(con: sqlite3.Connection, sql: str) -> None:
    """Run ``;``-separated statements inside the open transaction (``executescript`` would
    commit it first)."""
    for stmt in sql.split(";"):
        if stmt.strip():
            con.execute(stmt)


def _create_schema(con: sqlite3.Connection, project: Project) -> int:
    srs_id, org, org_id, wkt = _srs(project)
    con.execute(f"PRAGMA application_id = {_GPKG_APPLICATION_ID}")
    con.execute(f"PRAGMA user_version = {_GPKG_USER_VERSION}")
    _script(con, """
        CREATE TABLE gpkg_spatial_ref_sys (
          srs_name TEXT NOT NULL, srs_id INTEGER NOT NULL PRIMARY KEY,
          organization TEXT NOT NULL, organization_coordsys_id INTEGER NOT NULL,
          definition TEXT NOT NULL, description TEXT);
        CREATE TABLE gpkg_contents (
          table_name TEXT NOT NULL PRIMARY KEY, data_type TEXT NOT NULL,
          identifier TEXT UNIQUE, description TEXT DEFAULT '',
          last_change DATETIME NOT NULL DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ','now')),
          min_x DOUBLE, min_y DOUBLE, max_x DOUBLE, max_y DOUBLE, srs_id INTEGER,
          CONSTRAINT fk_gc_r_srs_id FOREIGN KEY (srs_id)
            REFERENCES gpkg_spatial_ref_sys(srs_id));
        CREATE TABLE gpkg_geometry_columns (
          table_name TEXT NOT NULL, column_name TEXT NOT NULL,
          geometry_type_name TEXT NOT NULL, srs_id INTEGER NOT NULL,
          z TINYINT NOT NULL, m TINYINT NOT NULL,
          CONSTRAINT pk_geom_cols PRIMARY KEY (table_name, column_name),
          CONSTRAINT uk_gc_table_name UNIQUE (table_name),
          CONSTRAINT fk_gc_tn FOREIGN KEY (table_name) REFERENCES gpkg_contents(table_name),
          CONSTRAINT fk_gc_srs FOREIGN KEY (srs_id) REFERENCES gpkg_spatial_ref_sys (srs_id));
    """)
    refs = [
        ("Undefined cartesian SRS", -1, "NONE", -1, "undefined",
         "undefined cartesian coordinate reference system"),
        ("Undefined geographic SRS", 0, "NONE", 0, "undefined",
         "undefined geographic coordinate reference system"),
        ("WGS 84 geodetic", 4326, "EPSG", 4326,
         'GEOGCS["WGS 84",DATUM["WGS_1984",SPHEROID["WGS 84",6378137,298.257223563,'
         'AUTHORITY["EPSG","7030"]],AUTHORITY["EPSG","6326"]],PRIMEM["Greenwich",0,'
         'AUTHORITY["EPSG","8901"]],UNIT["degree",0.0174532925199433,AUTHORITY["EPSG",'
         '"9122"]],AXIS["Latitude",NORTH],AXIS["Longitude",EAST],AUTHORITY["EPSG","4326"]]',
         "longitude/latitude coordinates in decimal degrees on the WGS 84 spheroid"),
    ]
    if srs_id not in (-1, 0, 4326):
        refs.append((project.crs.name, srs_id, org, org_id, wkt, "project CRS"))
    con.executemany("INSERT INTO gpkg_spatial_ref_sys VALUES (?,?,?,?,?,?)", refs)

    meta = "batch_id INTEGER NOT NULL, source TEXT, line INTEGER"
    _script(con, f"""
        CREATE TABLE collars (
          fid INTEGER PRIMARY KEY AUTOINCREMENT, geom POINT,
          borehole_id TEXT NOT NULL UNIQUE, x DOUBLE NOT NULL, y DOUBLE NOT NULL,
          ground_elev_m DOUBLE NOT NULL, total_depth_m DOUBLE NOT NULL, {meta});
        CREATE TABLE intervals (
          fid INTEGER PRIMARY KEY AUTOINCREMENT, borehole_id TEXT NOT NULL,
          from_m DOUBLE NOT NULL, to_m DOUBLE NOT NULL, unit TEXT NOT NULL, material TEXT,
          {meta});
        CREATE INDEX intervals_borehole ON intervals (borehole_id);
        CREATE TABLE samples (
          fid INTEGER PRIMARY KEY AUTOINCREMENT, borehole_id TEXT NOT NULL,
          depth_m DOUBLE NOT NULL, d10_mm DOUBLE, d60_mm DOUBLE, porosity DOUBLE,
          k_lab_m_s DOUBLE, {meta});
        CREATE INDEX samples_borehole ON samples (borehole_id);
        CREATE TABLE batches (
          fid INTEGER PRIMARY KEY AUTOINCREMENT, added_utc TEXT NOT NULL, note TEXT,
          files TEXT, n_added INTEGER, n_replaced INTEGER, n_unchanged INTEGER,
          n_intervals INTEGER, n_samples INTEGER, undone_utc TEXT);
        CREATE TABLE batch_files (
          fid INTEGER PRIMARY KEY AUTOINCREMENT, batch_id INTEGER NOT NULL,
          file TEXT NOT NULL, sha256 TEXT NOT NULL, tables TEXT);
        CREATE TABLE history_collars (
          fid INTEGER PRIMARY KEY AUTOINCREMENT, borehole_id TEXT NOT NULL, x DOUBLE,
          y DOUBLE, ground_elev_m DOUBLE, total_depth_m DOUBLE, {meta},
          reason TEXT NOT NULL, by_batch INTEGER NOT NULL);
        CREATE TABLE history_intervals (
          fid INTEGER PRIMARY KEY AUTOINCREMENT, borehole_id TEXT NOT NULL, from_m DOUBLE,
          to_m DOUBLE, unit TEXT, material TEXT, {meta},
          reason TEXT NOT NULL, by_batch INTEGER NOT NULL);
        CREATE TABLE history_samples (
          fid INTEGER PRIMARY KEY AUTOINCREMENT, borehole_id TEXT NOT NULL, depth_m DOUBLE,
          d10_mm DOUBLE, d60_mm DOUBLE, porosity DOUBLE, k_lab_m_s DOUBLE, {meta},
          reason TEXT NOT NULL, by_batch INTEGER NOT NULL);
    """)
    described = {
        "collars": "borehole collars (live)", "intervals": "logged intervals (live)",
        "samples": "samples (live)", "batches": "batches of added logs",
        "batch_files": "files of each batch with SHA-256",
        "history_collars": "collars replaced or undone",
        "history_intervals": "intervals replaced or undone",
        "history_samples": "samples replaced or undone",
    }
    for table, desc in described.items():
        kind = "features" if table == "collars" else "attributes"
        con.execute("INSERT INTO gpkg_contents (table_name, data_type, identifier, "
                    "description, srs_id) VALUES (?,?,?,?,?)",
                    (table, kind, table, desc, srs_id if kind == "features" else None))
    con.execute("INSERT INTO gpkg_geometry_columns VALUES ('collars','geom','POINT',?,0,0)",
                (srs_id,))
    return srs_id


def _connect(path: Path) -> sqlite3.Connection:
    con = sqlite3.connect(path, isolation_level=None, timeout=60.0)
    con.execute("PRAGMA synchronous = FULL")
    return con


@contextmanager
def _write_transaction(con: sqlite3.Connection) -> Iterator[None]:
    """``BEGIN IMMEDIATE`` (the write lock at once, so two writers queue rather than fail
    half-way), ``COMMIT`` when the block ends, ``ROLLBACK`` on any exception. A block may
    end the transaction itself (``ROLLBACK`` and return: nothing to write)."""
    con.execute("BEGIN IMMEDIATE")
    try:
        yield
    except BaseException:
        if con.in_transaction:
            con.execute("ROLLBACK")
        raise
    if con.in_transaction:
        con.execute("COMMIT")


def _srs_id(con: sqlite3.Connection) -> int:
    return int(con.execute("SELECT srs_id FROM gpkg_geometry_columns WHERE table_name = "
                           "'collars'").fetchone()[0])


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def _clean(v: object) -> object:
    if isinstance(v, float) and math.isnan(v):
        return None
    if v is None or (not isinstance(v, str) and pd.isna(v)):
        return None
    return v.item() if hasattr(v, "item") else v


# --------------------------------------------------------------------------------------------
# Records of one borehole


@dataclass(frozen=True)
class _Hole:
    """One borehole's whole record as plain tuples, comparable between versions."""

    collar: tuple
    intervals: tuple
    samples: tuple
    source: str = ""
    line: int = 0
    batch_id: int = 0

    def same_data(self, other: _Hole) -> bool:
        return (_eq(self.collar, other.collar) and len(self.intervals) == len(other.intervals)
                and all(_eq(a, b) for a, b in zip(self.intervals, other.intervals, strict=True))
                and len(self.samples) == len(other.samples)
                and all(_eq(a, b) for a, b in zip(self.samples, other.samples, strict=True)))


def _eq(a: tuple, b: tuple) -> bool:
    def norm(v: object) -> object:
        return None if v is None or (isinstance(v, float) and math.isnan(v)) else v
    return all(norm(x) == norm(y) for x, y in zip(a, b, strict=True))


def _fmt(v: object) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return "blank"
    return f"{v:g}" if isinstance(v, float) else str(v)


def _log_text(ivs: tuple) -> str:
    return "; ".join(f"{_fmt(t)}–{_fmt(b)} {u}" + (f" ({m})" if m else "")
                     for t, b, u, m in ivs) or "no intervals"


def _difference(old: _Hole, new: _Hole) -> str:
    """Plain text of what differs, with both versions."""
    parts = []
    for name, a, b in zip(_COLLAR_COLS[1:], old.collar, new.collar, strict=True):
        if not _eq((a,), (b,)):
            parts.append(f"{name} stored {_fmt(a)}, new {_fmt(b)}")
    if not (len(old.intervals) == len(new.intervals) and all(
            _eq(a, b) for a, b in zip(old.intervals, new.intervals, strict=True))):
        parts.append(f"log stored [{_log_text(old.intervals)}], new "
                     f"[{_log_text(new.intervals)}]")
    if not (len(old.samples) == len(new.samples) and all(
            _eq(a, b) for a, b in zip(old.samples, new.samples, strict=True))):
        def st(s: tuple) -> str:
            return "; ".join(" ".join(_fmt(v) for v in r) for r in s) or "none"
        parts.append(f"samples (depth_m {' '.join(SAMPLE_VALUES)}) stored [{st(old.samples)}]"
                     f", new [{st(new.samples)}]")
    return "; ".join(parts)


def _holes_from_boreholes(b: Boreholes) -> dict[str, _Hole]:
    ivs: dict[str, list] = {}
    for r in b.intervals.itertuples(index=False):
        ivs.setdefault(r.borehole_id, []).append(
            (float(r.from_m), float(r.to_m), str(r.unit),
             None if r.material is None or (isinstance(r.material, float)) else str(r.material)))
    sm: dict[str, list] = {}
    for r in b.samples.to_dict("records"):
        sm.setdefault(r["borehole_id"], []).append(
            (float(r["depth_m"]), *(float(r[k]) for k in SAMPLE_VALUES)))
    out = {}
    for bid, c in b.collars.iterrows():
        out[str(bid)] = _Hole(
            (float(c["x"]), float(c["y"]), float(c["ground_elev_m"]),
             float(c["total_depth_m"])),
            tuple(sorted(ivs.get(bid, []), key=lambda t: (t[0], t[1]))),
            tuple(sorted(sm.get(bid, []), key=_sample_key)),
            str(c["source"]), int(c["line"]))
    return out


def _sample_key(t: tuple) -> tuple:
    return tuple(-math.inf if v is None or (isinstance(v, float) and math.isnan(v)) else v
                 for v in t)


def _stored_holes(con: sqlite3.Connection, ids: Iterable[str]) -> dict[str, _Hole]:
    ids = list(ids)
    out: dict[str, _Hole] = {}
    for chunk in range(0, len(ids), 500):
        part = ids[chunk:chunk + 500]
        q = ",".join("?" * len(part))
        collars = con.execute(f"SELECT borehole_id, x, y, ground_elev_m, total_depth_m, "
                              f"batch_id, source, line FROM collars WHERE borehole_id IN ({q})",
                              part).fetchall()
        ivs: dict[str, list] = {}
        for bid, t, b, u, m in con.execute(
                f"SELECT borehole_id, from_m, to_m, unit, material FROM intervals "
                f"WHERE borehole_id IN ({q})", part):
            ivs.setdefault(bid, []).append((t, b, u, m))
        sm: dict[str, list] = {}
        for row in con.execute(f"SELECT borehole_id, depth_m, {', '.join(SAMPLE_VALUES)} "
                               f"FROM samples WHERE borehole_id IN ({q})", part):
            sm.setdefault(row[0], []).append(
                tuple(math.nan if v is None else float(v) for v in row[1:]))
        for bid, x, y, z, td, batch, source, line in collars:
            out[bid] = _Hole((x, y, z, td),
                             tuple(sorted(ivs.get(bid, []), key=lambda t: (t[0], t[1]))),
                             tuple(sorted(sm.get(bid, []), key=_sample_key)),
                             source or "", line or 0, batch)
    return out


# --------------------------------------------------------------------------------------------
# Writing


def _insert_boreholes(con: sqlite3.Connection, b: Boreholes, ids: set[str], batch_id: int,
                      srs_id: int) -> tuple[int, int]:
    """Insert the collars, intervals and samples of ``ids``; returns (n_intervals,
    n_samples)."""
    rows = []
    for bid, c in b.collars.iterrows():
        if bid in ids:
            x, y = float(c["x"]), float(c["y"])
            rows.append((_point_blob(x, y, srs_id), bid, x, y, float(c["ground_elev_m"]),
                         float(c["total_depth_m"]), batch_id, str(c["source"]),
                         int(c["line"])))
    con.executemany("INSERT INTO collars (geom, borehole_id, x, y, ground_elev_m, "
                    "total_depth_m, batch_id, source, line) VALUES (?,?,?,?,?,?,?,?,?)", rows)
    iv = b.intervals[b.intervals["borehole_id"].isin(ids)]
    con.executemany(
        "INSERT INTO intervals (borehole_id, from_m, to_m, unit, material, batch_id, source, "
        "line) VALUES (?,?,?,?,?,?,?,?)",
        [(r.borehole_id, float(r.from_m), float(r.to_m), r.unit, _clean(r.material),
          batch_id, r.source, int(r.line)) for r in iv.itertuples(index=False)])
    sm = b.samples[b.samples["borehole_id"].isin(ids)]
    con.executemany(
        f"INSERT INTO samples (borehole_id, depth_m, {', '.join(SAMPLE_VALUES)}, batch_id, "
        "source, line) VALUES (?,?,?,?,?,?,?,?,?)",
        [(r["borehole_id"], float(r["depth_m"]), *(_clean(float(r[k])) for k in SAMPLE_VALUES),
          batch_id, r["source"], int(r["line"])) for r in sm.to_dict("records")])
    return len(iv), len(sm)


def _to_history(con: sqlite3.Connection, ids: Sequence[str], reason: str, by_batch: int,
                where: str = "borehole_id IN ({q})", params: Sequence = ()) -> None:
    """Move live records (selected by ``where``) into the history tables."""
    for table, cols in _TABLE_COLS.items():
        names = ", ".join((*cols, *_META))
        for chunk in range(0, max(len(ids), 1), 500):
            part = list(ids[chunk:chunk + 500])
            q = ",".join("?" * len(part))
            cond = where.format(q=q)
            args = [*part, *params]
            con.execute(f"INSERT INTO history_{table} ({names}, reason, by_batch) "
                        f"SELECT {names}, ?, ? FROM {table} WHERE {cond}",
                        [reason, by_batch, *args])
            con.execute(f"DELETE FROM {table} WHERE {cond}", args)
            if not ids:
                break


def _carry_samples(con: sqlite3.Connection, ids: Sequence[str], batch_id: int) -> int:
    """Copy the samples of replaced holes back into the live table under ``batch_id`` (their
    history rows stay, so undoing the batch restores the old record whole)."""
    names = ", ".join(_SAMPLE_COLS)
    n = 0
    for chunk in range(0, len(ids), 500):
        part = list(ids[chunk:chunk + 500])
        q = ",".join("?" * len(part))
        cur = con.execute(f"INSERT INTO samples ({names}, batch_id, source, line) SELECT "
                          f"{names}, ?, source, line FROM history_samples WHERE by_batch = ? "
                          f"AND reason = 'replaced' AND borehole_id IN ({q}) ORDER BY fid",
                          [batch_id, batch_id, *part])
        n += cur.rowcount
    return n


def _update_extent(con: sqlite3.Connection) -> None:
    con.execute("UPDATE gpkg_contents SET min_x = (SELECT min(x) FROM collars), "
                "min_y = (SELECT min(y) FROM collars), max_x = (SELECT max(x) FROM collars), "
                "max_y = (SELECT max(y) FROM collars), "
                "last_change = strftime('%Y-%m-%dT%H:%M:%fZ','now') "
                "WHERE table_name = 'collars'")


def _new_batch(con: sqlite3.Connection, note: str, sources: Sequence[SourceFile]) -> int:
    cur = con.execute("INSERT INTO batches (added_utc, note, files) VALUES (?,?,?)",
                      (_now(), note, ", ".join(s.path.name for s in sources)))
    batch_id = int(cur.lastrowid)
    con.executemany("INSERT INTO batch_files (batch_id, file, sha256, tables) VALUES (?,?,?,?)",
                    [(batch_id, s.path.name, s.sha256, ",".join(s.tables)) for s in sources])
    return batch_id


def _project_sources(project: Project) -> list[SourceFile]:
    out = []
    for key in ("collars", "intervals", "samples"):
        p = project.file(key)
        if p is not None:
            out.append(SourceFile(p, file_sha256(p), (key,)))
    return out


def create_store(project: Project) -> Batch:
    """Create the project's store and import its CSV files as batch 1.

    The CSVs are validated first (:func:`aquitardmap.inputs.logs.read_boreholes`); the store is
    built in a temporary file and renamed into place, so it appears whole or not at all.

    Raises:
        InputError: the CSVs have problems (no store is created).
        FileExistsError: the store already exists.
    """
    path = store_path(project)
    if path.exists():
        raise FileExistsError(path)
    boreholes = read_boreholes(project)
    sources = _project_sources(project)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.partial-", dir=path.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        con = _connect(tmp)
        try:
            con.execute("PRAGMA journal_mode = DELETE")
            con.execute("BEGIN")
            srs_id = _create_schema(con, project)
            batch_id = _new_batch(con, "initial import of the project's CSV files", sources)
            ids = set(boreholes.collars.index)
            n_iv, n_s = _insert_boreholes(con, boreholes, ids, batch_id, srs_id)
            con.execute("UPDATE batches SET n_added=?, n_replaced=0, n_unchanged=0, "
                        "n_intervals=?, n_samples=? WHERE fid=?", (len(ids), n_iv, n_s, batch_id))
            _update_extent(con)
            con.execute("COMMIT")
        finally:
            con.close()
        with open(tmp, "rb") as f:
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return history(project)[0]


def _live_file_batches(con: sqlite3.Connection, sha: str) -> list[int]:
    return [int(r[0]) for r in con.execute(
        "SELECT f.batch_id FROM batch_files f JOIN batches b ON b.fid = f.batch_id "
        "WHERE f.sha256 = ? AND b.undone_utc IS NULL ORDER BY f.batch_id", (sha,))]


def _read_batch(project: Project, paths: Sequence[str | Path]
                ) -> tuple[LogTables, ProblemList]:
    """Read the files of a batch; a batch without collars or intervals is a problem."""
    tables, problems = read_log_files(paths, project.crs)
    for kind in ("collars", "intervals"):
        if kind not in tables.tables and not problems:
            problems.add(", ".join(Path(p).name for p in paths), 0, 0,
                         f"the batch has no {kind} table: a batch carries whole boreholes "
                         "(collars and intervals, samples optional)")
    return tables, problems


def _validate_batch(project: Project, tables: LogTables, problems: ProblemList,
                    stored_ids: frozenset[str]) -> Boreholes:
    t = tables.tables
    return validate_logs(project, t.get("collars"), t.get("intervals"), t.get("samples"),
                         problems=problems, stored_ids=stored_ids)


def add_files(project: Project, paths: Sequence[str | Path], *, note: str = "",
              replace: bool = False) -> AddResult:
    """Validate the logs in ``paths`` and commit them to the store as one batch, or nothing.

    On first use the store is created from the project's CSV files (batch 1). The new
    tables are checked like the project's CSVs (every problem with file, line and column),
    then each borehole is compared with the stored one of the same id: new holes are added,
    identical ones counted as unchanged, different ones are conflicts (reported with both
    versions) unless ``replace``, which moves the stored version to history.

    Re-adding files that are all already in live batches, or files whose every borehole is
    stored identically, commits nothing and says so.

    Raises:
        InputError: any problem in the files or any conflict; the store is untouched.
    """
    initial = None
    if not has_store(project):
        # Check the new files before creating the store, so that bad files leave the
        # project as it was (no store).
        tables, problems = _read_batch(project, paths)
        _validate_batch(project, tables, problems, frozenset(read_boreholes(project).collars.index))
        initial = create_store(project)
    path = store_path(project)
    tables, problems = _read_batch(project, paths)
    con = _connect(path)
    try:
        already = {s.path.name: _live_file_batches(con, s.sha256) for s in tables.sources}
        if tables.sources and not problems and all(already.values()):
            where = "; ".join(f"{name} in batch {', '.join(map(str, b))}"
                              for name, b in already.items())
            return AddResult(None, (), (), (), f"nothing to add: these files were added "
                             f"before ({where})", initial)
        stored_ids = frozenset(r[0] for r in con.execute("SELECT borehole_id FROM collars"))
        new = _validate_batch(project, tables, problems, stored_ids)
        t = tables.tables
        holes = _holes_from_boreholes(new)

        with _write_transaction(con):
            stored = _stored_holes(con, [b for b in holes if b in stored_ids])
            conflicts = ProblemList()
            added, replaced, unchanged = [], [], []
            keep_samples = "samples" not in t
            for bid, h in holes.items():
                old = stored.get(bid)
                if old is not None and keep_samples:
                    # A batch without a samples table says nothing about samples: the
                    # stored ones stay with the hole.
                    h = _Hole(h.collar, h.intervals, old.samples, h.source, h.line)
                if old is None:
                    added.append(bid)
                elif old.same_data(h):
                    unchanged.append(bid)
                elif replace:
                    replaced.append(bid)
                else:
                    conflicts.add(h.source, h.line, 1,
                                  f"borehole {bid!r} is already stored with different data "
                                  f"(batch {old.batch_id}, {old.source} line {old.line}): "
                                  f"{_difference(old, h)}. Use --replace to make the new "
                                  "version win (the stored one is kept in history)")
            conflicts.raise_if_any()
            if not added and not replaced:
                con.execute("ROLLBACK")
                return AddResult(None, (), (), tuple(unchanged),
                                 f"nothing to add: all {len(unchanged)} boreholes in these "
                                 "files are already stored with the same data", initial,
                                 new.warnings)
            batch_id = _new_batch(con, note, tables.sources)
            if replaced:
                _to_history(con, replaced, "replaced", batch_id)
            n_iv, n_s = _insert_boreholes(con, new, set(added) | set(replaced), batch_id,
                                          _srs_id(con))
            if replaced and keep_samples:
                n_s += _carry_samples(con, replaced, batch_id)
            con.execute("UPDATE batches SET n_added=?, n_replaced=?, n_unchanged=?, "
                        "n_intervals=?, n_samples=? WHERE fid=?",
                        (len(added), len(replaced), len(unchanged), n_iv, n_s, batch_id))
            _update_extent(con)
    finally:
        con.close()
    batch = next(b for b in history(project) if b.batch_id == batch_id)
    msg = (f"batch {batch_id}: {len(added)} borehole(s) added, {len(replaced)} replaced, "
           f"{len(unchanged)} already stored unchanged")
    return AddResult(batch, tuple(added), tuple(replaced), tuple(unchanged), msg, initial,
                     new.warnings)


def history(project: Project) -> list[Batch]:
    """Every batch of the store, oldest first (undone ones included, marked)."""
    path = store_path(project)
    if not path.is_file():
        return []
    con = _connect(path)
    try:
        files: dict[int, list] = {}
        for bid, name, sha in con.execute("SELECT batch_id, file, sha256 FROM batch_files "
                                          "ORDER BY fid"):
            files.setdefault(int(bid), []).append((name, sha))
        return [Batch(int(r[0]), r[1], r[2] or "", tuple(files.get(int(r[0]), ())),
                      *(int(v or 0) for v in r[3:8]), r[8])
                for r in con.execute("SELECT fid, added_utc, note, n_added, n_replaced, "
                                     "n_unchanged, n_intervals, n_samples, undone_utc "
                                     "FROM batches ORDER BY fid")]
    finally:
        con.close()


def undo_batch(project: Project, batch_id: int) -> str:
    """Remove batch ``batch_id``'s boreholes and restore the versions it replaced.

    Refused (InputError) when the batch does not exist, is already undone, or a later live
    batch replaced some of its boreholes (undo that one first). One transaction.

    Returns a plain sentence of what was done.
    """
    path = store_path(project)
    if not path.is_file():
        raise InputError([Problem(path.name, 0, 0, "the project has no store yet")])
    con = _connect(path)
    try:
        with _write_transaction(con):
            row = con.execute("SELECT undone_utc FROM batches WHERE fid = ?",
                              (batch_id,)).fetchone()
            if row is None:
                raise InputError([Problem(path.name, 0, 0, f"there is no batch {batch_id}")])
            if row[0] is not None:
                raise InputError([Problem(path.name, 0, 0, f"batch {batch_id} was already "
                                          f"undone on {row[0]}")])
            later = con.execute(
                "SELECT DISTINCT h.by_batch, h.borehole_id FROM history_collars h JOIN batches "
                "b ON b.fid = h.by_batch WHERE h.batch_id = ? AND h.reason = 'replaced' AND "
                "b.undone_utc IS NULL ORDER BY h.by_batch", (batch_id,)).fetchall()
            if later:
                by = sorted({r[0] for r in later})
                raise InputError([Problem(path.name, 0, 0, f"batch {batch_id} cannot be undone "
                                          f"while batch {', '.join(map(str, by))} replaced "
                                          f"some of its boreholes "
                                          f"({', '.join(r[1] for r in later[:5])}); undo "
                                          "the later batch first")])
            ids = [r[0] for r in con.execute("SELECT borehole_id FROM collars WHERE batch_id=?",
                                             (batch_id,))]
            _to_history(con, ids, "undone", batch_id)
            restore = [r[0] for r in con.execute(
                "SELECT borehole_id FROM history_collars WHERE by_batch = ? AND reason = "
                "'replaced'", (batch_id,))]
            srs_id = _srs_id(con)
            for table, cols in _TABLE_COLS.items():
                names = ", ".join((*cols, *_META))
                con.execute(f"INSERT INTO {table} ({names}) SELECT {names} FROM "
                            f"history_{table} WHERE by_batch = ? AND reason = 'replaced' "
                            "ORDER BY fid", (batch_id,))
                con.execute(f"DELETE FROM history_{table} WHERE by_batch = ? AND reason = "
                            "'replaced'", (batch_id,))
            for bid, x, y in con.execute("SELECT borehole_id, x, y FROM collars WHERE geom IS "
                                         "NULL").fetchall():
                con.execute("UPDATE collars SET geom = ? WHERE borehole_id = ?",
                            (_point_blob(x, y, srs_id), bid))
            con.execute("UPDATE batches SET undone_utc = ? WHERE fid = ?", (_now(), batch_id))
            _update_extent(con)
    finally:
        con.close()
    return (f"batch {batch_id} undone: {len(ids)} borehole(s) removed, {len(restore)} "
            "earlier version(s) restored")


def read_store(project: Project) -> Boreholes:
    """The live boreholes of the store as :class:`~aquitardmap.inputs.logs.Boreholes`.

    Per-hole warnings (gaps, short logs, samples in no interval) cite the file and line each
    record was read from when it was added.
    """
    path = store_path(project)
    con = _connect(path)
    try:
        con.execute("BEGIN")  # one consistent snapshot of the three tables
        collars = pd.read_sql_query(
            "SELECT borehole_id, x, y, ground_elev_m, total_depth_m, line, source "
            "FROM collars ORDER BY fid", con).set_index("borehole_id")
        intervals = pd.read_sql_query(
            "SELECT borehole_id, from_m, to_m, unit, line, material, source FROM intervals "
            "ORDER BY borehole_id, from_m", con)
        samples = pd.read_sql_query(
            f"SELECT borehole_id, depth_m, {', '.join(SAMPLE_VALUES)}, line, source "
            "FROM samples ORDER BY fid", con)
        con.execute("COMMIT")
    finally:
        con.close()
    for col in SAMPLE_VALUES:
        samples[col] = samples[col].astype(float)
    b = boreholes_from_frames(project, collars, intervals, samples,
                              collars_name=path.name, intervals_name=path.name)
    return b


def project_boreholes(project: Project) -> Boreholes:
    """The project's boreholes: from its store when there is one, else from its CSV files.

    With a store, a note is added when the project's CSV files differ from what the store
    imported from them (the store is what counts; ``aquitardmap add`` brings changes in).
    """
    if not has_store(project):
        return read_boreholes(project)
    try:
        b = read_store(project)
        notes = list(b.warnings)
        known = set()
        con = _connect(store_path(project))
        try:
            known = {r[0] for r in con.execute(
                "SELECT f.sha256 FROM batch_files f JOIN batches b ON b.fid = f.batch_id "
                "WHERE b.undone_utc IS NULL")}
        finally:
            con.close()
    except (sqlite3.Error, pd.errors.DatabaseError) as exc:
        # not a GeoPackage at all, or one without the store's tables
        raise InputError([Problem(store_path(project).name, 0, 0, "cannot be read as the "
                                  f"project's borehole store ({exc}); move it away to read "
                                  "the CSV files, or restore it from a backup")]) from None
    for src in _project_sources(project):
        if src.sha256 not in known:
            notes.append(Problem(src.path.name, 0, 0, f"{src.path.name} differs from every "
                                 f"file in the store; boreholes are read from "
                                 f"{store_path(project).name} (bring changes in with "
                                 "`aquitardmap add`)"))
    notes.insert(0, Problem(store_path(project).name, 0, 0,
                            f"boreholes read from the project store ({len(b.collars)} "
                            "boreholes); the project's CSV files are not read"))
    return Boreholes(b.collars, b.intervals, b.samples, tuple(notes))


__all__ = ["AddResult", "Batch", "STORE_FILE", "add_files", "create_store", "has_store",
           "history", "project_boreholes", "read_store", "store_path", "undo_batch"]
