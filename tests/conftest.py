"""Shared fixtures: one run of the whole pipeline on the demo region per test session."""

from __future__ import annotations

from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "demo_region"


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory):
    """The demo region run once through :func:`aquitardmap.run`; returns the RunResult."""
    import aquitardmap

    out = tmp_path_factory.mktemp("demo") / "out"
    return aquitardmap.run(DEMO, out)
