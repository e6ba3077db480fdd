"""Tests of the planners' map (aquitardmap.webmap) on a tiny synthetic run folder.

The run folder is invented test data (a 20 x 15 grid of 50 m cells in EPSG:32632). The
map is checked against outside references: pyproj (PROJ) for where the overlays must sit,
Python's json/html modules for what a browser would decode, and the PNG decoder of
matplotlib for what the overlays hold. No browser is driven here.
"""

from __future__ import annotations

import base64
import html
import io
import json
import re
from pathlib import Path

import geopandas as gpd
import matplotlib.image
import numpy as np
import pytest
from pyproj import CRS, Transformer
from shapely.geometry import Point, Polygon, box

from aquitardmap import outputs
from aquitardmap.grid import make_grid, write_raster
from aquitardmap.webmap import (
    WebAssetsNotFound,
    _lonlat_to_xy_fit,
    find_web_assets,
    write_map,
)

CRS_UTM32 = CRS.from_epsg(32632)
X0, Y0, CELL_M = 500_000.0, 6_100_000.0, 50.0  # 20 x 15 cells
EVIL_ID = "<img src=x onerror=alert(1)>"
EVIL_UNIT = "Lower clay <script>alert(2)</script>"
TEMPLATE_TRAP = "{{ 7*7 }}"  # folium re-reads layer code as a Jinja template

OVERLAY = re.compile(
    r'L\.imageOverlay\(\s*"(data:image/png;base64,[A-Za-z0-9+/=]+)",\s*'
    r"(\[\[[^\]]*\],\s*\[[^\]]*\]\])"
)


def _study_area() -> Polygon:
    # The NE corner (a 6 x 5 cell notch) is outside the study area.
    return Polygon([(X0, Y0), (X0 + 1000, Y0), (X0 + 1000, Y0 + 500), (X0 + 700, Y0 + 500),
                    (X0 + 700, Y0 + 750), (X0, Y0 + 750)])


def build_run_folder(run_dir: Path, *, grids: bool = True, summary: bool = True) -> None:
    """Write a tiny run folder: 9 grids (no cover grid), 3 zones, 3 boreholes, summary."""
    run_dir.mkdir(parents=True, exist_ok=True)
    grid = make_grid(_study_area(), CELL_M, CRS_UTM32)
    assert (grid.width, grid.height) == (20, 15)
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs - X0, ys - Y0)
    thickness_m = 30.0 * xx / 1000.0  # 0.75 m in the west column, 29.25 m in the east
    if grids:
        travel_yr = np.where(thickness_m < 2, 0.0, 10.0 ** (thickness_m / 10.0))
        for name, values in {
            outputs.AQUITARD_THICKNESS: thickness_m,
            outputs.AQUITARD_THICKNESS_SD: 1.0 + yy / 750.0,
            outputs.unit_thickness("UMC"): 0.6 * thickness_m,
            outputs.unit_thickness("LMC"): 0.4 * thickness_m,
            outputs.KV: np.full_like(xx, 3e-10),
            outputs.LEAKANCE: 3e-10 / np.maximum(thickness_m, 0.5),
            outputs.RESISTANCE: np.maximum(thickness_m, 0.5) / 3e-10 / 3.156e7,
            outputs.TRAVEL_TIME: travel_yr,
            outputs.P_THIN: np.clip(1.0 - thickness_m / 10.0, 0.0, 1.0),
        }.items():
            write_raster(run_dir / name, values, grid)
    zones = gpd.GeoDataFrame(
        {
            "kind": ["window", "thin", "fast"],
            "area_m2": [25_000.0, 1_250_000.0, 7_500.0],
            "reason": ["Clay absent & aquifer <b>exposed</b>", f"Thin clay {TEMPLATE_TRAP}",
                       "Short travel time"],
            "mean_thickness_m": [0.4, 3.2, 6.0],
            "min_thickness_m": [0.0, 2.0, 5.5],
            "mean_sd_m": [1.1, 1.4, 2.0],
            "mean_p_thin": [0.93, 0.61, 0.2],
            "n_boreholes": [1, 0, 0],
        },
        geometry=[box(X0, Y0, X0 + 100, Y0 + 250), box(X0 + 100, Y0, X0 + 300, Y0 + 750),
                  box(X0 + 300, Y0, X0 + 350, Y0 + 150)],
        crs=CRS_UTM32,
    )
    zones.to_file(run_dir / outputs.ZONES, layer=outputs.ZONES_LAYER, driver="GPKG")
    holes = gpd.GeoDataFrame(
        {
            "borehole_id": ["OV-101", "OV-102", EVIL_ID],
            "ground_elev_m": [42.0, 40.5, 39.0],
            "total_depth_m": [31.0, 12.0, 8.0],
            "reached_aquifer": [True, False, False],
            "bottom_unit": ["GRAV", "UMC", "UMC"],
            "aquitard_thickness_m": [21.2, 9.5, 5.0],
            "status_aquitard": ["full", "lower_bound", "lower_bound"],
            "proves_window": [False, False, False],
            "qa_flags": ["", "", "collar 6 m off the DEM"],
            "excluded": [False, False, True],
            "log": ["0.0–2.1 SAND; 2.1–23.3 UMC; 23.3–31.0 GRAV", "0.0–2.5 SAND; 2.5–12.0 UMC",
                    "0.0–3.0 FILL <b>x</b>; 3.0–8.0 UMC"],
            "dem_misfit_m": [0.3, -0.8, 6.1],
        },
        geometry=[Point(X0 + 725, Y0 + 125), Point(X0 + 325, Y0 + 425),
                  Point(X0 + 60, Y0 + 60)],
        crs=CRS_UTM32,
    )
    holes.to_file(run_dir / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER, driver="GPKG")
    if summary:
        (run_dir / outputs.SUMMARY).write_text(json.dumps({
            "project": {"name": "Ostrel Valley & <test>", "crs": "EPSG:32632"},
            "run": {"started_utc": "2025-03-04T08:15:00Z", "package_version": "0.1.0"},
            "units": [{"code": "UMC", "name": "Upper marine clay", "role": "aquitard"},
                      {"code": "LMC", "name": EVIL_UNIT, "role": "aquitard"}],
            "thresholds": {"window_thickness_m": 0.5, "thin_thickness_m": 5.0,
                           "fast_travel_time_yr": 100.0},
            "caution": outputs.CAUTION,
        }), encoding="utf-8")


@pytest.fixture(scope="module")
def tiny_run(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, str]:
    """(run folder, map html) for the tiny synthetic run, written once per module."""
    run_dir = tmp_path_factory.mktemp("run")
    build_run_folder(run_dir)
    path = write_map(run_dir)
    return run_dir, path.read_text(encoding="utf-8")


def _overlay_names(page: str) -> list[str]:
    """Overlay names as a person reads them in the layer control.

    Leaflet puts each name into the page as HTML, so the text shown is the JSON-decoded
    name with HTML character references resolved (html.unescape).
    """
    block = re.search(r"overlays\s*:\s*\{(.*?)\}", page, re.S).group(1)
    keys = re.findall(r'("(?:[^"\\]|\\.)*")\s*:', block)
    return [html.unescape(json.loads(k)) for k in keys]


def _geojson_payloads(page: str) -> list[dict]:
    return [json.loads(m) for m in re.findall(r"_add\((\{.*?\})\);\n", page, re.S)]


def _decode_png(data_url: str) -> np.ndarray:
    raw = base64.b64decode(data_url.split(",", 1)[1])
    return matplotlib.image.imread(io.BytesIO(raw), format="png")


def test_map_file_is_written_atomically(tiny_run: tuple[Path, str]) -> None:
    run_dir, page = tiny_run
    assert (run_dir / outputs.MAP).is_file()
    assert page.startswith("<!DOCTYPE html>")
    # No temporary file is left beside the map.
    assert not [p for p in run_dir.iterdir() if p.name.endswith(".tmp")]


def test_every_present_grid_is_a_layer_and_missing_ones_are_not(
        tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    names = _overlay_names(page)
    expected = [
        "Total aquitard thickness (m)",
        "Aquitard thickness uncertainty, one standard deviation (m)",
        "Probability the clay is thinner than 5 m (approximate, 0–1)",
        "Thickness of Upper marine clay [UMC] (m)",
        f"Thickness of {EVIL_UNIT} [LMC] (m)",
        "Vertical hydraulic conductivity of the aquitard, Kv (m/s, log scale)",
        "Leakance (1/s, log scale)",
        "Hydraulic resistance of the aquitard (years, log scale)",
        "Travel time, advective, unit gradient (years, log scale)",
    ]
    assert names[: len(expected)] == expected
    assert names[len(expected):] == ["Flagged zones (window, thin, fast)", "Boreholes"]
    assert len(OVERLAY.findall(page)) == 9  # nine grid files were written
    assert not any("Cover" in n for n in names)  # cover_thickness_m.tif is absent


def test_only_the_main_grid_is_shown_at_start(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    overlay_vars = re.findall(r"var (image_overlay_\w+) = L\.imageOverlay", page)
    added = [v for v in overlay_vars if re.search(rf"\b{v}\.addTo\(", page)]
    assert added == overlay_vars[:1]


def test_caution_and_title_are_on_the_page(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    assert html.escape(outputs.CAUTION) in page
    assert 'id="aqm-caution"' in page and "position: fixed" in page
    assert "Ostrel Valley &amp; &lt;test&gt;" in page
    assert "Run 2025-03-04 08:15 UTC" in page and "aquitardmap 0.1.0" in page
    assert "L.control.scale()" in page


def test_user_text_is_escaped_everywhere(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    # Raw markup never reaches the page, neither as HTML nor as a JSON string that a
    # script would later hand to innerHTML (\u003c is how JSON may spell "<").
    for raw in ("<img src=x onerror", "\\u003cimg src=x", "<script>alert(2)",
                "\\u003cscript\\u003ealert(2)", "<b>exposed", "\\u003cb\\u003eexposed"):
        assert raw not in page
    popups = [f["properties"].get("popup_html", "") for g in _geojson_payloads(page)
              for f in g["features"]]
    assert any("&lt;img src=x onerror=alert(1)&gt;" in p for p in popups)
    assert any("FILL &lt;b&gt;x&lt;/b&gt;" in p for p in popups)
    tips = [f["properties"].get("tooltip_html", "") for g in _geojson_payloads(page)
            for f in g["features"]]
    assert any("Clay absent &amp; aquifer &lt;b&gt;exposed&lt;/b&gt;" in t for t in tips)
    # Template text stays text: braces are character references, never evaluated to 49.
    assert any("Thin clay &#123;&#123; 7*7 &#125;&#125;" in t for t in tips)
    assert "Thin clay 49" not in page


def test_partial_hole_shows_a_lower_bound_not_a_thickness(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    features = {f["properties"]["popup_html"].split("</div>")[0]: f["properties"]
                for g in _geojson_payloads(page) for f in g["features"]
                if "popup_html" in f["properties"]}
    partial = next(p for k, p in features.items() if "OV-102" in k)
    full = next(p for k, p in features.items() if "OV-101" in k)
    evil = next(p for k, p in features.items() if "&lt;img" in k)
    assert "≥ 9.5 m (hole stopped in clay)" in partial["popup_html"]
    assert partial["category"] == "lower_bound"
    assert "21.2 m" in full["popup_html"] and "≥" not in full["popup_html"]
    assert full["category"] == "full"
    assert evil["category"] == "flagged" and "collar 6 m off the DEM" in evil["popup_html"]


def test_zone_tooltip_gives_area_probability_and_reason(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    tips = [f["properties"]["tooltip_html"] for g in _geojson_payloads(page)
            for f in g["features"] if "kind" in f["properties"]]
    # 25 000 m2 = 2.5 ha; 1 250 000 m2 = 1.25 km2 (1 ha = 1e4 m2, 1 km2 = 1e6 m2: SI).
    assert "Area: 2.5 ha" in tips[0] and "Mean P(thin) (approx.): 0.93" in tips[0]
    assert tips[0].startswith("<b>Window: clay absent (under 0.5 m)</b>")
    assert "Area: 1.25 km²" in tips[1]
    assert "Fast path: travel time under 100 years" in tips[2]


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


def test_log_layer_legend_uses_decades(tiny_run: tuple[Path, str]) -> None:
    _, page = tiny_run
    legends = re.findall(r'<div class="aqm-legend" id="aqm-legend-\d+">(.*?)</div></div>',
                         page, re.S)
    travel = next(lg for lg in legends if lg.startswith(
        '<div class="aqm-legend-title">Travel time, advective, unit gradient'))
    ticks = re.findall(r'<span style="left:[\d.]+%">([^<]*)</span>', travel)
    # Travel times span 10**0.225 .. 10**2.925 years (thickness / 10 m as exponent).
    assert ticks == ["10", "100"]
    assert "Values of zero are drawn in the lowest colour." in travel


def test_overlays_respect_the_cell_budget(tmp_path: Path) -> None:
    build_run_folder(tmp_path)
    page = write_map(tmp_path, max_overlay_cells=40).read_text(encoding="utf-8")
    for url, _ in OVERLAY.findall(page):
        h, w = _decode_png(url).shape[:2]
        assert 1 <= h * w <= 40


def test_missing_summary_and_grids_still_give_a_map(tmp_path: Path) -> None:
    build_run_folder(tmp_path, grids=False, summary=False)
    page = write_map(tmp_path).read_text(encoding="utf-8")
    assert _overlay_names(page) == ["Flagged zones (window, thin, fast)", "Boreholes"]
    assert "Aquitard screening map" in page and html.escape(outputs.CAUTION) in page


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
    fit = json.loads(re.search(r"var fit = (\{.*?\});", page).group(1))
    assert fit["crs"] == "EPSG:32632"
    to_lonlat = Transformer.from_crs(CRS_UTM32, 4326, always_xy=True)
    bounds = to_lonlat.transform_bounds(X0, Y0, X0 + 1000, Y0 + 750)
    _check_fit(fit, bounds, tol_m=0.01)  # 1 cm over a 1 km site


def test_coordinate_fit_holds_over_a_40_km_project() -> None:
    bounds = (8.7, 54.9, 9.35, 55.25)  # about 41 km x 39 km
    fit = _lonlat_to_xy_fit(CRS_UTM32, bounds)
    assert fit is not None and fit["max_miss_m"] < 0.5
    _check_fit(fit, bounds, tol_m=0.5)
    assert _lonlat_to_xy_fit(CRS.from_epsg(4326), bounds) is None  # lon/lat project: no fit


def test_self_contained_with_system_leaflet(tmp_path: Path) -> None:
    try:
        assets = find_web_assets()
    except WebAssetsNotFound:
        pytest.skip("no local Leaflet (Debian package libjs-leaflet) on this machine")
    build_run_folder(tmp_path)
    page = write_map(tmp_path, self_contained=True).read_text(encoding="utf-8")
    assert "L.imageOverlay" in page and "L.control.layers" in page
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
    assert _overlay_names(page)[-2:] == ["Flagged zones (window, thin, fast)", "Boreholes"]
    assert "No zones were flagged in this run" in page and "No boreholes" in page


def test_hole_through_no_clay_is_drawn_as_a_window(tmp_path: Path) -> None:
    build_run_folder(tmp_path)
    holes = gpd.read_file(tmp_path / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    holes.loc[0, ["proves_window", "aquitard_thickness_m"]] = [True, 0.0]
    (tmp_path / outputs.BOREHOLES).unlink()
    holes.to_file(tmp_path / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER, driver="GPKG")
    page = write_map(tmp_path).read_text(encoding="utf-8")
    props = [f["properties"] for g in _geojson_payloads(page) for f in g["features"]
             if "OV-101" in f["properties"].get("popup_html", "")]
    assert [p["category"] for p in props] == ["window"]
    assert "none (the hole reached the aquifer without passing through clay)" in \
        props[0]["popup_html"]
    assert "Reached the aquifer through no clay (proves a window) (1)" in page
