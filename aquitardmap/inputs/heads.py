"""Head inputs: read and check the water table and the aquifer head (stage 1).

Two optional inputs, each either a GeoTIFF grid of head (m, the project's elevation datum)
or a CSV of points ``x, y, head_m`` (project CRS, m): ``water_table`` (``[files]
water_table``, default ``water_table.csv``) and ``aquifer_head`` (``[files] aquifer_head``,
default ``aquifer_head.csv``). A grid is resampled onto the project grid (bilinear); points
are checked here (rows, and enough distinct locations to fit a variogram) and kriged into a
surface by the hydraulics stage (:mod:`aquitardmap.hydraulics.heads`).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from aquitardmap.errors import Problem, ProblemList
from aquitardmap.grid import Grid, resample_to_grid
from aquitardmap.inputs.tables import read_point_values

HEAD_KEYS = ("water_table", "aquifer_head")
GRID_SUFFIXES = (".tif", ".tiff")
#: Distinct point locations a head surface needs: enough to fit a variogram, as the
#: thickness surfaces need (:data:`aquitardmap.geostat.surfaces.MIN_HOLES_FOR_VARIOGRAM`).
MIN_HEAD_POINTS = 8
#: Points closer than this (m) share a location (they are averaged before kriging).
COINCIDENT_M = 0.01


@dataclass(frozen=True)
class HeadInput:
    """One head input as read: a grid on the project grid, or checked points.

    Attributes:
        key: ``"water_table"`` or ``"aquifer_head"``.
        file: name of the input file.
        source: ``"grid"`` or ``"points"``.
        head_m: the grid's head on the project grid (m; NaN outside the study area or where
            it gives no value); None for points.
        points: the points' ``x``, ``y`` (m) and ``head_m`` (m); None for a grid.
    """

    key: str
    file: str
    source: str
    head_m: np.ndarray | None = None
    points: pd.DataFrame | None = None


def distinct_locations(x_m: np.ndarray, y_m: np.ndarray,
                       tolerance_m: float = COINCIDENT_M) -> int:
    """Number of distinct point locations (points within ``tolerance_m`` count once)."""
    x, y = np.asarray(x_m, float), np.asarray(y_m, float)
    if x.size == 0:
        return 0
    keys = np.column_stack([np.round(x / tolerance_m), np.round(y / tolerance_m)])
    return int(np.unique(keys, axis=0).shape[0])


def read_head_input(path: Path | None, key: str, grid: Grid, problems: ProblemList,
                    notes: list[Problem]) -> HeadInput | None:
    """Read one head input (grid or points); None when the file is absent or has problems.

    Problems (unreadable file, bad rows, fewer than :data:`MIN_HEAD_POINTS` distinct
    points) go to ``problems``; a grid that leaves study-area cells without a value is
    noted (the stated gradient applies there).
    """
    if path is None:
        return None
    if path.suffix.lower() in GRID_SUFFIXES:
        try:
            head = resample_to_grid(path, grid)
        except Exception as exc:  # noqa: BLE001 - any reader failure is an input problem
            problems.add(path, 0, 0, f"cannot read the {key} grid: {exc}")
            return None
        head = np.where(grid.mask, head, np.nan)
        missing = int((grid.mask & ~np.isfinite(head)).sum())
        if missing:
            notes.append(Problem(path.name, 0, 0, f"the {key} grid gives no value in "
                                 f"{missing} cell(s) of the study area; the stated "
                                 "vertical_gradient is used there"))
        return HeadInput(key, path.name, "grid", head_m=head)
    warnings = ProblemList()
    before = len(problems.problems)
    pts = read_point_values(path, "head_m", problems, warnings)
    notes.extend(warnings.problems)
    if len(problems.problems) > before:
        return None
    n = distinct_locations(pts["x"].to_numpy(), pts["y"].to_numpy())
    if n < MIN_HEAD_POINTS:
        problems.add(path, 0, 0, f"{key}: {n} distinct point(s); at least {MIN_HEAD_POINTS} "
                     "are needed to fit a variogram and krige a head surface")
        return None
    return HeadInput(key, path.name, "points", points=pts[["x", "y", "head_m"]].copy())


__all__ = ["COINCIDENT_M", "GRID_SUFFIXES", "HEAD_KEYS", "MIN_HEAD_POINTS", "HeadInput",
           "distinct_locations", "read_head_input"]
