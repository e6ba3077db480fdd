"""``aquitardmap run --offline-map``: a map that opens without network, or a clear refusal."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys

import folium
from click.testing import CliRunner

from aquitardmap.cli import cli
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.webmap import assets as webmap_assets
from aquitardmap.outputs.webmap.assets import find_web_assets

from conftest import DEMO


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "aquitardmap", *map(str, args)],
                          capture_output=True, text=True, timeout=300)


def test_offline_map_without_local_leaflet_is_refused_before_any_work(tmp_path, monkeypatch):
    # No package copy, no system copies and an empty assets folder: Leaflet is "not there".
    monkeypatch.setattr(webmap_assets, "PACKAGE_ASSET_DIRS", ())
    monkeypatch.setattr(webmap_assets, "SYSTEM_ASSET_DIRS", ())
    monkeypatch.setenv("AQUITARDMAP_WEB_ASSETS", str(tmp_path / "empty"))
    r = CliRunner().invoke(cli, ["run", str(DEMO), "--out", str(tmp_path / "out"),
                                 "--offline-map"])
    assert r.exit_code == 2
    assert "libjs-leaflet" in r.output and not (tmp_path / "out").exists()


def test_package_ships_leaflet_and_the_cluster_plugin_with_their_licences(monkeypatch):
    monkeypatch.setattr(webmap_assets, "SYSTEM_ASSET_DIRS", ())
    monkeypatch.delenv("AQUITARDMAP_WEB_ASSETS", raising=False)
    found = find_web_assets()  # the package's own copy, nothing from Debian or npm
    assert found.leaflet_js.parent == webmap_assets.PACKAGE_ASSET_DIRS[0]
    # the version folium loads (its CDN address), as the file's banner says
    assert "/leaflet@1.9.3/" in dict(folium.Map.default_js)["leaflet"]
    assert "Leaflet 1.9.3," in found.leaflet_js.read_text(encoding="utf-8")[:200]
    for folder, words in ((found.leaflet_js.parent, "BSD 2-Clause License"),
                          (webmap_assets.MARKERCLUSTER_DIR, "Permission is hereby granted")):
        assert words in (folder / "LICENSE").read_text(encoding="utf-8")
    assert "MarkerClusterGroup" in webmap_assets.markercluster_js()
    assert "</script" not in webmap_assets.markercluster_js()


def test_offline_map_flag_writes_a_self_contained_map(tmp_path, monkeypatch):
    monkeypatch.setattr(webmap_assets, "SYSTEM_ASSET_DIRS", ())  # the package alone
    monkeypatch.delenv("AQUITARDMAP_WEB_ASSETS", raising=False)
    find_web_assets()
    project = tmp_path / "proj"
    shutil.copytree(DEMO, project, ignore=shutil.ignore_patterns("truth", "*.py"))
    r = CliRunner().invoke(cli, ["run", str(project), "--out", str(tmp_path / "out"),
                                 "--offline-map"])
    assert r.exit_code == 0, r.output
    page = (tmp_path / "out" / outputs.MAP).read_text(encoding="utf-8")
    assert '"relief":{layer:' in page  # the demo's background: its DEM relief
    assert not re.search(r"<(script|link)\b[^>]*\b(src|href)\s*=", page, re.I)
    assert "tile.openstreetmap" not in page and "aqmStart(" in page
    assert "--offline-map" in _cli("run", "--help").stdout
