"""Reliability of the store: malformed files leave it untouched; a SIGKILL during ``add`` or
``run`` leaves the store as before or after (never between), the previous outputs readable,
and the next command working.

Outside references: SQLite's own ``PRAGMA integrity_check``; GDAL (pyogrio) re-reading the
GeoPackage after each kill; the atomic-commit guarantee being tested is SQLite's rollback
journal (https://www.sqlite.org/atomiccommit.html).
"""

from __future__ import annotations

import os
import random
import shutil
import signal
import sqlite3
import subprocess
import sys
import time

import pyogrio
import pytest

from aquitardmap.config.project import read_project
from aquitardmap.errors import InputError
from aquitardmap.inputs.store import add_files, store_path
from aquitardmap.outputs import names as outputs

from conftest import DEMO

GOOD_COLLARS = ("borehole_id,x,y,ground_elev_m,total_depth_m\n"
                "NW-01,551000.0,6716000.0,55.0,30.0\n"
                "NW-02,552000.0,6716500.0,58.0,30.0\n")
GOOD_INTERVALS = ("borehole_id,from_m,to_m,unit\n"
                  "NW-01,0,3,SAND\nNW-01,3,20,UMC\nNW-01,20,30,GRAV\n"
                  "NW-02,0,2,SAND\nNW-02,2,30,UMC\n")


def _env():
    return {**os.environ, "COLUMNS": "250"}


@pytest.fixture()
def project(tmp_path):
    """A demo copy whose store already exists (batch 1 = the CSVs)."""
    dst = tmp_path / "proj"
    shutil.copytree(DEMO, dst, ignore=shutil.ignore_patterns("truth", "*.py"))
    d = tmp_path / "first"
    d.mkdir()
    (d / "collars.csv").write_text(GOOD_COLLARS.replace("NW-", "F-"))
    (d / "intervals.csv").write_text(GOOD_INTERVALS.replace("NW-", "F-"))
    add_files(read_project(dst), [d / "collars.csv", d / "intervals.csv"])
    return dst


def _swap(text: str, old: str, new: str) -> str:
    assert old in text
    return text.replace(old, new, 1)


# (defect, collars text, intervals text, expected (file, line, column), message part)
MALFORMED = [
    ("bad encoding", GOOD_COLLARS.encode().replace(b"NW-02", b"NW-\xe902"), GOOD_INTERVALS,
     ("collars_new.csv", 3, 0), "not valid UTF-8"),
    ("missing column", GOOD_COLLARS, GOOD_INTERVALS.replace(",to_m", "").replace(",3,", ","),
     ("intervals_new.csv", 1, 0), "missing required column 'to_m'"),
    ("text in a numeric column", _swap(GOOD_COLLARS, "55.0", "fifty"), GOOD_INTERVALS,
     ("collars_new.csv", 2, 4), "must be a number, got text 'fifty'"),
    ("overlapping intervals", GOOD_COLLARS, _swap(GOOD_INTERVALS, "NW-01,3,20", "NW-01,2,20"),
     ("intervals_new.csv", 3, 2), "overlaps"),
    ("inverted interval", GOOD_COLLARS, _swap(GOOD_INTERVALS, "NW-02,2,30", "NW-02,30,2"),
     ("intervals_new.csv", 6, 3), "inverted interval"),
    ("depth beyond total depth", GOOD_COLLARS, _swap(GOOD_INTERVALS, "20,30,GRAV", "20,31,GRAV"),
     ("intervals_new.csv", 4, 3), "below the total depth"),
    ("unknown unit code", GOOD_COLLARS, _swap(GOOD_INTERVALS, "3,20,UMC", "3,20,umc"),
     ("intervals_new.csv", 3, 4), "did you mean 'UMC'"),
    ("degrees in a metre CRS", _swap(GOOD_COLLARS, "552000.0,6716500.0", "10.75,59.91"),
     GOOD_INTERVALS, ("collars_new.csv", 3, 2), "look like degrees"),
    ("duplicated id in one file", GOOD_COLLARS + "NW-01,551500.0,6716000.0,55.0,30.0\n",
     GOOD_INTERVALS, ("collars_new.csv", 4, 1), "already used on line 2"),
]


@pytest.mark.parametrize("defect,collars,intervals,where,message", MALFORMED,
                         ids=[m[0] for m in MALFORMED])
def test_malformed_file_is_reported_and_the_store_untouched(project, tmp_path, defect,
                                                           collars, intervals, where,
                                                           message):
    c, i = tmp_path / "collars_new.csv", tmp_path / "intervals_new.csv"
    c.write_bytes(collars if isinstance(collars, bytes) else collars.encode())
    i.write_text(intervals)
    before = store_path(read_project(project)).read_bytes()
    with pytest.raises(InputError) as err:
        add_files(read_project(project), [c, i])
    hits = [p for p in err.value.problems if (p.file, p.line, p.column) == where]
    assert hits and message in hits[0].message, [str(p) for p in err.value.problems]
    assert store_path(read_project(project)).read_bytes() == before


def test_every_problem_in_one_report_exit_2_and_no_store_created(tmp_path):
    proj = tmp_path / "proj"
    shutil.copytree(DEMO, proj, ignore=shutil.ignore_patterns("truth", "*.py"))
    c, i = tmp_path / "collars_new.csv", tmp_path / "intervals_new.csv"
    c.write_text(_swap(_swap(GOOD_COLLARS, "55.0", "fifty"), "552000.0,6716500.0",
                       "10.75,59.91"))
    i.write_text(_swap(_swap(GOOD_INTERVALS, "3,20,UMC", "3,20,CLAY"), "NW-02,2,30",
                       "NW-02,30,2"))
    r = subprocess.run([sys.executable, "-m", "aquitardmap", "add", str(proj), str(c), str(i)],
                       capture_output=True, text=True, timeout=300, env=_env())
    assert r.returncode == 2
    for where in ("collars_new.csv, line 2, column 4", "collars_new.csv, line 3, column 2",
                  "intervals_new.csv, line 3, column 4", "intervals_new.csv, line 6, column 3"):
        assert where in r.stderr, r.stderr
    assert "4 problem(s)" in r.stderr
    assert not store_path(read_project(proj)).exists()  # bad files: not even batch 1


def _state(path) -> tuple:
    """What a store holds, without timestamps: live ids, row counts, live batches."""
    con = sqlite3.connect(path)
    try:
        assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        return (tuple(r[0] for r in con.execute("SELECT borehole_id FROM collars ORDER BY 1")),
                con.execute("SELECT count(*) FROM intervals").fetchone()[0],
                con.execute("SELECT count(*) FROM samples").fetchone()[0],
                con.execute("SELECT count(*) FROM batches WHERE undone_utc IS NULL"
                            ).fetchone()[0])
    finally:
        con.close()


def _big_batch(folder, n: int) -> list:
    """n new holes spread over the demo valley (a batch big enough to take a while)."""
    rng = random.Random(5)
    c = ["borehole_id,x,y,ground_elev_m,total_depth_m"]
    iv = ["borehole_id,from_m,to_m,unit"]
    for k in range(n):
        bid = f"KB-{k:05d}"
        c.append(f"{bid},{548000 + rng.random() * 7000:.2f},"
                 f"{6713000 + rng.random() * 5000:.2f},55.0,30.0")
        iv += [f"{bid},0,2,SAND", f"{bid},2,9,UMC", f"{bid},9,16,LMC", f"{bid},16,22,LAM",
               f"{bid},22,30,GRAV"]
    (folder / "collars_big.csv").write_text("\n".join(c) + "\n")
    (folder / "intervals_big.csv").write_text("\n".join(iv) + "\n")
    return [folder / "collars_big.csv", folder / "intervals_big.csv"]


@pytest.mark.slow
def test_sigkill_during_add_leaves_the_store_before_or_after(project, tmp_path):
    path = store_path(read_project(project))
    files = _big_batch(tmp_path, 3000)
    # the states "before" and "after", from a reference copy
    ref = tmp_path / "ref"
    shutil.copytree(project, ref)
    before = _state(path)
    add_files(read_project(ref), files)
    after = _state(store_path(read_project(ref)))
    assert after != before

    cmd = [sys.executable, "-m", "aquitardmap", "add", str(project), *map(str, files)]
    journal = path.with_name(path.name + "-journal")
    seen = {"before": 0, "after": 0}
    rng = random.Random(11)
    kills = 0
    for attempt in range(10):
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        if attempt % 2 == 0:
            # kill inside the transaction: as soon as SQLite's journal exists
            t_end = time.monotonic() + 60
            while not journal.exists() and proc.poll() is None and time.monotonic() < t_end:
                time.sleep(0.0005)
            time.sleep(rng.uniform(0.0, 0.05))
        else:
            time.sleep(rng.uniform(0.3, 4.0))
        if proc.poll() is None:
            proc.send_signal(signal.SIGKILL)
            kills += 1
        proc.wait()
        state = _state(path)  # opening rolls back a hot journal
        assert state in (before, after), f"attempt {attempt}: store between states"
        seen["before" if state == before else "after"] += 1
        assert dict(pyogrio.list_layers(path))["collars"] == "Point"
        if state == after:
            break
    assert kills >= 1 and seen["before"] >= 1
    # the next add completes (or says the files are already in)
    r = subprocess.run(cmd, capture_output=True, text=True, timeout=300, env=_env())
    assert r.returncode == 0, r.stderr
    assert _state(path) == after


@pytest.mark.slow
def test_sigkill_during_run_keeps_previous_outputs_and_next_run_succeeds(project, tmp_path):
    import aquitardmap

    out = tmp_path / "out"
    aquitardmap.run(project, out)
    summary = (out / outputs.SUMMARY).read_bytes()
    add_files(read_project(project), _big_batch(tmp_path, 40))
    cmd = [sys.executable, "-m", "aquitardmap", "run", str(project), "--out", str(out)]
    for delay in (2.5, 6.0):
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        time.sleep(delay)
        if proc.poll() is None:
            proc.send_signal(signal.SIGKILL)
        proc.wait()
        assert (out / outputs.SUMMARY).read_bytes() == summary
        import rasterio
        with rasterio.open(out / outputs.AQUITARD_THICKNESS) as src:
            assert src.read(1).size > 0
    r = subprocess.run(cmd, capture_output=True, text=True, timeout=600, env=_env())
    assert r.returncode == 0, r.stderr
    assert (out / outputs.SUMMARY).read_bytes() != summary
