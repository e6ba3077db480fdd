"""Local ordinary kriging engine: nearest-k neighbourhoods, bounded memory, shared systems.

Each target is estimated by ordinary kriging from its ``k`` nearest data, in the variogram
form of Isaaks & Srivastava (1989, *An Introduction to Applied Geostatistics*, eq. 12.14)::

    [Γ  1] [λ]   [γ0]
    [1ᵀ 0] [μ] = [1 ]      estimate = λᵀz,   variance = λᵀγ0 + μ

where Γ holds the model semivariance between the neighbours (0 on the diagonal) and γ0
between the neighbours and the target. Geometric anisotropy uses the coordinate change of
the pykrige package (rotation by minus ``anisotropy_angle_deg`` about the centre of the data's
bounding box, then the minor axis stretched by ``anisotropy_ratio``); neighbours are the
nearest in that frame, and a target closer than :data:`EXACT_DISTANCE` to a datum gets
γ0 = 0 there, so kriging is an exact interpolator. With the same model and neighbours the
results equal pykrige's ``OrdinaryKriging.execute(..., backend="C", n_closest_points=k)``
(tested to 1e-8 relative), without pykrige's dense n × n matrix of all data.

How it is fast, and lean:

* Targets are processed in chunks of at most :data:`CHUNK_TARGETS`, so memory is bounded
  whatever the number of targets.
* Within a chunk, targets are grouped in square *bins*. The data that can be among the k
  nearest of any target of a bin lie within ``d_k(c) + 2r`` of the bin centre c (d_k: k-th
  neighbour distance, r: largest distance from c to a target of the bin, by the triangle
  inequality), so one ball query per bin gives an exact candidate list, and each target
  picks its k nearest among a few dozen candidates instead of searching the tree.
* Neighbouring targets often have the very same k neighbours. Each distinct neighbour set
  of a bin is LU-factorised once and the factorisation is reused for every target that has
  it; only the right-hand side γ0 changes.
* The per-target loop is compiled with numba when it is installed (the ``fast`` extra);
  otherwise a pure-numpy path (tree queries, batched LAPACK solves) gives the same numbers
  to rounding. Set the environment variable ``AQUITARDMAP_NUMBA=0`` to force numpy.

A target's result depends only on its own neighbour set, never on which chunk or bin it fell
in, so any tiling of the targets (and any distribution of tiles over processes) gives the
same numbers. Neighbour sets are ordered by data index before the system is built.
"""

from __future__ import annotations

import importlib.util
import itertools
import os
from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from aquitardmap.geostat.kernel import compiled_kernel
from aquitardmap.geostat.variogram import STRUCTURE_CODES, VariogramModel, anisotropic_coordinates

#: Distance (m, in the anisotropy frame) under which a target sits on a datum: γ0 = 0 there
#: (the cut-off pykrige uses for its exact-value rule).
EXACT_DISTANCE = 1e-10
#: Largest number of targets handled at once by the engine (bounds its working memory).
CHUNK_TARGETS = 65_536
#: Side of a target bin as a fraction of the typical k-th neighbour distance.
BIN_FRACTION = 0.35
#: Working memory (bytes) allowed for cached factorisations or batched systems per call.
SYSTEM_MEMORY_BYTES = 64 * 2**20
#: Replacements of one datum (Woodbury updates) a cached inverse system may accumulate
#: before the kernel computes the inverse afresh; bounds the growth of rounding error.
MAX_UPDATE_DEPTH = 256


def numba_available() -> bool:
    """True when the compiled kernel can be used (numba importable and not disabled with
    ``AQUITARDMAP_NUMBA=0``)."""
    if os.environ.get("AQUITARDMAP_NUMBA", "1") == "0":
        return False
    return importlib.util.find_spec("numba") is not None


def anisotropic_frame(x_m: np.ndarray, y_m: np.ndarray, centre_xy: tuple[float, float],
                      ratio: float, angle_deg: float) -> np.ndarray:
    """Coordinates (n, 2) in the frame where the variogram is isotropic
    (:func:`aquitardmap.geostat.variogram.anisotropic_coordinates` about ``centre_xy``)."""
    u, v = anisotropic_coordinates(np.asarray(x_m, float).ravel(),
                                   np.asarray(y_m, float).ravel(), ratio, angle_deg,
                                   centre_xy)
    return np.column_stack([u, v])


@dataclass(frozen=True, eq=False)
class KrigingData:
    """Data prepared once for many calls of :func:`krige_targets` (picklable, so it can be
    sent to other processes).

    Attributes:
        xy: data coordinates in the anisotropy frame, shape (n, 2) (m).
        z: data values, shape (n,).
        model: the variogram model.
        k: neighbours per target, ``min(max_neighbours, n)``.
        centre_xy: centre of the anisotropy rotation (centre of the data's bounding box).
        bin_m: side of the target bins (m, anisotropy frame).
        tree: k-d tree of ``xy``.
    """

    xy: np.ndarray
    z: np.ndarray
    model: VariogramModel
    k: int
    centre_xy: tuple[float, float]
    bin_m: float
    tree: cKDTree

    @property
    def n(self) -> int:
        return int(self.z.size)


def prepare(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray, model: VariogramModel,
            max_neighbours: int) -> KrigingData:
    """Prepare data (locations must be distinct; see ``kriging.merge_coincident``).

    Raises:
        ValueError: with no data, mismatched lengths, non-finite values or
            ``max_neighbours < 1``.
    """
    x = np.asarray(x_m, dtype=float).ravel()
    y = np.asarray(y_m, dtype=float).ravel()
    z = np.asarray(values, dtype=float).ravel()
    if x.size == 0:
        raise ValueError("no data to krige")
    if not (x.size == y.size == z.size):
        raise ValueError(f"x, y and values differ in length ({x.size}, {y.size}, {z.size})")
    if not (np.isfinite(x).all() and np.isfinite(y).all() and np.isfinite(z).all()):
        raise ValueError("data coordinates and values must be finite")
    if max_neighbours < 1:
        raise ValueError(f"max_neighbours must be at least 1, got {max_neighbours}")
    centre = ((float(np.amax(x)) + float(np.amin(x))) / 2.0,
              (float(np.amax(y)) + float(np.amin(y))) / 2.0)
    xy = anisotropic_frame(x, y, centre, model.anisotropy_ratio, model.anisotropy_angle_deg)
    tree = cKDTree(xy)
    k = int(min(max_neighbours, x.size))
    bin_m = _bin_side(tree, xy, k)
    return KrigingData(xy, z.copy(), model, k, centre, bin_m, tree)


def _bin_side(tree: cKDTree, xy: np.ndarray, k: int) -> float:
    """Bin side from the median k-th neighbour distance at up to 512 data points."""
    n = xy.shape[0]
    if n == 1:
        return 1.0
    step = max(1, n // 512)
    d, _ = tree.query(xy[::step], k=min(k + 1, n))
    dk = d[:, -1] if d.ndim == 2 else d
    typical = float(np.median(dk))
    if not np.isfinite(typical) or typical <= 0.0:
        span = float(np.ptp(xy, axis=0).max())
        typical = span if span > 0 else 1.0
    return BIN_FRACTION * typical


def krige_targets(data: KrigingData, xt_m: np.ndarray, yt_m: np.ndarray, *,
                  accelerate: bool | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Ordinary kriging estimate and variance at targets (xt_m, yt_m) (project CRS).

    Targets are processed in chunks of :data:`CHUNK_TARGETS` in the order given, so callers
    should pass spatially compact sets (a grid tile, or points sorted by location) for
    speed; the numbers do not depend on it. The variance is returned as computed (it can be
    a rounding error below 0 at a datum).

    Args:
        data: from :func:`prepare`.
        xt_m, yt_m: target coordinates (m).
        accelerate: use the compiled kernel (default: when :func:`numba_available`).
    """
    xt = np.asarray(xt_m, dtype=float).ravel()
    yt = np.asarray(yt_m, dtype=float).ravel()
    if xt.size != yt.size:
        raise ValueError("xt_m and yt_m differ in length")
    use_numba = _use_numba(data, accelerate)
    est = np.empty(xt.size)
    var = np.empty(xt.size)
    for start in range(0, xt.size, CHUNK_TARGETS):
        sl = slice(start, start + CHUNK_TARGETS)
        txy = anisotropic_frame(xt[sl], yt[sl], data.centre_xy, data.model.anisotropy_ratio,
                                data.model.anisotropy_angle_deg)
        if use_numba:
            est[sl], var[sl] = _chunk_binned(data, txy)
        else:
            d, idx = _query(data, txy)
            est[sl], var[sl] = _solve_numpy(data, d, idx)
    return est, var


def leave_one_out(data: KrigingData, *, accelerate: bool | None = None
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Estimate and variance at every datum from its ``k`` nearest *other* data (the
    kriging of leave-one-out cross-validation), in one pass.

    Needs at least 2 data.
    """
    n = data.n
    if n < 2:
        raise ValueError("leave-one-out needs at least 2 data")
    k = min(data.k, n - 1)
    kq = k + 1
    d, idx = data.tree.query(data.xy, k=kq)
    d = d.reshape(n, kq)
    idx = idx.reshape(n, kq).astype(np.int64)
    own = idx == np.arange(n)[:, None]
    missing = ~own.any(axis=1)
    own[missing, -1] = True  # (only if > k data share the point: drop the farthest)
    keep = ~own
    d = d[keep].reshape(n, k)
    idx = idx[keep].reshape(n, k)
    if _use_numba(data, accelerate):
        # nearby data one after another, so that their neighbour sets overlap
        walk = _bin_order(data.xy, data.bin_m)
        cand = np.sort(idx[walk], axis=1).ravel()
        bounds = np.arange(n + 1, dtype=np.int64)
        e, v = _run_kernel(data, data.xy[walk], bounds, cand, bounds * k, k)
        est = np.empty(n)
        var = np.empty(n)
        est[walk] = e
        var[walk] = v
        bad = ~(np.isfinite(est) & np.isfinite(var))
        if bad.any():
            est[bad], var[bad] = _solve_lstsq(data, d[bad], idx[bad])
        return est, var
    return _solve_numpy(data, d, idx, k=k)


# ------------------------------------------------------------------------------- numpy path


def _structures(model: VariogramModel) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Codes, partial sills and ranges of the model's structures (a nested model, with a
    second structure ``model2``, ``psill2``, ``range2_m``, has two)."""
    names = [model.model]
    psills = [model.psill]
    ranges = [model.range_m]
    second = getattr(model, "model2", "")
    if second:
        names.append(second)
        psills.append(model.psill2)
        ranges.append(model.range2_m)
    return (np.array([STRUCTURE_CODES.get(n, -1) for n in names], dtype=np.int64),
            np.array(psills, dtype=float),
            np.array([max(r, 1e-12) for r in ranges], dtype=float))


def _use_numba(data: KrigingData, accelerate: bool | None) -> bool:
    ok = numba_available() and bool(np.all(_structures(data.model)[0] >= 0))
    if accelerate is None:
        return ok
    if accelerate and not ok:
        raise RuntimeError("the compiled kernel is not available (numba missing, disabled, "
                           f"or model {data.model.model!r} not compiled)")
    return bool(accelerate)


def _query(data: KrigingData, txy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    d, idx = data.tree.query(txy, k=data.k)
    return d.reshape(len(txy), data.k), idx.reshape(len(txy), data.k).astype(np.int64)


def _gamma_rhs(model: VariogramModel, d: np.ndarray) -> np.ndarray:
    """γ0 with the exact-value rule: 0 within :data:`EXACT_DISTANCE` of a datum."""
    return np.where(d <= EXACT_DISTANCE, 0.0, model.gamma(np.where(d > 0, d, 1.0)))


def _solve_numpy(data: KrigingData, d: np.ndarray, idx: np.ndarray, *, k: int | None = None
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Kriging of targets whose neighbours (idx) and distances (d), shape (m, k), are given.

    Neighbours are ordered by index, each distinct set's system is built once, and the
    systems are solved in batches that fit :data:`SYSTEM_MEMORY_BYTES`.
    """
    k = data.k if k is None else k
    m = idx.shape[0]
    order = np.argsort(idx, axis=1, kind="stable")
    idx = np.take_along_axis(idx, order, axis=1)
    d = np.take_along_axis(d, order, axis=1)
    est = np.empty(m)
    var = np.empty(m)
    batch = max(1, SYSTEM_MEMORY_BYTES // (8 * (k + 1) ** 2 * 2))
    for start in range(0, m, batch):
        sl = slice(start, start + batch)
        sets, inverse = np.unique(idx[sl], axis=0, return_inverse=True)
        inverse = inverse.ravel()
        lhs = _system_matrices(data, sets)
        rhs = np.ones((d[sl].shape[0], k + 1))
        rhs[:, :k] = _gamma_rhs(data.model, d[sl])
        w = np.linalg.solve(lhs[inverse], rhs[:, :, None])[:, :, 0]
        est[sl] = np.einsum("ij,ij->i", w[:, :k], data.z[idx[sl]])
        var[sl] = np.einsum("ij,ij->i", w, rhs)
    return est, var


def _system_matrices(data: KrigingData, sets: np.ndarray) -> np.ndarray:
    """Bordered matrices [Γ 1; 1ᵀ 0] of neighbour sets (u, k) → (u, k+1, k+1)."""
    u, k = sets.shape
    p = data.xy[sets]  # (u, k, 2)
    diff = p[:, :, None, :] - p[:, None, :, :]
    h = np.sqrt(diff[..., 0] ** 2 + diff[..., 1] ** 2)
    out = np.ones((u, k + 1, k + 1))
    out[:, :k, :k] = data.model.gamma(h)
    ii = np.arange(k)
    out[:, ii, ii] = 0.0
    out[:, k, k] = 0.0
    return out


# ---------------------------------------------------------------------------- compiled path


def _chunk_binned(data: KrigingData, txy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Bin the targets, find each bin's candidate data, run the kernel, restore the order."""
    m = txy.shape[0]
    if m == 0:
        return np.empty(0), np.empty(0)
    if data.k == data.n:  # every target uses every datum: one bin, one system
        bounds = np.array([0, m], dtype=np.int64)
        cand = np.arange(data.n, dtype=np.int64)
        cand_bounds = np.array([0, data.n], dtype=np.int64)
        est, var = _run_kernel(data, txy, bounds, cand, cand_bounds, data.k)
        bad = ~(np.isfinite(est) & np.isfinite(var))
        if bad.any():
            d, idx = _query(data, txy[bad])
            est[bad], var[bad] = _solve_lstsq(data, d, idx)
        return est, var
    order, key = _bin_order(txy, data.bin_m, with_keys=True)
    starts = np.flatnonzero(np.r_[True, key[1:] != key[:-1]])
    bounds = np.r_[starts, m].astype(np.int64)
    pts = txy[order]
    lo = np.minimum.reduceat(pts, starts, axis=0)
    hi = np.maximum.reduceat(pts, starts, axis=0)
    centres = (lo + hi) / 2.0
    which = np.repeat(np.arange(starts.size), np.diff(bounds))
    r = np.maximum.reduceat(np.hypot(*(pts - centres[which]).T), starts)
    dk, _ = data.tree.query(centres, k=data.k)
    dk = dk.reshape(len(centres), data.k)[:, -1]
    radius = (dk + 2.0 * r) * (1.0 + 1e-9) + 1e-6
    lists = data.tree.query_ball_point(centres, radius, return_sorted=True)
    lens = np.fromiter((len(li) for li in lists), dtype=np.int64, count=len(lists))
    if (lens < data.k).any():  # cannot happen: the ball holds the centre's k nearest
        raise RuntimeError("neighbour candidate search returned too few data")
    cand = np.fromiter(itertools.chain.from_iterable(lists), dtype=np.int64,
                       count=int(lens.sum()))
    cand_bounds = np.r_[0, np.cumsum(lens)].astype(np.int64)
    e, v = _run_kernel(data, pts, bounds, cand, cand_bounds, data.k)
    bad = ~(np.isfinite(e) & np.isfinite(v))
    if bad.any():
        d, idx = _query(data, pts[bad])
        e[bad], v[bad] = _solve_lstsq(data, d, idx)
    est = np.empty(m)
    var = np.empty(m)
    est[order] = e
    var[order] = v
    return est, var


def _bin_order(xy: np.ndarray, side_m: float, *, with_keys: bool = False):
    """Order of points bin by bin (square bins of ``side_m``, row by row, points of a bin
    in their given order); with ``with_keys`` also the sorted bin keys."""
    ix = np.floor(xy[:, 0] / side_m).astype(np.int64)
    iy = np.floor(xy[:, 1] / side_m).astype(np.int64)
    ix -= ix.min()
    iy -= iy.min()
    key = iy * (int(ix.max()) + 1) + ix
    order = np.argsort(key, kind="stable")
    return (order, key[order]) if with_keys else order


def _run_kernel(data: KrigingData, txy: np.ndarray, bounds: np.ndarray, cand: np.ndarray,
                cand_bounds: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Call the compiled loop; targets with a singular system come back as NaN."""
    m = txy.shape[0]
    est = np.empty(m)
    var = np.empty(m)
    md = data.model
    kinds, psills, ranges = _structures(md)
    cap = int(max(1, min(64, SYSTEM_MEMORY_BYTES // (8 * (k + 1) ** 2))))
    compiled_kernel()(np.ascontiguousarray(data.xy), data.z, np.ascontiguousarray(txy[:, 0]),
              np.ascontiguousarray(txy[:, 1]), bounds, cand, cand_bounds, k,
              float(md.nugget), kinds, psills, ranges, EXACT_DISTANCE, cap,
              max(1, k // 2), MAX_UPDATE_DEPTH, est, var)
    return est, var


def _solve_lstsq(data: KrigingData, d: np.ndarray, idx: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Minimum-norm solution for targets whose system is singular (pseudo-inverse)."""
    k = idx.shape[1]
    order = np.argsort(idx, axis=1, kind="stable")
    idx = np.take_along_axis(idx, order, axis=1)
    d = np.take_along_axis(d, order, axis=1)
    est = np.empty(idx.shape[0])
    var = np.empty(idx.shape[0])
    for i in range(idx.shape[0]):
        a = _system_matrices(data, idx[i:i + 1])[0]
        b = np.ones(k + 1)
        b[:k] = _gamma_rhs(data.model, d[i])
        w = np.linalg.pinv(a) @ b
        est[i] = w[:k] @ data.z[idx[i]]
        var[i] = w @ b
    return est, var
