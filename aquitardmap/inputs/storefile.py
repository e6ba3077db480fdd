"""The store's file: a GeoPackage (OGC 12-128r, version 1.2) holding the store's tables.

The schema (the GeoPackage's own tables, the live ``collars``, ``intervals`` and ``samples``,
``batches``, ``batch_files`` and the ``history_*`` tables; see :mod:`aquitardmap.inputs.store`
for what each holds), the connection and its write transactions, and the row operations
the batches are made of: inserting a batch's boreholes, moving records to history and back.
Every function here works inside a transaction its caller opened.
"""

from __future__ import annotations

import math
import sqlite3
import struct
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from datetime import UTC, datetime
from pathlib import Path

import pandas as pd

from aquitardmap.config.project import Project
from aquitardmap.inputs.logfiles import SourceFile
from aquitardmap.inputs.logs import (
    COLLAR_COLUMNS,
    INTERVAL_COLUMNS,
    SAMPLE_REQUIRED,
    SAMPLE_VALUES,
    Boreholes,
)

_GPKG_APPLICATION_ID = 0x47504B47  # "GPKG" (GeoPackage 1.2, clause 1.1.1.1.1)
_GPKG_USER_VERSION = 10200
_CUSTOM_SRS_ID = 100000

#: The data columns of each live table (each also holds ``fid`` and the ``_META`` columns;
#: ``collars`` its point ``geom``).
STORED_COLUMNS = {"collars": COLLAR_COLUMNS, "intervals": (*INTERVAL_COLUMNS, "material"),
                  "samples": (*SAMPLE_REQUIRED, *SAMPLE_VALUES)}
_META = ("batch_id", "source", "line")


def point_blob(x: float, y: float, srs_id: int) -> bytes:
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


def create_schema(con: sqlite3.Connection, project: Project) -> int:
    """Create every table of an empty store in the project CRS; returns its srs_id."""
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


def connect(path: Path) -> sqlite3.Connection:
    """Open the store at ``path`` (autocommit: transactions are explicit; every commit is
    synced to disk)."""
    con = sqlite3.connect(path, isolation_level=None, timeout=60.0)
    con.execute("PRAGMA synchronous = FULL")
    return con


@contextmanager
def write_transaction(con: sqlite3.Connection) -> Iterator[None]:
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


def stored_srs_id(con: sqlite3.Connection) -> int:
    """The srs_id of the store's collars layer."""
    return int(con.execute("SELECT srs_id FROM gpkg_geometry_columns WHERE table_name = "
                           "'collars'").fetchone()[0])


def now_utc() -> str:
    """The time now, UTC, ISO 8601 to the second (as batches record it)."""
    return datetime.now(UTC).isoformat(timespec="seconds")


def _clean(v: object) -> object:
    """``v`` as SQLite takes it: NaN and missing values as NULL, numpy scalars as Python."""
    if isinstance(v, float) and math.isnan(v):
        return None
    if v is None or (not isinstance(v, str) and pd.isna(v)):
        return None
    return v.item() if hasattr(v, "item") else v


def insert_boreholes(con: sqlite3.Connection, b: Boreholes, ids: set[str], batch_id: int,
                      srs_id: int) -> tuple[int, int]:
    """Insert the collars, intervals and samples of ``ids``; returns (n_intervals,
    n_samples)."""
    rows = []
    for bid, c in b.collars.iterrows():
        if bid in ids:
            x, y = float(c["x"]), float(c["y"])
            rows.append((point_blob(x, y, srs_id), bid, x, y, float(c["ground_elev_m"]),
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


def move_to_history(con: sqlite3.Connection, ids: Sequence[str], reason: str, by_batch: int,
                where: str = "borehole_id IN ({q})", params: Sequence = ()) -> None:
    """Move live records (selected by ``where``) into the history tables."""
    for table, cols in STORED_COLUMNS.items():
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


def carry_samples(con: sqlite3.Connection, ids: Sequence[str], batch_id: int) -> int:
    """Copy the samples of replaced holes back into the live table under ``batch_id`` (their
    history rows stay, so undoing the batch restores the old record whole)."""
    names = ", ".join(STORED_COLUMNS["samples"])
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


def update_extent(con: sqlite3.Connection) -> None:
    """Set the collars layer's extent (and change time) in ``gpkg_contents``."""
    con.execute("UPDATE gpkg_contents SET min_x = (SELECT min(x) FROM collars), "
                "min_y = (SELECT min(y) FROM collars), max_x = (SELECT max(x) FROM collars), "
                "max_y = (SELECT max(y) FROM collars), "
                "last_change = strftime('%Y-%m-%dT%H:%M:%fZ','now') "
                "WHERE table_name = 'collars'")


def new_batch(con: sqlite3.Connection, note: str, sources: Sequence[SourceFile]) -> int:
    """Record a new batch of ``sources`` (with each file's SHA-256); returns its id."""
    cur = con.execute("INSERT INTO batches (added_utc, note, files) VALUES (?,?,?)",
                      (now_utc(), note, ", ".join(s.path.name for s in sources)))
    batch_id = int(cur.lastrowid)
    con.executemany("INSERT INTO batch_files (batch_id, file, sha256, tables) VALUES (?,?,?,?)",
                    [(batch_id, s.path.name, s.sha256, ",".join(s.tables)) for s in sources])
    return batch_id



def restore_replaced(con: sqlite3.Connection, batch_id: int) -> list[str]:
    """Move the records that batch ``batch_id`` replaced from history back into the live
    tables (with their point geometry); returns the ids of the restored holes."""
    restore = [r[0] for r in con.execute(
        "SELECT borehole_id FROM history_collars WHERE by_batch = ? AND reason = "
        "'replaced'", (batch_id,))]
    srs_id = stored_srs_id(con)
    for table, cols in STORED_COLUMNS.items():
        names = ", ".join((*cols, *_META))
        con.execute(f"INSERT INTO {table} ({names}) SELECT {names} FROM "
                    f"history_{table} WHERE by_batch = ? AND reason = 'replaced' "
                    "ORDER BY fid", (batch_id,))
        con.execute(f"DELETE FROM history_{table} WHERE by_batch = ? AND reason = "
                    "'replaced'", (batch_id,))
    for bid, x, y in con.execute("SELECT borehole_id, x, y FROM collars WHERE geom IS "
                                 "NULL").fetchall():
        con.execute("UPDATE collars SET geom = ? WHERE borehole_id = ?",
                    (point_blob(x, y, srs_id), bid))
    return restore
