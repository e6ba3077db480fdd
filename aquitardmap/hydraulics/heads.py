"""Head surfaces above and below the column, for the vertical gradient (stage 3).

The head inputs (:mod:`aquitardmap.inputs.heads`, read and checked in stage 1) become
surfaces on the project grid: a grid as read, points kriged the way the thickness surfaces
are (:mod:`aquitardmap.geostat.variogram` fit, :func:`aquitardmap.geostat.kriging.krige_grid`,
the project's ``[kriging]`` settings), without the clipping at zero that thickness gets.
With both the gradient is ``(h_water_table − h_aquifer) / B``
(:func:`aquitardmap.hydraulics.column.gradient_from_heads`); where either is missing, the
stated ``[hydraulics] vertical_gradient`` applies.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from aquitardmap.config.settings import KrigingSettings
from aquitardmap.geostat.kriging import krige_grid, merge_coincident
from aquitardmap.geostat.surfaces import MIN_HOLES_FOR_VARIOGRAM
from aquitardmap.geostat.variogram import (
    VariogramModel,
    default_lags,
    experimental_variogram,
    fit_variogram,
)
from aquitardmap.grid import Grid
from aquitardmap.inputs.heads import HeadInput


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


def head_surface(head: HeadInput, grid: Grid, settings: KrigingSettings) -> HeadSurface:
    """The head surface of a head input on ``grid``: a grid as read, points kriged
    (:func:`krige_head_points`) and clipped to the study area."""
    if head.source == "grid":
        return HeadSurface(head.key, head.file, "grid", head.head_m)
    pts = head.points
    est, model = krige_head_points(pts["x"].to_numpy(), pts["y"].to_numpy(),
                                   pts["head_m"].to_numpy(), grid, settings)
    return HeadSurface(head.key, head.file, "points", np.where(grid.mask, est, np.nan),
                       n_points=len(pts), variogram=model)
