"""Ordinary kriging of point data onto points or a grid, with its variance (and kriging with
an external drift, for weights reused over many value vectors: :func:`kriging_weights`, or
:func:`prepare_locations` once and :func:`weights_at` per set of targets).

Ordinary kriging as in Isaaks & Srivastava (1989, ch. 12), with a moving neighbourhood: each
target uses its nearest ``max_neighbours`` data (all data when there are fewer), which
bounds the work and keeps the system well conditioned. The variogram is fitted by
:mod:`aquitardmap.geostat.variogram` and used as given. The solver is the local engine of
:mod:`aquitardmap.geostat.localkrige` (equal to pykrige's ``OrdinaryKriging`` C backend with
``n_closest_points`` to 1e-8 relative, tested). Targets are cut into tiles that run one
after another, or on a Dask cluster when the caller's :class:`~aquitardmap.geostat.context.
KrigingContext` says so (:mod:`aquitardmap.geostat.compute`); the numbers are the same
either way.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from aquitardmap.geostat import localkrige
from aquitardmap.geostat.context import DEFAULT_CONTEXT, KrigingContext
from aquitardmap.geostat.variogram import VariogramModel, anisotropic_coordinates
from aquitardmap.grid import Grid

if TYPE_CHECKING:  # pragma: no cover - typing only
    from scipy.spatial import cKDTree


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


def _points_tile(data: localkrige.KrigingData, item: tuple[np.ndarray, np.ndarray]
                 ) -> tuple[np.ndarray, np.ndarray]:
    """One tile of target points (a task of the compute runner)."""
    return localkrige.krige_targets(data, item[0], item[1])


def _grid_tile(data: localkrige.KrigingData,
               item: tuple[tuple[float, float, float, float], int, int, np.ndarray]
               ) -> tuple[np.ndarray, np.ndarray]:
    """One rectangular window of a grid: item = (transform a, c, e, f; first row; first
    column; mask of the window); kriges the cells of the window inside the mask."""
    (a, c, e, f), row0, col0, mask = item
    rows, cols = np.nonzero(mask)
    xt = c + a * (cols + col0 + 0.5)
    yt = f + e * (rows + row0 + 0.5)
    return localkrige.krige_targets(data, xt, yt)


def krige_points(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                 model: VariogramModel, xt_m: np.ndarray, yt_m: np.ndarray, *,
                 max_neighbours: int = 64, context: KrigingContext = DEFAULT_CONTEXT
                 ) -> KrigingResult:
    """Ordinary kriging of ``values`` at data (x_m, y_m) onto targets (xt_m, yt_m).

    Data must not share locations (see :func:`merge_coincident`). At a target that falls on a
    datum the estimate equals the datum (exact interpolator) and the variance is 0.
    Variances are clipped at 0 (a rounding error can make them slightly negative).
    """
    xt = np.asarray(xt_m, float).ravel()
    yt = np.asarray(yt_m, float).ravel()
    data = localkrige.prepare(x_m, y_m, values, model, max_neighbours)
    runner = context.runner
    size = runner.tile_cells
    est = np.empty(xt.size)
    var = np.empty(xt.size)
    if xt.size <= size:
        order = np.arange(xt.size)
    else:  # tiles of nearby targets: sort by a coarse square lattice, row by row
        side = data.bin_m * 8.0
        ix = np.floor((xt - xt.min()) / side).astype(np.int64)
        iy = np.floor((yt - yt.min()) / side).astype(np.int64)
        order = np.argsort(iy * (int(ix.max()) + 1) + ix, kind="stable")
    pieces = [order[s:s + size] for s in range(0, xt.size, size)]
    results = runner.map(_points_tile, data, [(xt[p], yt[p]) for p in pieces])
    for p, (e, v) in zip(pieces, results, strict=True):
        est[p] = e
        var[p] = v
    return KrigingResult(est, np.maximum(var, 0.0))


def _krige_arrays(x_m, y_m, values, model, xt_m, yt_m, *, max_neighbours, context):
    """:func:`krige_points` as (estimate, variance) arrays (the tile cache's kriging)."""
    r = krige_points(x_m, y_m, values, model, xt_m, yt_m, max_neighbours=max_neighbours,
                     context=context)
    return r.estimate, r.variance


def krige_grid(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray, model: VariogramModel,
               grid: Grid, *, max_neighbours: int = 64,
               context: KrigingContext = DEFAULT_CONTEXT) -> KrigingResult:
    """Ordinary kriging onto the centres of the cells of ``grid`` inside its mask.

    The grid is cut into square windows of about the runner's ``tile_cells`` cells, each a
    task; memory stays bounded by the tile size plus the output grids. Returns
    (height, width) arrays with NaN outside the mask. With a tile cache in ``context``,
    tiles whose deciding data are unchanged are read from the cache instead (same numbers;
    :mod:`aquitardmap.geostat.cache.tiles`); the others are kriged on the context's runner.
    """
    cache = context.tiles
    if cache is not None:
        krige = functools.partial(_krige_arrays, context=KrigingContext(context.runner))
        return KrigingResult(*cache.krige_grid(x_m, y_m, values, model, grid,
                                               max_neighbours, krige))
    data = localkrige.prepare(x_m, y_m, values, model, max_neighbours)
    runner = context.runner
    side = max(16, int(math.isqrt(runner.tile_cells)))
    t = grid.transform
    affine = (float(t.a), float(t.c), float(t.e), float(t.f))
    windows = []
    items = []
    for r0 in range(0, grid.height, side):
        for c0 in range(0, grid.width, side):
            m = grid.mask[r0:r0 + side, c0:c0 + side]
            if m.any():
                windows.append((r0, c0, m))
                items.append((affine, r0, c0, np.ascontiguousarray(m)))
    est = np.full(grid.mask.shape, np.nan)
    var = np.full(grid.mask.shape, np.nan)
    for (r0, c0, m), (e, v) in zip(windows, runner.map(_grid_tile, data, items), strict=True):
        h, w = m.shape
        est[r0:r0 + h, c0:c0 + w][m] = e
        var[r0:r0 + h, c0:c0 + w][m] = np.maximum(v, 0.0)
    return KrigingResult(est, var)


def loo_cross_validation(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                         model: VariogramModel, max_neighbours: int = 64) -> KrigingResult:
    """Leave-one-out cross-validation kriging: at every datum, the estimate and variance
    from its nearest ``max_neighbours`` *other* data (Isaaks & Srivastava 1989, ch. 15).

    Equal to kriging each datum from the data set without it, in one pass (about 5 µs per
    datum with 16 neighbours). Data must not share locations. Variances are clipped at 0.

    Raises:
        ValueError: with fewer than 2 data.
    """
    data = localkrige.prepare(x_m, y_m, values, model, max_neighbours)
    est, var = localkrige.leave_one_out(data)
    return KrigingResult(est, np.maximum(var, 0.0))


def cross_validation_statistics(values: np.ndarray, loo: KrigingResult) -> dict[str, float]:
    """Mean error, RMSE, and mean and variance of the standardised errors of a
    leave-one-out result (these should be near 0 and 1; Isaaks & Srivastava 1989, ch. 15).

    Keys: ``n``, ``mean_error``, ``rmse``, ``mean_standardised_error``,
    ``variance_standardised_error``; NaN statistics with fewer than 3 data.
    """
    z = np.asarray(values, dtype=float).ravel()
    n = z.size
    if n < 3:
        return {"n": float(n), "mean_error": np.nan, "rmse": np.nan,
                "mean_standardised_error": np.nan, "variance_standardised_error": np.nan}
    err = loo.estimate - z
    sd = np.sqrt(loo.variance)
    with np.errstate(invalid="ignore", divide="ignore"):
        zs = err / np.where(sd > 0, sd, np.nan)
    return {"n": float(n), "mean_error": float(err.mean()),
            "rmse": float(np.sqrt(np.mean(err**2))),
            "mean_standardised_error": float(np.nanmean(zs)),
            "variance_standardised_error": float(np.nanvar(zs))}


@dataclass(frozen=True)
class KrigingWeights:
    """Ordinary kriging weights of a moving neighbourhood, reusable for any data values at
    the same locations.

    Attributes:
        index: (n_targets, k) indices of each target's neighbours in the data arrays.
        weights: (n_targets, k) kriging weights (each row sums to 1).
        variance: (n_targets,) ordinary kriging variance (value units²).
        lagrange: (n_targets,) multiplier ``μ`` of the unbiasedness condition in the
            variogram form of the system, ``Σ_j λ_j γ(d_i, d_j) + μ = γ(d_i, x₀)``.
    """

    index: np.ndarray
    weights: np.ndarray
    variance: np.ndarray
    lagrange: np.ndarray

    def apply(self, values: np.ndarray) -> np.ndarray:
        """Estimates at the targets for data ``values`` (n_data,) or (n_data, m) -> (n_t,)
        or (n_t, m)."""
        v = np.asarray(values, dtype=float)
        if v.ndim == 1:
            return np.einsum("tk,tk->t", self.weights, v[self.index])
        return np.einsum("tk,tkm->tm", self.weights, v[self.index])


@dataclass(frozen=True)
class KrigingLocations:
    """What the kriging weights need from the data locations alone, built once by
    :func:`prepare_locations` and reused for any number of target sets.

    Attributes:
        model: the variogram the weights are for.
        ax, ay: (n,) data coordinates in anisotropy-scaled space (m).
        tree: k-d tree of (ax, ay).
        gamma_table: (n, n) semivariances between the data, or None above
            :data:`GAMMA_TABLE_MAX_DATA` data (then looked up per neighbourhood).
        drift: (n,) external drift at the data, centred and scaled by ``drift_centre`` and
            ``drift_scale`` (the data's mean and SD); None without a drift.
    """

    model: VariogramModel
    ax: np.ndarray
    ay: np.ndarray
    tree: cKDTree
    gamma_table: np.ndarray | None
    drift: np.ndarray | None
    drift_centre: float = 0.0
    drift_scale: float = 1.0

    @property
    def n(self) -> int:
        """Number of data."""
        return int(self.ax.size)


#: Data count up to which the semivariances between all data are tabulated once
#: (8 bytes × n², 128 MB at the limit).
GAMMA_TABLE_MAX_DATA = 4000


def prepare_locations(x_m: np.ndarray, y_m: np.ndarray, model: VariogramModel, *,
                      drift: np.ndarray | None = None) -> KrigingLocations:
    """The per-data part of :func:`kriging_weights`: anisotropy-scaled coordinates, their
    k-d tree, the semivariance table between the data (up to
    :data:`GAMMA_TABLE_MAX_DATA` data) and the external drift (a value per datum, or None)
    centred and scaled by its mean and SD. Pass the result to :func:`weights_at` for each
    set of targets.

    Raises:
        ValueError: without data, or with a drift that is not one finite value per datum.
    """
    from scipy.spatial import cKDTree

    ax, ay = anisotropic_coordinates(np.asarray(x_m, float), np.asarray(y_m, float),
                                     model.anisotropy_ratio, model.anisotropy_angle_deg)
    n = ax.size
    if n == 0:
        raise ValueError("no data to krige")
    f = None
    centre, scale = 0.0, 1.0
    if drift is not None:
        f = np.asarray(drift, float).ravel()
        if f.size != n:
            raise ValueError("one drift value per datum and per target is needed")
        if not np.all(np.isfinite(f)):
            raise ValueError("the external drift has missing values at data or targets")
        centre, scale = float(f.mean()), float(f.std()) or 1.0
        f = (f - centre) / scale
    table = None
    if n <= GAMMA_TABLE_MAX_DATA:
        table = model.gamma(np.hypot(ax[:, None] - ax[None, :], ay[:, None] - ay[None, :]))
    return KrigingLocations(model, ax, ay, cKDTree(np.column_stack([ax, ay])), table, f,
                            centre, scale)


def kriging_weights(x_m: np.ndarray, y_m: np.ndarray, model: VariogramModel,
                    xt_m: np.ndarray, yt_m: np.ndarray, *, max_neighbours: int = 64,
                    exclude_coincident: bool = False, chunk: int = 1024,
                    drift: np.ndarray | None = None, target_drift: np.ndarray | None = None
                    ) -> KrigingWeights:
    """Ordinary kriging weights and variances at targets from data locations alone.

    The system is the ordinary kriging system in variogram form (Isaaks & Srivastava 1989,
    eq. 12.14), ``[Γ 1; 1ᵀ 0][λ; μ] = [γ₀; 1]``, variance ``λᵀγ₀ + μ``, solved for the
    ``max_neighbours`` data nearest each target in anisotropy-scaled distance (the same
    neighbourhood as :func:`krige_points`). With ``exclude_coincident`` a datum at the
    target's own location is left out (leave-one-out cross-validation at data points).
    Weights do not depend on the data values, so one set serves many value vectors (e.g.
    draws of censored data).

    With ``drift`` (a value per datum, e.g. ground elevation) and ``target_drift`` (a value
    per target), the weights are those of kriging with an external drift: the local mean
    is ``a + b·f(x)`` with ``a`` and ``b`` unknown in each neighbourhood, and the system
    gains the constraint ``Σλᵢ fᵢ = f₀`` (Wackernagel 2003, *Multivariate Geostatistics*,
    3rd ed., the chapter on external drift, from memory; Hengl et al. 2007, Computers &
    Geosciences 33:1301–1315), ``[Γ 1 f; 1ᵀ 0 0; fᵀ 0 0][λ; μ₀; μ₁] =
    [γ₀; 1; f₀]``, variance ``λᵀγ₀ + μ₀ + μ₁f₀``; ``model`` is then the variogram of the
    residual from the drift. A neighbourhood whose drift values are all equal cannot
    estimate ``b``; its target gets the ordinary kriging weights. The drift is centred and
    scaled by the data's mean and SD first (the weights are invariant to that, given
    ``Σλᵢ = 1``), which keeps the system well conditioned.

    Equal to ``weights_at(prepare_locations(x_m, y_m, model, drift=drift), xt_m, yt_m,
    ...)``; for many target sets over the same data, prepare the locations once and call
    :func:`weights_at` per set.
    """
    return weights_at(prepare_locations(x_m, y_m, model, drift=drift), xt_m, yt_m,
                      max_neighbours=max_neighbours, exclude_coincident=exclude_coincident,
                      chunk=chunk, target_drift=target_drift)


def weights_at(locations: KrigingLocations, xt_m: np.ndarray, yt_m: np.ndarray, *,
               max_neighbours: int = 64, exclude_coincident: bool = False, chunk: int = 1024,
               target_drift: np.ndarray | None = None) -> KrigingWeights:
    """Kriging weights at targets (xt_m, yt_m) from prepared data locations (the method of
    :func:`kriging_weights`). ``target_drift`` (a value per target, in the units of the
    data's drift) is needed exactly when the locations carry a drift.

    Raises:
        ValueError: with fewer than 2 data and ``exclude_coincident``, or a target drift
            that is missing, of the wrong size or not finite.
    """
    loc = locations
    model = loc.model
    ax, ay = loc.ax, loc.ay
    tx, ty = anisotropic_coordinates(np.asarray(xt_m, float).ravel(),
                                     np.asarray(yt_m, float).ravel(),
                                     model.anisotropy_ratio, model.anisotropy_angle_deg)
    n = loc.n
    k = min(max_neighbours, n - 1 if exclude_coincident else n)
    if k < 1:
        raise ValueError("leave-one-out kriging needs at least 2 data")
    q = k + 1 if exclude_coincident else k
    d, idx = loc.tree.query(np.column_stack([tx, ty]), k=q)
    d = d.reshape(tx.size, q)
    idx = idx.reshape(tx.size, q)
    if exclude_coincident:
        # Drop the nearest datum if it sits on the target, else the farthest of the k + 1.
        on_target = d[:, 0] <= 1e-9
        d = np.where(on_target[:, None], d[:, 1:], d[:, :-1])
        idx = np.where(on_target[:, None], idx[:, 1:], idx[:, :-1])
    f = loc.drift
    ft = None
    if f is not None:
        if target_drift is None:
            raise ValueError("kriging with an external drift needs its value at the targets")
        ft = np.asarray(target_drift, float).ravel()
        if ft.size != tx.size:
            raise ValueError("one drift value per datum and per target is needed")
        if not np.all(np.isfinite(ft)):
            raise ValueError("the external drift has missing values at data or targets")
        ft = (ft - loc.drift_centre) / loc.drift_scale
    weights = np.empty((tx.size, k))
    variance = np.empty(tx.size)
    lagrange = np.empty(tx.size)
    table = loc.gamma_table
    for start in range(0, tx.size, chunk):
        sl = slice(start, start + chunk)
        ii = idx[sl]
        a = np.ones((ii.shape[0], k + 1, k + 1))
        if table is not None:
            a[:, :k, :k] = table[ii[:, :, None], ii[:, None, :]]
        else:
            px, py = ax[ii], ay[ii]
            a[:, :k, :k] = model.gamma(np.hypot(px[:, :, None] - px[:, None, :],
                                                py[:, :, None] - py[:, None, :]))
        a[:, k, k] = 0.0
        b = np.ones((ii.shape[0], k + 1))
        b[:, :k] = model.gamma(d[sl])
        if f is None:
            sol = _solve_systems(a, b)
        else:
            sol, b = _solve_with_external_drift(a, b, f[ii], ft[sl])
        weights[sl] = sol[:, :k]
        lagrange[sl] = sol[:, k]
        variance[sl] = np.einsum("ti,ti->t", sol, b)
    return KrigingWeights(idx, weights, np.maximum(variance, 0.0), lagrange)


#: Spread of the (scaled) drift within a neighbourhood below which it cannot be estimated.
DRIFT_SPREAD_MIN = 1e-6


def _solve_systems(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve a batch of kriging systems ``a x = b`` ((t, m, m) and (t, m)); a singular one
    (coincident data or a degenerate model) sends the batch to the pseudo-inverse."""
    try:
        return np.linalg.solve(a, b[..., None])[..., 0]
    except np.linalg.LinAlgError:
        return np.einsum("tij,tj->ti", np.linalg.pinv(a), b)


def _solve_with_external_drift(a_ok: np.ndarray, b_ok: np.ndarray, f_nb: np.ndarray,
                               f_target: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Extend ordinary kriging systems (t, k+1, k+1) by the external-drift row and column
    and solve them; rows whose neighbours' drift is constant are solved as ordinary
    systems instead (with a zero drift multiplier). Each row is solved once. Returns
    (solution, right-hand side), both (t, k+2)."""
    t, k1, _ = a_ok.shape
    k = k1 - 1
    a = np.zeros((t, k + 2, k + 2))
    a[:, :k1, :k1] = a_ok
    a[:, :k, k + 1] = f_nb
    a[:, k + 1, :k] = f_nb
    b = np.zeros((t, k + 2))
    b[:, :k1] = b_ok
    b[:, k + 1] = f_target
    sol = np.zeros((t, k + 2))
    ok = np.ptp(f_nb, axis=1) > DRIFT_SPREAD_MIN
    if ok.any():
        sol[ok] = _solve_systems(a[ok], b[ok])
    if not ok.all():
        sol[~ok, :k1] = _solve_systems(a_ok[~ok], b_ok[~ok])
        b[~ok, k + 1] = 0.0  # ordinary rows: no drift term in the variance
    return sol, b
