"""Ordinary kriging of point data onto points or a grid, with its variance.

The solver is pykrige's ``OrdinaryKriging`` (ordinary kriging as in Isaaks & Srivastava 1989,
ch. 12): the variogram is fitted by :mod:`aquitardmap.variogram` and handed to pykrige as
fixed parameters, never re-fitted there. With more data than ``max_neighbours`` each target
uses only its nearest ``max_neighbours`` data (a moving neighbourhood), which bounds the
memory and keeps the system well conditioned.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from pykrige.ok import OrdinaryKriging

from aquitardmap.grid import Grid
from aquitardmap.variogram import VariogramModel

#: Targets kriged per call to bound memory (the vectorised solver holds n_targets × n_data).
CHUNK_TARGETS = 4096


@dataclass(frozen=True)
class KrigingResult:
    """Estimate and kriging variance at the targets (value units and value units²)."""

    estimate: np.ndarray
    variance: np.ndarray


def merge_coincident(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                     tolerance_m: float = 0.01) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Average data that share a location (within ``tolerance_m``); kriging cannot take two
    data at one point."""
    x, y, v = (np.asarray(a, dtype=float) for a in (x_m, y_m, values))
    if x.size == 0:
        return x, y, v
    keys = np.column_stack([np.round(x / tolerance_m), np.round(y / tolerance_m)])
    uniq, inverse = np.unique(keys, axis=0, return_inverse=True)
    inverse = inverse.ravel()
    n = np.bincount(inverse)
    return (np.bincount(inverse, x) / n, np.bincount(inverse, y) / n,
            np.bincount(inverse, v) / n)


def krige_points(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                 model: VariogramModel, xt_m: np.ndarray, yt_m: np.ndarray, *,
                 max_neighbours: int = 64) -> KrigingResult:
    """Ordinary kriging of ``values`` at data (x_m, y_m) onto targets (xt_m, yt_m).

    Data must not share locations (see :func:`merge_coincident`). At a target that falls on a
    datum the estimate equals the datum (exact interpolator) and the variance is 0.
    """
    x, y, z = (np.asarray(a, dtype=float) for a in (x_m, y_m, values))
    xt, yt = np.asarray(xt_m, float).ravel(), np.asarray(yt_m, float).ravel()
    if x.size == 0:
        raise ValueError("no data to krige")
    if x.size == 1 and model.anisotropy_ratio == 1.0:
        return KrigingResult(np.full(xt.size, z[0]),
                             model.gamma(np.hypot(xt - x[0], yt - y[0])) * 2.0)
    ok = OrdinaryKriging(
        x, y, z, variogram_model=model.model,
        variogram_parameters={"psill": model.psill, "range": model.range_m,
                              "nugget": model.nugget},
        anisotropy_scaling=model.anisotropy_ratio, anisotropy_angle=model.anisotropy_angle_deg,
        exact_values=True, pseudo_inv=True,
    )
    est = np.empty(xt.size)
    var = np.empty(xt.size)
    local = x.size > max_neighbours
    for start in range(0, xt.size, CHUNK_TARGETS):
        sl = slice(start, start + CHUNK_TARGETS)
        if local:
            e, v = ok.execute("points", xt[sl], yt[sl], backend="C",
                              n_closest_points=max_neighbours)
        else:
            e, v = ok.execute("points", xt[sl], yt[sl], backend="vectorized")
        est[sl] = np.asarray(e, dtype=float)
        var[sl] = np.asarray(v, dtype=float)
    return KrigingResult(est, np.maximum(var, 0.0))


def krige_grid(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray, model: VariogramModel,
               grid: Grid, *, max_neighbours: int = 64) -> KrigingResult:
    """Ordinary kriging onto the centres of the cells of ``grid`` inside its mask.

    Returns (height, width) arrays with NaN outside the mask.
    """
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    inside = grid.mask
    res = krige_points(x_m, y_m, values, model, xx[inside], yy[inside],
                       max_neighbours=max_neighbours)
    est = np.full(grid.mask.shape, np.nan)
    var = np.full(grid.mask.shape, np.nan)
    est[inside] = res.estimate
    var[inside] = res.variance
    return KrigingResult(est, var)
