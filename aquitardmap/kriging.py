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
from aquitardmap.variogram import VariogramModel, anisotropic_coordinates

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
    if model.is_nested:  # pykrige's compiled solver knows single structures only
        w = kriging_weights(x, y, model, xt, yt, max_neighbours=max_neighbours)
        return KrigingResult(w.apply(z), w.variance)
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


@dataclass(frozen=True)
class KrigingWeights:
    """Ordinary kriging weights of a moving neighbourhood, reusable for any data values at
    the same locations.

    Attributes:
        index: (n_targets, k) indices of each target's neighbours in the data arrays.
        weights: (n_targets, k) kriging weights (each row sums to 1).
        variance: (n_targets,) ordinary kriging variance (value units²).
    """

    index: np.ndarray
    weights: np.ndarray
    variance: np.ndarray

    def apply(self, values: np.ndarray) -> np.ndarray:
        """Estimates at the targets for data ``values`` (n_data,) or (n_data, m) -> (n_t,)
        or (n_t, m)."""
        v = np.asarray(values, dtype=float)
        if v.ndim == 1:
            return np.einsum("tk,tk->t", self.weights, v[self.index])
        return np.einsum("tk,tkm->tm", self.weights, v[self.index])


def kriging_weights(x_m: np.ndarray, y_m: np.ndarray, model: VariogramModel,
                    xt_m: np.ndarray, yt_m: np.ndarray, *, max_neighbours: int = 64,
                    exclude_coincident: bool = False, chunk: int = 1024) -> KrigingWeights:
    """Ordinary kriging weights and variances at targets from data locations alone.

    The system is the ordinary kriging system in variogram form (Isaaks & Srivastava 1989,
    eq. 12.14), ``[Γ 1; 1ᵀ 0][λ; μ] = [γ₀; 1]``, variance ``λᵀγ₀ + μ``, solved for the
    ``max_neighbours`` data nearest each target in anisotropy-scaled distance (the same
    neighbourhood as :func:`krige_points`). With ``exclude_coincident`` a datum at the
    target's own location is left out (leave-one-out cross-validation at data points).
    Weights do not depend on the data values, so one set serves many value vectors (e.g.
    draws of censored data).
    """
    from scipy.spatial import cKDTree

    ax, ay = anisotropic_coordinates(np.asarray(x_m, float), np.asarray(y_m, float),
                                     model.anisotropy_ratio, model.anisotropy_angle_deg)
    tx, ty = anisotropic_coordinates(np.asarray(xt_m, float).ravel(),
                                     np.asarray(yt_m, float).ravel(),
                                     model.anisotropy_ratio, model.anisotropy_angle_deg)
    n = ax.size
    if n == 0:
        raise ValueError("no data to krige")
    k = min(max_neighbours, n - 1 if exclude_coincident else n)
    if k < 1:
        raise ValueError("leave-one-out kriging needs at least 2 data")
    tree = cKDTree(np.column_stack([ax, ay]))
    q = k + 1 if exclude_coincident else k
    d, idx = tree.query(np.column_stack([tx, ty]), k=q)
    d = d.reshape(tx.size, q)
    idx = idx.reshape(tx.size, q)
    if exclude_coincident:
        # Drop the nearest datum if it sits on the target, else the farthest of the k + 1.
        on_target = d[:, 0] <= 1e-9
        d = np.where(on_target[:, None], d[:, 1:], d[:, :-1])
        idx = np.where(on_target[:, None], idx[:, 1:], idx[:, :-1])
    weights = np.empty((tx.size, k))
    variance = np.empty(tx.size)
    for start in range(0, tx.size, chunk):
        sl = slice(start, start + chunk)
        ii = idx[sl]
        px, py = ax[ii], ay[ii]
        dd = np.hypot(px[:, :, None] - px[:, None, :], py[:, :, None] - py[:, None, :])
        a = np.ones((ii.shape[0], k + 1, k + 1))
        a[:, :k, :k] = model.gamma(dd)
        a[:, k, k] = 0.0
        b = np.ones((ii.shape[0], k + 1))
        b[:, :k] = model.gamma(d[sl])
        try:
            sol = np.linalg.solve(a, b[..., None])[..., 0]
        except np.linalg.LinAlgError:  # coincident data or a degenerate model
            sol = np.einsum("tij,tj->ti", np.linalg.pinv(a), b)
        weights[sl] = sol[:, :k]
        variance[sl] = np.einsum("ti,ti->t", sol, b)
    return KrigingWeights(idx, weights, np.maximum(variance, 0.0))
