"""Integrity hazards drawn by the user: excavations, pits, landslide scars.

``hazards.geojson`` (optional) holds polygons, each with the depth of material removed
below the ground surface. Before the hydraulics the column is cut down from the top by
that depth (cover first, then the clay; :func:`aquitardmap.hydraulics.column.remove_from_top_m`),
so a pit deeper than the cover thins the clay and one deeper than the clay opens a window.
The zones that a hazard touches say so in their ``reason``.

Properties of each feature:

``kind``
    one of :data:`HAZARD_KINDS`.
``removed_depth_m``
    depth of removed material below the ground surface (m), > 0.
``name`` (optional)
    a label shown in zone reasons and the summary; default ``"<kind> <n>"``.

A cell is cut when the polygon touches it (``all_touched``): a pit smaller than a cell
still breaches the clay somewhere in that cell, and the screening keeps the weakest point.
Where polygons overlap the deepest cut applies.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
from pyproj import CRS
from rasterio.features import rasterize

from aquitardmap.errors import Problem, ProblemList
from aquitardmap.grid import Grid

HAZARD_KINDS = ("excavation", "pit", "landslide_scar", "other")


def _empty(crs: CRS) -> gpd.GeoDataFrame:
    return gpd.GeoDataFrame({"name": [], "kind": [], "removed_depth_m": []},
                            geometry=gpd.GeoSeries([], crs=crs), crs=crs)


def read_hazards(path: str | Path | None, crs: CRS, problems: ProblemList,
                 notes: list[Problem]) -> gpd.GeoDataFrame:
    """Read and check ``hazards.geojson``; an absent file gives an empty table.

    Every problem is added to ``problems`` (file, feature number in the message): a feature
    that is not a polygon, a missing or unknown ``kind``, a ``removed_depth_m`` that is
    missing, not a number or not > 0. A file without a CRS is taken in the project CRS
    (noted); another CRS is reprojected (noted).

    Returns:
        Columns ``name``, ``kind``, ``removed_depth_m`` (m) and polygon ``geometry`` in
        ``crs``; one row per feature, file order.
    """
    if path is None:
        return _empty(crs)
    path = Path(path)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)  # mixed-type properties: as text
            gdf = gpd.read_file(path)
    except Exception as exc:  # noqa: BLE001 - any reader failure is an input problem
        problems.add(path, 0, 0, f"cannot read the hazards file: {exc}")
        return _empty(crs)
    rows = []
    for i, feat in enumerate(gdf.itertuples(index=False), start=1):
        geom = feat.geometry
        props = feat._asdict()
        name = props.get("name")
        name = str(name).strip() if isinstance(name, str) and name.strip() else ""
        label = f"feature {i}" + (f" ({name!r})" if name else "")
        ok = True
        if geom is None or geom.is_empty or geom.geom_type not in ("Polygon", "MultiPolygon"):
            problems.add(path, 0, 0, f"{label}: a hazard must be a polygon, got "
                         f"{'nothing' if geom is None else geom.geom_type}")
            ok = False
        kind = props.get("kind")
        if kind not in HAZARD_KINDS:
            problems.add(path, 0, 0, f"{label}: kind must be one of "
                         f"{', '.join(HAZARD_KINDS)}, got {kind!r}")
            ok = False
        depth = props.get("removed_depth_m")
        try:
            depth_f = float(depth)
        except (TypeError, ValueError):
            depth_f = float("nan")
        if isinstance(depth, bool) or not np.isfinite(depth_f):
            problems.add(path, 0, 0, f"{label}: removed_depth_m must be a number (m), got "
                         f"{depth!r}")
            ok = False
        elif depth_f <= 0:
            problems.add(path, 0, 0, f"{label}: removed_depth_m must be > 0, got {depth_f:g}")
            ok = False
        if ok:
            rows.append({"name": name or f"{kind} {i}", "kind": kind,
                         "removed_depth_m": depth_f, "geometry": geom.buffer(0)})
    if not rows:
        if len(gdf) == 0:
            notes.append(Problem(path.name, 0, 0, "the hazards file holds no feature"))
        return _empty(crs)
    out = gpd.GeoDataFrame(rows, geometry="geometry", crs=gdf.crs)
    if out.crs is None:
        notes.append(Problem(path.name, 0, 0, "hazards have no CRS; taken as the project CRS"))
        out = out.set_crs(crs)
    elif not out.crs.equals(crs):
        notes.append(Problem(path.name, 0, 0, f"hazards reprojected from "
                             f"{out.crs.to_string()} to the project CRS {crs.to_string()}"))
        out = out.to_crs(crs)
    return out.reset_index(drop=True)


def removed_depth_grid_m(hazards: gpd.GeoDataFrame, grid: Grid) -> tuple[np.ndarray,
                                                                          np.ndarray]:
    """Depth removed from the top of the column in each cell, and which hazard set it.

    Returns:
        ``(removed_m, index)``: removed depth (m; 0 where no hazard, NaN outside the study
        area) and the row of ``hazards`` whose cut applies (the deepest; -1 where none).
    """
    shape = (grid.height, grid.width)
    index = np.full(shape, -1, dtype=np.int32)
    if len(hazards):
        order = np.argsort(hazards["removed_depth_m"].to_numpy(float), kind="stable")
        index = rasterize(((hazards.geometry.iloc[i], int(i)) for i in order), out_shape=shape,
                          transform=grid.transform, fill=-1, all_touched=True,
                          dtype="int32")
    depths = hazards["removed_depth_m"].to_numpy(float) if len(hazards) else np.zeros(0)
    removed = np.where(index >= 0, depths[np.clip(index, 0, None)] if len(depths) else 0.0,
                       0.0)
    removed = np.where(grid.mask, removed, np.nan)
    index = np.where(grid.mask, index, -1)
    return removed, index


def hazard_table(hazards: gpd.GeoDataFrame, index: np.ndarray, aquitard_removed_m: np.ndarray,
                 cell_area_m2: float) -> list[dict]:
    """Per hazard: name, kind, removed depth, cells and area where its cut applies, and the
    largest and mean thickness of aquitard it removes there (m)."""
    out = []
    for i, row in hazards.reset_index(drop=True).iterrows():
        cells = index == i
        n = int(cells.sum())
        removed = aquitard_removed_m[cells]
        out.append({
            "name": row["name"], "kind": row["kind"],
            "removed_depth_m": float(row["removed_depth_m"]), "n_cells": n,
            "area_m2": n * cell_area_m2,
            "max_aquitard_removed_m": float(np.nanmax(removed)) if n else 0.0,
            "mean_aquitard_removed_m": float(np.nanmean(removed)) if n else 0.0,
        })
    return out


def annotate_zones(zones: gpd.GeoDataFrame, hazards: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """Add a ``hazards`` column (names of the hazards a zone touches, ``"; "``-joined) and
    say in ``reason`` that the clay there was thinned by them."""
    zones = zones.copy()
    names: list[str] = []
    for _, z in zones.iterrows():
        hit = hazards[hazards.intersects(z.geometry)] if len(hazards) else hazards
        names.append("; ".join(hit["name"]) if len(hit) else "")
        if len(hit):
            parts = ", ".join(f"{r['name']} ({r['kind'].replace('_', ' ')}, "
                              f"{r['removed_depth_m']:g} m removed)"
                              for _, r in hit.iterrows())
            reason = str(z["reason"]).rstrip(".")
            zones.loc[z.name, "reason"] = (f"{reason}; the column is cut down by "
                                           f"{parts}.")
    zones["hazards"] = names
    return zones
