"""Candidate drilling sites: every grid cell, or the points, lines and polygons a user
supplies (road allowances, municipal land) in a GeoJSON or GeoPackage file.

Each feature becomes one or more sites in the project CRS:

- a point (or each point of a multipoint) is a site;
- a line is sampled every cell width along its part inside the study area;
- a polygon gives the centres of the grid cells inside it and inside the study area (or,
  when it is too small to hold a cell centre, one point inside it).

Bad input is collected, never guessed around: a file that cannot be read, a CRS that is not
the project's, a feature with no geometry, an unsupported geometry type, or a feature
entirely outside the study area is a :class:`~aquitardmap.errors.Problem` whose "line" is
the feature's number in the file (1 = first feature).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
from pyproj import CRS
from shapely import contains_xy
from shapely.geometry.base import BaseGeometry

from aquitardmap.errors import ProblemList
from aquitardmap.grid import Grid

#: Columns whose value, if present, labels a feature's sites in the output (first found).
LABEL_COLUMNS = ("name", "label", "site", "id")


@dataclass(frozen=True)
class CandidateSites:
    """Candidate sites for new holes.

    Attributes:
        x_m, y_m: site coordinates in the project CRS (m).
        feature: number of the feature each site came from (1 = first in the file); 0 for
            sites that are grid cells.
        label: the feature's label (from a ``name``, ``label``, ``site`` or ``id``
            column), or "".
        source: name of the file the sites came from ("" for grid cells).
    """

    x_m: np.ndarray
    y_m: np.ndarray
    feature: np.ndarray
    label: np.ndarray
    source: str = ""

    def __len__(self) -> int:
        return int(self.x_m.size)


def grid_sites(grid: Grid) -> CandidateSites:
    """Every cell centre inside the study area, as a candidate site."""
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    n = int(grid.mask.sum())
    return CandidateSites(xx[grid.mask], yy[grid.mask], np.zeros(n, dtype=int),
                          np.full(n, "", dtype=object))


def _cells_in(polygon: BaseGeometry, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    inside = grid.mask & contains_xy(polygon, xx, yy)
    return xx[inside], yy[inside]


def _along(line: BaseGeometry, step_m: float) -> tuple[np.ndarray, np.ndarray]:
    """Points every ``step_m`` along a (multi)line, starting half a step in; at least the
    midpoint of each part."""
    xs: list[float] = []
    ys: list[float] = []
    parts = getattr(line, "geoms", [line])
    for part in parts:
        length = part.length
        n = max(1, int(length // step_m))
        for d in (np.arange(n) + 0.5) * (length / n):
            p = part.interpolate(float(d))
            xs.append(p.x)
            ys.append(p.y)
    return np.array(xs), np.array(ys)


def _sites_of(geom: BaseGeometry, area: BaseGeometry, grid: Grid
              ) -> tuple[np.ndarray, np.ndarray, str]:
    """Sites of one feature inside the study area, or an empty result and the reason."""
    kind = geom.geom_type
    if kind in ("Point", "MultiPoint"):
        pts = list(getattr(geom, "geoms", [geom]))
        x = np.array([p.x for p in pts])
        y = np.array([p.y for p in pts])
        inside = contains_xy(area, x, y)
        if not inside.all():
            out = [f"({x[i]:.1f}, {y[i]:.1f})" for i in np.flatnonzero(~inside)[:3]]
            return np.empty(0), np.empty(0), (f"point {', '.join(out)} lies outside the "
                                               "study area")
        return x, y, ""
    if kind in ("LineString", "MultiLineString", "LinearRing"):
        x, y = _along_parts(geom.intersection(area), grid.cell_size_m)
        if x.size == 0:
            return x, y, "the line lies entirely outside the study area"
        return x, y, ""
    if kind in ("Polygon", "MultiPolygon"):
        part = geom.intersection(area)
        if part.is_empty or part.area <= 0:
            return np.empty(0), np.empty(0), ("the polygon lies entirely outside the study "
                                              "area")
        x, y = _cells_in(part, grid)
        if x.size == 0:
            p = part.representative_point()
            x, y = np.array([p.x]), np.array([p.y])
        return x, y, ""
    return np.empty(0), np.empty(0), (f"geometry type {kind} is not supported; use points, "
                                      "lines or polygons")


def _along_parts(geom: BaseGeometry, step_m: float) -> tuple[np.ndarray, np.ndarray]:
    """Sites along the line parts of an intersection result (points where a line only
    touches the boundary are dropped)."""
    xs, ys = [], []
    for g in getattr(geom, "geoms", [geom]):
        if g.geom_type in ("LineString", "MultiLineString") and g.length > 0:
            x, y = _along(g, step_m)
            xs.append(x)
            ys.append(y)
    return (np.concatenate(xs), np.concatenate(ys)) if xs else (np.empty(0), np.empty(0))


def read_candidates(path: str | Path, crs: CRS, area: BaseGeometry, grid: Grid
                    ) -> CandidateSites:
    """Read candidate sites from a GeoJSON or GeoPackage file (first layer).

    Args:
        path: the file.
        crs: the project CRS; the file must be in it.
        area: the study-area polygon (project CRS).
        grid: the screening grid (polygons give its cell centres; lines are sampled at its
            cell width).

    Raises:
        InputError: every problem found; feature problems carry the feature number as the
            line.
    """
    path = Path(path)
    problems = ProblemList()
    if not path.is_file():
        problems.add(path, 0, 0, "candidate file not found")
        problems.raise_if_any()
    try:
        gdf = gpd.read_file(path)
    except Exception as exc:  # noqa: BLE001 - any reader failure is an input problem
        problems.add(path, 0, 0, f"cannot read the candidate sites (GeoJSON or GeoPackage "
                     f"expected): {exc}")
        problems.raise_if_any()
    if len(gdf) == 0:
        problems.add(path, 0, 0, "the file holds no feature")
        problems.raise_if_any()
    if gdf.crs is not None and not CRS.from_user_input(gdf.crs).equals(crs):
        fcrs = CRS.from_user_input(gdf.crs)
        msg = (f"the candidate sites are in {fcrs.to_string()} ({fcrs.name}) but the project "
               f"CRS is {crs.to_string()} ({crs.name}); write the file in the project CRS")
        b = gdf.total_bounds
        if fcrs.is_geographic and np.all(np.isfinite(b)) and (
                max(abs(b[0]), abs(b[2])) > 180 or max(abs(b[1]), abs(b[3])) > 90):
            msg += (". Its coordinates look like metres, not degrees: a GeoJSON file without "
                    "a \"crs\" member is read as WGS 84 longitude/latitude")
        problems.add(path, 0, 0, msg)
        problems.raise_if_any()
    label_col = next((c for c in LABEL_COLUMNS if c in gdf.columns), None)
    xs, ys, feats, labels = [], [], [], []
    for i, geom in enumerate(gdf.geometry):
        line = i + 1
        if geom is None or geom.is_empty:
            problems.add(path, line, 0, f"feature {line} has no geometry")
            continue
        x, y, why = _sites_of(geom, area, grid)
        if why:
            problems.add(path, line, 0, f"feature {line}: {why}")
            continue
        label = "" if label_col is None else gdf[label_col].iloc[i]
        label = "" if label is None or (isinstance(label, float) and np.isnan(label)) else \
            str(label)
        xs.append(x)
        ys.append(y)
        feats.append(np.full(x.size, line, dtype=int))
        labels.append(np.full(x.size, label, dtype=object))
    problems.raise_if_any()
    return CandidateSites(np.concatenate(xs), np.concatenate(ys), np.concatenate(feats),
                          np.concatenate(labels), path.name)
