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
from it instead of the project's CSV files. The file's schema and the row operations the
batches are made of are :mod:`aquitardmap.inputs.storefile`.
"""

from __future__ import annotations

import math
import sqlite3
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from aquitardmap.config.project import Project
from aquitardmap.config.settings import DEFAULT_FILES
from aquitardmap.errors import InputError, Problem, ProblemList
from aquitardmap.files import file_sha256, replace_atomically
from aquitardmap.inputs.logfiles import LogTables, SourceFile, read_log_files
from aquitardmap.inputs.logs import (
    COLLAR_COLUMNS,
    SAMPLE_VALUES,
    Boreholes,
    boreholes_from_frames,
    read_boreholes,
    validate_logs,
)
from aquitardmap.inputs.storefile import (
    carry_samples,
    connect,
    create_schema,
    insert_boreholes,
    move_to_history,
    new_batch,
    now_utc,
    restore_replaced,
    stored_srs_id,
    update_extent,
    write_transaction,
)

STORE_FILE = DEFAULT_FILES["store"]


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
# The store of a project


def store_path(project: Project) -> Path:
    """Path of the project's store (it may not exist yet)."""
    return project.files.get("store", project.root / STORE_FILE)


def has_store(project: Project) -> bool:
    """True when the project's store file exists."""
    return store_path(project).is_file()


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
        return (_eq(self.collar, other.collar) and _same_rows(self.intervals, other.intervals)
                and _same_rows(self.samples, other.samples))


def _eq(a: tuple, b: tuple) -> bool:
    def norm(v: object) -> object:
        return None if v is None or (isinstance(v, float) and math.isnan(v)) else v
    return all(norm(x) == norm(y) for x, y in zip(a, b, strict=True))


def _same_rows(a: tuple, b: tuple) -> bool:
    """Two versions of a hole's intervals (or samples) hold the same rows (blank = NaN)."""
    return len(a) == len(b) and all(_eq(x, y) for x, y in zip(a, b, strict=True))


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
    for name, a, b in zip(COLLAR_COLUMNS[1:], old.collar, new.collar, strict=True):
        if not _eq((a,), (b,)):
            parts.append(f"{name} stored {_fmt(a)}, new {_fmt(b)}")
    if not _same_rows(old.intervals, new.intervals):
        parts.append(f"log stored [{_log_text(old.intervals)}], new "
                     f"[{_log_text(new.intervals)}]")
    if not _same_rows(old.samples, new.samples):
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
# Batches


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

    def write(tmp: Path) -> None:
        con = connect(tmp)
        try:
            con.execute("PRAGMA journal_mode = DELETE")
            con.execute("BEGIN")
            srs_id = create_schema(con, project)
            batch_id = new_batch(con, "initial import of the project's CSV files", sources)
            ids = set(boreholes.collars.index)
            n_iv, n_s = insert_boreholes(con, boreholes, ids, batch_id, srs_id)
            con.execute("UPDATE batches SET n_added=?, n_replaced=0, n_unchanged=0, "
                        "n_intervals=?, n_samples=? WHERE fid=?", (len(ids), n_iv, n_s, batch_id))
            update_extent(con)
            con.execute("COMMIT")
        finally:
            con.close()

    replace_atomically(path, write, fsync=True)
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
    con = connect(path)
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

        with write_transaction(con):
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
            batch_id = new_batch(con, note, tables.sources)
            if replaced:
                move_to_history(con, replaced, "replaced", batch_id)
            n_iv, n_s = insert_boreholes(con, new, set(added) | set(replaced), batch_id,
                                          stored_srs_id(con))
            if replaced and keep_samples:
                n_s += carry_samples(con, replaced, batch_id)
            con.execute("UPDATE batches SET n_added=?, n_replaced=?, n_unchanged=?, "
                        "n_intervals=?, n_samples=? WHERE fid=?",
                        (len(added), len(replaced), len(unchanged), n_iv, n_s, batch_id))
            update_extent(con)
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
    con = connect(path)
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
    con = connect(path)
    try:
        with write_transaction(con):
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
            move_to_history(con, ids, "undone", batch_id)
            restore = restore_replaced(con, batch_id)
            con.execute("UPDATE batches SET undone_utc = ? WHERE fid = ?", (now_utc(), batch_id))
            update_extent(con)
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
    con = connect(path)
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
        con = connect(store_path(project))
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
