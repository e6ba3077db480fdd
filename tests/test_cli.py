"""The command line: exit codes, messages, and nothing written on bad input."""

from __future__ import annotations

import json
import shutil
import subprocess
import sys

import pytest

from aquitardmap.outputs import names as outputs

from conftest import DEMO


def _cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "aquitardmap", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, timeout=300)


@pytest.fixture()
def project(tmp_path):
    dst = tmp_path / "proj"
    shutil.copytree(DEMO, dst, ignore=shutil.ignore_patterns("truth", "*.py"))
    return dst


def test_help_on_every_command():
    for args in ([], ["run"], ["check"]):
        r = _cli(*args, "--help")
        assert r.returncode == 0 and "Usage" in r.stdout


def test_check_reports_usable_demo_inputs():
    r = _cli("check", DEMO)
    assert r.returncode == 0, r.stderr
    assert "Inputs are usable" in r.stderr and "lower bounds" in r.stderr


def test_run_writes_outputs_and_replaces_a_previous_run(project, tmp_path):
    out = tmp_path / "out"
    r = _cli("run", project, "--out", out)
    assert r.returncode == 0, r.stderr
    assert (out / outputs.MAP).exists() and (out / outputs.SUMMARY).exists()
    first = (out / outputs.SUMMARY).read_text()
    # The flagged areas printed after the run are those of summary.json, window and thin
    # split by tier (the total first).
    zones = json.loads(first)["zones"]
    printed = " ".join((r.stdout + r.stderr).split())
    for kind in ("window", "thin"):
        tiers = zones["area_m2_by_kind_and_tier"][kind]
        assert (f"{kind} {zones['area_m2_by_kind'][kind] / 1e6:.2f} km² (likely "
                f"{tiers['likely'] / 1e6:.2f}, possible {tiers['possible'] / 1e6:.2f})"
                in printed), printed
    r = _cli("run", project, "--out", out)
    assert r.returncode == 0, r.stderr
    assert (out / outputs.SUMMARY).read_text() != first  # a new run (new start time)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out", "proj"]


def test_bad_input_exits_2_names_file_line_column_and_writes_nothing(project, tmp_path):
    lines = (project / "intervals.csv").read_text().splitlines()
    fields = lines[5].split(",")
    fields[1] = "twelve"
    lines[5] = ",".join(fields)
    (project / "intervals.csv").write_text("\n".join(lines) + "\n")
    out = tmp_path / "out"
    r = _cli("run", project, "--out", out)
    assert r.returncode == 2
    assert "intervals.csv, line 6, column 2" in r.stderr
    assert "nothing was written" in r.stderr
    assert not out.exists()
    assert _cli("check", project).returncode == 2


def test_bad_input_leaves_the_previous_outputs_intact(project, tmp_path):
    out = tmp_path / "out"
    assert _cli("run", project, "--out", out).returncode == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    (project / "collars.csv").write_text("borehole_id,x,y\n")
    r = _cli("run", project, "--out", out)
    assert r.returncode == 2 and "missing required column" in r.stderr
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before


def test_refuses_to_overwrite_a_folder_that_is_not_a_run(project, tmp_path):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("keep me")
    r = _cli("run", project, "--out", out)
    assert r.returncode == 2 and "does not hold a previous aquitardmap run" in r.stderr
    assert (out / "notes.txt").read_text() == "keep me"


def test_missing_project_folder_is_bad_input(tmp_path):
    r = _cli("check", tmp_path / "nowhere")
    assert r.returncode == 2 and "project folder not found" in r.stderr
