"""Shared fixtures: one run of the whole pipeline on the demo region per test session."""

from __future__ import annotations

from collections import Counter
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "demo_region"

#: The smallest valid project.toml: one clay over one aquifer (tests of the project reader).
MINIMAL_PROJECT_TOML = """\
[project]
name = "Test"
crs = "EPSG:32632"

[grid]
cell_size_m = 50

[[units]]
code = "CLAY"
name = "Clay"
role = "aquitard"

[[units]]
code = "GRAV"
name = "Gravel"
role = "aquifer"
"""



@pytest.fixture(scope="session")
def demo_run(tmp_path_factory):
    """The demo region run once through :func:`aquitardmap.run`; returns the RunResult."""
    import aquitardmap

    out = tmp_path_factory.mktemp("demo") / "out"
    return aquitardmap.run(DEMO, out)


#: Generated input cases run by the property-based tests, by kind; printed at the end of the
#: session (the README quotes the total).
GENERATED_CASES: Counter[str] = Counter()


def pytest_terminal_summary(terminalreporter):
    if GENERATED_CASES:
        terminalreporter.section("generated input cases")
        for kind, n in GENERATED_CASES.items():
            terminalreporter.write_line(f"{n:6d}  {kind}")
        terminalreporter.write_line(f"{sum(GENERATED_CASES.values()):6d}  in total")


def demo_copy(tmp_path: Path, name: str = "proj", *, screening: str = "") -> Path:
    """A copy of the demo project in ``tmp_path / name`` (no truth, no scripts); the lines
    ``screening`` (e.g. ``'probability_method = "latent_gaussian"\n'``) are added at the
    top of its ``[screening]`` table."""
    import shutil

    proj = tmp_path / name
    shutil.copytree(DEMO, proj, ignore=shutil.ignore_patterns("truth", "*.py"))
    if screening:
        toml = proj / "project.toml"
        text = toml.read_text(encoding="utf-8")
        assert text.count("[screening]\n") == 1
        toml.write_text(text.replace("[screening]\n", "[screening]\n" + screening),
                        encoding="utf-8")
    return proj


def demo_copy_with_new_hole(tmp_path: Path, hole_id: str) -> tuple[Path, list[Path]]:
    """A copy of the demo project in ``tmp_path / "proj"`` (:func:`demo_copy`) and one
    new full-penetration hole ``hole_id`` (3 m sand, 1 m clay, then the aquifer) as
    ``collars_n.csv`` and ``intervals_n.csv`` beside it, ready to ``add``."""
    proj = demo_copy(tmp_path)
    collars, intervals = tmp_path / "collars_n.csv", tmp_path / "intervals_n.csv"
    collars.write_text("borehole_id,x,y,ground_elev_m,total_depth_m\n"
                       f"{hole_id},551000.0,6716000.0,55.0,30.0\n")
    intervals.write_text("borehole_id,from_m,to_m,unit\n"
                         f"{hole_id},0,3,SAND\n{hole_id},3,4,UMC\n{hole_id},4,30,GRAV\n")
    return proj, [collars, intervals]
