"""Experimental variograms and their model fit.

Semivariance follows Matheron's estimator, ``γ(h) = 1/(2N(h)) Σ (z_i − z_j)²`` over the
N(h) pairs in each lag class (Isaaks & Srivastava 1989, ch. 7). Models are the usual
transitive ones with a nugget; ``range_m`` is the *practical* range, the distance at which
the model reaches about 95 % (exponential, Gaussian) or all (spherical) of its sill, which is
also the convention of the pykrige package so parameters pass to it unchanged.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
from scipy.optimize import least_squares
from scipy.spatial.distance import pdist

#: Above this many points the experimental variogram uses a seeded random subset.
MAX_POINTS_FOR_PAIRS = 3000


@dataclass(frozen=True)
class ExperimentalVariogram:
    """Semivariance by lag class: centre distance (m), semivariance (value units²), pairs."""

    lag_m: np.ndarray
    gamma: np.ndarray
    n_pairs: np.ndarray


@dataclass(frozen=True)
class VariogramModel:
    """A fitted variogram model.

    Attributes:
        model: ``"spherical"``, ``"exponential"`` or ``"gaussian"``.
        nugget: semivariance at vanishing distance (value units²).
        psill: partial sill, the structured part of the variance (value units²).
        range_m: practical range (m), along the major axis when anisotropic.
        anisotropy_ratio: major range / minor range (≥ 1; 1 = isotropic).
        anisotropy_angle_deg: direction of the major axis, degrees counter-clockwise from
            east (the convention of pykrige's ``anisotropy_angle``).
    """

    model: str
    nugget: float
    psill: float
    range_m: float
    anisotropy_ratio: float = 1.0
    anisotropy_angle_deg: float = 0.0

    @property
    def sill(self) -> float:
        return self.nugget + self.psill

    def gamma(self, h_m: np.ndarray) -> np.ndarray:
        """Model semivariance at (isotropic or already anisotropy-scaled) distances ``h_m``
        (m); γ(0) = 0 exactly."""
        h = np.asarray(h_m, dtype=float)
        return np.where(h > 0, self.nugget + self.psill * _structure(self.model, h,
                                                                     self.range_m), 0.0)

    def as_dict(self) -> dict[str, float | str]:
        return asdict(self)


def _structure(model: str, h: np.ndarray, range_m: float) -> np.ndarray:
    """Unit-sill structure function of ``model`` at distances ``h`` for practical range a."""
    a = max(range_m, 1e-12)
    if model == "spherical":
        r = np.minimum(h / a, 1.0)
        return 1.5 * r - 0.5 * r**3
    if model == "exponential":
        return 1.0 - np.exp(-3.0 * h / a)
    if model == "gaussian":
        return 1.0 - np.exp(-((h / (a * 4.0 / 7.0)) ** 2))
    raise ValueError(f"unknown variogram model {model!r}")


def experimental_variogram(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray, *,
                           n_lags: int = 12, max_lag_m: float | None = None,
                           max_lag_fraction: float = 0.5, seed: int = 0
                           ) -> ExperimentalVariogram:
    """Isotropic experimental variogram in ``n_lags`` equal lag classes up to ``max_lag_m``.

    ``max_lag_m`` defaults to ``max_lag_fraction`` times the largest pair distance (half the
    field size is the usual rule, Journel & Huijbregts 1978). Classes without pairs are
    dropped.
    """
    x, y, z = (np.asarray(a, dtype=float) for a in (x_m, y_m, values))
    if x.size > MAX_POINTS_FOR_PAIRS:
        idx = np.random.default_rng(seed).choice(x.size, MAX_POINTS_FOR_PAIRS, replace=False)
        x, y, z = x[idx], y[idx], z[idx]
    pts = np.column_stack([x, y])
    d = pdist(pts)
    sq = pdist(z[:, None], metric="sqeuclidean")
    if max_lag_m is None:
        max_lag_m = max_lag_fraction * (d.max() if d.size else 0.0)
    if d.size == 0 or max_lag_m <= 0:
        return ExperimentalVariogram(np.array([]), np.array([]), np.array([], dtype=int))
    edges = np.linspace(0.0, max_lag_m, n_lags + 1)
    which = np.digitize(d, edges) - 1
    keep = (which >= 0) & (which < n_lags)
    counts = np.bincount(which[keep], minlength=n_lags)
    sums = np.bincount(which[keep], weights=sq[keep], minlength=n_lags)
    dsum = np.bincount(which[keep], weights=d[keep], minlength=n_lags)
    ok = counts > 0
    return ExperimentalVariogram(
        lag_m=dsum[ok] / counts[ok], gamma=0.5 * sums[ok] / counts[ok], n_pairs=counts[ok]
    )


def default_lags(x_m: np.ndarray, y_m: np.ndarray, *, max_lag_fraction: float = 0.5,
                 max_lags: int = 40) -> tuple[int, float]:
    """Lag classes from the data spacing: width = median nearest-neighbour distance,
    classes up to ``max_lag_fraction`` of the largest pair distance (at most ``max_lags``).

    Lags as wide as the typical hole spacing resolve the short-range structure that
    decides whether a narrow window is seen (common practice: lag ≈ average data spacing,
    Isaaks & Srivastava 1989, ch. 7). Returns (n_lags, max_lag_m).
    """
    from scipy.spatial import cKDTree

    pts = np.column_stack([np.asarray(x_m, float), np.asarray(y_m, float)])
    if len(pts) < 3:
        return 1, 1.0
    d, _ = cKDTree(pts).query(pts, k=2)
    width = float(np.median(d[:, 1]))
    span = float(np.hypot(np.ptp(pts[:, 0]), np.ptp(pts[:, 1])))
    max_lag = max_lag_fraction * span
    if width <= 0:
        return min(12, max_lags), max_lag
    n = int(np.clip(np.ceil(max_lag / width), 3, max_lags))
    return n, max_lag


def fit_variogram(exp: ExperimentalVariogram, model: str = "spherical", *,
                  sample_variance: float | None = None,
                  weighting: str = "cressie") -> VariogramModel:
    """Fit ``model`` to an experimental variogram by weighted least squares.

    ``weighting="cressie"`` (default) minimises Σ N(h)·(γ̂(h)/γ(h) − 1)², the weights of
    Cressie (1985, Math. Geol. 17(5):563–586): lags with many pairs and small semivariance
    (the short lags that matter most for kriging) count most. ``weighting="pairs"`` weights
    squared residuals by pair counts alone.
    Nugget and partial sill are kept between 0 and twice the largest semivariance (or the
    sample variance); the range between the first lag and twice the last.
    A flat or empty variogram (constant data) gives a pure-nugget model of that variance.
    """
    if weighting not in ("cressie", "pairs"):
        raise ValueError(f"unknown weighting {weighting!r}")
    if exp.lag_m.size < 2 or not np.any(exp.gamma > 0):
        var = float(sample_variance or 0.0)
        last = float(exp.lag_m.max()) if exp.lag_m.size else 1.0
        return VariogramModel(model, nugget=var, psill=max(var, 1e-9) * 1e-6, range_m=last)
    top = float(max(exp.gamma.max(), sample_variance or 0.0))
    lo_range = float(exp.lag_m.min())
    hi_range = float(2.0 * exp.lag_m.max())
    n = exp.n_pairs.astype(float)

    def resid(p: np.ndarray) -> np.ndarray:
        nug, ps, rng_ = p
        g = nug + ps * _structure(model, exp.lag_m, rng_)
        if weighting == "cressie":
            return np.sqrt(n) * (exp.gamma / np.maximum(g, 1e-12 * top) - 1.0)
        return np.sqrt(n / n.sum()) * (g - exp.gamma)

    best = None
    for frac in (0.2, 0.5, 0.8):
        p0 = [min(exp.gamma[0], 0.5 * top), max(top - exp.gamma[0], 1e-3 * top),
              lo_range + frac * (exp.lag_m.max() - lo_range)]
        r = least_squares(resid, p0, bounds=([0.0, 1e-9 * top, lo_range],
                                             [2 * top, 2 * top, hi_range]))
        if best is None or r.cost < best.cost:
            best = r
    nug, ps, rng_ = (float(v) for v in best.x)
    return VariogramModel(model, nugget=nug, psill=max(ps, 1e-9 * top), range_m=rng_)
