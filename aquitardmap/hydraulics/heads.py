"""Hydraulic heads above and below the column, for the vertical gradient.

Two optional inputs, each either a GeoTIFF grid of head (m, the project's elevation datum)
or a CSV of points ``x, y, head_m`` (project CRS, m):

* ``water_table`` (``[files] water_table``, default ``water_table.csv``): the water table
  above the column;
* ``aquifer_head`` (``[files] aquifer_head``, default ``aquifer_head.csv``): the head in the
  protected aquifer (its potentiometric surface).

A grid is resampled onto the project grid (bilinear). Points are kriged the way the
thickness surfaces are (:mod:`aquitardmap.geostat.variogram` fit,
:func:`aquitardmap.geostat.kriging.
krige_grid`, the project's ``[kriging]`` settings), without the clipping at zero that
thickness gets. With both inputs the gradient is ``(h_water_table − h_aquifer) / B``
(:func:`aquitardmap.hydraulics.column.gradient_from_heads`); where either is missing, the stated
``[hydraulics] vertical_gradient`` applies.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from aquitardmap.config.settings import KrigingSettings
from aquitardmap.errors import Problem, ProblemList
from aquitardmap.geostat.kriging import krige_grid, merge_coincident
from aquitardmap.geostat.surfaces import MIN_HOLES_FOR_VARIOGRAM
from aquitardmap.geostat.variogram import (
    VariogramModel,
    default_lags,
    experimental_variogram,
    fit_variogram,
)
from aquitardmap.grid import Grid, resample_to_grid
from aquitardmap.inputs.tables import read_point_values

HEAD_KEYS = ("water_table", "aquifer_head")
GRID_SUFFIXES = (".tif", ".tiff")


@dataclass(frozen=True)
class HeadSurface:
    """A head surface on the project grid.

    Attributes:
        key: ``"water_table"`` or ``"aquifer_head"``.
        file: name of the input file.
        source: ``"grid"`` or ``"points"``.
        head_m: head on the grid (m), NaN outside the study area or where the input gives
            no value.
        n_points: number of points kriged (0 for a grid).
        variogram: the fitted model (points only).
    """

    key: str
    file: str
    source: str
    head_m: np.ndarray
    n_points: int = 0
    variogram: VariogramModel | None = None

    def as_dict(self) -> dict:
        """Plain description for the summary."""
        inside = np.isfinite(self.head_m)
        return {"file": self.file, "source": self.source, "n_points": self.n_points,
                "variogram": self.variogram.as_dict() if self.variogram else None,
                "min_m": float(np.nanmin(self.head_m)) if inside.any() else None,
                "max_m": float(np.nanmax(self.head_m)) if inside.any() else None}


def krige_head_points(x_m: np.ndarray, y_m: np.ndarray, head_m: np.ndarray, grid: Grid,
                      settings: KrigingSettings) -> tuple[np.ndarray, VariogramModel]:
    """Ordinary kriging of head points onto ``grid`` (m); returns (grid, variogram).

    Variogram: lags from the point spacing (:func:`default_lags`), fitted with the
    project's model (:func:`fit_variogram`). Coincident points are averaged.

    Raises:
        ValueError: fewer than :data:`MIN_HOLES_FOR_VARIOGRAM` distinct points.
    """
    x, y, h = merge_coincident(x_m, y_m, head_m)
    if x.size < MIN_HOLES_FOR_VARIOGRAM:
        raise ValueError(f"{x.size} distinct point(s); at least {MIN_HOLES_FOR_VARIOGRAM} "
                         "are needed to fit a variogram and krige a head surface")
    n_lags, max_lag = default_lags(x, y, max_lag_fraction=settings.max_lag_fraction)
    exp = experimental_variogram(x, y, h, n_lags=settings.n_lags or n_lags, max_lag_m=max_lag)
    model = fit_variogram(exp, settings.variogram_model, sample_variance=float(np.var(h)))
    res = krige_grid(x, y, h, model, grid, max_neighbours=settings.max_neighbours)
    return res.estimate, model


def read_head_surface(path: Path | None, key: str, grid: Grid, settings: KrigingSettings,
                      problems: ProblemList, notes: list[Problem]) -> HeadSurface | None:
    """Read one head input (grid or points) onto ``grid``; None when the file is absent.

    Problems (unreadable file, bad rows, too few points) go to ``problems``; a grid that
    leaves study-area cells without a value is noted (the stated gradient applies there).
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
        return HeadSurface(key, path.name, "grid", head)
    warnings = ProblemList()
    before = len(problems.problems)
    pts = read_point_values(path, "head_m", problems, warnings)
    notes.extend(warnings.problems)
    if len(problems.problems) > before:
        return None
    try:
        head, model = krige_head_points(pts["x"].to_numpy(), pts["y"].to_numpy(),
                                        pts["head_m"].to_numpy(), grid, settings)
    except ValueError as exc:
        problems.add(path, 0, 0, f"{key}: {exc}")
        return None
    return HeadSurface(key, path.name, "points", np.where(grid.mask, head, np.nan),
                       n_points=len(pts), variogram=model)
