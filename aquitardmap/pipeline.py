"""The whole screening run, stage by stage: logs → surfaces → hydraulics → zones → outputs.

Each stage is a public function a notebook can call in turn; :func:`run` calls them in
order and writes every output into a temporary folder that replaces ``out_dir`` only when
all of it is written, so a failed or interrupted run never leaves a half-written result and
never damages the previous one.
"""

from __future__ import annotations

import platform
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import rasterio
import shapely
from pyproj import CRS, Transformer
from shapely.geometry import MultiPoint
from shapely.ops import unary_union

from aquitardmap._version import __version__
from aquitardmap.config.project import PROJECT_FILE, Project, read_project, setting_location
from aquitardmap.config.settings import ComputeSettings, ScreeningThresholds
from aquitardmap.errors import InputError, Problem, ProblemList
from aquitardmap.files import file_sha256
from aquitardmap.geostat.cache import tiles as tilecache
from aquitardmap.geostat.cache import variograms as variogramreuse
from aquitardmap.geostat.compute import compute_session, describe
from aquitardmap.geostat.context import DEFAULT_CONTEXT, KrigingContext
from aquitardmap.geostat.drift import RESIDUAL_NAME, choose_drift
from aquitardmap.geostat.indicator import (
    IndicatorSettings,
    cross_validate,
    thickness_probabilities_by_indicator,
)
from aquitardmap.geostat.probability import (
    ThicknessProbabilities,
    cv_variance_scale,
    thickness_probabilities,
)
from aquitardmap.geostat.surfaces import CV_COLUMNS, Surface, krige_column, surface_summary
from aquitardmap.grid import Grid, make_grid, resample_to_grid, snapped_bounds, write_raster
from aquitardmap.hydraulics.column import (
    AVI_CLASSES,
    SECONDS_PER_YEAR,
    advective_travel_time_yr,
    avi_class,
    avi_legend,
    crossing_time_yr,
    crust_thickness_m,
    diffusion_time_yr,
    downward_travel_time_yr,
    equivalent_kv_m_s,
    gradient_from_heads,
    leakance_per_s,
    peclet_number,
    remove_from_top_m,
    series_flux_m_s,
    series_resistance_s,
)
from aquitardmap.hydraulics.conductivity import lab_k_magnitude_warnings, unit_conductivity
from aquitardmap.hydraulics.heads import HEAD_KEYS, HeadSurface, read_head_surface
from aquitardmap.hydraulics.piercing import piercing_mask, piercing_table, point_density_per_km2
from aquitardmap.inputs.hazards import (
    annotate_zones,
    hazard_table,
    read_hazards,
    removed_depth_grid_m,
)
from aquitardmap.inputs.logs import Boreholes, column_table
from aquitardmap.inputs.store import has_store, project_boreholes
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.figures import variogram_figure
from aquitardmap.outputs.presentation import avi_classes
from aquitardmap.outputs.report import write_report
from aquitardmap.outputs.staging import staged_output_dir, tidy_output_dir  # noqa: F401
from aquitardmap.outputs.summary import write_summary
from aquitardmap.outputs.webmap.assets import find_web_assets
from aquitardmap.outputs.webmap.build import write_map
from aquitardmap.outputs.webmap.qml import write_qml_sidecars
from aquitardmap.screening.suspicious import suspicious_columns, suspicious_list
from aquitardmap.screening.zones import (
    ZONE_KINDS,
    ZONE_TIERS,
    probability_below,
    window_proof_cells,
    zone_areas_m2,
    zone_tier_areas_m2,
    zone_tier_counts,
    zones_from_grids,
)

#: Called with (stage description, stage number from 1, number of stages).
ProgressFn = Callable[[str, int, int], None]

STAGES = (
    "Reading and checking inputs",
    "Kriging unit thicknesses",
    "Computing conductivity and hydraulics",
    "Drawing flagged zones",
    "Writing outputs and map",
)


@dataclass
class Inputs:
    """Everything read from a project folder, validated, plus the grid it defines."""

    project: Project
    boreholes: Boreholes
    columns: pd.DataFrame
    area: object
    grid: Grid
    warnings: list[Problem] = field(default_factory=list)
    hazards: gpd.GeoDataFrame | None = None
    heads: dict[str, HeadSurface] = field(default_factory=dict)


@dataclass
class Hydraulics:
    """Per-unit conductivity and the per-cell hydraulic grids."""

    unit_k: pd.DataFrame
    column_thickness_m: dict[str, np.ndarray]
    resistance_yr: np.ndarray
    kv_m_s: np.ndarray
    leakance_per_s: np.ndarray
    travel_time_yr: np.ndarray
    avi_class: np.ndarray | None = None
    diffusion_time_yr: np.ndarray | None = None
    peclet_number: np.ndarray | None = None
    vertical_gradient: np.ndarray | None = None
    gradient_source: str = "stated"
    crust_m: np.ndarray | None = None
    protective_thickness_m: np.ndarray | None = None
    hazard_removed_m: np.ndarray | None = None
    hazard_index: np.ndarray | None = None
    hazard_removed_aquitard_m: np.ndarray | None = None
    hazards: list[dict] = field(default_factory=list)
    piercing_density_per_km2: np.ndarray | None = None
    piercing: pd.DataFrame | None = None


@dataclass
class RunResult:
    """What a run produced (in memory) and where it wrote it."""

    out_dir: Path | None
    inputs: Inputs
    surfaces: dict[str, Surface]
    hydraulics: Hydraulics
    p_thin: np.ndarray
    zones: gpd.GeoDataFrame
    boreholes: gpd.GeoDataFrame
    summary: dict
    probabilities: ThicknessProbabilities | None = None


def same_crs(a, b) -> bool:
    """True when two CRSs (pyproj, rasterio or text) are the same: equal, or carrying the same
    EPSG code (GDAL's and pyproj's copies of the EPSG database can name a datum
    differently, so that ``equals`` is false for one and the same CRS)."""
    ca, cb = CRS.from_user_input(a), CRS.from_user_input(b)
    if ca.equals(cb, ignore_axis_order=True):
        return True
    code_a, code_b = crs_code(ca), crs_code(cb)
    return code_a is not None and code_a == code_b


def crs_code(crs) -> str | None:
    """``"AUTHORITY:CODE"`` the CRS declares (e.g. ``"EPSG:3067"``), else the EPSG code pyproj
    finds for it, else None."""
    c = CRS.from_user_input(crs)
    ident = c.to_json_dict().get("id")
    if isinstance(ident, dict) and "authority" in ident and "code" in ident:
        return f"{ident['authority']}:{ident['code']}"
    epsg = c.to_epsg()
    return f"EPSG:{epsg}" if epsg is not None else None


def _read_area(project: Project, columns: pd.DataFrame, problems: ProblemList,
               notes: list[Problem]):
    """Study-area polygon in the project CRS: the boundary file, else the collars' convex
    hull buffered by ``buffer_m``."""
    path = project.file("boundary")
    if path is None:
        hull = MultiPoint(list(zip(columns["x"], columns["y"], strict=True))).convex_hull
        notes.append(Problem(project.files["boundary"].name, 0, 0,
                             f"no boundary file: the study area is the boreholes' convex hull "
                             f"buffered by {project.buffer_m:g} m"))
        area = hull.buffer(project.buffer_m)
        if area.is_empty or area.area <= 0:
            problems.add(project.root / PROJECT_FILE,
                         *setting_location(project, "grid", "buffer_m"),
                         f"without a boundary file the study area is the boreholes' convex "
                         f"hull buffered by buffer_m = {project.buffer_m:g} m, and it has no "
                         "area (the boreholes lie on one point or one line): set [grid] "
                         "buffer_m > 0 or give a boundary file")
            return None
        return area
    try:
        gdf = gpd.read_file(path)
    except Exception as exc:  # noqa: BLE001 - any reader failure is an input problem
        problems.add(path, 0, 0, f"cannot read the boundary: {exc}")
        return None
    gdf = gdf[gdf.geometry.notna()]
    gdf = gdf[gdf.geometry.geom_type.isin(["Polygon", "MultiPolygon"])]
    if gdf.empty:
        problems.add(path, 0, 0, "the boundary holds no polygon")
        return None
    xmin, ymin, xmax, ymax = gdf.total_bounds
    if not np.isfinite([xmin, ymin, xmax, ymax]).all():
        problems.add(path, 0, 0, "the boundary has coordinates that are not finite numbers")
        return None
    if gdf.crs is None:
        notes.append(Problem(path.name, 0, 0, "boundary has no CRS; taken as the project CRS"))
    elif gdf.crs.is_geographic and (max(abs(xmin), abs(xmax)) > 180
                                    or max(abs(ymin), abs(ymax)) > 90):
        # A GeoJSON file without a "crs" member is read as longitude/latitude (RFC 7946),
        # but these coordinates cannot be degrees: they were written in a projected CRS.
        notes.append(Problem(path.name, 0, 0, f"boundary coordinates (x {xmin:.0f} to "
                             f"{xmax:.0f}, y {ymin:.0f} to {ymax:.0f}) cannot be degrees of "
                             f"{gdf.crs.to_string()}; taken as the project CRS "
                             f"{project.crs.to_string()}"))
        gdf = gdf.set_crs(project.crs, allow_override=True)
    elif not same_crs(gdf.crs, project.crs):
        source = gdf.crs.to_string()
        notes.append(Problem(path.name, 0, 0, f"boundary reprojected from {source} to the "
                             f"project CRS {project.crs.to_string()}"))
        gdf = gdf.to_crs(project.crs)
        if not np.isfinite(gdf.total_bounds).all():
            problems.add(path, 0, 0, f"the boundary cannot be reprojected from {source} to "
                         f"the project CRS {project.crs.to_string()}: its coordinates fall "
                         "outside the area the CRSs cover")
            return None
    area = unary_union(list(gdf.geometry.make_valid()))
    if area.is_empty or area.area <= 0:
        problems.add(path, 0, 0, "the boundary polygon has no area")
        return None
    return area


def _dem_at_collars(project: Project, columns: pd.DataFrame, problems: ProblemList,
                    notes: list[Problem]) -> np.ndarray:
    """Ground elevation from the DEM at each collar (m), NaN where the DEM has no value."""
    out = np.full(len(columns), np.nan)
    path = project.file("dem")
    if path is None or len(columns) == 0:
        return out
    dem_crs = None
    try:
        with rasterio.open(path) as src:
            dem_crs = src.crs.to_string() if src.crs else None
            x, y = columns["x"].to_numpy(float), columns["y"].to_numpy(float)
            if src.crs is None:
                notes.append(Problem(path.name, 0, 0, "DEM has no CRS; taken as the project CRS"))
            elif not same_crs(src.crs, project.crs):
                notes.append(Problem(path.name, 0, 0, f"DEM is in {src.crs.to_string()}; collars "
                                     "were transformed to it to read elevations"))
                x, y = Transformer.from_crs(project.crs, src.crs, always_xy=True).transform(x, y)
            vals = np.array([v[0] for v in src.sample(zip(x, y, strict=True), masked=True)
                             ], dtype=object)
            for i, v in enumerate(vals):
                if v is not np.ma.masked and np.isfinite(float(v)):
                    out[i] = float(v)
    except Exception as exc:  # noqa: BLE001 - any reader failure is an input problem
        problems.add(path, 0, 0, f"cannot read the DEM: {exc}")
        return out
    n_out = int(np.isnan(out).sum())
    if n_out and n_out == len(out):
        problems.add(path, 0, 0, f"none of the {n_out} collars falls on the DEM (or all fall "
                     "on its nodata cells): are the DEM and collars.csv in the CRSs they "
                     f"declare? (project CRS {project.crs.to_string()}, DEM "
                     f"{dem_crs or 'without CRS'})")
    elif n_out:
        notes.append(Problem(path.name, 0, 0, f"{n_out} collar(s) fall outside the DEM or on "
                             "its nodata cells; their elevations were not checked: "
                             f"{_some_ids(columns.index[np.isnan(out)])}"))
    return out


def _some_ids(ids, n: int = 8) -> str:
    """Up to ``n`` ids, comma-separated, with a count of the rest."""
    ids = [str(i) for i in ids]
    more = f" and {len(ids) - n} more" if len(ids) > n else ""
    return ", ".join(ids[:n]) + more


def _check_holes_in_area(project: Project, used: pd.DataFrame, area, problems: ProblemList,
                         notes: list[Problem]) -> None:
    """Boreholes outside the boundary: all of them is an input error (most likely the
    boundary or the collars are not in the CRS they declare), some of them a note."""
    path = project.file("boundary")
    if path is None or area is None or len(used) == 0:
        return
    inside = shapely.contains_xy(area, used["x"].to_numpy(float), used["y"].to_numpy(float))
    outside = used.index[~inside]
    if len(outside) == len(used):
        xmin, ymin, xmax, ymax = area.bounds
        problems.add(path, 0, 0, f"none of the {len(used)} boreholes lies inside the study "
                     f"area (boundary spans x {xmin:.0f} to {xmax:.0f}, y {ymin:.0f} to "
                     f"{ymax:.0f}; boreholes span x {used['x'].min():.0f} to "
                     f"{used['x'].max():.0f}, y {used['y'].min():.0f} to "
                     f"{used['y'].max():.0f}): are the boundary and collars.csv in the same "
                     f"CRS (the project CRS {project.crs.to_string()})?")
    elif len(outside):
        notes.append(Problem(path.name, 0, 0, f"{len(outside)} borehole(s) lie outside the "
                             "study area; they still inform the kriging near its edge: "
                             f"{_some_ids(outside)}"))


def _check_grid_size(project: Project, used: pd.DataFrame, area,
                     problems: ProblemList) -> None:
    """Refuse a grid of more than ``[grid] max_cells`` cells before allocating it."""
    xmin, ymin, xmax, ymax = snapped_bounds(area.bounds, project.cell_size_m)
    nx = (xmax - xmin) / project.cell_size_m
    ny = (ymax - ymin) / project.cell_size_m
    if nx * ny <= project.max_grid_cells:
        return
    line, col = setting_location(project, "grid", "cell_size_m")
    source = ("the boundary" if project.file("boundary") is not None else
              f"the boreholes' hull buffered by {project.buffer_m:g} m")
    extremes = sorted({used["x"].idxmin(), used["x"].idxmax(), used["y"].idxmin(),
                       used["y"].idxmax()}) if len(used) else []
    problems.add(project.root / PROJECT_FILE, line, col,
                 f"the study area ({source}, {(xmax - xmin) / 1000:.6g} km by "
                 f"{(ymax - ymin) / 1000:.6g} km) at cell_size_m = {project.cell_size_m:g} "
                 f"makes a grid of {nx * ny:.3g} cells, more than [grid] max_cells = "
                 f"{project.max_grid_cells}: raise cell_size_m (or max_cells), or look for a "
                 f"mistyped coordinate among the outermost boreholes "
                 f"({_some_ids(extremes)})")


def load_inputs(project_dir: str | Path) -> Inputs:
    """Stage 1: read ``project.toml``, the logs, the boundary and the DEM; define the grid.

    Adds to the column table the DEM elevation at each collar, the misfit, and a QA flag
    when the misfit exceeds ``[qa] dem_misfit_m``.

    Raises:
        InputError: every problem found, each with file, line and column.
    """
    project = read_project(project_dir)
    boreholes = project_boreholes(project)  # the store if there is one, else the CSVs
    columns = column_table(boreholes, project)
    problems = ProblemList()
    notes: list[Problem] = list(boreholes.warnings)
    used = columns[~columns["excluded"]]
    unknown = set(project.qa.exclude_boreholes) - set(columns.index)
    if unknown:
        notes.append(Problem("project.toml", 0, 0, "[qa] exclude_boreholes names ids not in "
                             f"collars.csv: {', '.join(sorted(unknown))}"))
    if len(used) == 0:
        problems.add(project.files["collars"], 0, 0, "no borehole left to use")
    if int((used["status_aquitard"] == "full").sum()) < 3:
        problems.add(project.files["intervals"], 0, 0,
                     "fewer than 3 boreholes reach the aquifer: the total aquitard thickness "
                     "cannot be mapped (holes that stop in the clay only give lower bounds)")
    problems.raise_if_any()

    area = _read_area(project, used, problems, notes)
    _check_holes_in_area(project, used, area, problems, notes)
    dem = _dem_at_collars(project, columns, problems, notes)
    problems.raise_if_any()
    assert area is not None  # no problem was found, so the area was read
    _check_grid_size(project, used, area, problems)
    problems.raise_if_any()
    columns = columns.copy()
    columns["dem_elev_m"] = dem
    columns["dem_misfit_m"] = columns["ground_elev_m"] - dem
    bad = columns["dem_misfit_m"].abs() > project.qa.dem_misfit_m
    for bid in columns.index[bad]:
        flag = (f"collar elevation differs from the DEM by "
                f"{columns.at[bid, 'dem_misfit_m']:+.1f} m")
        prev = columns.at[bid, "qa_flags"]
        columns.at[bid, "qa_flags"] = f"{prev}; {flag}" if prev else flag
    grid = make_grid(area, project.cell_size_m, project.crs)
    if not grid.mask.any():
        problems.add(project.files["boundary"], 0, 0, "the study area holds no grid cell: "
                     "cell_size_m is larger than the area")
        problems.raise_if_any()
    row, _ = grid.rowcol(used["x"].to_numpy(), used["y"].to_numpy())
    n_outside = int((row < 0).sum())
    if n_outside:
        notes.append(Problem(project.files["collars"].name, 0, 0, f"{n_outside} borehole(s) lie "
                             "outside the grid; they still inform the kriging near the edge"))
    samples_file = project.file("samples")
    notes.extend(lab_k_magnitude_warnings(
        boreholes.samples, project.units,
        samples_file.name if samples_file is not None else "samples"))
    hazards = read_hazards(project.file("hazards"), project.crs, problems, notes)
    heads = {}
    for key in HEAD_KEYS:
        surface = read_head_surface(project.file(key), key, grid, project.kriging, problems,
                                    notes)
        if surface is not None:
            heads[key] = surface
    if len(heads) == 1:
        only = next(iter(heads.values()))
        notes.append(Problem(only.file, 0, 0, f"only the {only.key.replace('_', ' ')} is "
                             "given; the gradient needs both heads, so the stated "
                             "vertical_gradient is used"))
    problems.raise_if_any()
    return Inputs(project, boreholes, columns, area, grid, notes, hazards, heads)


def build_surfaces(inputs: Inputs, context: KrigingContext = DEFAULT_CONTEXT
                   ) -> dict[str, Surface]:
    """Stage 2: krige the total aquitard thickness and each unit above the aquifer
    (``context``: where the kriging runs, and the run's tile cache and kept variograms).

    Fallbacks taken for a surface (too few holes, all holes equal, merged duplicates) are
    added to ``inputs.warnings``.

    Raises:
        InputError: a unit that no borehole passes through completely.
    """
    p = inputs.project
    used = inputs.columns[~inputs.columns["excluded"]]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        try:
            surfaces = krige_column(used, [u.code for u in p.column_units],
                                    [u.code for u in p.aquitard_units], inputs.grid, p.kriging,
                                    context=context)
        except ValueError as exc:
            raise InputError([Problem(p.files["intervals"].name, 0, 0,
                                      f"{exc}: holes that stop in it only give lower bounds, "
                                      "so it cannot be mapped; add holes that pass through "
                                      "it or merge it with a neighbouring unit of the stack"
                                      )]) from exc
    for s in surfaces.values():
        inputs.warnings.extend(Problem(p.files["intervals"].name, 0, 0, n) for n in s.notes)
    return surfaces


def thickness_probability_grids(inputs: Inputs, surfaces: dict[str, Surface],
                                hyd: Hydraulics, context: KrigingContext = DEFAULT_CONTEXT
                                ) -> ThicknessProbabilities:
    """Stage 4a: P(window) and P(thin) of the protective aquitard thickness on the grid
    (:func:`aquitard_probabilities`).

    Where hazards (or a non-protective weathered crust) cut the column, the protective
    thickness is max(0, T − c), with c the depth the hazard removes below the top of the
    clay (its removed depth less the kriged cover) plus the crust when it is not
    protective; so P(protective < t) = P(T < t + c).
    """
    p = inputs.project
    th = p.screening
    cut = np.zeros(inputs.grid.mask.shape)
    if hyd.hazard_removed_m is not None:
        cover = sum((np.nan_to_num(surfaces[u.code].thickness_m) for u in p.column_units
                     if u.role == "cover"), np.zeros_like(cut))
        cut = np.maximum(np.nan_to_num(hyd.hazard_removed_m) - cover, 0.0)
    if p.hydraulics.crust_treatment == "not_protective":
        cut = cut + p.hydraulics.crust_depth_m
    return aquitard_probabilities(inputs, surfaces["aquitard"],
                                  {"window": th.window_thickness_m + cut,
                                   "thin": th.thin_thickness_m + cut}, context)


def proves_thinner_than(columns: pd.DataFrame, thickness_m: float) -> pd.Series:
    """Holes that passed through the aquitard and logged less than ``thickness_m`` of it
    (with the window thickness: holes that prove a window)."""
    return (columns["status_aquitard"] == "full") & (
        columns["aquitard_thickness_m"] < thickness_m)


def window_proof_grid(inputs: Inputs, hyd: Hydraulics | None = None) -> np.ndarray:
    """Where probability zones may draw a window (:func:`aquitardmap.screening.zones.zone_masks`):
    cells within ``[screening] window_proof_radius_m`` of a hole (not excluded) that proves a
    window, and, with ``hyd``, cells where a mapped hazard (pit, cutting, scar) removes clay
    of the aquitard."""
    th = inputs.project.screening
    used = inputs.columns[~inputs.columns["excluded"]]
    proven = used[proves_thinner_than(used, th.window_thickness_m)]
    cells = window_proof_cells(proven["x"].to_numpy(float), proven["y"].to_numpy(float),
                               inputs.grid, th.window_proof_radius_m)
    if hyd is not None and hyd.hazard_removed_aquitard_m is not None:
        cells |= np.nan_to_num(hyd.hazard_removed_aquitard_m) > 0
    return cells


def aquitard_probabilities(inputs: Inputs, total: Surface,
                           thresholds_m: dict[str, float | np.ndarray],
                           context: KrigingContext = DEFAULT_CONTEXT
                           ) -> ThicknessProbabilities:
    """P(total aquitard thickness < threshold) grids by the ``[screening]
    probability_method``.

    ``"indicator"`` (default): indicator kriging with continuity along chains of proving
    holes (:mod:`aquitardmap.geostat.indicator`; ``total`` is not used), its neighbourhood the
    kriging's ``max_neighbours`` up to 32, and the blocked cross-validation of the window
    and thin probabilities at the holes (:func:`aquitardmap.geostat.indicator.cross_validate`) in
    the record's ``cross_validation``.

    ``"latent_gaussian"``: :mod:`aquitardmap.geostat.probability`, with the ground elevation as an
    external drift when ``[kriging] external_drift`` and the cross-validation say so
    (:mod:`aquitardmap.geostat.drift`), otherwise with the total thickness's variogram; the
    variance level comes from the cross-validation of the model used.

    ``context``: where the kriging runs, and the kept variograms (the drift's residual)."""
    p = inputs.project
    th = p.screening
    used = inputs.columns[~inputs.columns["excluded"]]
    x, y = used["x"].to_numpy(float), used["y"].to_numpy(float)
    t, status = used["aquitard_thickness_m"].to_numpy(float), used["status_aquitard"].to_numpy()
    if th.probability_method == "indicator":
        settings = IndicatorSettings(continuity_ratio=th.continuity_ratio,
                                     chain_corridor_m=th.chain_corridor_m,
                                     location_sd_m=th.location_sd_m,
                                     max_neighbours=min(32, p.kriging.max_neighbours))
        probs = thickness_probabilities_by_indicator(x, y, t, status, inputs.grid,
                                                     thresholds_m, settings, context=context)
        cv = cross_validate(x, y, t, status, {"window": th.window_thickness_m,
                                              "thin": th.thin_thickness_m}, settings,
                            context=context)
        return replace(probs, other_method={
            **probs.other_method,
            "cross_validation": {name: c.as_dict() for name, c in cv.items()}})
    ground = used["dem_elev_m"].to_numpy(float)
    dem_path = p.file("dem")
    grid_ground = resample_to_grid(dem_path, inputs.grid) if dem_path is not None else None
    drift = choose_drift(x, y, t, status, ground, grid_ground, inputs.grid, p.kriging,
                         total.cv, context.variograms)
    model, cv = (drift.model, drift.cv_drift) if drift.used else (total.variogram, total.cv)
    probs = thickness_probabilities(
        x, y, t, status, model, inputs.grid, thresholds_m,
        max_neighbours=drift.max_neighbours if drift.used else p.kriging.max_neighbours,
        n_draws=th.probability_draws, seed=th.probability_seed,
        variance_scale=cv_variance_scale(cv) if th.probability_variance_from_cv else 1.0,
        drift=ground if drift.used else None,
        grid_drift=drift.grid_drift(grid_ground) if drift.used else None,
        window_floor_m=th.window_latent_floor_m)
    return replace(probs, drift=drift.as_dict(),
                   residual=drift.residual if drift.used else None)


def compute_hydraulics(inputs: Inputs, surfaces: dict[str, Surface]) -> Hydraulics:
    """Stage 3: K per unit (lab, else grain size, else default; times the unit's anisotropy
    and secondary-permeability multipliers), then per cell, through every unit above the
    aquifer (cover included, as in the AVI):

    1. the column cut down from the top by the hazards (excavations, pits, scars);
    2. the weathered crust, the top ``crust_depth_m`` of the remaining clay, with its K
       raised by ``crust_k_factor`` or left out (``crust_treatment``);
    3. series resistance, equivalent Kv, leakance, AVI class;
    4. with both head inputs, the head drop drives one steady Darcy flux through the units
       in series (``Δh / c``) and the advective travel time is ``Σ nₑbᵢ / q``; elsewhere
       the stated gradient acts in every unit alike; infinite where the flow is not
       downward;
    5. the diffusion time scale B²/De of the intact clay below the crust and its Péclet
       number (diffusive over advective time of that clay);
    6. the density of boreholes piercing the aquitard.
    """
    p = inputs.project
    h = p.hydraulics
    g = inputs.grid
    units = p.column_units
    unit_k = unit_conductivity(inputs.boreholes.samples, p.units, h)
    thick0 = np.stack([surfaces[u.code].thickness_m for u in units])
    kv = np.array([unit_k.at[u.code, "kv_m_s"] for u in units], dtype=float)
    por = np.array([u.effective_porosity for u in units], dtype=float)
    is_aq = np.array([u.role == "aquitard" for u in units])

    hazards = inputs.hazards
    removed = index = None
    hazard_rows: list[dict] = []
    thick = thick0
    if hazards is not None and len(hazards):
        removed, index = removed_depth_grid_m(hazards, g)
        thick = remove_from_top_m(thick0, np.nan_to_num(removed, nan=0.0))
        hazard_rows = hazard_table(hazards, index, (thick0[is_aq] - thick[is_aq]).sum(axis=0),
                                   g.cell_area_m2)
    aq_removed = (thick0[is_aq] - thick[is_aq]).sum(axis=0)

    crust = crust_thickness_m(thick, is_aq, h.crust_depth_m)
    intact = thick - crust
    if h.crust_treatment == "raise_k":
        layers = np.concatenate([intact, crust])
        kv_layers = np.concatenate([kv, kv * h.crust_k_factor])
        por_layers = np.concatenate([por, por])
        protective = thick[is_aq].sum(axis=0)
    else:  # "not_protective": the crust is left out of the column
        layers, kv_layers, por_layers = intact, kv, por
        protective = intact[is_aq].sum(axis=0)

    stated = h.vertical_gradient
    gradient = np.where(g.mask, stated, np.nan)
    source = "stated"
    head_drop = None
    if set(HEAD_KEYS) <= set(inputs.heads):
        head_drop = inputs.heads["water_table"].head_m - inputs.heads["aquifer_head"].head_m
        from_heads = gradient_from_heads(inputs.heads["water_table"].head_m,
                                         inputs.heads["aquifer_head"].head_m,
                                         np.nansum(thick, axis=0))
        gradient = np.where(np.isfinite(from_heads), from_heads, gradient)
        source = "heads"
    downward = gradient > 0
    safe_i = np.where(downward, gradient, 1.0)

    with np.errstate(divide="ignore", invalid="ignore"):
        c_s = series_resistance_s(layers, kv_layers)
        # A stated gradient acts in every unit alike; a head drop drives one steady flux
        # through the units in series, the gradient steepest across the tightest one.
        travel = downward_travel_time_yr(layers, kv_layers, por_layers, gradient)
        clay_b = intact[is_aq].sum(axis=0)
        t_diff = diffusion_time_yr(clay_b, h.effective_diffusion_m2_s)
        t_adv_clay = advective_travel_time_yr(intact[is_aq], kv[is_aq], por[is_aq], safe_i)
        t_adv_clay = np.where(downward, t_adv_clay, np.inf)
        if head_drop is not None:
            q = series_flux_m_s(layers, kv_layers, head_drop)
            by_heads = np.isfinite(head_drop) & np.isfinite(c_s)
            travel = np.where(by_heads, crossing_time_yr(layers, por_layers, q), travel)
            t_adv_clay = np.where(by_heads, crossing_time_yr(intact[is_aq], por[is_aq], q),
                                  t_adv_clay)
        resistance_yr = c_s / SECONDS_PER_YEAR
        used = inputs.columns
        density = point_density_per_km2(
            used.loc[piercing_mask(used), "x"].to_numpy(float),
            used.loc[piercing_mask(used), "y"].to_numpy(float), g,
            p.screening.piercing_radius_m)
        return Hydraulics(
            unit_k=unit_k,
            column_thickness_m={u.code: thick[i] for i, u in enumerate(units)},
            resistance_yr=resistance_yr,
            kv_m_s=equivalent_kv_m_s(layers, kv_layers),
            leakance_per_s=leakance_per_s(layers, kv_layers),
            travel_time_yr=travel,
            avi_class=avi_class(resistance_yr),
            diffusion_time_yr=t_diff,
            peclet_number=peclet_number(t_diff, t_adv_clay),
            vertical_gradient=gradient,
            gradient_source=source,
            crust_m=crust[is_aq].sum(axis=0),
            protective_thickness_m=protective,
            hazard_removed_m=removed,
            hazard_index=index,
            hazard_removed_aquitard_m=aq_removed,
            hazards=hazard_rows,
            piercing_density_per_km2=density,
            piercing=piercing_table(used, density, g, p.screening.piercing_flag_per_km2),
        )


def borehole_table(inputs: Inputs, surfaces: dict[str, Surface] | None = None
                   ) -> gpd.GeoDataFrame:
    """Every borehole with its derived values, as points in the project CRS.

    With ``surfaces`` the suspicious-log columns are added
    (:mod:`aquitardmap.screening.suspicious`):
    ``cv_error_m``, ``cv_standardised_error``, ``suspicious``, ``suspicious_reasons``.
    """
    c = inputs.columns.copy()
    if surfaces is not None and "aquitard" in surfaces:
        sus = suspicious_columns(c, surfaces["aquitard"].cv_table, inputs.project.qa,
                                 inputs.grid)
        for col in sus.columns:
            c[col] = sus[col]
    th = inputs.project.screening
    c["proves_window"] = proves_thinner_than(c, th.window_thickness_m)
    c["proves_thin"] = proves_thinner_than(c, th.thin_thickness_m)
    c["pierces_aquitard"] = piercing_mask(c)
    c = c.reset_index().rename(columns={"index": "borehole_id"})
    return gpd.GeoDataFrame(c, geometry=gpd.points_from_xy(c["x"], c["y"]),
                            crs=inputs.project.crs)


def screen(inputs: Inputs, surfaces: dict[str, Surface], hyd: Hydraulics,
           boreholes: gpd.GeoDataFrame, *,
           probabilities: ThicknessProbabilities | None = None
           ) -> tuple[np.ndarray, gpd.GeoDataFrame]:
    """Stage 4: approximate P(thin) grid and the window / thin / fast zones.

    With ``[screening] zone_basis = "probability"`` window and thin zones are drawn from
    ``probabilities`` (computed here by :func:`thickness_probability_grids` when not given)
    in a likely and a possible tier (:func:`aquitardmap.screening.zones.zone_tier_masks`);
    otherwise from the kriged thickness. Either way the cells holding a used hole that
    proves a window or thin clay (``proves_window`` / ``proves_thin`` of ``boreholes``,
    :func:`proves_thinner_than`) are flagged whatever the grids say.
    """
    total = surfaces["aquitard"]
    th = inputs.project.screening
    thickness = total.thickness_m
    if hyd.protective_thickness_m is not None:
        # Cut by hazards (and without the crust when it is not protective); equal to the
        # kriged total otherwise.
        thickness = np.where(np.isfinite(total.thickness_m), hyd.protective_thickness_m,
                             np.nan)
    p_thin = probability_below(th.thin_thickness_m, thickness, total.sd_m)
    used = boreholes[~boreholes["excluded"]]
    p_window = None
    if th.zone_basis == "probability":
        if probabilities is None:
            probabilities = thickness_probability_grids(inputs, surfaces, hyd)
        p_window = probabilities.p_below["window"]
        zones = zones_from_grids(thickness, total.sd_m, hyd.travel_time_yr,
                                 probabilities.p_below["thin"], inputs.grid, th, used,
                                 p_window=p_window,
                                 window_proven=window_proof_grid(inputs, hyd),
                                 piercing_density_per_km2=hyd.piercing_density_per_km2)
    else:
        zones = zones_from_grids(thickness, total.sd_m, hyd.travel_time_yr, p_thin,
                                 inputs.grid, th, used,
                                 piercing_density_per_km2=hyd.piercing_density_per_km2)
    if hyd.gradient_source == "heads" and len(zones):
        zones["reason"] = zones["reason"].str.replace(
            "(unit-gradient assumption)", "(steady flux from the head inputs' head drop)",
            regex=False)
    if inputs.hazards is not None and len(inputs.hazards):
        zones = annotate_zones(zones, inputs.hazards)
    return p_thin, zones


def _summary(inputs: Inputs, surfaces: dict[str, Surface], hyd: Hydraulics,
             zones: gpd.GeoDataFrame, boreholes: gpd.GeoDataFrame, started: datetime,
             t0: float, probabilities: ThicknessProbabilities | None = None) -> dict:
    p = inputs.project
    g = inputs.grid
    used = boreholes[~boreholes["excluded"]]
    inputs_hash = {"project.toml": {"sha256": p.config_sha256}}
    for key in p.files:
        f = p.file(key)
        if f is not None:
            inputs_hash[f.name] = {"sha256": file_sha256(f)}
    units = []
    for u in p.units:
        row = {"code": u.code, "name": u.name, "role": u.role,
               "effective_porosity": u.effective_porosity, "k_default_m_s": u.k_default_m_s,
               "k_method": u.k_method, "anisotropy_kh_kv": u.anisotropy_kh_kv,
               "secondary_k_factor": u.secondary_k_factor}
        if u.code in hyd.unit_k.index:
            row.update({k: v for k, v in hyd.unit_k.loc[u.code].items()})
        units.append(row)
    inside = g.mask
    total = surfaces["aquitard"].thickness_m
    return {
        "caution": outputs.CAUTION,
        "project": {"name": p.name, "crs": p.crs.to_string(), "folder": str(p.root)},
        "run": {"started_utc": started.isoformat(timespec="seconds"),
                "run_time_s": round(time.perf_counter() - t0, 2),
                "package_version": __version__, "python": platform.python_version()},
        "inputs": inputs_hash,
        "grid": {"cell_size_m": g.cell_size_m, "width": g.width, "height": g.height,
                 "bounds_m": list(g.bounds), "cells_in_study_area": int(inside.sum()),
                 # nothing above the aquifer: travel time and resistance 0, leakance +inf,
                 # equivalent Kv undefined (nodata)
                 "cells_without_column": int((np.isinf(hyd.leakance_per_s) & inside).sum()),
                 "study_area_km2": float(inside.sum() * g.cell_area_m2 / 1e6)},
        "counts": {
            "boreholes": int(len(boreholes)),
            "excluded": int(boreholes["excluded"].sum()),
            "reached_aquifer": int(used["reached_aquifer"].sum()),
            "aquitard_lower_bound_holes": int((used["status_aquitard"] == "lower_bound").sum()),
            "proves_window": int(used["proves_window"].sum()),
            "qa_flagged": int((used["qa_flags"] != "").sum()),
            "samples": int(len(inputs.boreholes.samples)),
        },
        "units": units,
        "thresholds": {"window_thickness_m": p.screening.window_thickness_m,
                       "thin_thickness_m": p.screening.thin_thickness_m,
                       "fast_travel_time_yr": p.screening.fast_travel_time_yr,
                       "piercing_flag_per_km2": p.screening.piercing_flag_per_km2,
                       **_tier_thresholds(p.screening)},
        "hydraulics": _hydraulics_summary(inputs, hyd),
        "avi": _avi_summary(hyd, g),
        "hazards": hyd.hazards,
        "piercing": _piercing_summary(inputs, hyd),
        "kriging": {"variogram_model": p.kriging.variogram_model,
                    "n_lags": p.kriging.n_lags, "max_neighbours": p.kriging.max_neighbours,
                    "nested_model": p.kriging.nested_model,
                    "lag_width_m": p.kriging.lag_width_m,
                    "max_lag_fraction": p.kriging.max_lag_fraction,
                    "anisotropy": p.kriging.anisotropy,
                    "n_directions": p.kriging.n_directions,
                    "direction_tolerance_deg": p.kriging.direction_tolerance_deg,
                    "manual_variograms": sorted(p.kriging.variograms),
                    "reuse_variogram_within": p.kriging.reuse_variogram_within,
                    "reuse_variogram_angle_deg": p.kriging.reuse_variogram_angle_deg},
        "surfaces": {
            name: {**surface_summary(s),
                   "figure": outputs.variogram_figure(name)}
            for name, s in surfaces.items()
        },
        "cross_validation_file": outputs.CV_RESIDUALS,
        "figures": {"variograms": {name: outputs.variogram_figure(name)
                                   for name in _figure_surfaces(surfaces, probabilities)}},
        "probability": _probability_summary(inputs, probabilities),
        "suspicious_boreholes": (suspicious_list(boreholes) if "suspicious" in boreholes
                                 else []),
        "aquitard_thickness_m": {"min": float(np.nanmin(total)), "mean": float(np.nanmean(total)),
                                 "max": float(np.nanmax(total))},
        "zones": _zones_summary(inputs, zones, probabilities),
        "warnings": [str(w) for w in inputs.warnings],
    }


def _tier_thresholds(th: ScreeningThresholds) -> dict[str, float]:
    """The probability thresholds of the likely and possible zone tiers."""
    return {"p_window_threshold": th.p_window_threshold,
            "p_thin_threshold": th.p_thin_threshold,
            "p_window_possible_threshold": th.p_window_possible_threshold,
            "p_thin_possible_threshold": th.p_thin_possible_threshold}


def _zones_summary(inputs: Inputs, zones: gpd.GeoDataFrame,
                   probabilities: ThicknessProbabilities | None) -> dict:
    """Areas and counts of the zones: by kind (all tiers together), and for window and thin
    zones by kind and tier (empty tiers with ``zone_basis = "kriged_thickness"``), with the
    thresholds that drew them."""
    th = inputs.project.screening
    tiered = probabilities is not None
    return {"area_m2_by_kind": zone_areas_m2(zones),
            "count_by_kind": {k: int((zones["kind"] == k).sum()) for k in ZONE_KINDS},
            "area_m2_by_kind_and_tier": zone_tier_areas_m2(zones) if tiered else {},
            "count_by_kind_and_tier": zone_tier_counts(zones) if tiered else {},
            "tiers": list(ZONE_TIERS) if tiered else [],
            "basis": th.zone_basis if tiered else "kriged_thickness",
            **_tier_thresholds(th),
            "window_proof_radius_m": th.window_proof_radius_m,
            "cells_likely_window_without_proof": (
                int(zones["n_cells_unproven_window"].sum()) if len(zones) else 0),
            "cells_flagged_by_proving_holes_alone": (
                int(zones["n_cells_from_holes"].sum()) if len(zones) else 0)}


def _probability_summary(inputs: Inputs, probabilities: ThicknessProbabilities | None
                         ) -> dict:
    """How ``p_thin.tif`` and ``p_window.tif`` were made (empty when they were not)."""
    if probabilities is None:
        return {}
    th = inputs.project.screening
    mask = inputs.grid.mask
    out = probabilities.as_dict()
    out.update({"p_window_file": outputs.P_WINDOW_PROB, "p_thin_file": outputs.P_THIN_PROB,
                "window_thickness_m": th.window_thickness_m,
                "thin_thickness_m": th.thin_thickness_m,
                "mean_p_window": float(np.nanmean(probabilities.p_below["window"][mask])),
                "mean_p_thin": float(np.nanmean(probabilities.p_below["thin"][mask]))})
    return out


def _stats(values: np.ndarray) -> dict[str, float | None]:
    """min / median / max of the finite values (None when there are none)."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if not v.size:
        return {"min": None, "median": None, "max": None}
    return {"min": float(v.min()), "median": float(np.median(v)), "max": float(v.max())}


def _hydraulics_summary(inputs: Inputs, hyd: Hydraulics) -> dict:
    h = inputs.project.hydraulics
    inside = inputs.grid.mask
    if hyd.gradient_source == "heads":
        assumption = ("head drop from the head inputs (water table - aquifer head) driving "
                      "one steady flux through the units in series (q = head drop / "
                      "resistance; the gradient is steepest across the tightest unit); "
                      "the vertical_gradient grid is the column average, head drop / "
                      f"column thickness; the stated {h.vertical_gradient:g} in every unit "
                      "where a head is missing")
    else:
        assumption = ("uniform vertical gradient across the column"
                      + (" (unit gradient)" if h.vertical_gradient == 1.0 else ""))
    grad = hyd.vertical_gradient if hyd.vertical_gradient is not None else np.array([])
    with np.errstate(invalid="ignore"):
        upward = int((inside & (grad <= 0)).sum()) if grad.size else 0
    pe = hyd.peclet_number if hyd.peclet_number is not None else np.full(inside.shape, np.nan)
    with np.errstate(invalid="ignore"):
        diffusion_governs = int((inside & (pe < 1)).sum())
        advection_governs = int((inside & (pe >= 1)).sum())
    return {
        "groundwater_temp_c": h.groundwater_temp_c,
        "vertical_gradient": h.vertical_gradient,
        "gradient_assumption": assumption,
        "gradient_source": hyd.gradient_source,
        "gradient": _stats(grad[inside]) if grad.size else None,
        "cells_without_downward_gradient": upward,
        "heads": {k: v.as_dict() for k, v in inputs.heads.items()},
        "hazen_c": h.hazen_c,
        "terzaghi_c": h.terzaghi_c,
        "weathered_crust": {
            "depth_m": h.crust_depth_m, "k_factor": h.crust_k_factor,
            "treatment": h.crust_treatment,
            "meaning": ("the top crust_depth_m of the clay counts with its vertical K "
                        "multiplied by k_factor" if h.crust_treatment == "raise_k" else
                        "the top crust_depth_m of the clay is left out of the column and of "
                        "the thickness screened for thin zones"),
            "mean_crust_thickness_m": float(np.nanmean(hyd.crust_m[inside]))
            if hyd.crust_m is not None else None,
        },
        "effective_diffusion_m2_s": h.effective_diffusion_m2_s,
        "diffusion_time_yr": _stats(hyd.diffusion_time_yr[inside])
        if hyd.diffusion_time_yr is not None else None,
        "peclet_number": {
            **_stats(pe[inside]),
            "cells_diffusion_governs": diffusion_governs,
            "cells_advection_governs": advection_governs,
            "meaning": "Pe = (B^2/De) / advective time through the intact clay; Pe < 1: "
                       "diffusion governs, Pe > 1: advection governs; undefined (nodata) "
                       "where no intact clay is left",
        },
        "travel_time_yr": _stats(hyd.travel_time_yr[inside]),
    }


def _avi_summary(hyd: Hydraulics, g: Grid) -> dict:
    """AVI legend with the area of each class."""
    legend = avi_legend()
    cls = hyd.avi_class if hyd.avi_class is not None else np.zeros(g.mask.shape, np.int8)
    for row in legend:
        n = int((g.mask & (cls == row["class"])).sum())
        row["cells"] = n
        row["area_km2"] = n * g.cell_area_m2 / 1e6
    return {"source": "Van Stempvoort, Ewert & Wassenaar (1993), Canadian Water Resources "
                      "Journal 18(1): classes of log10 of the hydraulic resistance c in years "
                      "(bounds from memory)",
            "file": outputs.AVI_CLASS, "classes": legend, "n_classes": len(AVI_CLASSES)}


def _piercing_summary(inputs: Inputs, hyd: Hydraulics) -> dict:
    sc = inputs.project.screening
    g = inputs.grid
    dens = hyd.piercing_density_per_km2
    table = hyd.piercing if hyd.piercing is not None else pd.DataFrame()
    flagged = int((g.mask & (np.nan_to_num(dens, nan=-1.0) >= sc.piercing_flag_per_km2)
                   ).sum()) if dens is not None else 0
    return {
        "definition": "holes whose log reaches the aquifer through some clay "
                      "(status_aquitard full, aquitard thickness > 0), excluded holes not "
                      "counted",
        "radius_m": sc.piercing_radius_m, "flag_per_km2": sc.piercing_flag_per_km2,
        "count": int(len(table)),
        "max_density_per_km2": float(np.nanmax(dens)) if dens is not None else None,
        "flagged_cells": flagged, "flagged_area_km2": flagged * g.cell_area_m2 / 1e6,
        "holes_in_flagged_cells": int(table["in_flagged_cell"].sum()) if len(table) else 0,
        "borehole_ids": list(table["borehole_id"]) if len(table) else [],
    }


def _figure_surfaces(surfaces: dict[str, Surface],
                     probabilities: ThicknessProbabilities | None) -> dict[str, Surface]:
    """Surfaces that get a variogram figure: every kriged one, and the residual from the
    external drift when the probabilities used it."""
    out = dict(surfaces)
    if probabilities is not None and probabilities.residual is not None:
        out[probabilities.residual.name] = probabilities.residual
    return out


def output_grids(inputs: Inputs, surfaces: dict[str, Surface], hyd: Hydraulics,
                 p_thin: np.ndarray, probabilities: ThicknessProbabilities | None = None
                 ) -> dict[str, tuple[np.ndarray, str, str]]:
    """The float GeoTIFFs a run writes: file name -> (grid, description, units). (The AVI
    class grid, written as integers, comes from ``hyd.avi_class``.)"""
    p = inputs.project
    total = surfaces["aquitard"]
    grids = {
        outputs.AQUITARD_THICKNESS: (total.thickness_m, "total aquitard thickness", "m"),
        outputs.AQUITARD_THICKNESS_SD: (total.sd_m, "kriging SD of total aquitard thickness",
                                        "m"),
        outputs.COVER_THICKNESS: (sum(surfaces[u.code].thickness_m for u in p.column_units
                                      if u.role == "cover") + 0.0 * total.thickness_m,
                                  "cover thickness above the aquitard", "m"),
        outputs.KV: (hyd.kv_m_s, "equivalent vertical K of the column", "m/s"),
        outputs.LEAKANCE: (hyd.leakance_per_s, "leakance of the column", "1/s"),
        outputs.RESISTANCE: (hyd.resistance_yr, "vertical hydraulic resistance", "years"),
        outputs.TRAVEL_TIME: (hyd.travel_time_yr, "advective vertical travel time", "years"),
        outputs.P_THIN: (p_thin, "approx. probability total aquitard is thin", "1"),
    }
    for u in p.aquitard_units:
        grids[outputs.unit_thickness(u.code)] = (surfaces[u.code].thickness_m,
                                                 f"thickness of {u.name}", "m")
    optional = {
        outputs.DIFFUSION_TIME: (hyd.diffusion_time_yr, "diffusion time scale B^2/De of the "
                                 "intact clay", "years"),
        outputs.PECLET: (hyd.peclet_number, "Peclet number of the intact clay (diffusive / "
                         "advective time)", "1"),
        outputs.PIERCING_DENSITY: (hyd.piercing_density_per_km2, "density of boreholes "
                                   "piercing the aquitard", "holes/km2"),
    }
    if hyd.gradient_source == "heads":
        optional[outputs.VERTICAL_GRADIENT] = (hyd.vertical_gradient, "downward vertical "
                                               "hydraulic gradient from heads", "1")
    if hyd.hazard_removed_m is not None:
        optional[outputs.HAZARD_REMOVED] = (hyd.hazard_removed_m, "depth removed by "
                                            "excavations, pits and scars", "m")
    if hyd.hazard_removed_m is not None or (p.hydraulics.crust_treatment == "not_protective"
                                            and p.hydraulics.crust_depth_m > 0):
        optional[outputs.AQUITARD_THICKNESS_EFFECTIVE] = (
            hyd.protective_thickness_m, "aquitard thickness counted as protective", "m")
    grids.update({k: v for k, v in optional.items() if v[0] is not None})
    if probabilities is not None:
        th = p.screening
        grids[outputs.P_THIN_PROB] = (probabilities.p_below["thin"], "probability that the "
                                      f"protective aquitard is thinner than "
                                      f"{th.thin_thickness_m:g} m", "1")
        grids[outputs.P_WINDOW_PROB] = (probabilities.p_below["window"], "probability that "
                                        "the protective aquitard is thinner than "
                                        f"{th.window_thickness_m:g} m (absent)", "1")
    return grids


def write_outputs(folder: Path, inputs: Inputs, surfaces: dict[str, Surface],
                  hyd: Hydraulics, p_thin: np.ndarray, zones: gpd.GeoDataFrame,
                  boreholes: gpd.GeoDataFrame, summary: dict, *,
                  self_contained_map: bool = False,
                  probabilities: ThicknessProbabilities | None = None) -> list[str]:
    """Stage 5: write every output file into ``folder``; returns the file names.

    ``self_contained_map`` writes a map that needs no network (see
    :func:`aquitardmap.outputs.webmap.write_map`)."""
    g = inputs.grid
    p = inputs.project
    grids = output_grids(inputs, surfaces, hyd, p_thin, probabilities)
    extra: list[str] = []
    cv = pd.concat([s.cv_table for s in surfaces.values() if len(s.cv_table)],
                   ignore_index=True) if any(len(s.cv_table) for s in surfaces.values()) \
        else pd.DataFrame(columns=list(CV_COLUMNS))
    cv.to_csv(folder / outputs.CV_RESIDUALS, index=False, float_format="%.10g")
    extra.append(outputs.CV_RESIDUALS)
    for name, s in _figure_surfaces(surfaces, probabilities).items():
        variogram_figure(s, folder / outputs.variogram_figure(name),
                         title=_surface_title(p, name))
        extra.append(outputs.variogram_figure(name))
    for name, (arr, desc, units) in grids.items():
        write_raster(folder / name, arr, g, description=desc, units=units)
    if hyd.avi_class is not None:
        cls = np.where(hyd.avi_class > 0, hyd.avi_class, np.nan).astype(float)
        write_raster(folder / outputs.AVI_CLASS, cls, g, dtype="uint8", nodata=0,
                     description="Aquifer Vulnerability Index class (1 extremely high to 5 "
                     "extremely low vulnerability)", units="class",
                     colours={c.code: c.colour for c in avi_classes()})
        extra.append(outputs.AVI_CLASS)
    # style sidecars: each GeoTIFF opens in a desktop GIS with the map's colours (ranges
    # from the values as written, float32)
    values_of = {name: np.where(g.mask, np.asarray(arr, np.float32), np.nan)
                 for name, (arr, _, _) in grids.items()}
    if hyd.avi_class is not None:
        values_of[outputs.AVI_CLASS] = cls
    extra.extend(write_qml_sidecars(
        folder, values_of, summary,
        {name: (desc, units) for name, (_, desc, units) in grids.items()}))
    if hyd.piercing is not None:
        hyd.piercing.to_csv(folder / outputs.PIERCING_BOREHOLES, index=False,
                            float_format="%.6g")
        extra.append(outputs.PIERCING_BOREHOLES)
    zones.to_file(folder / outputs.ZONES, layer=outputs.ZONES_LAYER, driver="GPKG")
    bh = boreholes.copy()
    for col in bh.columns:
        if bh[col].dtype == object and col != "geometry":
            bh[col] = bh[col].astype(str)
    bh.to_file(folder / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER, driver="GPKG")
    names = sorted([*grids, *extra, outputs.ZONES, outputs.BOREHOLES, outputs.SUMMARY, outputs.MAP,
                    outputs.REPORT])
    summary["outputs"] = names
    write_summary(folder / outputs.SUMMARY, summary)
    write_map(folder, self_contained=self_contained_map)
    write_report(folder)
    return names


#: Folder of the kriged-tile cache inside a project that has a store.
TILE_CACHE_DIR = ".aquitardmap-cache/tiles"


def _tile_folder(project: Project, setting: str | Path | bool | None) -> Path | None:
    """The tile cache folder of this run: ``setting`` ``None`` (default) is
    ``PROJECT/.aquitardmap-cache/tiles`` when the project has a store, ``False`` none, a
    path that folder. The kept variograms live beside it."""
    if setting is False or (setting is None and not has_store(project)):
        return None
    return project.root / TILE_CACHE_DIR if setting in (None, True) else Path(setting)


def _tile_cache(folder: Path | None) -> tilecache.TileCache | None:
    """The tile cache in ``folder`` for the grid kriging of a run (none without)."""
    return tilecache.TileCache(folder) if folder is not None else None


def _variogram_book(project: Project, folder: Path | None, refit: bool
                    ) -> variogramreuse.VariogramBook:
    """The book of variograms kept beside the tile folder (without a cache it keeps
    nothing: every surface is fitted afresh, and the decisions are still recorded)."""
    k = project.kriging
    return variogramreuse.open_variogram_book(
        folder.parent / variogramreuse.KEPT_FILE if folder is not None else None,
        within=k.reuse_variogram_within, angle_deg=k.reuse_variogram_angle_deg, refit=refit)


def kept_variograms(project: Project) -> variogramreuse.VariogramBook:
    """The variograms ``project``'s last run kept, under the same reuse rule as ``run``
    (:mod:`aquitardmap.geostat.cache.variograms`), for stages outside ``run`` (e.g.
    ``suggest``) that must krige with the run's models: pass it in a
    :class:`~aquitardmap.geostat.context.KrigingContext`. Nothing is written. Without a
    project cache every surface is fitted afresh."""
    return _variogram_book(project, _tile_folder(project, None), False)


def _surface_title(project: Project, name: str) -> str:
    if name == "aquitard":
        return "Variogram of the total aquitard thickness"
    if name == RESIDUAL_NAME:
        return "Variogram of the total thickness less its drift on the ground"
    try:
        return f"Variogram of the thickness of {project.unit(name).name} ({name})"
    except KeyError:
        return f"Variogram of {name}"


def _refuse_out_over_project(project_dir: str | Path, out_dir: str | Path) -> None:
    """An output folder that is the project folder, or holds it, would be replaced with the
    inputs inside: refused before any work."""
    root, out = Path(project_dir).resolve(), Path(out_dir).resolve()
    if root == out or root.is_relative_to(out):
        raise InputError([Problem(str(out), 0, 0, "the output folder is the project folder "
                                  "or holds it; replacing it would delete the inputs: choose "
                                  "another --out")])


def run(project_dir: str | Path, out_dir: str | Path | None = None, *,
        progress: ProgressFn | None = None, self_contained_map: bool = False,
        compute: ComputeSettings | None = None,
        tile_cache: str | Path | bool | None = None,
        refit_variograms: bool = False) -> RunResult:
    """Run the whole screening on a project folder and write every output to ``out_dir``.

    With ``out_dir=None`` nothing is written (the result is returned in memory only).
    ``self_contained_map=True`` writes a ``map.html`` that opens without network (Leaflet
    inlined from a local copy, no background tiles); the local copy is looked for before
    any work is done. ``compute`` replaces the project's ``[compute]`` settings (where the
    kriging tiles run: this process, or a Dask cluster; the numbers are the same).
    The summary records the seconds spent in each stage (``run.stage_seconds``).

    Raises:
        InputError: when inputs are unusable (nothing is written).
        WebAssetsNotFound: ``self_contained_map`` and no local Leaflet (nothing is written).

    ``tile_cache``: grid kriging reuses the tiles whose deciding data are unchanged
    (:mod:`aquitardmap.geostat.cache.tiles`; same numbers as without it). By default (None) this is
    on for a project with a store, in ``PROJECT/.aquitardmap-cache/tiles``; False turns it
    off; a path names the folder. ``summary.json`` then counts tiles reused and kriged.

    Variograms: with the cache, a surface reuses the model the previous run used while a
    fresh fit differs from it by less than ``[kriging] reuse_variogram_within``
    (:mod:`aquitardmap.geostat.cache.variograms`); ``refit_variograms=True`` always uses the fresh
    fit. ``summary.json`` records each surface's decision (``variogram_reuse``).
    """
    def step(i: int) -> None:
        if progress is not None:
            progress(STAGES[i], i + 1, len(STAGES))

    if out_dir is not None:
        _refuse_out_over_project(project_dir, out_dir)
    if self_contained_map and out_dir is not None:
        find_web_assets()
    started = datetime.now(UTC)
    t0 = time.perf_counter()
    seconds: dict[str, float] = {}

    def lap(name: str, since: float) -> float:
        now = time.perf_counter()
        seconds[name] = round(now - since, 3)
        return now

    step(0)
    inputs = load_inputs(project_dir)
    t = lap("inputs", t0)
    folder = _tile_folder(inputs.project, tile_cache)
    # the kept variograms serve the surfaces and the probabilities (residual from the drift)
    book = _variogram_book(inputs.project, folder, refit_variograms)
    cache = _tile_cache(folder)
    with compute_session(compute or inputs.project.compute) as runner:
        step(1)
        surfaces = build_surfaces(inputs, KrigingContext(runner, cache, book))
        t = lap("surfaces", t)
        step(2)
        hyd = compute_hydraulics(inputs, surfaces)
        t = lap("hydraulics", t)
        step(3)
        boreholes = borehole_table(inputs, surfaces)
        probabilities = None
        if inputs.project.screening.zone_basis == "probability":
            probabilities = thickness_probability_grids(inputs, surfaces, hyd,
                                                        KrigingContext(runner, None, book))
        p_thin, zones = screen(inputs, surfaces, hyd, boreholes, probabilities=probabilities)
        t = lap("zones", t)
        compute_info = describe(runner)
    summary = _summary(inputs, surfaces, hyd, zones, boreholes, started, t0, probabilities)
    summary["compute"] = compute_info
    summary["run"]["stage_seconds"] = seconds
    if cache is not None:
        summary["tile_cache"] = {"folder": str(cache.folder), **cache.stats.as_dict()}
    summary["variogram_reuse"] = book.summary()
    for name, decision in book.decisions.items():
        if name in summary["surfaces"]:
            summary["surfaces"][name]["variogram_reuse"] = decision.as_dict()
    drift = summary.get("probability", {}).get("external_drift")
    if isinstance(drift, dict) and RESIDUAL_NAME in book.decisions:
        drift["variogram_reuse"] = book.decisions[RESIDUAL_NAME].as_dict()
    written = None
    if out_dir is not None:
        step(4)
        with staged_output_dir(out_dir) as tmp:
            write_outputs(tmp, inputs, surfaces, hyd, p_thin, zones, boreholes, summary,
                          self_contained_map=self_contained_map,
                          probabilities=probabilities)
        written = Path(out_dir).resolve()
    if cache is not None:
        cache.prune()  # keep only the tiles of this (successful) run
        book.save()  # and the variograms it used
    return RunResult(written, inputs, surfaces, hyd, p_thin, zones, boreholes, summary,
                     probabilities)
