"""A tiny invented run folder for the map and report tests (not a test module).

A 20 x 15 grid of 50 m cells in EPSG:32632 whose NE corner (6 x 5 cells) lies outside the
study area; total clay thickness rises linearly from 0.75 m in the west column to
29.25 m in the east; 3 zones; 3 boreholes, one of them with a hostile id.
"""

from __future__ import annotations

import json
from pathlib import Path

import geopandas as gpd
import numpy as np
from pyproj import CRS
from shapely.geometry import Point, Polygon, box

from aquitardmap.grid import make_grid, write_raster
from aquitardmap.hydraulics.column import avi_class
from aquitardmap.outputs import names as outputs

CRS_UTM32 = CRS.from_epsg(32632)
X0, Y0, CELL_M = 500_000.0, 6_100_000.0, 50.0  # 20 x 15 cells
EVIL_ID = "<img src=x onerror=alert(1)>"
EVIL_UNIT = "Lower clay <script>alert(2)</script>"
TEMPLATE_TRAP = "{{ 7*7 }}"  # folium re-reads layer code as a Jinja template
KV_M_S = 3e-10
SECONDS_PER_YEAR = 3.15576e7  # Julian year (365.25 d x 86 400 s)

#: The boreholes: id -> (x, y) in EPSG:32632.
HOLE_XY = {"OV-101": (X0 + 725, Y0 + 125), "OV-102": (X0 + 325, Y0 + 425),
           EVIL_ID: (X0 + 60, Y0 + 60)}


def study_area() -> Polygon:
    # The NE corner (a 6 x 5 cell notch) is outside the study area.
    return Polygon([(X0, Y0), (X0 + 1000, Y0), (X0 + 1000, Y0 + 500), (X0 + 700, Y0 + 500),
                    (X0 + 700, Y0 + 750), (X0, Y0 + 750)])


def thickness_at(x: float) -> float:
    """Total clay thickness (m) of the cell whose centre has easting ``x``."""
    return 30.0 * (x - X0) / 1000.0


def build_run_folder(run_dir: Path, *, grids: bool = True, summary: bool = True,
                     tiers: bool = False) -> None:
    """Write a tiny run folder: 10 grids (no cover grid), 3 zones, 3 boreholes, summary.

    With ``tiers`` the zones are drawn in tiers, as a probability run writes them: the
    window zone likely, the thin zone possible (with supporting holes, one a hostile id),
    and the summary says so (likely 0.5 / 0.5, possible 0.15 / 0.2)."""
    run_dir.mkdir(parents=True, exist_ok=True)
    grid = make_grid(study_area(), CELL_M, CRS_UTM32)
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
            outputs.KV: np.full_like(xx, KV_M_S),
            outputs.LEAKANCE: KV_M_S / np.maximum(thickness_m, 0.5),
            outputs.RESISTANCE: np.maximum(thickness_m, 0.5) / KV_M_S / SECONDS_PER_YEAR,
            outputs.TRAVEL_TIME: travel_yr,
            outputs.P_THIN: np.clip(1.0 - thickness_m / 10.0, 0.0, 1.0),
        }.items():
            write_raster(run_dir / name, values, grid)
        # the vulnerability class grid, as the hydraulics stage writes it beside the
        # resistance (integers, 0 = no data)
        resistance_yr = np.maximum(thickness_m, 0.5) / KV_M_S / SECONDS_PER_YEAR
        write_raster(run_dir / outputs.AVI_CLASS, avi_class(resistance_yr), grid,
                     dtype="uint8", nodata=0)
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
            "mean_travel_time_yr": [0.0, 2.5, 30.0],
            "n_boreholes": [1, 0, 0],
        },
        geometry=[box(X0, Y0, X0 + 100, Y0 + 250), box(X0 + 100, Y0, X0 + 300, Y0 + 750),
                  box(X0 + 300, Y0, X0 + 350, Y0 + 150)],
        crs=CRS_UTM32,
    )
    if tiers:
        zones["tier"] = ["likely", "possible", ""]
        zones["probability"] = [0.8, 0.61, np.nan]  # thin: its mean_p_thin
        zones["max_probability"] = [0.97, 0.8, np.nan]
        zones["p_threshold"] = [0.5, 0.2, np.nan]
        zones["supporting_holes"] = ["OV-101", f"OV-101,{EVIL_ID}", ""]
        zones["n_supporting_holes"] = [1, 2, 0]
    zones.to_file(run_dir / outputs.ZONES, layer=outputs.ZONES_LAYER, driver="GPKG")
    holes = gpd.GeoDataFrame(
        {
            "borehole_id": list(HOLE_XY),
            "ground_elev_m": [42.0, 40.5, 39.0],
            "total_depth_m": [31.0, 12.0, 8.0],
            "reached_aquifer": [True, False, False],
            "bottom_unit": ["GRAV", "UMC", "UMC"],
            "aquitard_thickness_m": [21.2, 9.5, 5.0],
            "status_aquitard": ["full", "lower_bound", "lower_bound"],
            "depth_to_aquifer_m": [23.3, np.nan, np.nan],
            "proves_window": [False, False, False],
            "proves_thin": [False, False, False],
            "qa_flags": ["", "", "collar 6 m off the DEM"],
            "excluded": [False, False, True],
            "log": ["0.0–2.1 SAND; 2.1–23.3 UMC; 23.3–31.0 GRAV", "0.0–2.5 SAND; 2.5–12.0 UMC",
                    "0.0–3.0 FILL <b>x</b>; 3.0–8.0 UMC"],
            "dem_misfit_m": [0.3, -0.8, 6.1],
        },
        geometry=[Point(*xy) for xy in HOLE_XY.values()],
        crs=CRS_UTM32,
    )
    holes.to_file(run_dir / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER, driver="GPKG")
    if summary:
        (run_dir / outputs.SUMMARY).write_text(json.dumps({
            "project": {"name": "Ostrel Valley & <test>", "crs": "EPSG:32632"},
            "run": {"started_utc": "2025-03-04T08:15:00Z", "package_version": "0.1.0"},
            "inputs": {"collars.csv": {"sha256": "ab" * 32},
                       "intervals.csv": {"sha256": "cd" * 32}},
            "units": [{"code": "SAND", "name": "Surficial sand", "role": "cover"},
                      {"code": "UMC", "name": "Upper marine clay", "role": "aquitard"},
                      {"code": "LMC", "name": EVIL_UNIT, "role": "aquitard"},
                      {"code": "GRAV", "name": "Gravel aquifer", "role": "aquifer"}],
            "thresholds": {"window_thickness_m": 0.5, "thin_thickness_m": 5.0,
                           "fast_travel_time_yr": 100.0},
            "hydraulics": {"gradient_assumption": "uniform vertical gradient (unit gradient)"},
            "caution": outputs.CAUTION,
            **({"zones": {"basis": "probability", "tiers": ["likely", "possible"],
                          "p_window_threshold": 0.5, "p_thin_threshold": 0.5,
                          "p_window_possible_threshold": 0.15,
                          "p_thin_possible_threshold": 0.2, "window_proof_radius_m": 300.0,
                          "area_m2_by_kind": {"window": 25_000.0, "thin": 1_250_000.0,
                                              "fast": 7_500.0, "pierced": 0.0},
                          "count_by_kind": {"window": 1, "thin": 1, "fast": 1, "pierced": 0},
                          "area_m2_by_kind_and_tier": {
                              "window": {"likely": 25_000.0, "possible": 0.0},
                              "thin": {"likely": 0.0, "possible": 1_250_000.0}},
                          "count_by_kind_and_tier": {"window": {"likely": 1, "possible": 0},
                                                     "thin": {"likely": 0, "possible": 1}}}}
               if tiers else {}),
        }), encoding="utf-8")


def _bins(rows: list[tuple[int, float | None, float | None]]) -> list[dict]:
    edges = (0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0)
    return [{"p_from": lo, "p_to": hi, "n": n, "mean_p": mp, "observed": ob}
            for lo, hi, (n, mp, ob) in zip(edges[:-1], edges[1:], rows, strict=True)]


def indicator_probability() -> dict:
    """An invented ``probability`` section as an indicator run writes it (method name from
    :mod:`aquitardmap.geostat.indicator`), with a block cross-validation of both events."""
    from aquitardmap.geostat.indicator import METHOD

    cutoff = {"n_left_out_lower_bounds": 0, "variogram_source": "fitted",
              "variogram": {"model": "exponential", "nugget": 0.01, "psill": 0.1,
                            "range_m": 1234.0, "anisotropy_ratio": 1.0,
                            "anisotropy_angle_deg": 0.0}}
    return {
        "method": METHOD, "continuity_ratio": 3.5, "chain_corridor_m": 175.0,
        "location_sd_m": 25.0, "hard_data_floor": 0.9,
        "cutoffs": [{**cutoff, "threshold_m": 0.5, "n_data": 120, "n_event": 9,
                     "n_continuity_segments": 7},
                    {**cutoff, "threshold_m": 5.0, "n_data": 110, "n_event": 17,
                     "n_continuity_segments": 11},
                    {**cutoff, "threshold_m": 40.0, "n_data": 100, "n_event": 100,
                     "n_continuity_segments": 30, "variogram_source": "default"}],
        "external_drift": {"used": False},
        "cross_validation": {
            "window": {"threshold_m": 0.5, "block_m": 300.0, "n_blocks": 40, "n_holes": 120,
                       "n_event": 9, "mean_p": 0.08, "brier": 0.0123,
                       "brier_reference": 0.0456, "brier_skill_score": 0.7303,
                       "reliability": _bins([(100, 0.004, 0.0), (11, 0.21, 0.1818),
                                             (4, 0.41, 0.5), (3, 0.62, 0.6667),
                                             (2, 0.83, 1.0), (0, None, None)])},
            "thin": {"threshold_m": 5.0, "block_m": 300.0, "n_blocks": 40, "n_holes": 110,
                     "n_event": 17, "mean_p": 0.15, "brier": 0.0789,
                     "brier_reference": 0.1306, "brier_skill_score": 0.3959,
                     "reliability": _bins([(70, 0.03, 0.0286), (21, 0.27, 0.2381),
                                           (9, 0.44, 0.3333), (6, 0.58, 0.6667),
                                           (4, 0.77, 0.75), (0, None, None)])}},
        "notes": []}


def latent_probability() -> dict:
    """An invented ``probability`` section as a latent Gaussian run writes it (method name
    from :mod:`aquitardmap.geostat.probability`): no cross-validation at the holes."""
    from aquitardmap.geostat.probability import METHOD

    return {"method": METHOD, "n_full_positive": 1, "n_proving_absence": 1,
            "n_lower_bounds": 1, "window_latent_floor_m": 3.0, "n_draws": 64,
            "gibbs_sweeps": 40, "seed": 1, "variance_scale": 1.0,
            "external_drift": {"used": False, "reason": "not used: RMSE 3.3 m with it, "
                               "3.1 m without"}, "notes": []}


def set_probability(run_dir: Path, probability: dict | None) -> None:
    """Put ``probability`` in the run folder's summary.json (None: take the section out)."""
    path = run_dir / outputs.SUMMARY
    summary = json.loads(path.read_text(encoding="utf-8"))
    summary.pop("probability", None)
    if probability is not None:
        summary["probability"] = probability
    path.write_text(json.dumps(summary), encoding="utf-8")


#: Categories of the large run folder's holes: (status, reached, proves_window, proves_thin).
_LARGE_KINDS = (("full", True, False, False), ("full", True, False, True),
                ("full", True, True, False), ("lower_bound", False, False, False),
                ("unknown", False, False, False))


def build_large_run_folder(run_dir: Path, *, n_holes: int = 20_000, cells: int = 2_000,
                           cell_m: float = 20.0, seed: int = 3) -> None:
    """A regional run folder: ``cells`` x ``cells`` grids (4 M cells by default) of a
    smooth invented thickness, 20,000 invented holes with logs and ~300 square zones;
    no summary (the map reads what is there)."""
    import rasterio
    from affine import Affine
    from rasterio.crs import CRS as RioCRS

    run_dir.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    transform = Affine(cell_m, 0, X0, 0, -cell_m, Y0 + cells * cell_m)
    t = np.linspace(0, 6 * np.pi, cells, dtype=np.float32)
    thickness = (12 + 8 * np.sin(t)[None, :] * np.cos(0.7 * t)[:, None]).astype(np.float32)
    profile = {"driver": "GTiff", "width": cells, "height": cells, "count": 1,
               "dtype": "float32", "crs": RioCRS.from_epsg(32632), "transform": transform,
               "nodata": np.nan, "tiled": True, "compress": "deflate"}
    for name, values in {outputs.AQUITARD_THICKNESS: thickness,
                         outputs.AQUITARD_THICKNESS_SD: 1 + thickness / 10,
                         outputs.P_THIN: np.clip(1 - thickness / 10, 0, 1)}.items():
        with rasterio.open(run_dir / name, "w", **profile) as dst:
            dst.write(values, 1)
    side = cells * cell_m
    xy = rng.uniform(0, side, (n_holes, 2)) + (X0, Y0)
    kinds = rng.choice(len(_LARGE_KINDS), n_holes, p=(0.6, 0.03, 0.02, 0.25, 0.1))
    top = np.round(rng.uniform(1, 6, n_holes), 1)
    clay = np.round(rng.uniform(0.5, 30, n_holes), 1)
    rows = {k: [] for k in ("borehole_id", "ground_elev_m", "total_depth_m",
                            "reached_aquifer", "aquitard_thickness_m", "status_aquitard",
                            "depth_to_aquifer_m", "proves_window", "proves_thin", "qa_flags",
                            "excluded", "log", "dem_misfit_m")}
    for i in range(n_holes):
        status, reached, window, thin = _LARGE_KINDS[kinds[i]]
        c = 0.0 if window else clay[i]
        bottom = top[i] + c
        depth = round(bottom + (3.0 if reached else -min(c, 2.0) / 2), 1)
        log = f"0.0–{top[i]:g} SAND" + (f"; {top[i]:g}–{bottom:.1f} UMC" if c else "") + \
            (f"; {bottom:.1f}–{depth:g} GRAV" if reached else "")
        for key, value in zip(rows, (f"RG-{i:05d}", round(float(rng.uniform(20, 60)), 1),
                                     depth, reached, c, status,
                                     bottom if reached else np.nan, window, thin, "", False,
                                     log, round(float(rng.normal(0, 0.5)), 2)), strict=True):
            rows[key].append(value)
    gpd.GeoDataFrame(rows, geometry=gpd.points_from_xy(xy[:, 0], xy[:, 1]),
                     crs=CRS_UTM32).to_file(run_dir / outputs.BOREHOLES,
                                            layer=outputs.BOREHOLES_LAYER, driver="GPKG")
    centres = rng.uniform(0, side - 400, (300, 2)) + (X0, Y0)
    zones = gpd.GeoDataFrame(
        {"kind": rng.choice(["window", "thin", "fast"], 300), "area_m2": 160_000.0,
         "reason": "invented", "mean_thickness_m": 2.0, "min_thickness_m": 0.5,
         "mean_sd_m": 1.0, "mean_p_thin": 0.7, "n_boreholes": 1},
        geometry=[box(x, y, x + 400, y + 400) for x, y in centres], crs=CRS_UTM32)
    zones.to_file(run_dir / outputs.ZONES, layer=outputs.ZONES_LAYER, driver="GPKG")
