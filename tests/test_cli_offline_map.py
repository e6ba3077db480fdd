"""``aquitardmap run --offline-map``: a map that opens without network, or a clear refusal."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys

import pytest
from click.testing import CliRunner

from aquitardmap.cli import cli
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.webmap import assets as webmap_assets
from aquitardmap.outputs.webmap.assets import WebAssetsNotFound, find_web_assets

from conftest import DEMO


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "aquitardmap", *map(str, args)],
                          capture_output=True, text=True, timeout=300)


def test_offline_map_without_local_leaflet_is_refused_before_any_work(tmp_path, monkeypatch):
    # No system copies and an empty assets folder: Leaflet is "not installed".
    monkeypatch.setattr(webmap_assets, "SYSTEM_ASSET_DIRS", ())
    monkeypatch.setenv("AQUITARDMAP_WEB_ASSETS", str(tmp_path / "empty"))
    r = CliRunner().invoke(cli, ["run", str(DEMO), "--out", str(tmp_path / "out"),
                                 "--offline-map"])
    assert r.exit_code == 2
    assert "libjs-leaflet" in r.output and not (tmp_path / "out").exists()


def test_offline_map_flag_writes_a_self_contained_map(tmp_path):
    try:
        find_web_assets()
    except WebAssetsNotFound:
        pytest.skip("no local Leaflet (Debian package libjs-leaflet) on this machine")
    project = tmp_path / "proj"
    shutil.copytree(DEMO, project, ignore=shutil.ignore_patterns("truth", "*.py"))
    r = _cli("run", project, "--out", tmp_path / "out", "--offline-map")
    assert r.returncode == 0, r.stderr
    page = (tmp_path / "out" / outputs.MAP).read_text(encoding="utf-8")
    assert not re.search(r"<(script|link)\b[^>]*\b(src|href)\s*=", page, re.I)
    assert "tile.openstreetmap" not in page and "aqmStart(" in page
    assert "--offline-map" in _cli("run", "--help").stdout
