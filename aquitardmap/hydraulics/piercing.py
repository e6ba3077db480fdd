"""Piercing boreholes: holes through the whole aquitard into the aquifer, and their density.

Every well or hole that passes through the clay into the aquifer is a potential vertical
conduit if it is poorly sealed (common practice). A hole *pierces* the aquitard when its
log reaches the aquifer (``status_aquitard == "full"``) and it went through some clay on
the way (``aquitard_thickness_m > 0``): a hole in a window pierces nothing. Holes left out
by ``[qa] exclude_boreholes`` are not counted.

Density is the number of piercing holes within ``radius_m`` of each cell centre divided by
the area of that circle, in holes per km² (a uniform-kernel point density, e.g. Silverman
1986, *Density Estimation for Statistics and Data Analysis*, ch. 2, the naive estimator).
Cells at or above ``flag_per_km2`` are flagged.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.spatial import cKDTree

from aquitardmap.grid import Grid
from aquitardmap.units import M2_PER_KM2


def piercing_mask(columns: pd.DataFrame) -> pd.Series:
    """Whether each borehole of a :func:`aquitardmap.inputs.columns.column_table` pierces the
    aquitard (reached the aquifer through some clay, not excluded)."""
    return ((columns["status_aquitard"] == "full") & columns["reached_aquifer"].astype(bool)
            & (columns["aquitard_thickness_m"] > 0) & ~columns["excluded"].astype(bool))


def point_density_per_km2(x_m: np.ndarray, y_m: np.ndarray, grid: Grid,
                          radius_m: float) -> np.ndarray:
    """Points within ``radius_m`` of each cell centre per km² of the search circle.

    Returns (height, width), NaN outside the study area.
    """
    if radius_m <= 0:
        raise ValueError("radius_m must be > 0")
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    counts = np.zeros(xx.shape)
    if len(x_m):
        tree = cKDTree(np.column_stack([np.asarray(x_m, float), np.asarray(y_m, float)]))
        counts = tree.query_ball_point(np.column_stack([xx.ravel(), yy.ravel()]), r=radius_m,
                                       return_length=True).reshape(xx.shape).astype(float)
    density = counts / (np.pi * radius_m**2 / M2_PER_KM2)
    return np.where(grid.mask, density, np.nan)


def piercing_table(columns: pd.DataFrame, density_per_km2: np.ndarray, grid: Grid,
                   flag_per_km2: float) -> pd.DataFrame:
    """The piercing holes: ``borehole_id, x, y, aquitard_thickness_m, total_depth_m,
    depth_to_aquifer_m, density_per_km2`` (density at the hole's cell, NaN outside the
    grid) and ``in_flagged_cell``."""
    p = columns[piercing_mask(columns)]
    row, col = grid.rowcol(p["x"].to_numpy(float), p["y"].to_numpy(float))
    inside = row >= 0
    dens = np.full(len(p), np.nan)
    dens[inside] = density_per_km2[row[inside], col[inside]]
    out = pd.DataFrame({
        "borehole_id": p.index.astype(str),
        "x": p["x"].to_numpy(float), "y": p["y"].to_numpy(float),
        "aquitard_thickness_m": p["aquitard_thickness_m"].to_numpy(float),
        "total_depth_m": p["total_depth_m"].to_numpy(float),
        "depth_to_aquifer_m": p["depth_to_aquifer_m"].to_numpy(float),
        "density_per_km2": dens,
    })
    with np.errstate(invalid="ignore"):
        out["in_flagged_cell"] = out["density_per_km2"] >= flag_per_km2
    return out
