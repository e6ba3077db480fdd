"""The planners' map in a real browser: Debian's headless Chromium driven by playwright.

No internet is used. Leaflet (the version folium asks for) is the package's own copy
(``aquitardmap/outputs/webmap/vendor``; else npm's, installed into a cache folder, or
Debian's libjs-leaflet) and is served to the page with ``page.route``;
background tiles are answered with a blank grey tile; any other request is refused and
counted as a failure. Screenshots and the measured size and load time of the demo map go
to ``test-artifacts/`` (git-ignored).

Values are checked against references outside the map code: pyproj (PROJ) for where a
borehole sits on screen, and the run folder's own files (tests/mapdata.py).
"""

from __future__ import annotations

import io
import json
import os
import re
import shutil
import subprocess
import time
from pathlib import Path

import folium
import matplotlib.image
import numpy as np
import pytest
from mapdata import (
    EVIL_ID,
    EVIL_UNIT,
    HOLE_XY,
    X0,
    Y0,
    build_large_run_folder,
    build_run_folder,
    thickness_at,
)
from pyproj import Transformer

import aquitardmap
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.webmap import assets as webmap_assets
from aquitardmap.outputs.webmap.build import write_map
from aquitardmap.outputs.webmap.features import HoleData, hole_popup_html, hole_tooltip_html

from conftest import REPO

pytestmark = pytest.mark.browser

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu",
                 "--disable-background-networking", "--disable-component-update",
                 "--no-first-run", "--disable-sync"]
ARTIFACTS = REPO / "test-artifacts"
DEBIAN_LEAFLET = Path("/usr/share/javascript/leaflet")
LEAFLET_URL = re.compile(r"/npm/leaflet@([\d.]+)/dist/(.+)$")
TILE_HOSTS = ("tile.openstreetmap.org",)
VIEWPORT = {"width": 1400, "height": 900}


def _folium_leaflet_version() -> str:
    url = dict(folium.Map.default_js)["leaflet"]
    m = LEAFLET_URL.search(url)
    assert m, f"folium's Leaflet URL has an unexpected form: {url}"
    return m.group(1)


def _cache_root() -> Path:
    env = os.environ.get("AQUITARDMAP_TEST_CACHE")
    return Path(env) if env else Path.home() / ".cache" / "aquitardmap-tests"


@pytest.fixture(scope="session")
def leaflet_dist() -> Path:
    """A local ``leaflet/dist`` folder: the package's own copy when it is folium's version;
    else npm's leaflet@<folium's version> in a cache, installed on first use; else Debian's
    libjs-leaflet; else the tests are skipped."""
    version = _folium_leaflet_version()
    shipped = Path(aquitardmap.__file__).parent / "outputs" / "webmap" / "vendor" / "leaflet"
    if (shipped / "leaflet.css").is_file() and f"Leaflet {version}" in (
            shipped / "leaflet.js").read_text(encoding="utf-8")[:400]:
        return shipped
    prefix = _cache_root() / f"npm-leaflet-{version}"
    dist = prefix / "node_modules" / "leaflet" / "dist"
    npm = shutil.which("npm")
    if not (dist / "leaflet.js").is_file() and npm:
        prefix.mkdir(parents=True, exist_ok=True)
        try:
            subprocess.run([npm, "install", "--prefix", str(prefix), "--no-audit", "--no-fund",
                            "--no-save", "--silent", f"leaflet@{version}"],
                           check=True, capture_output=True, timeout=300)
        except (subprocess.SubprocessError, OSError):
            pass
    if (dist / "leaflet.js").is_file() and (dist / "leaflet.css").is_file():
        return dist
    if (DEBIAN_LEAFLET / "leaflet.js").is_file():
        return DEBIAN_LEAFLET
    pytest.skip(f"no local Leaflet: npm could not install leaflet@{version} and Debian's "
                "libjs-leaflet is not installed")


@pytest.fixture(scope="session")
def browser():
    if not CHROMIUM.is_file():
        pytest.skip("Debian's chromium is not installed at /usr/bin/chromium "
                    "(apt-get install chromium; .ci/run does this)")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        b = pw.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
        yield b
        b.close()


def _blank_tile() -> bytes:
    buf = io.BytesIO()
    matplotlib.image.imsave(buf, np.full((256, 256, 3), 0.93), format="png")
    return buf.getvalue()


class Session:
    """One page with local routing; records console errors, refused requests, dialogs."""

    def __init__(self, browser, leaflet: Path | None, *, offline: bool = False) -> None:
        self.errors: list[str] = []
        self.refused: list[str] = []
        self.dialogs: list[str] = []
        self.context = browser.new_context(viewport=VIEWPORT)
        self.page = self.context.new_page()
        tile = _blank_tile()

        def handle(route) -> None:
            url = route.request.url
            if url.startswith(("file:", "data:")):
                route.continue_()
                return
            m = LEAFLET_URL.search(url)
            if not offline and m and leaflet is not None and (leaflet / m.group(2)).is_file():
                route.fulfill(path=str(leaflet / m.group(2)))
            elif not offline and any(h in url for h in TILE_HOSTS):
                route.fulfill(body=tile, content_type="image/png")
            else:
                self.refused.append(url)
                route.abort()

        self.page.route("**/*", handle)
        self.page.on("console", lambda msg: msg.type == "error" and self.errors.append(msg.text))
        self.page.on("pageerror", lambda exc: self.errors.append(str(exc)))

        def on_dialog(dialog) -> None:
            self.dialogs.append(dialog.message)
            dialog.dismiss()

        self.page.on("dialog", on_dialog)

    def open(self, path: Path) -> float:
        """Open a map; returns the seconds until its script has wired everything."""
        t0 = time.perf_counter()
        self.page.goto(path.resolve().as_uri(), wait_until="load")
        self.page.wait_for_function("() => window.aqm !== undefined", timeout=30_000)
        return time.perf_counter() - t0

    def screen_xy(self, lon: float, lat: float) -> tuple[float, float]:
        """Page pixel of a longitude/latitude (after panning it into view)."""
        return tuple(self.page.evaluate(
            """([lat, lon]) => {
                var m = aqm.map, ll = L.latLng(lat, lon);
                if (!m.getBounds().pad(-0.1).contains(ll)) { m.panTo(ll, {animate: false}); }
                var p = m.latLngToContainerPoint(ll), r = m.getContainer().getBoundingClientRect();
                return [p.x + r.left, p.y + r.top];
            }""", [lat, lon]))

    def close(self) -> None:
        self.context.close()


@pytest.fixture()
def session(browser, leaflet_dist):
    s = Session(browser, leaflet_dist)
    yield s
    s.close()


@pytest.fixture(scope="module")
def tiny_map(tmp_path_factory) -> Path:
    run_dir = tmp_path_factory.mktemp("tiny")
    build_run_folder(run_dir)
    return write_map(run_dir)


TO_LONLAT = Transformer.from_crs(32632, 4326, always_xy=True)  # PROJ: the outside reference


def _lonlat(x: float, y: float) -> tuple[float, float]:
    return TO_LONLAT.transform(x, y)


def _grid_state(page) -> dict:
    return page.evaluate("""() => ({
        shown: aqm.cfg.grids.map(g => aqm.map.hasLayer(g.layer)),
        legends: aqm.cfg.grids.map(g => !document.getElementById(g.legend).hidden),
        images: document.querySelectorAll('.leaflet-aqmGrids-pane img').length,
    })""")


def test_demo_map_loads_without_console_errors(browser, leaflet_dist, demo_run):
    ARTIFACTS.mkdir(exist_ok=True)
    path = demo_run.out_dir / outputs.MAP
    s = Session(browser, leaflet_dist)
    try:
        seconds = s.open(path)
        timing = s.page.evaluate("""() => {
            var n = performance.getEntriesByType('navigation')[0];
            return {dom_content_loaded_ms: n.domContentLoadedEventEnd, load_ms: n.loadEventEnd,
                    script_ready_ms: aqm.readyMs};
        }""")
        s.page.wait_for_timeout(300)
        s.page.screenshot(path=str(ARTIFACTS / "demo_map.png"))
        assert s.errors == [] and s.refused == [] and s.dialogs == []
        # The default view shows the first grid, zones and boreholes, the caution bar.
        assert _grid_state(s.page)["shown"][0] is True
        assert s.page.locator("#aqm-caution").is_visible()
        assert outputs.CAUTION[:60] in s.page.locator("#aqm-caution").inner_text()
        size_mb = path.stat().st_size / 1e6
        assert size_mb < 15  # issue 6: the demo map stays under 15 MB
        (ARTIFACTS / "demo_map_load.json").write_text(json.dumps(
            {"size_mb": round(size_mb, 2), "open_to_ready_s": round(seconds, 3), **timing},
            indent=2) + "\n", encoding="utf-8")
    finally:
        s.close()


def test_each_layer_toggles(session, demo_run):
    page = session.page
    session.open(demo_run.out_dir / outputs.MAP)
    page.locator("summary", has_text="More grids").click()
    radios = page.locator('input[name="aqm-grid"]')
    n = radios.count()
    n_grids = page.evaluate("() => aqm.cfg.grids.length")
    assert n == n_grids + 1 >= 10  # every grid plus "No shaded grid"
    for k in range(n):
        radio = radios.nth(k)
        value = int(radio.get_attribute("value"))
        radio.check()
        state = _grid_state(page)
        expected = [i == value for i in range(n_grids)]
        assert state["shown"] == expected and state["legends"] == expected
        assert state["images"] == (0 if value < 0 else 1)
    radios.first.check()
    # Opacity applies to the shown grid.
    page.evaluate("""() => { var s = document.getElementById('aqm-opacity'); s.value = 30;
                             s.dispatchEvent(new Event('input')); }""")
    assert page.locator(".leaflet-aqmGrids-pane img").evaluate("e => e.style.opacity") == "0.3"
    assert page.locator("#aqm-opacity-value").inner_text() == "30 %"
    for key in page.evaluate("() => Object.keys(aqm.cfg.layers)"):
        box = page.locator(f'input[data-aqm-layer="{key}"]')
        on = f"() => aqm.map.hasLayer(aqm.cfg.layers[{json.dumps(key)}].layer)"
        assert page.evaluate(on) is True
        box.uncheck()
        assert page.evaluate(on) is False
        box.check()
        assert page.evaluate(on) is True
    assert session.errors == [] and session.refused == []


def test_zone_tooltip_shows_kind_area_probability_and_reason(session, tiny_map):
    page = session.page
    session.open(tiny_map)
    # The middle of the window zone (the box X0..X0+100, Y0..Y0+250), away from any hole.
    x, y = session.screen_xy(*_lonlat(X0 + 50, Y0 + 200))
    page.mouse.move(x, y)
    page.mouse.move(x + 1, y + 1)
    tip = page.locator(".leaflet-tooltip.aqm-tip")
    tip.wait_for(state="visible", timeout=5000)
    text = tip.inner_text()
    assert "Window: clay absent (under 0.5 m)" in text
    assert "Area: 2.5 ha" in text  # 25 000 m² = 2.5 ha (1 ha = 10⁴ m²)
    assert "Chance the clay is thin (mean over the zone): 93 %" in text
    assert "Why: Clay absent & aquifer <b>exposed</b>" in text  # shown as text, not markup
    assert session.errors == []


def test_borehole_popup_shows_its_log_and_values(session, tiny_map):
    page = session.page
    session.open(tiny_map)
    page.evaluate("() => aqm.map.setZoom(aqm.map.getZoom() + 1, {animate: false})")
    x, y = session.screen_xy(*_lonlat(*HOLE_XY["OV-102"]))
    page.mouse.click(x, y)
    popup = page.locator(".leaflet-popup-content")
    popup.wait_for(state="visible", timeout=5000)
    text = popup.inner_text()
    assert text.startswith("OV-102")
    assert "Stopped in the clay: thickness is a lower bound" in text
    assert "≥ 9.5 m (hole stopped in clay)" in text and "Reached the aquifer: no" in text
    assert "2.5–12 m" in text and "Upper marine clay [UMC]" in text and "9.5 m" in text
    svg = popup.locator("svg.aqm-strip")
    assert svg.count() == 1 and "hole ends" in svg.text_content()
    # The clay interval's bar is 9.5/12 of the 134 px column (drawn to depth scale).
    bars = svg.locator("rect[stroke='#333']")
    heights = [float(bars.nth(i).get_attribute("height")) for i in range(bars.count())]
    assert heights == pytest.approx([2.5 * 134 / 12, 9.5 * 134 / 12], abs=0.06)
    assert session.errors == []


def test_click_shows_coordinates_and_the_cell_values(session, tiny_map):
    page = session.page
    session.open(tiny_map)
    cx, cy = X0 + 475.0, Y0 + 375.0  # centre of a cell inside the study area
    x, y = session.screen_xy(*_lonlat(cx, cy))
    page.mouse.click(x, y)
    popup = page.locator(".aqm-here")
    popup.wait_for(state="visible", timeout=5000)
    text = popup.inner_text()
    m = re.search(r"x ([\d.]+) m, y ([\d.]+) m \(EPSG:32632\)", text)
    # A click lands within a pixel (under 2 m at this zoom) of the point aimed at.
    assert float(m.group(1)) == pytest.approx(cx, abs=2.0)
    assert float(m.group(2)) == pytest.approx(cy, abs=2.0)
    t = re.search(r"Total clay \(aquitard\) thickness\s+([\d.]+) m ± ([\d.]+) m", text)
    assert float(t.group(1)) == pytest.approx(thickness_at(cx), abs=0.051)
    assert "Aquifer vulnerability class" in text and "vulnerability" in text.split("class")[-1]


def test_hostile_borehole_id_stays_inert(session, tiny_map):
    page = session.page
    session.open(tiny_map)
    x, y = session.screen_xy(*_lonlat(*HOLE_XY[EVIL_ID]))
    page.mouse.move(x, y)
    page.mouse.click(x, y)
    title = page.locator(".leaflet-popup-content .aqm-popup-title")
    title.wait_for(state="visible", timeout=5000)
    assert title.inner_text() == EVIL_ID  # the id is shown as the text it is
    page.locator("summary", has_text="More grids").click()
    assert page.locator("label", has_text=EVIL_UNIT).count() == 1
    page.wait_for_timeout(300)
    assert page.locator('img[src="x"]').count() == 0 and page.locator("b:text('x')").count() == 0
    assert session.dialogs == [] and session.errors == []
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / "hostile_id_popup.png"))


def test_map_says_why_it_is_blank_when_leaflet_cannot_load(browser, leaflet_dist, tiny_map):
    """A map that fetches Leaflet, opened with the network refused: the page names the
    cause and the self-contained alternative instead of showing a blank map; with
    Leaflet served, the notice stays hidden (common practice: fail visibly)."""
    blocked = Session(browser, leaflet_dist, offline=True)
    try:
        blocked.page.goto(tiny_map.resolve().as_uri(), wait_until="load")
        notice = blocked.page.locator("#aqm-nolib")
        notice.wait_for(state="visible", timeout=10_000)
        assert "--offline-map" in notice.inner_text()
        assert any(LEAFLET_URL.search(u) for u in blocked.refused)
        assert blocked.page.locator("#aqm-caution").is_visible()
    finally:
        blocked.close()
    served = Session(browser, leaflet_dist)
    try:
        served.open(tiny_map)
        assert not served.page.locator("#aqm-nolib").is_visible()
        assert served.errors == []
    finally:
        served.close()


def test_self_contained_map_needs_no_network(browser, leaflet_dist, tmp_path, monkeypatch):
    monkeypatch.setenv("AQUITARDMAP_WEB_ASSETS", str(leaflet_dist))
    build_run_folder(tmp_path)
    path = write_map(tmp_path, self_contained=True)
    s = Session(browser, None, offline=True)
    try:
        s.open(path)
        assert s.refused == [] and s.errors == []
        assert _grid_state(s.page)["images"] == 1
        assert s.page.evaluate("() => Object.keys(aqm.cfg.layers)") == ["outline", "zones",
                                                                          "holes"]
    finally:
        s.close()


def _page_hole_data(page) -> HoleData:
    cfg = page.evaluate("() => aqm.cfg.holes")
    return HoleData(cfg["rows"], cfg["cats"], cfg["units"], {})


def _popups_match(page) -> int:
    """Every hole's popup and tooltip as the page builds them equal the Python text."""
    data = _page_hole_data(page)
    built = page.evaluate("""() => aqm.cfg.holes.rows.map(r => [
        aqmHoles.popupHtml(r, aqm.cfg.holes), aqmHoles.tooltipHtml(r, aqm.cfg.holes)])""")
    for record, (popup, tip) in zip(data.records, built, strict=True):
        assert popup == hole_popup_html(record, data)
        assert tip == hole_tooltip_html(record, data)
    return len(built)


def test_popups_built_in_the_page_equal_the_python_popups(session, tiny_map, demo_run):
    session.open(tiny_map)
    assert _popups_match(session.page) == 3
    session.open(demo_run.out_dir / outputs.MAP)
    assert _popups_match(session.page) > 300
    # Python's "%g" and "%.1f" rules as the page spells them (Python's format mini-language).
    cases = [0.0, 2.5, 12.0, 0.1234567, 1234567.0, 1e-5, 123456.0, 1e9, 33.3333333]
    assert session.page.evaluate("v => v.map(aqmHoles.g6)", cases) == [f"{v:g}" for v in cases]
    assert session.errors == []


def test_proving_holes_are_never_clustered(session, demo_run):
    page = session.page
    session.open(demo_run.out_dir / outputs.MAP)
    state = page.evaluate("""() => {
        var g = aqm.cfg.layers.holes.layer, h = aqm.cfg.holes, out = {proving: 0, drawn: 0,
            clusteredProving: 0, clustered: 0, expected: 0};
        h.rows.forEach(r => { var k = h.cats[r[2]][0];
                              if (k === "window" || k === "thin") { out.expected += 1; } });
        g.proving.eachLayer(m => { out.proving += 1; if (aqm.map.hasLayer(m)) out.drawn += 1; });
        g.clustered.getLayers().forEach(m => { out.clustered += 1;
            var f = m.options.fillColor;
            if (f === h.cats[0][1] || f === h.cats[1][1]) { out.clusteredProving += 1; } });
        out.clusters = document.querySelectorAll(".aqm-cluster").length;
        return out; }""")
    assert state["expected"] > 0 and state["proving"] == state["expected"]
    assert state["drawn"] == state["proving"]  # always drawn, whatever the zoom
    assert state["clusteredProving"] == 0
    assert state["proving"] + state["clustered"] == len(page.evaluate("() => aqm.cfg.holes.rows"))
    assert state["clusters"] > 0  # the demo's 400-odd holes are grouped at the opening view
    assert session.errors == []


def test_opening_view_fits_the_study_area_beside_the_panel(session, demo_run):
    page = session.page
    session.open(demo_run.out_dir / outputs.MAP)
    box = page.evaluate("""() => {
        var e = aqm.cfg.extent, m = aqm.map, a = m.latLngToContainerPoint(e[0]),
            b = m.latLngToContainerPoint(e[1]), size = m.getSize(),
            panel = document.getElementById("aqm-panel").getBoundingClientRect(),
            map = m.getContainer().getBoundingClientRect();
        return {left: a.x, bottom: a.y, right: b.x, top: b.y, width: size.x, height: size.y,
                panelLeft: panel.left - map.left}; }""")
    assert box["left"] >= 0 and box["top"] >= 0 and box["bottom"] <= box["height"]
    assert box["right"] <= box["panelLeft"]  # not under the layer panel
    # and it fills the room: one zoom step (0.25) more would not fit (Leaflet's zoomSnap)
    assert (box["right"] - box["left"]) > 0.5 * box["panelLeft"] or \
        (box["bottom"] - box["top"]) > 0.5 * box["height"]


def _tiny_dem(path: Path) -> None:
    """An invented DEM over the tiny run folder: a ridge running north-south."""
    import rasterio
    from affine import Affine

    x = np.arange(60)
    z = np.tile(40 + 10 * np.exp(-((x - 30) / 8.0) ** 2), (50, 1)).astype("float32")
    with rasterio.open(path, "w", driver="GTiff", width=60, height=50, count=1,
                       dtype="float32", crs="EPSG:32632",
                       transform=Affine(20, 0, X0 - 100, 0, -20, Y0 + 850)) as dst:
        dst.write(z, 1)


def test_offline_map_from_the_package_alone_renders_with_network_blocked(browser, tmp_path,
                                                                          monkeypatch):
    monkeypatch.setattr(webmap_assets, "SYSTEM_ASSET_DIRS", ())
    monkeypatch.delenv("AQUITARDMAP_WEB_ASSETS", raising=False)
    build_run_folder(tmp_path)
    _tiny_dem(tmp_path / "dem.tif")
    path = write_map(tmp_path, self_contained=True, dem_path=tmp_path / "dem.tif")
    s = Session(browser, None, offline=True)
    try:
        s.open(path)
        assert s.refused == [] and s.errors == []
        assert s.page.evaluate("() => Object.keys(aqm.cfg.layers)") == [
            "relief", "outline", "zones", "holes"]
        assert s.page.locator(".leaflet-aqmRelief-pane img").count() == 1
        assert s.page.evaluate("() => typeof L.markerClusterGroup") == "function"
        ARTIFACTS.mkdir(exist_ok=True)
        s.page.screenshot(path=str(ARTIFACTS / "offline_relief_map.png"))
    finally:
        s.close()


def test_large_region_map_loads_and_its_cost_is_recorded(browser, leaflet_dist,
                                                         tmp_path_factory):
    """20,000 holes and 4 M cells: the page loads with no console error (tiles are served
    blank, nothing else is fetched); size, load time and script heap go to
    test-artifacts/large_map_load.json (never a failure on time)."""
    run_dir = tmp_path_factory.mktemp("large")
    build_large_run_folder(run_dir)
    t0 = time.perf_counter()
    path = write_map(run_dir)
    write_s = time.perf_counter() - t0
    s = Session(browser, leaflet_dist)
    try:
        seconds = s.open(path)
        s.page.wait_for_timeout(500)
        cdp = s.context.new_cdp_session(s.page)
        heap = cdp.send("Runtime.getHeapUsage")
        n_holes = s.page.evaluate("() => aqm.cfg.holes.rows.length")
        ARTIFACTS.mkdir(exist_ok=True)
        s.page.screenshot(path=str(ARTIFACTS / "large_map.png"))
        (ARTIFACTS / "large_map_load.json").write_text(json.dumps(
            {"holes": n_holes, "cells": 4_000_000, "size_mb": round(path.stat().st_size / 1e6, 2),
             "write_s": round(write_s, 2), "open_to_ready_s": round(seconds, 3),
             "js_heap_used_mb": round(heap["usedSize"] / 1e6, 1)}, indent=2) + "\n",
            encoding="utf-8")
        assert n_holes == 20_000
        assert s.errors == [] and s.refused == [] and s.dialogs == []
        assert s.page.locator(".aqm-cluster").count() > 0
    finally:
        s.close()
