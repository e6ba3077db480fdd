"""Tests of the planners' map (aquitardmap.outputs.webmap) on a tiny synthetic run folder.

The run folder is invented test data (tests/mapdata.py: a 20 x 15 grid of 50 m cells in
EPSG:32632). The map is checked against outside references: pyproj (PROJ) for where the
overlays must sit, rasterio for the grid values the page carries, Python's json/html
modules for what a browser would decode, and the PNG decoder of matplotlib for what the
overlays hold. No browser is driven here (see test_webmap_browser.py).
"""

from __future__ import annotations

import base64
import html
import io
import json
import re
import shutil
from pathlib import Path

import geopandas as gpd
import matplotlib.image
import numpy as np
import pytest
import rasterio
from mapdata import (
    CRS_UTM32,
    EVIL_ID,
    EVIL_UNIT,
    X0,
    Y0,
    build_run_folder,
    indicator_probability,
    latent_probability,
    set_probability,
)
from pyproj import CRS, Transformer

from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.presentation import unit_colours
from aquitardmap.outputs.webmap.assets import WebAssetsNotFound, find_web_assets
from aquitardmap.outputs.webmap.build import write_map
from aquitardmap.outputs.webmap.features import HoleData, hole_popup_html, hole_tooltip_html
from aquitardmap.outputs.webmap.page import lonlat_to_xy_fit
from aquitardmap.outputs.webmap.striplog import parse_log, strip_log_svg

OVERLAY = re.compile(
    r'L\.imageOverlay\(\s*"(data:image/png;base64,[A-Za-z0-9+/=]+)",\s*'
    r"(\[\[[^\]]*\],\s*\[[^\]]*\]\])"
)
RADIO = re.compile(r'<label title="([^"]*)"><input type="radio" name="aqm-grid" '
                   r'value="(\d+)"( checked)?>([^<]*)</label>')


@pytest.fixture(scope="module")
def tiny_run(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, str]:
    """(run folder, map html) for the tiny synthetic run, written once per module."""
    run_dir = tmp_path_factory.mktemp("run")
    build_run_folder(run_dir)
    path = write_map(run_dir)
    return run_dir, path.read_text(encoding="utf-8")


def _grid_titles(page: str) -> list[str]:
    """Full layer titles as a person reads them (the tooltip of each panel entry)."""
    return [html.unescape(m.group(1)) for m in RADIO.finditer(page)]


def _toggles(page: str) -> list[str]:
    return re.findall(r'<input type="checkbox" data-aqm-layer="([^"]+)"', page)


def _config_value(page: str, key: str):
    """A JSON value of the page script's config (``fit``, ``readout``)."""
    start = page.index(f",{key}:", page.index("aqmStart(map_")) + len(key) + 2
    return json.JSONDecoder().raw_decode(page, start)[0]


def _geojson_payloads(page: str) -> list[dict]:
    return [json.loads(m) for m in re.findall(r"_add\((\{.*?\})\);\n", page, re.S)]


def _decode_png(data_url: str) -> np.ndarray:
    raw = base64.b64decode(data_url.split(",", 1)[1])
    return matplotlib.image.imread(io.BytesIO(raw), format="png")


def _decode_f32(b64: str, shape: tuple[int, int]) -> np.ndarray:
    return np.frombuffer(base64.b64decode(b64), dtype="<f4").reshape(shape)


def test_map_file_is_written_atomically(tiny_run: tuple[Path, str]) -> None:
    run_dir, page = tiny_run
    assert (run_dir / outputs.MAP).is_file()
    assert page.startswith("<!DOCTYPE html>")
    # No temporary file is left beside the map.
    assert not [p for p in run_dir.iterdir() if p.name.endswith(".tmp")]


def test_every_present_grid_is_a_layer_and_missing_ones_are_not(
        tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    assert _grid_titles(page) == [
        "Total clay (aquitard) thickness (m)",
        "Chance the clay is thinner than 5 m (approximate) (%)",
        "Travel time down to the aquifer (years, log scale)",
        "Aquifer vulnerability class (AVI)",
        "Uncertainty of the clay thickness (one standard deviation) (m)",
        "Upper marine clay [UMC] thickness (m)",
        f"{EVIL_UNIT} [LMC] thickness (m)",
        "Vertical hydraulic conductivity of the column, Kv (m/s, log scale)",
        "Leakance of the column (1/s, log scale)",
        "Hydraulic resistance of the column (years, log scale)",
    ]
    # Ten grid files, the vulnerability class among them (no cover grid).
    assert len(OVERLAY.findall(page)) == 10
    assert not any("Cover" in t for t in _grid_titles(page))  # no cover grid was written
    assert _toggles(page) == ["basemap", "outline", "zones", "holes"]


def test_only_the_main_grid_is_chosen_at_start(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    checked = [m.group(2) for m in RADIO.finditer(page) if m.group(3)]
    assert checked == ["0"]
    # folium adds no overlay by itself: the page script shows the chosen one.
    overlay_vars = re.findall(r"var (image_overlay_\w+) = L\.imageOverlay", page)
    assert len(overlay_vars) == 10
    assert not [v for v in overlay_vars if re.search(rf"\b{v}\.addTo\(", page)]
    assert "aqmStart(map_" in page and 'name="aqm-grid" value="-1"' in page


def test_caution_title_and_input_hashes_are_on_the_page(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    assert html.escape(outputs.CAUTION) in page
    assert '<footer id="aqm-caution" role="note">' in page
    assert "Ostrel Valley &amp; &lt;test&gt;" in page
    assert "run 2025-03-04 08:15 UTC" in page and "aquitardmap 0.1.0" in page
    assert f'<td>collars.csv</td><td class="aqm-hash">{"ab" * 32}</td>' in page
    assert "L.control.scale({ imperial: false" in page  # a metric scale bar


def test_user_text_is_escaped_everywhere(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    # Raw markup never reaches the page, neither as HTML nor as a JSON string that a
    # script would later hand to innerHTML (\u003c is how JSON may spell "<").
    for raw in ("<img src=x onerror", "\\u003cimg src=x", "<script>alert(2)",
                "\\u003cscript\\u003ealert(2)", "<b>exposed", "\\u003cb\\u003eexposed"):
        assert raw not in page
    popups = [p["popup_html"] for p in _hole_props(page).values()]
    assert any("&lt;img src=x onerror=alert(1)&gt;" in p for p in popups)
    assert any("FILL &lt;b&gt;x&lt;/b&gt;" in p for p in popups)
    tips = [f["properties"].get("tooltip_html", "") for g in _geojson_payloads(page)
            for f in g["features"]]
    assert any("Clay absent &amp; aquifer &lt;b&gt;exposed&lt;/b&gt;" in t for t in tips)
    # Template text stays text: braces are character references, never evaluated to 49.
    assert any("Thin clay &#123;&#123; 7*7 &#125;&#125;" in t for t in tips)
    assert "Thin clay 49" not in page


def _hole_data(page: str) -> HoleData:
    """The boreholes' compact data as the page carries it (decoded as JSON)."""
    cfg = _config_value(page, "holes")
    return HoleData(cfg["rows"], cfg["cats"], cfg["units"], {})


def _hole_props(page: str) -> dict[str, dict]:
    """Per hole id: category, and the popup and tooltip built from the page's data (the
    browser builds the same text: test_webmap_browser.py compares them)."""
    data = _hole_data(page)
    return {html.unescape(r[3]): {"category": data.categories[r[2]][0],
                                  "popup_html": hole_popup_html(r, data),
                                  "tooltip_html": hole_tooltip_html(r, data)}
            for r in data.records}


def test_partial_hole_shows_a_lower_bound_not_a_thickness(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    holes = _hole_props(page)
    partial, full, evil = holes["OV-102"], holes["OV-101"], holes[EVIL_ID]
    assert "≥ 9.5 m (hole stopped in clay)" in partial["popup_html"]
    assert partial["category"] == "lower_bound" and "hole ends" in partial["popup_html"]
    assert "<b>21.2 m</b>" in full["popup_html"] and "≥" not in full["popup_html"]
    assert "yes, at 23.3 m" in full["popup_html"] and "hole ends" not in full["popup_html"]
    assert full["category"] == "full"
    assert evil["category"] == "suspicious"
    assert "collar 6 m off the DEM" in evil["popup_html"]
    assert "Not used in the estimates." in evil["popup_html"]


def test_zone_tooltip_gives_kind_area_probability_and_reason(
        tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    tips = {f["properties"]["kind"]: f["properties"]["tooltip_html"]
            for g in _geojson_payloads(page) for f in g["features"]
            if "kind" in f["properties"]}
    # 25 000 m2 = 2.5 ha; 1 250 000 m2 = 1.25 km2 (1 ha = 1e4 m2, 1 km2 = 1e6 m2: SI).
    assert tips["window"].startswith("<b>Window: clay absent (under 0.5 m)</b>")
    assert "Area: 2.5 ha" in tips["window"]
    assert "Chance the clay is thin (mean over the zone): 93 %" in tips["window"]
    assert "Area: 1.25 km²" in tips["thin"] and "Travel time to the aquifer (mean): 2.5 " \
        "years" in tips["thin"]
    assert tips["fast"].startswith("<b>Fast path: travel time under 100 years</b>")
    assert "<i>Why: Short travel time</i>" in tips["fast"]
    # A zero travel time is "under 1 day", not "0 years".
    assert "(mean): under 1 day" in tips["window"]


def test_overlay_bounds_match_pyproj(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    # Reference: PROJ via pyproj, the grid's outer edges densified along each side.
    to_lonlat = Transformer.from_crs(CRS_UTM32, CRS.from_epsg(4326), always_xy=True)
    west, south, east, north = to_lonlat.transform_bounds(X0, Y0, X0 + 1000, Y0 + 750,
                                                          densify_pts=21)
    found = OVERLAY.findall(page)
    assert found
    for _, bounds_json in found:
        (s, w), (n, e) = json.loads(bounds_json)
        # 1e-7 degrees is about 1 cm; a one-cell (50 m) slip would be ~5e-4 degrees.
        assert (s, w, n, e) == pytest.approx((south, west, north, east), abs=1e-7)


def test_overlay_is_transparent_outside_the_study_area(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    url, _ = OVERLAY.findall(page)[0]  # total thickness
    alpha = _decode_png(url)[..., 3]
    h, w = alpha.shape
    assert alpha[0, -1] == 0  # NE corner: the notch outside the study area
    assert alpha[-1, 0] == 1 and alpha[h // 2, w // 4] == 1  # SW corner and west: inside
    # 270 of the 300 cells are inside; the warped image keeps that share within 3 points.
    assert alpha.mean() == pytest.approx(270 / 300, abs=0.03)


def _legends(page: str) -> dict[str, str]:
    found = re.findall(r'<div class="aqm-legend" id="aqm-legend-\d+" hidden>'
                       r'<div class="aqm-legend-title">([^<]*)</div>(.*?)</div></div>', page, re.S)
    return {html.unescape(title): body for title, body in found}


def test_log_layer_legend_uses_decades(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    travel = _legends(page)["Travel time down to the aquifer (years, log scale)"]
    ticks = re.findall(r'<span style="left:[\d.]+%">([^<]*)</span>', travel)
    # Travel times span 10**0.225 .. 10**2.925 years (thickness / 10 m as exponent).
    assert ticks == ["10", "100"]
    assert "Values of zero are drawn in the lowest colour." in travel
    assert "Advective; uniform vertical gradient (unit gradient)." in travel


def test_probability_legend_is_in_per_cent(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    body = _legends(page)["Chance the clay is thinner than 5 m (approximate) (%)"]
    ticks = re.findall(r'<span style="left:([\d.]+)%">([^<]*)</span>', body)
    assert [label for _, label in ticks] == ["0", "25", "50", "75", "100"]
    assert [float(pos) for pos, _ in ticks] == [0.0, 25.0, 50.0, 75.0, 100.0]


def test_overlays_respect_the_cell_budget(tmp_path: Path) -> None:
    build_run_folder(tmp_path)
    page = write_map(tmp_path, max_overlay_cells=40).read_text(encoding="utf-8")
    for url, _ in OVERLAY.findall(page):
        h, w = _decode_png(url).shape[:2]
        assert 1 <= h * w <= 40


def test_missing_summary_and_grids_still_give_a_map(tmp_path: Path) -> None:
    build_run_folder(tmp_path, grids=False, summary=False)
    page = write_map(tmp_path).read_text(encoding="utf-8")
    assert _grid_titles(page) == [] and _toggles(page) == ["basemap", "zones", "holes"]
    assert "Aquitard screening map" in page and html.escape(outputs.CAUTION) in page


def test_readout_values_are_the_geotiff_cells(tiny_run: tuple[Path, str]) -> None:
    run_dir, page = tiny_run
    readout = _config_value(page, "readout")
    # Reference: rasterio reading the GeoTIFFs the pipeline wrote.
    with rasterio.open(run_dir / outputs.AQUITARD_THICKNESS) as src:
        thick = src.read(1, masked=True).filled(np.nan)
        t = src.transform
    with rasterio.open(run_dir / outputs.AQUITARD_THICKNESS_SD) as src:
        sd = src.read(1, masked=True).filled(np.nan)
    assert (readout["x0"], readout["y0"], readout["dx"], readout["dy"]) == (t.c, t.f, t.a, -t.e)
    assert (readout["ny"], readout["nx"]) == thick.shape
    items = {it["label"]: it for it in readout["items"]}
    assert list(items) == ["Total clay (aquitard) thickness",
                           "Chance the clay is thinner than 5 m (approximate)",
                           "Travel time down to the aquifer", "Aquifer vulnerability class (AVI)"]
    got = _decode_f32(items["Total clay (aquitard) thickness"]["b64"], thick.shape)
    np.testing.assert_array_equal(np.isnan(got), np.isnan(thick))
    np.testing.assert_allclose(got[~np.isnan(got)], thick[~np.isnan(thick)], rtol=1e-7)
    got_sd = _decode_f32(items["Total clay (aquitard) thickness"]["sd_b64"], sd.shape)
    np.testing.assert_allclose(got_sd[~np.isnan(sd)], sd[~np.isnan(sd)], rtol=1e-7)
    assert items["Chance the clay is thinner than 5 m (approximate)"]["percent"] is True
    assert items["Travel time down to the aquifer"]["years"] is True


def test_vulnerability_class_is_derived_at_the_published_breaks(
        tiny_run: tuple[Path, str]) -> None:
    run_dir, page = tiny_run
    readout = _config_value(page, "readout")
    item = next(it for it in readout["items"] if it["label"].startswith("Aquifer vuln"))
    with rasterio.open(run_dir / outputs.RESISTANCE) as src:
        c_yr = src.read(1, masked=True).filled(np.nan)
    got = _decode_f32(item["b64"], c_yr.shape)
    # Van Stempvoort, Ewert & Wassenaar (1993): log10(c / 1 yr) < 1, 1-2, 2-3, 3-4, >= 4
    # give classes 1 (extremely high vulnerability) to 5 (extremely low); by hand here.
    inside = np.isfinite(c_yr)
    expected = np.select([c_yr < 10, c_yr < 100, c_yr < 1000, c_yr < 10_000], [1, 2, 3, 4], 5)
    np.testing.assert_array_equal(got[inside], expected[inside])
    assert np.all(np.isnan(got[~inside]))
    # The tiny run's resistance spans 79 to 3090 years: classes 2, 3 and 4 occur.
    assert set(np.unique(got[inside])) == {2.0, 3.0, 4.0}
    assert item["classes"]["2"] == "High vulnerability (resistance 10–100 years)"


def test_p_thin_grid_is_preferred_and_unknown_grids_are_listed(tmp_path: Path) -> None:
    build_run_folder(tmp_path)
    shutil.copy(tmp_path / outputs.P_THIN, tmp_path / "p_thin.tif")
    shutil.copy(tmp_path / outputs.TRAVEL_TIME, tmp_path / "recharge_index_mm.tif")
    # the copy is a COG: editing its metadata in place is fine for this test
    with rasterio.open(tmp_path / "recharge_index_mm.tif", "r+",
                       IGNORE_COG_LAYOUT_BREAK="YES") as dst:
        dst.set_band_description(1, "recharge index")
        dst.update_tags(1, units="mm/yr")
    titles = _grid_titles(write_map(tmp_path).read_text(encoding="utf-8"))
    assert "Chance the clay is thinner than 5 m (%)" in titles
    assert not any("approximate" in t for t in titles)
    assert titles[-1] == "Recharge index (mm/yr)"  # a grid of a later stage: listed last


def test_self_contained_inlines_local_leaflet(tmp_path: Path,
                                              monkeypatch: pytest.MonkeyPatch) -> None:
    assets = tmp_path / "assets"
    (assets / "images").mkdir(parents=True)
    (assets / "leaflet.js").write_text("window.L_FAKE = 1; // </script> inside\n"
                                       "//# sourceMappingURL=leaflet.js.map\n")
    (assets / "leaflet.css").write_text(".x{background-image:url(images/layers.png)}")
    (assets / "images" / "layers.png").write_bytes(b"\x89PNG-fake")
    monkeypatch.setenv("AQUITARDMAP_WEB_ASSETS", str(assets))
    run_dir = tmp_path / "run"
    build_run_folder(run_dir)
    page = write_map(run_dir, self_contained=True).read_text(encoding="utf-8")
    assert "window.L_FAKE = 1;" in page and "<\\/script> inside" in page
    assert "sourceMappingURL" not in page
    assert base64.b64encode(b"\x89PNG-fake").decode() in page
    assert not re.search(r"<(script|link)\b[^>]*\b(src|href)=", page)
    assert "tile.openstreetmap" not in page and "L.tileLayer" not in page
    assert "basemap" not in _toggles(page)


def test_missing_local_leaflet_is_a_clear_error(tmp_path: Path) -> None:
    with pytest.raises(WebAssetsNotFound, match="libjs-leaflet"):
        find_web_assets([tmp_path])


def test_default_map_uses_basemap_tiles(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    assert "tile.openstreetmap.org" in page


def test_bad_arguments_are_refused(tmp_path: Path) -> None:
    with pytest.raises(NotADirectoryError):
        write_map(tmp_path / "nope")
    with pytest.raises(ValueError, match="max_overlay_cells"):
        write_map(tmp_path, max_overlay_cells=0)


def _poly(c: list[float], u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """The cubic the page's click handler evaluates (same term order as its script)."""
    return (c[0] + c[1] * u + c[2] * v + c[3] * u * u + c[4] * u * v + c[5] * v * v
            + c[6] * u ** 3 + c[7] * u * u * v + c[8] * u * v * v + c[9] * v ** 3)


def _check_fit(fit: dict, bounds: tuple[float, float, float, float], tol_m: float) -> None:
    west, south, east, north = bounds
    rng = np.random.default_rng(7)
    lon = rng.uniform(west, east, 200)
    lat = rng.uniform(south, north, 200)
    # Reference: PROJ via pyproj, lon/lat to UTM zone 32N.
    x, y = Transformer.from_crs(4326, CRS_UTM32, always_xy=True).transform(lon, lat)
    u, v = (lon - fit["lon0"]) / fit["su"], (lat - fit["lat0"]) / fit["sv"]
    assert np.max(np.abs(_poly(fit["cx"], u, v) - x)) < tol_m
    assert np.max(np.abs(_poly(fit["cy"], u, v) - y)) < tol_m


def test_clicked_point_shows_project_coordinates_as_pyproj_gives(
        tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    fit = _config_value(page, "fit")
    assert fit["crs"] == "EPSG:32632"
    to_lonlat = Transformer.from_crs(CRS_UTM32, 4326, always_xy=True)
    bounds = to_lonlat.transform_bounds(X0, Y0, X0 + 1000, Y0 + 750)
    _check_fit(fit, bounds, tol_m=0.01)  # 1 cm over a 1 km site


def test_coordinate_fit_holds_over_a_40_km_project() -> None:
    bounds = (8.7, 54.9, 9.35, 55.25)  # about 41 km x 39 km
    fit = lonlat_to_xy_fit(CRS_UTM32, bounds)
    assert fit is not None and fit["max_miss_m"] < 0.5
    _check_fit(fit, bounds, tol_m=0.5)
    assert lonlat_to_xy_fit(CRS.from_epsg(4326), bounds) is None  # lon/lat project: no fit


def test_self_contained_with_system_leaflet(tmp_path: Path) -> None:
    try:
        assets = find_web_assets()
    except WebAssetsNotFound:
        pytest.skip("no local Leaflet (Debian package libjs-leaflet) on this machine")
    build_run_folder(tmp_path)
    page = write_map(tmp_path, self_contained=True).read_text(encoding="utf-8")
    assert "L.imageOverlay" in page and "aqmStart(" in page
    assert assets.leaflet_js.read_text(encoding="utf-8")[:200] in page
    assert "images/layers.png" not in page and "data:image/png;base64," in page
    assert not re.search(r"<(script|link)\b[^>]*\b(src|href)=", page)


def test_empty_zone_and_borehole_layers_say_so(tmp_path: Path) -> None:
    build_run_folder(tmp_path)
    for name, layer in ((outputs.ZONES, outputs.ZONES_LAYER),
                        (outputs.BOREHOLES, outputs.BOREHOLES_LAYER)):
        empty = gpd.read_file(tmp_path / name, layer=layer).iloc[0:0]
        (tmp_path / name).unlink()
        empty.to_file(tmp_path / name, layer=layer, driver="GPKG")
    page = write_map(tmp_path).read_text(encoding="utf-8")
    assert _toggles(page)[-2:] == ["zones", "holes"]
    assert "No zones were flagged in this run" in page and "No boreholes" in page


def test_hole_through_no_clay_is_drawn_as_a_window(tmp_path: Path) -> None:
    build_run_folder(tmp_path)
    holes = gpd.read_file(tmp_path / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    holes.loc[0, ["proves_window", "aquitard_thickness_m"]] = [True, 0.0]
    (tmp_path / outputs.BOREHOLES).unlink()
    holes.to_file(tmp_path / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER, driver="GPKG")
    page = write_map(tmp_path).read_text(encoding="utf-8")
    props = _hole_props(page)["OV-101"]
    assert props["category"] == "window"
    assert "none (the hole reached the aquifer without passing through clay)" in \
        props["popup_html"]
    assert "Reached the aquifer through no clay (proves a window) (1)" in page


def test_strip_log_is_drawn_to_depth_scale() -> None:
    ivs = parse_log("0.0–2.1 SAND; 2.1–23.3 UMC; junk; 23.3–31.0 GRAV")
    assert [(i.top_m, i.bottom_m, i.unit) for i in ivs] == [
        (0.0, 2.1, "SAND"), (2.1, 23.3, "UMC"), (23.3, 31.0, "GRAV")]
    colours = unit_colours([{"code": "SAND", "role": "cover"},
                            {"code": "UMC", "role": "aquitard"},
                            {"code": "GRAV", "role": "aquifer"}])
    svg = strip_log_svg(ivs, colours, total_depth_m=31.0, reached_aquifer=True,
                        title="Log <x>", height_px=160)
    rects = re.findall(r'<rect x="34.0" y="([\d.]+)" width="26.0" height="([\d.]+)" '
                       r'fill="(#[0-9a-f]{6})"', svg)
    # 134 px of column for 31 m of hole: each interval's height is its length x 134/31.
    heights = [float(h) for _, h, _ in rects[1:]]
    assert heights == pytest.approx([2.1 * 134 / 31, 21.2 * 134 / 31, 7.7 * 134 / 31],
                                    abs=0.06)
    assert [c for _, _, c in rects[1:]] == [colours["SAND"], colours["UMC"], colours["GRAV"]]
    assert "<title>Log &lt;x&gt;</title>" in svg and "hole ends" not in svg
    stopped = strip_log_svg(ivs[:2], colours, total_depth_m=25.0, reached_aquifer=False)
    assert "hole ends" in stopped
    assert strip_log_svg([], colours, total_depth_m=5.0, reached_aquifer=False) == ""


def test_unit_colours_follow_roles() -> None:
    colours = unit_colours([{"code": "S", "role": "cover"}, {"code": "C1", "role": "aquitard"},
                            {"code": "C2", "role": "aquitard"}, {"code": "G", "role": "aquifer"},
                            {"code": "X", "role": "bedrock"}])
    assert len({colours["C1"], colours["C2"], colours["S"], colours["G"]}) == 4
    assert colours["X"] == "#bdbdbd"


def test_about_this_run_says_how_the_zones_were_drawn() -> None:
    # The decision behind the zones is on the page (thresholds, method, drift), escaped.
    from aquitardmap.outputs.webmap.page import header_html, zone_method_html

    summary = {"zones": {"basis": "probability", "p_window_threshold": 0.5,
                         "p_thin_threshold": 0.6, "window_proof_radius_m": 300.0},
               "probability": {"method": "latent <Gaussian>",
                               "external_drift": {"used": True, "reason": "used: RMSE 2.97 m"}}}
    text = zone_method_html(summary)
    assert "P(window) is at least</td><td>0.5" in text
    assert "P(thin) is at least</td><td>0.6" in text
    assert "hole proving a window, or where a mapped hazard removes clay</td><td>300<" in text
    assert "latent &lt;Gaussian&gt;" in text and "used: RMSE 2.97 m" in text
    assert "ordinary-kriged mean (without the drift)" in text
    assert "(without the drift)" not in zone_method_html(
        {"zones": {"basis": "probability"}, "probability": {"external_drift": {"used": False}}})
    assert "How the zones were drawn" in header_html(summary, "")
    assert "kriged total thickness" in zone_method_html({"zones": {"basis":
                                                                   "kriged_thickness"}})
    assert zone_method_html({}) == ""


def test_run_notes_name_the_method_the_run_used() -> None:
    # One wording (wording.probability_method_notes) for the report and the map; it
    # follows the method the summary names.
    from aquitardmap.outputs.webmap.page import zone_method_html
    from aquitardmap.outputs.wording import probability_method_notes

    zones = {"basis": "probability", "p_window_threshold": 0.5}
    indicator = {"zones": zones, "thresholds": {"window_thickness_m": 0.5,
                                                "thin_thickness_m": 5.0},
                 "probability": indicator_probability()}
    latent = {"zones": zones, "probability": latent_probability()}
    text = zone_method_html(indicator)
    for words in ("indicator kriging", "Journel 1983", "Goovaerts 1997",
                  "te Stroet &amp; Snepvangers 2005", "(ratio 3.5)", "within 175 m",
                  "within 25 m of one", "at least 90 %"):
        assert words in text, words
    assert "Gibbs" not in text
    text = zone_method_html(latent)
    assert "Gibbs sampler" in text and "window_latent_floor_m" in text
    assert "not used: RMSE 3.3 m with it" in text and "Journel" not in text
    assert [w for w, _ in probability_method_notes(latent)] == [
        "Chance of thin clay or a window", "Ground as external drift",
        "External drift in this run"]
    assert probability_method_notes({}) == []


def test_run_notes_say_how_well_the_probabilities_held_up(tmp_path: Path) -> None:
    # The block cross-validation of summary.json, compact, under "About this run".
    from aquitardmap.outputs.webmap.page import calibration_html

    build_run_folder(tmp_path)
    set_probability(tmp_path, indicator_probability())
    text = html.unescape(write_map(tmp_path).read_text(encoding="utf-8"))
    notes = text[text.index("How well the probabilities held up at the holes"):]
    notes = notes[:notes.index("</p>")]
    # Invented numbers of tests/mapdata.py, as stored (Brier scores to four decimals).
    assert ("P(window) (under 0.5 m)</td><td>120 holes scored (9 showing it), 40 blocks of "
            "300 m; Brier score 0.0123 (constant share 0.0456), skill 0.7303") in notes
    assert "Brier score 0.0789 (constant share 0.1306), skill 0.3959" in notes
    # Reliability bins: n, mean P and observed share of P(window) then P(thin); empty as –.
    assert ("<tr><td>10–30 %</td><td>11</td><td>21 %</td><td>18 %</td><td>21</td>"
            "<td>27 %</td><td>24 %</td></tr>") in notes
    assert ("<tr><td>90–100 %</td><td>0</td><td>–</td><td>–</td><td>0</td><td>–</td>"
            "<td>–</td></tr>") in notes
    assert "Block cross-validation is a pessimistic check" in notes
    assert "not a substitute for site-specific investigation" in text  # the caution bar
    # Latent Gaussian runs and older runs have no check: nothing is shown, nothing breaks.
    assert calibration_html({"probability": latent_probability()}) == ""
    assert calibration_html({"probability": {"cross_validation": {"thin": "odd"}}}) == ""
    assert calibration_html({}) == ""


def test_variogram_figures_are_linked_and_odd_names_are_not() -> None:
    # The figures sit beside map.html: plain relative links; anything that is not a plain
    # PNG file name (a path, a script URL) is left out.
    from aquitardmap.outputs.webmap.page import figure_links_html, header_html

    summary = {"figures": {"variograms": {
        "aquitard": "variogram_aquitard.png", "UMC": "variogram_UMC.png",
        "aquitard_residual": "variogram_aquitard_residual.png",
        "evil": "javascript:alert(1).png", "up": "../secret.png"}}}
    text = figure_links_html(summary)
    assert '<a href="variogram_aquitard.png" target="_blank"' in text
    assert "total aquitard thickness" in text and "UMC thickness" in text
    assert "residual from the ground drift" in text
    assert "javascript" not in text and "secret" not in text
    assert "Variograms (figures beside this map)" in header_html(summary, "")
    assert figure_links_html({}) == ""


@pytest.fixture(scope="module")
def tiered_run(tmp_path_factory: pytest.TempPathFactory) -> str:
    """Map html of the tiny run with its window and thin zones drawn in tiers."""
    run_dir = tmp_path_factory.mktemp("tiered")
    build_run_folder(run_dir, tiers=True)
    return write_map(run_dir).read_text(encoding="utf-8")


def _zone_legend_rows(page: str) -> list[tuple[str, str]]:
    """(swatch style, plain text) of each row of the zones legend."""
    body = re.search(r'<div class="aqm-legend aqm-sub" id="aqm-legend-zones">(.*?)</div>'
                     r'(?!<div class="aqm-row)', page, re.S).group(1)
    rows = re.findall(r'<div class="aqm-row"><span class="aqm-swatch" style="([^"]*)">'
                      r"</span>(.*?)(?=<div class=\"aqm-row\"|$)", body, re.S)
    return [(style, html.unescape(re.sub(r"<[^>]+>", "", text)).strip())
            for style, text in rows]


def test_map_legend_lists_each_kind_and_tier(tiered_run: str, tmp_path: Path) -> None:
    rows = _zone_legend_rows(tiered_run)
    texts = [t for _, t in rows]
    assert texts[:4] == [
        "Window: clay absent (under 0.5 m), likely (chance at least 50 %) — 1 zone, 2.5 ha",
        "Window: clay absent (under 0.5 m), possible: cannot be ruled out (chance at least "
        "15 %) — none",
        "Thin clay (under 5 m), likely (chance at least 50 %) — none",
        "Thin clay (under 5 m), possible: cannot be ruled out (chance at least 20 %) — 1 "
        "zone, 1.25 km²",
    ]
    assert texts[4].startswith("Fast path")
    # The possible tier: the same colour, a light fill and a broken outline.
    likely, possible = rows[0][0], rows[1][0]
    assert "background:#d7191c;" in likely and "dashed" not in likely
    assert "background:#d7191c33;" in possible and "border-style:dashed" in possible
    # An untiered run keeps one row per kind.
    build_run_folder(tmp_path)
    untiered = [t for _, t in _zone_legend_rows(write_map(tmp_path).read_text())]
    assert [t.split(" — ")[0] for t in untiered][:2] == ["Window: clay absent (under 0.5 m)",
                                                         "Thin clay (under 5 m)"]


def test_zone_tooltip_and_style_say_the_tier_and_the_proving_holes(tiered_run: str) -> None:
    feats = {f["properties"]["kind"]: f for g in _geojson_payloads(tiered_run)
             for f in g["features"] if "kind" in f["properties"]}
    win, thin = feats["window"]["properties"], feats["thin"]["properties"]
    assert (win["tier"], thin["tier"], feats["fast"]["properties"]["tier"]) == \
        ("likely", "possible", "")
    assert "Tier: <b>likely (chance at least 50 %)</b>" in win["tooltip_html"]
    assert ("Tier: <b>possible: cannot be ruled out (chance at least 20 %)</b> — a hole here "
            "would tell" in thin["tooltip_html"])
    assert "Chance the clay is thin (mean over the zone): 61 %, highest 80 %" in \
        thin["tooltip_html"]
    # Supporting hole ids are listed, escaped.
    assert ("in or near the zone: OV-101, &lt;img src=x onerror=alert(1)&gt;"
            in thin["tooltip_html"])
    assert "Holes proving" not in feats["fast"]["properties"]["tooltip_html"]
    # The run notes give both tiers' thresholds and the rule.
    assert "Window, possible tier (cannot be ruled out): P(window) is at least</td><td>0.15" \
        in tiered_run
    assert "Thin, possible tier (cannot be ruled out): P(thin) is at least</td><td>0.2" in \
        tiered_run
    assert "the higher tier first, then window before thin" in tiered_run
    assert "Thin area by tier</td><td>likely 0.0 ha, possible 1.25 km²" in tiered_run


@pytest.mark.parametrize("p,q", [(0.0, 0.0), (0.3, 0.0), (0.0, -0.5), (-0.2, 0.4),
                                 (1.5, 1.5)])
def test_relief_shade_of_a_plane_is_the_published_hillshade(p: float, q: float) -> None:
    """On a plane Horn's (1981) differences give the exact slope, so the shade must equal
    the hillshade formula of Burrough & McDonnell (1998): cos(zenith) cos(slope) +
    sin(zenith) sin(slope) cos(sun azimuth - aspect), the aspect being the compass
    direction the slope faces."""
    from aquitardmap.outputs.webmap.relief import hillshade_horn

    dx, dy = 25.0, 30.0
    rows, cols = np.mgrid[0:6, 0:7]
    z = p * cols * dx + q * (-rows * dy)  # row 0 is the north edge
    shade = hillshade_horn(z, dx, dy, azimuth_deg=315.0, altitude_deg=45.0)
    zenith, azimuth = np.radians(45.0), np.radians(315.0)
    slope = np.arctan(np.hypot(p, q))
    aspect = np.arctan2(-p, -q)  # downhill direction, clockwise from north
    expected = max(0.0, np.cos(zenith) * np.cos(slope)
                   + np.sin(zenith) * np.sin(slope) * np.cos(azimuth - aspect))
    assert np.all(np.isnan(shade[[0, -1], :])) and np.all(np.isnan(shade[:, [0, -1]]))
    assert shade[1:-1, 1:-1] == pytest.approx(np.full((4, 5), expected), abs=1e-12)


def test_background_setting_picks_tiles_relief_or_nothing(tmp_path: Path) -> None:
    build_run_folder(tmp_path)
    dem = tmp_path / "dem.tif"
    x = np.arange(60)
    z = np.tile(40 + 10 * np.exp(-((x - 30) / 8.0) ** 2), (50, 1)).astype("float32")
    with rasterio.open(dem, "w", driver="GTiff", width=60, height=50, count=1, dtype="float32",
                       crs="EPSG:32632",
                       transform=rasterio.Affine(20, 0, X0 - 100, 0, -20, Y0 + 850)) as dst:
        dst.write(z, 1)
    relief = write_map(tmp_path, background="relief", dem_path=dem).read_text("utf-8")
    assert "relief" in _toggles(relief) and "basemap" not in _toggles(relief)
    assert "tile.openstreetmap" not in relief
    none = write_map(tmp_path, background="none", dem_path=dem).read_text("utf-8")
    assert not {"relief", "basemap"} & set(_toggles(none))
    tiles = write_map(tmp_path, dem_path=dem).read_text("utf-8")
    assert "basemap" in _toggles(tiles) and "relief" not in _toggles(tiles)
    with pytest.raises(ValueError, match="background"):
        write_map(tmp_path, background="satellite")


def test_overlays_stay_within_the_pixel_budget() -> None:
    """A 4 M-cell grid is shown as an image of at most MAX_OVERLAY_SIDE_PX on its long
    side; class grids keep exact class codes (most frequent class of the cells)."""
    from affine import Affine

    from aquitardmap.outputs.webmap.overlays import MAX_OVERLAY_SIDE_PX, warp_for_display

    values = np.tile(np.arange(4000) % 5 + 1, (1000, 1)).astype(float)
    transform = Affine(10, 0, X0, 0, -10, Y0 + 10_000)
    shown, _ = warp_for_display(values, transform, CRS_UTM32, 4_000_000, classes=True)
    assert max(shown.shape) <= MAX_OVERLAY_SIDE_PX
    assert set(np.unique(shown[np.isfinite(shown)])) <= {1.0, 2.0, 3.0, 4.0, 5.0}
