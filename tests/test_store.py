"""The project store: batches of logs in a GeoPackage, conflicts, history and undo.

Outside references: the store is read back with GDAL (through pyogrio/geopandas), an
implementation of the GeoPackage standard independent of ours; the file header values come
from the OGC GeoPackage Encoding Standard 1.2 (OGC 12-128r15), clause 1.1.1.1.1
(application_id 0x47504B47 "GPKG", user_version 10200); ``PRAGMA integrity_check`` is
SQLite's own consistency check.
"""

from __future__ import annotations

import os
import shutil
import sqlite3
import subprocess
import sys

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest

from aquitardmap.config.project import read_project
from aquitardmap.errors import InputError
from aquitardmap.inputs.logs import read_boreholes
from aquitardmap.inputs.store import (
    add_files,
    history,
    project_boreholes,
    read_store,
    store_path,
    undo_batch,
)

from conftest import DEMO

NEW_COLLARS = """borehole_id,x,y,ground_elev_m,total_depth_m
NW-01,551000.0,6716000.0,55.0,30.0
NW-02,552000.5,6716500.25,58.5,12.0
"""
NEW_INTERVALS = """borehole_id,from_m,to_m,unit
NW-01,0,3,SAND
NW-01,3,20,UMC
NW-01,20,30,GRAV
NW-02,0,2.5,SAND
NW-02,2.5,12,UMC
"""
NEW_SAMPLES = """borehole_id,depth_m,d10_mm,d60_mm,porosity,k_lab_m_s
NW-01,5.0,0.001,0.02,0.5,3e-10
"""


def _cli(*args, cwd=None):
    env = {**os.environ, "COLUMNS": "250"}  # keep rich from wrapping the messages
    return subprocess.run([sys.executable, "-m", "aquitardmap", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, timeout=300, env=env)


@pytest.fixture()
def project(tmp_path):
    dst = tmp_path / "proj"
    shutil.copytree(DEMO, dst, ignore=shutil.ignore_patterns("truth", "*.py"))
    return dst


@pytest.fixture()
def new_files(tmp_path):
    d = tmp_path / "incoming"
    d.mkdir()
    (d / "collars_new.csv").write_text(NEW_COLLARS)
    (d / "intervals_new.csv").write_text(NEW_INTERVALS)
    (d / "samples_new.csv").write_text(NEW_SAMPLES)
    return d


def _files(d, *names):
    return [d / n for n in names]


def _content(path) -> dict:
    """Every live and history table of the store, for before/after comparisons."""
    con = sqlite3.connect(path)
    try:
        return {t: con.execute(f"SELECT * FROM {t} ORDER BY fid").fetchall()
                for t in ("collars", "intervals", "samples", "batches", "batch_files",
                          "history_collars", "history_intervals", "history_samples")}
    finally:
        con.close()


def test_first_add_imports_the_csvs_as_batch_one_and_adds_the_new_holes(project, new_files):
    proj = read_project(project)
    from_csv = read_boreholes(proj)
    r = add_files(proj, _files(new_files, "collars_new.csv", "intervals_new.csv",
                               "samples_new.csv"), note="autumn drilling")
    assert r.initial is not None and r.initial.batch_id == 1
    assert r.initial.n_added == len(from_csv.collars) == 400
    assert r.batch.batch_id == 2 and sorted(r.added) == ["NW-01", "NW-02"]
    assert r.batch.note == "autumn drilling" and r.batch.n_intervals == 5
    assert [name for name, _ in r.batch.files] == ["collars_new.csv", "intervals_new.csv",
                                                  "samples_new.csv"]
    stored = read_store(proj)
    # the imported CSV content is kept to the last digit
    old = stored.collars.loc[from_csv.collars.index]
    pd.testing.assert_frame_equal(old[["x", "y", "ground_elev_m", "total_depth_m"]],
                                  from_csv.collars[["x", "y", "ground_elev_m", "total_depth_m"]])
    assert len(stored.intervals) == len(from_csv.intervals) + 5
    assert len(stored.samples) == len(from_csv.samples) + 1
    assert stored.collars.loc["NW-02", "y"] == 6716500.25
    # the pipeline's reader now takes the store
    b = project_boreholes(proj)
    assert "NW-01" in b.collars.index and "project store" in str(b.warnings[0])


def test_store_is_a_geopackage_gdal_reads(project, new_files):
    proj = read_project(project)
    add_files(proj, _files(new_files, "collars_new.csv", "intervals_new.csv"))
    path = store_path(proj)
    con = sqlite3.connect(path)
    # OGC 12-128r15 clause 1.1.1.1.1: application id "GPKG", user_version 1.2
    assert con.execute("PRAGMA application_id").fetchone()[0] == 0x47504B47
    assert con.execute("PRAGMA user_version").fetchone()[0] == 10200
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()
    layers = dict(pyogrio.list_layers(path))
    assert layers["collars"] == "Point"
    assert {"intervals", "samples", "batches", "history_collars"} <= set(layers)
    g = gpd.read_file(path, layer="collars")
    assert g.crs.to_epsg() == 32632 and len(g) == 402
    row = g.set_index("borehole_id").loc["NW-02"]
    assert row.geometry.x == 552000.5 and row.geometry.y == 6716500.25
    iv = gpd.read_file(path, layer="intervals")
    assert set(iv.loc[iv["borehole_id"] == "NW-01", "unit"]) == {"SAND", "UMC", "GRAV"}


def test_re_adding_the_same_file_is_a_no_op_that_says_so(project, new_files):
    proj = read_project(project)
    files = _files(new_files, "collars_new.csv", "intervals_new.csv")
    add_files(proj, files)
    before = _content(store_path(proj))
    r = add_files(proj, files)
    assert r.batch is None and "added before" in r.message and "batch 2" in r.message
    assert _content(store_path(proj)) == before
    # the same data under other file names: nothing new either
    (new_files / "collars_copy.csv").write_text(NEW_COLLARS.replace("\n", "\r\n"))
    r = add_files(proj, [new_files / "collars_copy.csv", new_files / "intervals_new.csv"])
    assert r.batch is None and r.unchanged == ("NW-01", "NW-02")
    assert "already stored with the same data" in r.message
    assert _content(store_path(proj)) == before
    r = _cli("add", project, *files)
    assert r.returncode == 0 and "added before" in r.stderr


def test_conflict_reports_both_versions_and_leaves_the_store_untouched(project, new_files):
    proj = read_project(project)
    add_files(proj, _files(new_files, "collars_new.csv", "intervals_new.csv"))
    before = store_path(proj).read_bytes()
    (new_files / "collars_v2.csv").write_text(NEW_COLLARS.replace("58.5,12.0", "59.0,12.0"))
    with pytest.raises(InputError) as err:
        add_files(proj, [new_files / "collars_v2.csv", new_files / "intervals_new.csv"])
    (p,) = err.value.problems
    assert (p.file, p.line, p.column) == ("collars_v2.csv", 3, 1)
    assert "'NW-02' is already stored with different data" in p.message
    assert "ground_elev_m stored 58.5, new 59" in p.message and "--replace" in p.message
    assert store_path(proj).read_bytes() == before
    r = _cli("add", project, new_files / "collars_v2.csv", new_files / "intervals_new.csv")
    assert r.returncode == 2 and "collars_v2.csv, line 3, column 1" in r.stderr
    assert store_path(proj).read_bytes() == before


def test_replace_keeps_the_old_version_in_history_and_undo_restores_it(project, new_files):
    proj = read_project(project)
    add_files(proj, _files(new_files, "collars_new.csv", "intervals_new.csv",
                           "samples_new.csv"))
    (new_files / "intervals_v2.csv").write_text(NEW_INTERVALS.replace("NW-01,3,20,UMC",
                                                                      "NW-01,3,20,LMC"))
    r = add_files(proj, [new_files / "collars_new.csv", new_files / "intervals_v2.csv"],
                  replace=True, note="relogged")
    assert r.batch.batch_id == 3 and r.replaced == ("NW-01",) and r.unchanged == ("NW-02",)
    s = read_store(proj)
    assert list(s.intervals.loc[s.intervals["borehole_id"] == "NW-01", "unit"]) == [
        "SAND", "LMC", "GRAV"]
    # no samples table in batch 3: the stored sample stays with the hole
    assert list(s.samples.loc[s.samples["borehole_id"] == "NW-01", "depth_m"]) == [5.0]
    con = sqlite3.connect(store_path(proj))
    hist = con.execute("SELECT borehole_id, batch_id, reason, by_batch FROM history_collars"
                       ).fetchall()
    con.close()
    assert hist == [("NW-01", 2, "replaced", 3)]
    # batch 2 cannot be undone while batch 3 replaced one of its holes
    with pytest.raises(InputError, match="undo the later batch first"):
        undo_batch(proj, 2)
    assert "1 earlier version(s) restored" in undo_batch(proj, 3)
    s = read_store(proj)
    assert list(s.intervals.loc[s.intervals["borehole_id"] == "NW-01", "unit"]) == [
        "SAND", "UMC", "GRAV"]
    assert len(s.samples[s.samples["borehole_id"] == "NW-01"]) == 1
    assert "2 borehole(s) removed" in undo_batch(proj, 2)
    s = read_store(proj)
    assert "NW-01" not in s.collars.index and len(s.collars) == 400
    assert [b.live for b in history(proj)] == [True, False, False]
    # an undone file can be added again
    r = add_files(proj, _files(new_files, "collars_new.csv", "intervals_new.csv"))
    assert r.batch.batch_id == 4 and len(r.added) == 2


def test_history_and_undo_commands(project, new_files):
    r = _cli("add", project, *_files(new_files, "collars_new.csv", "intervals_new.csv"),
             "--note", "from the county archive")
    assert r.returncode == 0, r.stderr
    assert "Created boreholes_store.gpkg" in r.stderr and "Batch 2: 2 borehole(s) added" \
        in r.stderr
    r = _cli("history", project)
    assert r.returncode == 0 and "from the county archive" in r.stderr
    r = _cli("undo", project, 2)
    assert r.returncode == 0 and "Batch 2 undone" in r.stderr
    r = _cli("undo", project, 7)
    assert r.returncode == 2 and "there is no batch 7" in r.stderr


def _workbook(path, tables: dict[str, str]) -> None:
    import openpyxl

    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, text in tables.items():
        ws = wb.create_sheet(name)
        for i, line in enumerate(text.strip().splitlines()):
            cells = line.split(",")
            ws.append([c if i == 0 or j in (0, 3) and name == "intervals" or j == 0
                       else float(c) for j, c in enumerate(cells)])
    wb.save(path)


def test_workbook_and_geopackage_give_the_same_batch_as_csv(project, new_files, tmp_path):
    proj = read_project(project)
    add_files(proj, _files(new_files, "collars_new.csv", "intervals_new.csv",
                           "samples_new.csv"))
    via_csv = read_store(proj)
    undo_batch(proj, 2)

    book = tmp_path / "logs.xlsx"
    _workbook(book, {"Collars": NEW_COLLARS, "intervals": NEW_INTERVALS,
                     "samples": NEW_SAMPLES})
    r = add_files(proj, [book])
    assert sorted(r.added) == ["NW-01", "NW-02"]
    via_xlsx = read_store(proj)
    undo_batch(proj, 3)

    gpkg = tmp_path / "logs.gpkg"
    c = pd.read_csv(new_files / "collars_new.csv")
    gpd.GeoDataFrame(c.drop(columns=["x", "y"]), geometry=gpd.points_from_xy(c.x, c.y),
                     crs="EPSG:32632").to_file(gpkg, layer="collars")
    pyogrio.write_dataframe(pd.read_csv(new_files / "intervals_new.csv"), gpkg,
                            layer="intervals")
    pyogrio.write_dataframe(pd.read_csv(new_files / "samples_new.csv"), gpkg, layer="samples")
    r = add_files(proj, [gpkg])
    assert sorted(r.added) == ["NW-01", "NW-02"]
    via_gpkg = read_store(proj)
    cols = ["x", "y", "ground_elev_m", "total_depth_m"]
    for other in (via_xlsx, via_gpkg):
        pd.testing.assert_frame_equal(other.collars[cols].sort_index(),
                                      via_csv.collars[cols].sort_index())
        key = ["borehole_id", "from_m", "to_m", "unit"]
        pd.testing.assert_frame_equal(
            other.intervals[key].sort_values(key[:2]).reset_index(drop=True),
            via_csv.intervals[key].sort_values(key[:2]).reset_index(drop=True))
        assert np.allclose(other.samples["k_lab_m_s"].fillna(-1),
                           via_csv.samples["k_lab_m_s"].fillna(-1), rtol=0, atol=0)
    # problems in a workbook cite the sheet, its row and column
    bad = tmp_path / "bad.xlsx"
    _workbook(bad, {"collars": NEW_COLLARS.replace("NW-02", "NW-09"),
                    "intervals": NEW_INTERVALS.replace("NW-02", "NW-09")})
    import openpyxl
    wb = openpyxl.load_workbook(bad)
    wb["intervals"]["C3"] = "deep"
    wb.save(bad)
    with pytest.raises(InputError) as err:
        add_files(proj, [bad])
    assert [(p.file, p.line, p.column) for p in err.value.problems] == [("bad.xlsx[intervals]",
                                                                         3, 3)]


def test_run_reads_the_store_once_it_exists(project, new_files):
    import aquitardmap

    proj = read_project(project)
    add_files(proj, _files(new_files, "collars_new.csv", "intervals_new.csv"))
    inputs = aquitardmap.load_inputs(project)
    assert {"NW-01", "NW-02"} <= set(inputs.columns.index)
    assert inputs.columns.loc["NW-01", "aquitard_thickness_m"] == 17.0
    assert inputs.columns.loc["NW-02", "status_aquitard"] == "lower_bound"
    # the project's CSVs are then no longer read: a broken CSV does not matter, and a
    # changed one is noted
    (project / "collars.csv").write_text("garbage\n")
    inputs = aquitardmap.load_inputs(project)
    assert any("collars.csv differs from every file in the store" in str(w)
               for w in inputs.warnings)
