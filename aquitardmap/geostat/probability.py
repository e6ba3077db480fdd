"""Probabilities that the clay is thin or absent, honouring every kind of borehole datum.

Method (a multi-Gaussian model of a *latent* thickness with inequality data):

- The total aquitard thickness is ``T(x) = max(0, Z(x))``, where ``Z`` is a Gaussian random
  function with the variogram of the thickness surface and an unknown local mean (ordinary
  kriging). ``Z`` is the "potential" thickness: negative where the clay was never laid down
  or was eroded (truncated-Gaussian idea of Matheron et al. 1987, *Conditional simulation
  of the geometry of fluvio-deltaic reservoirs*, SPE 16753; from memory).
- Boreholes give three kinds of data on ``Z``: a hole that passed through the clay and
  logged a positive thickness ``t`` gives ``Z = t``; a hole that passed through and logged
  none proves a window and gives ``-L ≤ Z ≤ 0`` (``L`` the floor of
  :func:`censored_data`); a hole that stopped inside the clay after ``b`` metres gives
  ``Z ≥ b``. Inequalities are never used as values: kriging a 0 at a window
  hole or the depth reached by a partial hole as if it were the thickness biases the map
  (inequality data, Dubrule & Kostov 1986, Math. Geol. 18(1):33–51).
- The censored values are drawn jointly from their conditional distribution by a Gibbs
  sampler (Geman & Geman 1984; for inequality data in geostatistics Freulon & de Fouquet
  1993, *Conditioning a Gaussian model with inequalities*, Geostatistics Tróia '92, from
  memory): site by site, each censored value is redrawn from the normal distribution given
  all the other sites (kriging estimate and variance), truncated to its interval. ``n_draws``
  independent chains run ``sweeps`` sweeps each; each chain's final state is one draw.
- For each draw the grid is kriged from all sites (equalities and the drawn censored
  values); given the data ``Z(x)`` is then normal with the kriging estimate and variance
  (multi-Gaussian kriging, Verly 1983, Math. Geol. 15(2):259–286), so
  ``P(T < t) = mean over draws of Φ((t − Z*ₖ(x)) / σ(x))`` — the censored data are
  integrated out by Monte Carlo, the rest analytically (no grid simulation is needed). The
  kriging weights do not depend on the values, so they are computed once.

The level of the kriging variance is set by cross-validation: the variogram's sills are
multiplied by the variance of the leave-one-out standardised errors of the thickness surface
(:func:`cv_variance_scale`), which leaves every estimate unchanged.

Approximations, stated in the summary: ordinary kriging (local mean re-estimated) stands in
for the simple-kriging conditional distributions of the Gaussian model; the variogram is the
one of the thickness data; moving neighbourhoods; the Monte Carlo error of a probability is
about ``sqrt(p(1 − p)/n_draws)`` at most (0.06 for 64 draws at p = 0.5).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING

import numpy as np
from scipy.special import ndtr, ndtri

from aquitardmap.geostat.kriging import (
    KrigingLocations,
    merge_coincident,
    prepare_locations,
    weights_at,
)
from aquitardmap.geostat.variogram import VariogramModel
from aquitardmap.grid import Grid

if TYPE_CHECKING:  # pragma: no cover - typing only
    from aquitardmap.geostat.surfaces import Surface

#: Data closer than this are taken as one location (m).
COINCIDENT_M = 0.01
#: Name of the method, as recorded in ``summary.json``.
METHOD = "latent Gaussian thickness with inequality data (Gibbs sampler + kriging)"


def truncated_normal(rng: np.random.Generator, mean: np.ndarray, sd: np.ndarray | float,
                     low: float, high: float) -> np.ndarray:
    """Draws from normal distributions ``N(mean, sd²)`` truncated to ``[low, high]`` (either
    bound may be infinite), by inversion of the CDF (Devroye 1986, *Non-Uniform Random
    Variate Generation*, ch. 2, from memory). Upper-tail intervals are mirrored into the
    lower tail, where the CDF keeps its precision; an interval beyond ~37 SD gives its
    nearer bound."""
    m = np.asarray(mean, dtype=float)
    s = np.maximum(np.broadcast_to(np.asarray(sd, dtype=float), m.shape), 1e-12)
    a = (low - m) / s
    b = (high - m) / s
    flip = a > 0  # interval wholly above the mean: draw -X from [-b, -a]
    lo_ = np.where(flip, -b, a)
    hi_ = np.where(flip, -a, b)
    plo, phi = ndtr(lo_), ndtr(hi_)
    u = plo + (phi - plo) * rng.uniform(size=m.shape)
    z = ndtri(np.clip(u, 1e-300, 1.0 - 1e-16))
    z = np.where(phi - plo > 0, np.clip(z, lo_, hi_), np.where(np.isfinite(hi_), hi_, lo_))
    z = np.where(flip, -z, z)
    return m + s * z


@dataclass(frozen=True)
class CensoredData:
    """Thickness data at borehole locations, split by kind.

    Attributes:
        x_m, y_m, value_m: holes with a positive full thickness (equality data, m).
        cx_m, cy_m: holes that give an inequality.
        low_m, high_m: the interval of each inequality (m): ``[-floor, 0]`` for a hole
            that proves a window, ``[bound, inf]`` for a hole that stopped in the clay.
        notes: what was merged or dropped, in plain words.
        drift, c_drift: the external drift (ground elevation, m) at the equality and the
            inequality data; empty when there is no drift.
    """

    x_m: np.ndarray
    y_m: np.ndarray
    value_m: np.ndarray
    cx_m: np.ndarray
    cy_m: np.ndarray
    low_m: np.ndarray
    high_m: np.ndarray
    notes: list[str] = field(default_factory=list)
    drift: np.ndarray = field(default_factory=lambda: np.empty(0))
    c_drift: np.ndarray = field(default_factory=lambda: np.empty(0))

    @property
    def has_drift(self) -> bool:
        """Whether the data carry an external drift."""
        return self.drift.size + self.c_drift.size > 0

    @property
    def all_drift(self) -> np.ndarray:
        """Drift at all data, equalities first (as in :func:`gibbs_draws`)."""
        return np.concatenate([self.drift, self.c_drift])

    @property
    def n_absent(self) -> int:
        """Holes proving the clay absent (upper bound 0)."""
        return int(np.sum(np.isfinite(self.high_m)))

    @property
    def n_lower_bounds(self) -> int:
        """Holes that stopped in the clay (no upper bound)."""
        return int(np.sum(~np.isfinite(self.high_m)))


def censored_data(x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                  status: np.ndarray, drift: np.ndarray | None = None, *,
                  window_floor_m: float = math.inf) -> CensoredData:
    """Sort borehole thicknesses into equality and inequality data of the latent thickness.

    ``status`` is ``"full"``, ``"lower_bound"`` or ``"unknown"`` per hole (as in
    :func:`aquitardmap.inputs.columns.column_table`). Full holes at one location are averaged; an
    inequality at the location of an equality datum is dropped (the full thickness says
    more), and of several inequalities at one location the tightest is kept. ``drift`` (an
    external drift per hole, e.g. ground elevation) is carried along, averaged where holes
    are merged.

    A hole that proves a window gives ``-window_floor_m <= Z <= 0``. The hole shows that
    the clay is absent, not how far below zero the latent thickness goes; left unbounded,
    a drift that falls steeply there (a channel's low in the DEM) draws it tens of metres
    below zero and spreads near-certain windows past the window's edge. The floor's
    default in ``project.toml`` (3 m) gave the most reliable P(window) over 24 synthetic
    regions other than those of the tests (README, *Zones from probabilities*).
    """
    x, y, t = (np.asarray(a, dtype=float) for a in (x_m, y_m, thickness_m))
    f = None if drift is None else np.asarray(drift, dtype=float)
    status = np.asarray(status)
    notes: list[str] = []
    full = status == "full"
    fx, fy, ft = merge_coincident(x[full], y[full], t[full], COINCIDENT_M)
    ff = (merge_coincident(x[full], y[full], f[full], COINCIDENT_M)[2] if f is not None
          else np.empty(0))
    pos = ft > 0
    ex, ey, ev = fx[pos], fy[pos], ft[pos]
    # Inequalities: windows (Z <= 0) then partial holes (Z >= bound).
    cx = np.concatenate([fx[~pos], x[status == "lower_bound"]])
    cy = np.concatenate([fy[~pos], y[status == "lower_bound"]])
    cf = (np.concatenate([ff[~pos], f[status == "lower_bound"]]) if f is not None
          else np.empty(0))
    low = np.concatenate([np.full(int((~pos).sum()), -float(window_floor_m)),
                          t[status == "lower_bound"]])
    high = np.concatenate([np.zeros(int((~pos).sum())),
                           np.full(int((status == "lower_bound").sum()), np.inf)])
    keep = np.ones(cx.size, dtype=bool)
    if cx.size and ex.size:
        from scipy.spatial import cKDTree

        d, _ = cKDTree(np.column_stack([ex, ey])).query(np.column_stack([cx, cy]))
        on_eq = d <= COINCIDENT_M
        if on_eq.any():
            notes.append(f"{int(on_eq.sum())} inequality datum(s) share a location with a "
                         "full-thickness hole and were left out")
        keep &= ~on_eq
    # Several inequalities at one location: keep the tightest interval.
    if keep.sum() > 1:
        key = np.column_stack([np.round(cx / COINCIDENT_M), np.round(cy / COINCIDENT_M)])
        _, inverse = np.unique(key, axis=0, return_inverse=True)
        inverse = inverse.ravel()
        for g in np.flatnonzero(np.bincount(inverse) > 1):
            members = np.flatnonzero((inverse == g) & keep)
            if members.size < 2:
                continue
            lo_g, hi_g = low[members].max(), high[members].min()
            keep[members[1:]] = False
            low[members[0]], high[members[0]] = lo_g, hi_g
            if lo_g > hi_g:  # contradictory logs at one place: take the lower bound
                high[members[0]] = np.inf
                notes.append(f"contradictory logs at ({cx[members[0]]:.1f}, "
                             f"{cy[members[0]]:.1f}): a hole proves no clay where another "
                             "stopped in it; the lower bound was kept")
    return CensoredData(ex, ey, ev, cx[keep], cy[keep], low[keep], high[keep], notes,
                        ff[pos] if f is not None else np.empty(0),
                        cf[keep] if f is not None else np.empty(0))


def data_locations(data: CensoredData, model: VariogramModel) -> KrigingLocations:
    """The kriging set-up of all data sites, equalities first (as :func:`gibbs_draws` and
    :func:`probability_below_grid` order them), with the drift when the data carry one;
    built once per run and shared by both."""
    return prepare_locations(np.concatenate([data.x_m, data.cx_m]),
                             np.concatenate([data.y_m, data.cy_m]), model,
                             drift=data.all_drift if data.has_drift else None)


def gibbs_draws(data: CensoredData, model: VariogramModel, *, n_draws: int = 64,
                sweeps: int = 30, max_neighbours: int = 32,
                rng: np.random.Generator | None = None,
                locations: KrigingLocations | None = None) -> np.ndarray:
    """Joint draws of the censored latent thickness values given all the data.

    Returns an array (n_censored, n_draws): column k is the final state of the k-th of
    ``n_draws`` independent Gibbs chains after ``sweeps`` sweeps. Each step redraws one site
    from ``N(Z*, σ²)`` truncated to its interval, where Z* and σ² are the ordinary kriging
    estimate and variance from the other sites within ``max_neighbours``. ``locations``
    (:func:`data_locations` of the same data and model) saves building them again.
    """
    rng = np.random.default_rng(0) if rng is None else rng
    nc = data.cx_m.size
    if nc == 0:
        return np.empty((0, n_draws))
    ne = data.x_m.size
    n_sites = ne + nc
    if n_sites < 2:  # a single censored datum and nothing else: its interval alone
        start = np.where(np.isfinite(data.high_m), data.high_m, data.low_m)
        return np.repeat(start[:, None], n_draws, axis=1)
    locations = data_locations(data, model) if locations is None else locations
    w = weights_at(locations, data.cx_m, data.cy_m, max_neighbours=max_neighbours,
                   exclude_coincident=True,
                   target_drift=data.c_drift if data.has_drift else None)
    sd = np.sqrt(w.variance)
    state = np.empty((n_sites, n_draws))
    state[:ne] = data.value_m[:, None]
    # Start inside each interval: at its upper bound (a window) or its lower bound (a hole
    # that stopped in the clay), nudged 1 % of the data spread inside (at most half-way).
    nudge = 0.01 * (float(np.ptp(data.value_m)) if ne > 1 else 1.0) + 1e-6
    nudge = np.minimum(nudge, 0.5 * (data.high_m - data.low_m))
    start = np.where(np.isfinite(data.high_m), data.high_m - nudge, data.low_m + nudge)
    state[ne:] = start[:, None]
    idx, wts = w.index, w.weights
    for _ in range(sweeps):
        for i in range(nc):
            mean = wts[i] @ state[idx[i]]
            state[ne + i] = truncated_normal(rng, mean, sd[i], data.low_m[i], data.high_m[i])
    return state[ne:].copy()


@dataclass(frozen=True)
class ThicknessProbabilities:
    """Probability grids of the total aquitard thickness and how they were made.

    Attributes:
        p_below: ``{name: grid}`` of P(T < threshold) per requested threshold, NaN outside
            the study area.
        n_equal, n_absent, n_lower_bounds: data of each kind used.
        n_draws, sweeps, seed: Monte Carlo settings.
        notes: plain-language notes (merged or dropped data).
        window_floor_m: lower end of the latent thickness at holes proving a window (m
            below zero; infinite for none).
    """

    p_below: dict[str, np.ndarray]
    n_equal: int
    n_absent: int
    n_lower_bounds: int
    n_draws: int
    sweeps: int
    seed: int
    notes: list[str]
    variance_scale: float = 1.0
    drift: dict[str, object] = field(default_factory=lambda: {"used": False})
    residual: Surface | None = None
    window_floor_m: float = math.inf
    #: For grids made by another method (:mod:`aquitardmap.geostat.indicator`): its summary, which
    #: then replaces this method's own fields in :meth:`as_dict`.
    other_method: dict[str, object] | None = None

    def as_dict(self) -> dict[str, object]:
        if self.other_method is not None:
            return {**self.other_method, "notes": list(self.notes)}
        return {"method": METHOD, "n_full_positive": self.n_equal,
                "n_proving_absence": self.n_absent, "n_lower_bounds": self.n_lower_bounds,
                "window_latent_floor_m": (self.window_floor_m if math.isfinite(
                    self.window_floor_m) else None),
                "n_draws": self.n_draws, "gibbs_sweeps": self.sweeps, "seed": self.seed,
                "variance_scale": self.variance_scale,
                "monte_carlo_sd_at_p_0_5": float(0.5 / np.sqrt(self.n_draws)),
                "external_drift": dict(self.drift), "notes": list(self.notes)}


def probability_below_grid(data: CensoredData, draws: np.ndarray, model: VariogramModel,
                           grid: Grid, thresholds_m: dict[str, float | np.ndarray], *,
                           max_neighbours: int = 64, grid_drift: np.ndarray | None = None,
                           locations: KrigingLocations | None = None
                           ) -> dict[str, np.ndarray]:
    """P(T < t) on the cells of ``grid`` for each threshold ``t`` (a number, or a grid for a
    threshold that varies by cell), averaged over the ``draws`` of the censored values.

    ``T = max(0, Z)``, so a threshold of 0 gives P(T = 0) = P(Z ≤ 0). When the data carry
    an external drift, ``grid_drift`` gives it on the grid (finite on every cell of the
    study area). ``locations`` (:func:`data_locations` of the same data and model) saves
    building them again.
    """
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    inside = grid.mask
    n_sites = data.x_m.size + data.cx_m.size
    if data.has_drift and grid_drift is None:
        raise ValueError("the data carry an external drift but the grid has none")
    tx, ty = xx[inside], yy[inside]
    tf = np.asarray(grid_drift)[inside] if data.has_drift else None
    n_draws = draws.shape[1] if draws.size else 1
    values = np.empty((n_sites, n_draws))
    values[:data.x_m.size] = data.value_m[:, None]
    if draws.size:
        values[data.x_m.size:] = draws
    thr = {k: (np.broadcast_to(np.asarray(v, float), inside.shape)[inside]
               if np.ndim(v) else np.full(tx.size, float(v)))
           for k, v in thresholds_m.items()}
    acc = {k: np.zeros(tx.size) for k in thresholds_m}
    # The data's part of the kriging systems once; cells in blocks: the weights of one
    # block at a time bound the memory.
    if locations is None:
        locations = data_locations(data, model)
    for start in range(0, tx.size, CELLS_PER_BLOCK):
        sl = slice(start, start + CELLS_PER_BLOCK)
        w = weights_at(locations, tx[sl], ty[sl], max_neighbours=max_neighbours,
                       target_drift=tf[sl] if tf is not None else None)
        sd = np.sqrt(w.variance)
        on_datum = sd <= 0
        safe_sd = np.where(on_datum, 1.0, sd)
        for k in range(n_draws):
            est = np.einsum("tk,tk->t", w.weights, values[w.index, k])
            for name, t in thr.items():
                tb = np.maximum(t[sl], 0.0)
                acc[name][sl] += np.where(on_datum, (est < tb) | ((t[sl] <= 0) & (est <= 0)),
                                          ndtr((tb - est) / safe_sd))
    out = {}
    for name, a in acc.items():
        g = np.full(inside.shape, np.nan)
        g[inside] = np.clip(a / n_draws, 0.0, 1.0)
        out[name] = g
    return out


#: Grid cells whose kriging weights are held at once in :func:`probability_below_grid`.
CELLS_PER_BLOCK = 65_536
#: Cross-validated holes needed before the variance scale is taken from them.
MIN_HOLES_FOR_VARIANCE_SCALE = 20
#: Range the variance scale is kept in.
VARIANCE_SCALE_LIMITS = (0.05, 20.0)


def cv_variance_scale(cv: dict[str, float]) -> float:
    """Factor on the variogram's sill that makes the leave-one-out standardised errors have
    variance 1: their observed variance (kept within :data:`VARIANCE_SCALE_LIMITS`; 1 with
    fewer than :data:`MIN_HOLES_FOR_VARIANCE_SCALE` cross-validated holes).

    Multiplying a variogram by a constant leaves the ordinary kriging weights and estimates
    unchanged and multiplies every kriging variance by it (the kriging system is linear in
    γ; Journel & Huijbregts 1978, ch. V), so this sets only the *level* of the uncertainty,
    from the one check the data offer: standardised cross-validation errors should have
    variance near 1 (Isaaks & Srivastava 1989, ch. 15).
    """
    v = cv.get("variance_standardised_error")
    n = cv.get("n", 0)
    if v is None or not np.isfinite(v) or v <= 0 or n < MIN_HOLES_FOR_VARIANCE_SCALE:
        return 1.0
    return float(np.clip(v, *VARIANCE_SCALE_LIMITS))


def scaled_variogram(model: VariogramModel, factor: float) -> VariogramModel:
    """``model`` with its nugget and partial sills multiplied by ``factor``."""
    return replace(model, nugget=model.nugget * factor, psill=model.psill * factor,
                   psill2=model.psill2 * factor)


def thickness_probabilities(x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                            status: np.ndarray, model: VariogramModel, grid: Grid,
                            thresholds_m: dict[str, float | np.ndarray], *,
                            max_neighbours: int = 64, n_draws: int = 64, sweeps: int = 30,
                            seed: int = 0, variance_scale: float = 1.0,
                            drift: np.ndarray | None = None,
                            grid_drift: np.ndarray | None = None,
                            window_floor_m: float = math.inf
                            ) -> ThicknessProbabilities:
    """P(total aquitard thickness < threshold) grids from borehole columns (module
    docstring): full positive thicknesses as data, holes proving a window as
    ``-window_floor_m ≤ Z ≤ 0``, holes that stopped in the clay as ``Z ≥ bound``.

    Args:
        x_m, y_m: borehole coordinates (m).
        thickness_m: full thickness or lower bound per hole (m).
        status: ``"full"``, ``"lower_bound"`` or ``"unknown"`` (ignored) per hole.
        model: variogram of the thickness (m²).
        grid: target grid.
        thresholds_m: ``{name: threshold}``; a threshold may be a grid (m).
        max_neighbours: kriging neighbourhood of the grid cells (the Gibbs sampler uses half
            of it, at least 8).
        n_draws, sweeps, seed: Monte Carlo settings; the same seed gives the same grids.
        variance_scale: factor on the variogram's sills (see :func:`cv_variance_scale`).
        drift, grid_drift: an external drift (ground elevation, m) per hole and on the grid;
            ``model`` is then the variogram of the residual from the drift
            (:mod:`aquitardmap.geostat.drift`).
        window_floor_m: lower end of the latent thickness at a hole that proves a window
            (m below zero; :func:`censored_data`).
    """
    model = scaled_variogram(model, variance_scale)
    data = censored_data(x_m, y_m, thickness_m, status, drift,
                         window_floor_m=window_floor_m)
    if data.x_m.size + data.cx_m.size == 0:
        raise ValueError("no borehole gives the total aquitard thickness or a bound on it")
    rng = np.random.default_rng(seed)
    locations = data_locations(data, model)
    draws = gibbs_draws(data, model, n_draws=n_draws, sweeps=sweeps,
                        max_neighbours=max(8, max_neighbours // 2), rng=rng,
                        locations=locations)
    p = probability_below_grid(data, draws, model, grid, thresholds_m,
                               max_neighbours=max_neighbours, grid_drift=grid_drift,
                               locations=locations)
    return ThicknessProbabilities(p, int(data.x_m.size), data.n_absent, data.n_lower_bounds,
                                  n_draws, sweeps, seed, list(data.notes), variance_scale,
                                  window_floor_m=float(window_floor_m))
