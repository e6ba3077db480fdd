"""Stage 1: read and check a project folder's inputs (settings, logs, study area, DEM, hazards,
heads) into one :class:`Inputs` on the project grid."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import rasterio
import shapely
from pyproj import CRS, Transformer
from shapely.geometry import MultiPoint
from shapely.ops import unary_union

from aquitardmap.config.project import PROJECT_FILE, Project, read_project, setting_location
from aquitardmap.errors import Problem, ProblemList
from aquitardmap.grid import Grid, make_grid, snapped_bounds
from aquitardmap.inputs.columns import column_table
from aquitardmap.inputs.hazards import (
    read_hazards,
)
from aquitardmap.inputs.heads import HEAD_KEYS, HeadInput, read_head_input
from aquitardmap.inputs.logs import Boreholes
from aquitardmap.inputs.samples import lab_k_magnitude_warnings
from aquitardmap.inputs.store import project_boreholes


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
    heads: dict[str, HeadInput] = field(default_factory=dict)


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
        head = read_head_input(project.file(key), key, grid, problems, notes)
        if head is not None:
            heads[key] = head
    if len(heads) == 1:
        only = next(iter(heads.values()))
        notes.append(Problem(only.file, 0, 0, f"only the {only.key.replace('_', ' ')} is "
                             "given; the gradient needs both heads, so the stated "
                             "vertical_gradient is used"))
    problems.raise_if_any()
    return Inputs(project, boreholes, columns, area, grid, notes, hazards, heads)
