"""Where to drill next: rank new borehole sites by how much uncertain area they settle.

A cell is *uncertain* while its probability of a thin aquitard, ``p = Φ((t − T*)/σ)`` from
the kriged total thickness ``T*`` and its kriging standard deviation ``σ`` (the Gaussian
approximation of :func:`aquitardmap.screening.zones.probability_below`), lies between ``p_low``
and ``p_high``. A new full-penetration hole at ``s`` changes both:

- **The variance, exactly.** Ordinary-kriging variance does not depend on the data values,
  so the variance after adding a datum at ``s`` is known before drilling. With the kriging
  error covariance ``C_n(x, s)`` of the present data, adding ``s`` gives
  ``σ²_{n+1}(x) = σ²_n(x) − C_n(x, s)² / σ²_n(s)``, and the estimate moves by
  ``C_n(x, s)/σ²_n(s) · (Z(s) − T*_n(s))`` (the kriging update equations, Emery 2009,
  Comput. Geosci. 13(3):269–280). Several holes are added one after the other in the same way
  (a rank-one update each), so every pick accounts for those chosen before it.
- **The estimate, in expectation (preposterior analysis).** The thickness that the hole will
  find is unknown. We assume, as the kriging model itself does, that it is Gaussian around
  the present estimate with the kriging variance: ``Z(s) ~ N(T*_n(s), σ²_n(s))``. Then the
  estimate after drilling any set S of holes is Gaussian around today's estimate with the
  variance the set removes, ``T*_S(x) ~ N(T*_n(x), σ²_n(x) − σ²_S(x))`` (the variance of
  the update equals the variance reduction). The probability that a cell is *still*
  uncertain after drilling follows in closed form (:func:`probability_still_uncertain`), and
  the expected uncertain area after drilling is its weighted sum over cells: integrated
  over the unknown values (Raiffa & Schlaifer 1961, *Applied Statistical Decision Theory*,
  preposterior analysis), not guessed.

Holes are chosen greedily: each next hole is the candidate that most reduces the expected
uncertain area given the holes already chosen (variance updated exactly), at least
``min_spacing_m`` from them.

Approximations, stated: the error covariance ``C_n(x, s)`` is computed in the candidate's
kriging neighbourhood (its ``max_neighbours`` nearest data), the same moving neighbourhood
the surfaces are kriged with; it is exact when all data fit in one neighbourhood. A hole is
taken to influence cells within :data:`INFLUENCE_RANGES` variogram ranges of it (beyond, a
moving neighbourhood does not reach); cells whose present probability lies within
:data:`RELEVANT_P` of 0 or 1 are left out of the sums (their chance of turning uncertain is
below that bound). The variogram is held fixed: drilling is assumed not to change it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree
from scipy.special import ndtr, ndtri

from aquitardmap.geostat.kriging import KrigingLocations, prepare_locations, weights_at
from aquitardmap.geostat.variogram import VariogramModel

#: A new hole is taken to influence cells within this many (major-axis) variogram ranges.
INFLUENCE_RANGES = 1.5
#: Cells whose present probability lies within this distance of 0 or 1 cannot realistically
#: become uncertain and are left out of the sums.
RELEVANT_P = 1e-5
#: Above this many candidate sites, a coarser lattice of them is searched first and each
#: pick is then refined on the full set around the best lattice site.
MAX_COARSE_CANDIDATES = 600
#: Largest number of datum-cell covariances kept in memory (8 bytes each).
_MAX_CACHE = 20_000_000
#: (site, cell) pairs evaluated together in one vectorised batch.
_MAX_PAIRS = 400_000


# ------------------------------------------------------------------ covariance and kriging


def covariance(model: VariogramModel, dx_m: np.ndarray, dy_m: np.ndarray) -> np.ndarray:
    """Covariance ``C(h) = sill − γ(h)`` of the variogram model at separations (m).

    ``C(0)`` is the sill (nugget included); at any non-zero lag the nugget has dropped out
    (second-order stationarity; Isaaks & Srivastava 1989, ch. 16).
    """
    return model.sill - model.gamma_xy(np.asarray(dx_m, float), np.asarray(dy_m, float))


@dataclass(frozen=True)
class KrigingNeighbourhood:
    """Ordinary-kriging system solved at a set of sites, in each site's own neighbourhood.

    Attributes:
        x_m, y_m: the sites (m), shape (m,).
        data_index: indices of each site's neighbourhood data, shape (m, k).
        weights: ordinary-kriging weights of those data, shape (m, k).
        lagrange: Lagrange multiplier ``μ`` with the convention
            ``Σ_j λ_j C(d_i, d_j) + μ = C(d_i, s)``, shape (m,).
        variance: kriging variance ``σ² = C(0) − Σ λ_i C(d_i, s) − μ`` (value units²).
    """

    x_m: np.ndarray
    y_m: np.ndarray
    data_index: np.ndarray
    weights: np.ndarray
    lagrange: np.ndarray
    variance: np.ndarray


def solve_at(locations: KrigingLocations, x_m: np.ndarray, y_m: np.ndarray,
             max_neighbours: int) -> KrigingNeighbourhood:
    """Solve the ordinary-kriging system at each site with its ``max_neighbours`` nearest
    data (nearest in the anisotropy-scaled distance; Isaaks & Srivastava 1989, ch. 12), from
    data ``locations`` prepared once (:func:`aquitardmap.geostat.kriging.prepare_locations`;
    data must not share locations). The system is the kriging module's
    (:func:`aquitardmap.geostat.kriging.weights_at`), in variogram form; its multiplier is
    turned to the covariance convention here (``μ_C = −μ_γ``, as ``C = sill − γ`` and the
    weights sum to 1)."""
    sx, sy = np.atleast_1d(np.asarray(x_m, float)), np.atleast_1d(np.asarray(y_m, float))
    k = int(min(max_neighbours, locations.n))
    if sx.size == 0:
        return KrigingNeighbourhood(sx, sy, np.empty((0, k), int), np.empty((0, k)),
                                    np.empty(0), np.empty(0))
    w = weights_at(locations, sx, sy, max_neighbours=k)
    return KrigingNeighbourhood(sx, sy, w.index, w.weights, -w.lagrange, w.variance)


def error_covariance(model: VariogramModel, data_x_m: np.ndarray, data_y_m: np.ndarray,
                     nb: KrigingNeighbourhood, i: int, x_m: np.ndarray,
                     y_m: np.ndarray) -> np.ndarray:
    """Kriging error covariance ``C_n(x, s_i) = C(x, s_i) − Σ_j λ_j(s_i) C(d_j, x) − μ(s_i)``
    between points x and site ``i`` of ``nb`` (value units²).

    It is the covariance of the kriging errors at x and at s_i; at x = s_i it is the kriging
    variance. (Emery 2009, eq. for the ordinary-kriging update.)
    """
    idx = nb.data_index[i]
    x = np.asarray(x_m, float)
    y = np.asarray(y_m, float)
    c_xs = covariance(model, x - nb.x_m[i], y - nb.y_m[i])
    c_dx = covariance(model, data_x_m[idx][:, None] - x[None, :],
                      data_y_m[idx][:, None] - y[None, :])
    return c_xs - nb.weights[i] @ c_dx - nb.lagrange[i]


# ---------------------------------------------------------------------- preposterior step


def probability_still_uncertain(estimate_m: np.ndarray, sd_m: np.ndarray,
                                sd_after_m: np.ndarray, threshold_m: float, p_low: float,
                                p_high: float) -> np.ndarray:
    """Probability that a cell is still uncertain after drilling (preposterior).

    Today the cell has kriged thickness ``T`` and kriging SD ``σ``; after drilling its SD
    will be ``σa ≤ σ`` (known exactly) and its estimate ``T'`` will be Gaussian,
    ``T' ~ N(T, σ² − σa²)``. It stays uncertain when ``p_low ≤ Φ((t − T')/σa) ≤ p_high``,
    i.e. when ``t − z_high σa ≤ T' ≤ t − z_low σa`` with ``z = Φ⁻¹(p)``, so

        P = Φ((t − z_low σa − T)/s) − Φ((t − z_high σa − T)/s),   s = √(σ² − σa²).

    With ``σa = σ`` (no change) this is 1 or 0, whether the cell is uncertain today; with
    ``σa = 0`` (a hole in the cell) it is 0.
    """
    est = np.asarray(estimate_m, float)
    sd = np.asarray(sd_m, float)
    sda = np.minimum(np.asarray(sd_after_m, float), sd)
    z_lo, z_hi = float(ndtri(p_low)), float(ndtri(p_high))
    hi = threshold_m - z_lo * sda
    lo = threshold_m - z_hi * sda
    s = np.sqrt(np.maximum(sd * sd - sda * sda, 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        moving = ndtr((hi - est) / s) - ndtr((lo - est) / s)
    still = (est >= lo) & (est <= hi) & (sda > 0)
    return np.where(s > 1e-9 * np.maximum(sd, 1e-300), moving, still.astype(float))


def uncertain_now(estimate_m: np.ndarray, sd_m: np.ndarray, threshold_m: float,
                  p_low: float, p_high: float) -> np.ndarray:
    """Boolean: today's ``Φ((t − T)/σ)`` lies within [p_low, p_high] (σ = 0: never)."""
    return probability_still_uncertain(estimate_m, sd_m, sd_m, threshold_m, p_low,
                                       p_high) > 0.5


# -------------------------------------------------------------------------- greedy design


@dataclass(frozen=True)
class DrillingPlan:
    """The greedy choice of new holes.

    Attributes:
        chosen: indices into the candidate sites, in order of choice.
        x_m, y_m: their coordinates (m).
        expected_reduction_m2: expected reduction of the (weighted) uncertain area that each
            hole adds, given the holes before it (m², times the priority weight if any).
        expected_uncertain_after_m2: expected uncertain area after drilling the holes up to
            and including this one (m²).
        uncertain_now_m2: uncertain area today (m², weighted).
        sd_before_m: kriging SD of the cells at each hole before it was added (m).
        sd_after_m: kriging SD of every evaluated cell after all chosen holes (m); NaN for
            cells left out as irrelevant.
    """

    chosen: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    expected_reduction_m2: np.ndarray
    expected_uncertain_after_m2: np.ndarray
    uncertain_now_m2: float
    sd_before_m: np.ndarray
    sd_after_m: np.ndarray


class _Design:
    """State of the greedy search: relevant cells, chosen holes, rank-one updates."""

    def __init__(self, model: VariogramModel, data_x_m: np.ndarray, data_y_m: np.ndarray,
                 cell_x_m: np.ndarray, cell_y_m: np.ndarray, estimate_m: np.ndarray,
                 sd_m: np.ndarray, weight_m2: np.ndarray, thresholds_m: tuple[float, ...],
                 p_low: float, p_high: float, max_neighbours: int) -> None:
        self.model = model
        self.dx, self.dy = np.asarray(data_x_m, float), np.asarray(data_y_m, float)
        self.locations = prepare_locations(self.dx, self.dy, model)
        self.max_neighbours = max_neighbours
        self.thresholds = thresholds_m
        self.p_low, self.p_high = p_low, p_high
        est, sd, w = (np.asarray(a, float) for a in (estimate_m, sd_m, weight_m2))
        ok = np.isfinite(est) & np.isfinite(sd) & (sd > 0) & np.isfinite(w) & (w > 0)
        est0, sd0, w0 = np.where(ok, est, 0.0), np.where(ok, sd, 1.0), np.where(ok, w, 0.0)
        zmax = float(-ndtri(RELEVANT_P))
        relevant = np.zeros(est.shape, dtype=bool)
        now = 0.0
        for t in thresholds_m:
            relevant |= ok & (np.abs((t - est0) / sd0) <= zmax)
            now += float(np.sum(w0 * uncertain_now(est0, sd0, t, p_low, p_high)))
        self.uncertain_now_m2 = now
        self.cells = np.flatnonzero(relevant)
        self.cx = np.asarray(cell_x_m, float)[self.cells]
        self.cy = np.asarray(cell_y_m, float)[self.cells]
        self.est, self.sd, self.w = est[self.cells], sd[self.cells], w[self.cells]
        self.var_s = self.sd ** 2  # variance after the holes chosen so far
        self.tree = cKDTree(np.column_stack([self.cx, self.cy])) if self.cells.size else None
        self.radius_m = INFLUENCE_RANGES * model.range_m
        self.remaining = self._still(np.sqrt(self.var_s))  # per cell, summed over thresholds
        # covariance of every datum with every relevant cell, when it fits in memory
        self.cd = (covariance(model, self.dx[:, None] - self.cx[None, :],
                              self.dy[:, None] - self.cy[None, :])
                   if self.dx.size * self.cells.size <= _MAX_CACHE else None)
        self.cache: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        # chosen holes: neighbourhood solve, variance before, u-values at earlier holes
        self.hx: list[float] = []
        self.hy: list[float] = []
        self.hnb: list[KrigingNeighbourhood] = []
        self.hvar: list[float] = []
        self.hu: list[np.ndarray] = []
        self.u_cells = np.empty((0, self.cells.size))

    def _still(self, sd_after: np.ndarray, sl: np.ndarray | slice = slice(None)) -> np.ndarray:
        out = np.zeros(np.shape(sd_after))
        for t in self.thresholds:
            out += probability_still_uncertain(self.est[sl], self.sd[sl], sd_after, t,
                                               self.p_low, self.p_high)
        return out

    def expected_uncertain_m2(self) -> float:
        return float(np.sum(self.w * self.remaining))

    def _cn_cells(self, nb: KrigingNeighbourhood, sites: np.ndarray
                  ) -> list[tuple[np.ndarray, np.ndarray]]:
        """For each site of ``nb`` listed in ``sites``: the relevant cells within its
        influence radius and their error covariance with it, before any chosen hole."""
        sites = np.asarray(sites, dtype=int)
        if sites.size == 0:
            return []
        balls = self.tree.query_ball_point(np.column_stack([nb.x_m[sites], nb.y_m[sites]]),
                                           self.radius_m)
        balls = [np.asarray(bl, dtype=int) for bl in balls]
        if self.cd is None:  # too many data × cells to hold: one site at a time
            return [(cells, error_covariance(self.model, self.dx, self.dy, nb, int(i),
                                             self.cx[cells], self.cy[cells]))
                    for i, cells in zip(sites, balls, strict=True)]
        out: list[tuple[np.ndarray, np.ndarray]] = []
        for i, cells in zip(sites.tolist(), balls, strict=True):
            c_xs = covariance(self.model, self.cx[cells] - nb.x_m[i], self.cy[cells] - nb.y_m[i])
            wc = nb.weights[i] @ self.cd[np.ix_(nb.data_index[i], cells)]
            out.append((cells, c_xs - wc - nb.lagrange[i]))
        return out

    def u_at(self, x_m: np.ndarray, y_m: np.ndarray) -> np.ndarray:
        """Rank-one update vectors of the chosen holes at arbitrary points: (k, m)."""
        x, y = np.atleast_1d(x_m), np.atleast_1d(y_m)
        u = np.zeros((len(self.hx), x.size))
        for j in range(len(self.hx)):
            near = np.hypot(x - self.hx[j], y - self.hy[j]) <= self.radius_m
            if not near.any():
                continue
            c = error_covariance(self.model, self.dx, self.dy, self.hnb[j], 0, x[near],
                                 y[near])
            u[j, near] = (c - self.hu[j] @ u[:j, near]) / np.sqrt(self.hvar[j])
        return u

    def gains(self, nb: KrigingNeighbourhood, keys: np.ndarray | None = None) -> np.ndarray:
        """Expected reduction of the weighted uncertain area (m²) of adding each site of
        ``nb``; ``keys`` (one per site) cache the sites' covariances between calls."""
        n = nb.x_m.size
        out = np.zeros(n)
        if self.tree is None or n == 0:
            return out
        u_sites = self.u_at(nb.x_m, nb.y_m)
        var_sites = nb.variance - np.sum(u_sites ** 2, axis=0)
        live = np.flatnonzero(var_sites > 1e-12 * self.model.sill)
        if keys is None:
            found = dict(zip(live.tolist(), self._cn_cells(nb, live), strict=True))
        else:
            todo = np.array([i for i in live if int(keys[i]) not in self.cache], dtype=int)
            for i, cc in zip(todo.tolist(), self._cn_cells(nb, todo), strict=True):
                self.cache[int(keys[i])] = cc
            found = {int(i): self.cache[int(keys[i])] for i in live}
        # sites are processed in batches whose (site, cell) pairs are evaluated together
        pending: list[tuple[int, np.ndarray, np.ndarray]] = []
        size = 0
        for j, i in enumerate(live.tolist()):
            cells, c = found[i]
            if cells.size:
                pending.append((i, cells, c))
                size += cells.size
            if pending and (size >= _MAX_PAIRS or j == live.size - 1):
                self._batch_gains(pending, u_sites, var_sites, out)
                pending, size = [], 0
        return out

    def _batch_gains(self, pending: list[tuple[int, np.ndarray, np.ndarray]],
                     u_sites: np.ndarray, var_sites: np.ndarray, out: np.ndarray) -> None:
        site = np.concatenate([np.full(cells.size, i) for i, cells, _ in pending])
        cells = np.concatenate([cells for _, cells, _ in pending])
        c = np.concatenate([c for _, _, c in pending])
        if len(self.hx):
            c = c - np.einsum("kp,kp->p", u_sites[:, site], self.u_cells[:, cells])
        var_new = np.maximum(self.var_s[cells] - c * c / var_sites[site], 0.0)
        delta = self.w[cells] * (self.remaining[cells] - self._still(np.sqrt(var_new), cells))
        ids = np.array([i for i, _, _ in pending])
        sums = np.bincount(np.searchsorted(ids, site), weights=delta, minlength=ids.size)
        out[ids] = sums

    def add(self, x: float, y: float) -> tuple[float, float]:
        """Add a hole at (x, y); returns (expected reduction m², SD there before, m)."""
        before = self.expected_uncertain_m2()
        nb = solve_at(self.locations, np.array([x]), np.array([y]), self.max_neighbours)
        u_here = self.u_at(np.array([x]), np.array([y]))[:, 0]
        var = float(nb.variance[0] - np.sum(u_here ** 2))
        sd_before = float(np.sqrt(max(var, 0.0)))
        if var <= 1e-12 * self.model.sill:
            return 0.0, sd_before
        u_new = np.zeros(self.cells.size)
        if self.tree is not None:
            ((near, c),) = self._cn_cells(nb, np.array([0]))
            if near.size:
                u_new[near] = (c - u_here @ self.u_cells[:, near]) / np.sqrt(var)
        self.hx.append(float(x))
        self.hy.append(float(y))
        self.hnb.append(nb)
        self.hvar.append(var)
        self.hu.append(u_here)
        self.u_cells = np.vstack([self.u_cells, u_new])
        self.var_s = np.maximum(self.var_s - u_new ** 2, 0.0)
        self.remaining = self._still(np.sqrt(self.var_s))
        return before - self.expected_uncertain_m2(), sd_before


def _coarse_subset(x: np.ndarray, y: np.ndarray, max_n: int) -> tuple[np.ndarray, float]:
    """Indices of at most ``max_n`` sites spread evenly (the first site of each occupied
    square block of a lattice) and the block size (m); all sites and 0 when there are few
    enough."""
    if x.size <= max_n:
        return np.arange(x.size), 0.0
    span = max(float(np.ptp(x)), float(np.ptp(y)), 1.0)
    lo, hi = 0.0, span
    best, size_best = np.array([0]), span
    for _ in range(25):
        size = 0.5 * (lo + hi)
        key = np.floor((x - x.min()) / size) * (span / size + 2) + np.floor((y - y.min()) / size)
        _, first = np.unique(key, return_index=True)
        if first.size > max_n:
            lo = size
        else:
            hi = size
            best, size_best = np.sort(first), size
    return best, size_best


def plan_holes(model: VariogramModel, data_x_m: np.ndarray, data_y_m: np.ndarray,
               cell_x_m: np.ndarray, cell_y_m: np.ndarray, estimate_m: np.ndarray,
               sd_m: np.ndarray, weight_m2: np.ndarray, cand_x_m: np.ndarray,
               cand_y_m: np.ndarray, n_holes: int, *, thresholds_m: tuple[float, ...],
               p_low: float = 0.1, p_high: float = 0.9, min_spacing_m: float = 0.0,
               max_neighbours: int = 64) -> DrillingPlan:
    """Choose ``n_holes`` new holes among candidate sites, greedily, by expected reduction
    of the weighted uncertain area (see the module docstring for the method).

    Args:
        model: variogram of the kriged total thickness (held fixed).
        data_x_m, data_y_m: locations of the data the surface was kriged from (m).
        cell_x_m, cell_y_m: cell centres (m), flat arrays.
        estimate_m, sd_m: kriged thickness and kriging SD at those cells (m).
        weight_m2: each cell's weight: its area times its priority (m²); 0 = ignored.
        cand_x_m, cand_y_m: candidate sites (m).
        n_holes: how many holes to choose (fewer come back when no candidate is left, e.g.
            because of the spacing, or none reduces the uncertain area any more).
        thresholds_m: thickness thresholds whose probabilities define the uncertain area
            (areas of several thresholds are added).
        p_low, p_high: bounds of the uncertain probability band.
        min_spacing_m: smallest distance between two chosen holes (m).
        max_neighbours: kriging neighbourhood size (as for the surface).
    """
    if not 0.0 < p_low < p_high < 1.0:
        raise ValueError(f"need 0 < p_low < p_high < 1, got {p_low}, {p_high}")
    d = _Design(model, data_x_m, data_y_m, cell_x_m, cell_y_m, estimate_m, sd_m, weight_m2,
                tuple(thresholds_m), p_low, p_high, max_neighbours)
    cx, cy = np.asarray(cand_x_m, float), np.asarray(cand_y_m, float)
    coarse, block = _coarse_subset(cx, cy, MAX_COARSE_CANDIDATES)
    refine = coarse.size < cx.size  # then each pick is refined within a block around it
    nb = solve_at(d.locations, cx[coarse], cy[coarse], max_neighbours)
    gains = d.gains(nb, keys=coarse)
    allowed = np.ones(cx.size, dtype=bool)
    chosen, red, after, sd_before = [], [], [], []
    for _ in range(int(n_holes)):
        g = np.where(allowed[coarse], gains, -np.inf)
        if g.size == 0 or not np.isfinite(g).any() or g.max() <= 0.0:
            break
        best = int(coarse[int(np.argmax(g))])
        if refine:
            near = np.flatnonzero(allowed & (np.abs(cx - cx[best]) <= block)
                                  & (np.abs(cy - cy[best]) <= block))
            fine = d.gains(solve_at(d.locations, cx[near], cy[near], max_neighbours))
            if fine.size and fine.max() > g.max():
                best = int(near[int(np.argmax(fine))])
        r, sd0 = d.add(cx[best], cy[best])
        chosen.append(best)
        red.append(r)
        after.append(d.expected_uncertain_m2())
        sd_before.append(sd0)
        if min_spacing_m > 0:
            allowed &= np.hypot(cx - cx[best], cy - cy[best]) >= min_spacing_m
        allowed[best] = False
        # gains change only for candidates whose influence overlaps the new hole's
        redo = np.flatnonzero(allowed[coarse] & (np.hypot(cx[coarse] - cx[best],
                                                          cy[coarse] - cy[best])
                                                 <= 2.0 * d.radius_m))
        if redo.size:
            gains[redo] = d.gains(_subset(nb, redo), keys=coarse[redo])
    sd_after = np.full(np.size(estimate_m), np.nan)
    sd_after[d.cells] = np.sqrt(d.var_s)
    idx = np.asarray(chosen, dtype=int)
    return DrillingPlan(idx, cx[idx], cy[idx], np.asarray(red), np.asarray(after),
                        d.uncertain_now_m2, np.asarray(sd_before), sd_after)


def _subset(nb: KrigingNeighbourhood, idx: np.ndarray) -> KrigingNeighbourhood:
    return KrigingNeighbourhood(nb.x_m[idx], nb.y_m[idx], nb.data_index[idx],
                                nb.weights[idx], nb.lagrange[idx], nb.variance[idx])
