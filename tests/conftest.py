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
