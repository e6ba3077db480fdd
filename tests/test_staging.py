"""Output folders are replaced whole or not at all, even when the run is killed.

SIGKILL cannot be caught, so these tests kill real processes: once at every single
file-system step of the swap (deterministic), and at seeded random moments of whole command
line runs. After every kill the output folder holds either the previous run or the new one,
complete and readable; what a killed run leaves behind is a hidden folder that is never
taken for a run and that the next run removes.
"""

from __future__ import annotations

import json
import os
import random
import shutil
import signal
import stat
import subprocess
import sys
import time
from pathlib import Path

import projectgen as pg
import pytest
import rasterio

from aquitardmap.errors import InputError
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.staging import staged_output_dir, tidy_output_dir

from conftest import REPO

# A child that writes a result tagged ``tag`` through staged_output_dir and SIGKILLs itself
# just before its ``kill_at``-th file-system step (0 = never). It imports the staging module
# without the package's __init__ (which loads the whole pipeline) to start in milliseconds.
CHILD = r"""
import os, shutil, signal, sys, types
pkg = types.ModuleType("aquitardmap")
pkg.__path__ = [os.path.join(sys.argv[5], "aquitardmap")]
sys.modules["aquitardmap"] = pkg
from pathlib import Path
from aquitardmap.outputs import staging

out, tag, kill_at, exchange = Path(sys.argv[1]), sys.argv[2], int(sys.argv[3]), sys.argv[4]
calls = 0

def step(fn):
    def wrapped(*args, **kwargs):
        global calls
        calls += 1
        if calls == kill_at:
            os.kill(os.getpid(), signal.SIGKILL)
        return fn(*args, **kwargs)
    return wrapped

staging._exchange = step(staging._exchange) if exchange == "1" else (lambda a, b: False)
os.replace, os.rename, os.mkdir, os.fsync = (step(os.replace), step(os.rename),
                                             step(os.mkdir), step(os.fsync))
shutil.rmtree = step(shutil.rmtree)
with staging.staged_output_dir(out) as tmp:
    for i in range(3):
        (tmp / f"grid_{i}.txt").write_text(tag * 1000)
    (tmp / "summary.json").write_text('{"run": "%s"}' % tag)
print(calls)
"""

FILES = ["grid_0.txt", "grid_1.txt", "grid_2.txt", "summary.json"]


def _write_run(out: Path, tag: str) -> None:
    with staged_output_dir(out) as tmp:
        for i in range(3):
            (tmp / f"grid_{i}.txt").write_text(tag * 1000)
        (tmp / "summary.json").write_text(json.dumps({"run": tag}))


def _tag_of(out: Path) -> str | None:
    """The run tag ``out`` holds, after checking that it is complete and consistent."""
    if not out.exists():
        return None
    assert sorted(p.name for p in out.iterdir()) == FILES, "a half-written output folder"
    tag = json.loads((out / "summary.json").read_text())["run"]
    for i in range(3):
        assert (out / f"grid_{i}.txt").read_text() == tag * 1000
    return tag


def _child(out: Path, tag: str, kill_at: int, exchange: bool) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", CHILD, str(out), tag, str(kill_at),
                           "1" if exchange else "0", str(REPO)],
                          capture_output=True, text=True, timeout=60)


def _leftovers(out: Path) -> list[str]:
    return sorted(p.name for p in out.parent.iterdir() if p.name.startswith(f".{out.name}."))


@pytest.mark.parametrize("exchange", [True, False], ids=["atomic-swap", "two-renames"])
def test_a_kill_at_every_step_of_the_replacement_loses_nothing(tmp_path, exchange):
    if exchange and sys.platform != "linux":
        pytest.skip("the atomic swap is Linux's renameat2")
    out = tmp_path / "out"
    _write_run(out, "A")
    clean = _child(out, "B", 0, exchange)
    assert clean.returncode == 0, clean.stderr
    steps = int(clean.stdout)
    assert steps >= 6  # mkdir, fsyncs, the swap or renames, removal of the previous run
    seen = set()
    for kill_at in range(1, steps + 1):
        shutil.rmtree(tmp_path)
        tmp_path.mkdir()
        _write_run(out, "A")
        r = _child(out, "B", kill_at, exchange)
        assert r.returncode == -signal.SIGKILL, (kill_at, r.stderr)
        tag = _tag_of(out)
        if tag is None:
            # only between the two renames of the fallback: the previous run was moved
            # aside, and the next run moves it back before anything else
            assert not exchange, f"step {kill_at}: output folder missing"
            assert tidy_output_dir(out) and _tag_of(out) == "A"
            tag = "A (restored)"
        seen.add(tag)
        # nothing a killed run leaves is a visible folder, let alone taken for a run
        assert sorted(p.name for p in tmp_path.iterdir() if not p.name.startswith(".")) == \
            ["out"]
        _write_run(out, "C")  # the next run succeeds and tidies up
        assert _tag_of(out) == "C" and _leftovers(out) == [], (kill_at, _leftovers(out))
    # the kills fell both before and after the switch to the new run
    assert "A" in seen and "B" in seen
    if not exchange:
        assert "A (restored)" in seen


def test_a_failing_run_leaves_the_previous_outputs_byte_for_byte(tmp_path):
    out = tmp_path / "out"
    _write_run(out, "A")
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    with pytest.raises(RuntimeError), staged_output_dir(out) as tmp:
        (tmp / "summary.json").write_text("{}")
        raise RuntimeError("a stage failed")
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert _leftovers(out) == []


def test_stale_partial_folders_of_dead_runs_go_live_and_unknown_ones_stay(tmp_path):
    out = tmp_path / "out"
    _write_run(out, "A")
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    stale = tmp_path / f".out.partial-{dead.pid}-0000"
    live = tmp_path / f".out.partial-{os.getpid()}-1111"  # this test's own process
    unknown = tmp_path / ".out.partial-handmade"
    for folder in (stale, live, unknown):
        folder.mkdir()
        (folder / "summary.json").write_text('{"run": "half"}')
    _write_run(out, "B")
    assert _tag_of(out) == "B"
    assert not stale.exists() and live.exists() and unknown.exists()


def test_outputs_are_readable_as_the_umask_allows_not_private(tmp_path):
    mask = os.umask(0o022)
    try:
        _write_run(tmp_path / "out", "A")
    finally:
        os.umask(mask)
    mode = stat.S_IMODE((tmp_path / "out").stat().st_mode)
    assert mode == 0o755, oct(mode)  # tempfile.mkdtemp would have made it 0o700


def test_a_folder_that_holds_something_else_is_refused_and_kept(tmp_path):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("keep me")
    with pytest.raises(InputError, match="does not hold a previous aquitardmap run"):
        _write_run(out, "A")
    assert (out / "notes.txt").read_text() == "keep me" and _leftovers(out) == []


@pytest.mark.parametrize("where", ["project", "parent"])
def test_an_output_folder_that_is_or_holds_the_project_is_refused_before_any_work(
        tmp_path, where):
    import aquitardmap

    project = _small_project(tmp_path / "p")
    (project / outputs.SUMMARY).write_text("{}")  # even if it once held a run's summary
    (tmp_path / outputs.SUMMARY).write_text("{}")
    before = sorted(p.name for p in project.iterdir())
    out = project if where == "project" else tmp_path
    with pytest.raises(InputError, match="would delete the inputs"):
        aquitardmap.run(project, out)
    assert sorted(p.name for p in project.iterdir()) == before


# ----------------------------------------------------------- whole runs, killed at random


def _small_project(folder: Path) -> Path:
    """Twelve holes over 2 km with 25 m cells (about 6 400 cells): long enough to write that
    kills land in every stage."""
    units = [pg.UnitSpec("SAND", "cover", 0.3, 1e-4, "none", 1.0),
             pg.UnitSpec("UMC", "aquitard", 0.4, 5e-10, "none", 1.0),
             pg.UnitSpec("LAM", "aquitard", 0.35, 1e-9, "none", 4.0),
             pg.UnitSpec("GRAV", "aquifer", 0.25, 1e-3, "none", 1.0)]
    rng = random.Random(3)
    holes = []
    for i in range(12):
        sand, umc, lam = (round(rng.uniform(0, 4), 2), round(rng.uniform(0, 15), 2),
                          round(rng.uniform(0, 8), 2))
        ivs, d = [], 0.0
        for code, t in (("SAND", sand), ("UMC", umc), ("LAM", lam), ("GRAV", 3.0)):
            if t > 0:
                ivs.append((d, round(d + t, 2), code))
                d = round(d + t, 2)
        holes.append(pg.HoleSpec(f"K-{i:02d}", 500_000 + rng.uniform(0, 2000),
                                 6_700_000 + rng.uniform(0, 2000), 40.0, d, ivs))
    spec = pg.Spec(crs="EPSG:32632", origin=(500_000.0, 6_700_000.0), extent_m=2000.0,
                   cell_size_m=25.0, buffer_m=200.0, units=units, holes=holes,
                   settings={"screening": {"window_thickness_m": 1.0,
                                           "thin_thickness_m": 5.0,
                                           "fast_travel_time_yr": 50.0}},
                   with_samples=False)
    r = pg.render(spec)
    r.lines["project.toml"] = [ln for ln in r.lines["project.toml"]
                               if not ln.startswith("max_cells")]
    return r.write(folder)


def _state(out: Path) -> bytes:
    """summary.json of a complete, readable run folder."""
    summary = json.loads((out / outputs.SUMMARY).read_text(encoding="utf-8"))
    assert sorted(p.name for p in out.iterdir()) == sorted(summary["outputs"])
    for name in summary["outputs"]:
        if name.endswith(".tif"):
            with rasterio.open(out / name) as src:
                assert src.read(1).size > 0
    return (out / outputs.SUMMARY).read_bytes()


def test_sigkill_at_random_moments_of_runs_keeps_a_whole_run_and_the_next_run_succeeds(
        tmp_path):
    project = _small_project(tmp_path / "p")
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "aquitardmap", "run", str(project), "--out", str(out)]
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    t0 = time.monotonic()
    first = subprocess.run(cmd, capture_output=True, text=True, timeout=600, env=env)
    duration = time.monotonic() - t0  # only to spread the kills over a run; never asserted
    assert first.returncode == 0, first.stderr
    current = _state(out)
    rng = random.Random(20)  # seeded delays, as fractions of the first run's duration
    scale = 1.0
    kills = 0
    for _ in range(8):
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                env=env)
        time.sleep(rng.uniform(0.05, 0.6) * duration * scale)
        killed = proc.poll() is None
        if killed:
            proc.send_signal(signal.SIGKILL)
            kills += 1
        else:
            scale /= 2  # this machine ran faster than the first run: aim earlier
        proc.wait()
        state = _state(out)  # whole and readable: the previous run or the new one
        assert killed or state != current
        current = state
        assert sorted(p.name for p in tmp_path.iterdir() if not p.name.startswith(".")) == \
            ["out", "p"]
        if kills == 3:
            break
    r = subprocess.run(cmd, capture_output=True, text=True, timeout=600, env=env)
    assert r.returncode == 0, r.stderr
    assert _state(out) != current
    assert _leftovers(out) == [], _leftovers(out)
    assert kills >= 1
