"""Experimental variograms and their model fit.

Semivariance follows Matheron's estimator, ``γ(h) = 1/(2N(h)) Σ (z_i − z_j)²`` over the
N(h) pairs in each lag class (Isaaks & Srivastava 1989, ch. 7). Models are the usual
transitive ones with a nugget; ``range_m`` is the *practical* range, the distance at which
the model reaches about 95 % (exponential, Gaussian) or all (spherical) of its sill, which is
also the convention of the pykrige package so parameters pass to it unchanged.

Beyond the isotropic variogram this module gives directional variograms (pairs whose
direction lies within a tolerance of an azimuth), geometric anisotropy fitted from them (an
ellipse of ranges, Isaaks & Srivastava 1989, ch. 16), and nested models (nugget plus up to two
structures, e.g. a short-range spherical plus a long-range exponential; Journel & Huijbregts
1978, ch. II). Angles are degrees counter-clockwise from east, pykrige's convention.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, replace

import numpy as np
from scipy.optimize import least_squares
from scipy.spatial.distance import pdist

#: Above this many points the experimental variogram uses a seeded random subset.
MAX_POINTS_FOR_PAIRS = 3000
#: Variogram structure families.
MODELS = ("spherical", "exponential", "gaussian")


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
        model2: family of an optional second (nested) structure, ``""`` for none.
        psill2: partial sill of the second structure (value units²).
        range2_m: practical range of the second structure (m, along the major axis).

    Both structures share the geometric anisotropy. The model is
    ``γ(h) = nugget + psill·g₁(h/range_m) + psill2·g₂(h/range2_m)`` for h > 0, γ(0) = 0.
    """

    model: str
    nugget: float
    psill: float
    range_m: float
    anisotropy_ratio: float = 1.0
    anisotropy_angle_deg: float = 0.0
    model2: str = ""
    psill2: float = 0.0
    range2_m: float = 0.0

    @property
    def sill(self) -> float:
        return self.nugget + self.psill + (self.psill2 if self.model2 else 0.0)

    @property
    def is_nested(self) -> bool:
        """True when the model has a second structure."""
        return bool(self.model2)

    def gamma(self, h_m: np.ndarray) -> np.ndarray:
        """Model semivariance at (isotropic or already anisotropy-scaled) distances ``h_m``
        (m); γ(0) = 0 exactly."""
        h = np.asarray(h_m, dtype=float)
        g = self.nugget + self.psill * _structure(self.model, h, self.range_m)
        if self.model2:
            g = g + self.psill2 * _structure(self.model2, h, self.range2_m)
        return np.where(h > 0, g, 0.0)

    def scaled_distance(self, dx_m: np.ndarray, dy_m: np.ndarray) -> np.ndarray:
        """Distance along the major axis that is equivalent, under the geometric anisotropy,
        to the separation (dx_m, dy_m): the separation is rotated so that the major axis is
        along x and its minor component stretched by ``anisotropy_ratio`` (pykrige's
        convention)."""
        xr, yr = anisotropic_coordinates(dx_m, dy_m, self.anisotropy_ratio,
                                         self.anisotropy_angle_deg)
        return np.hypot(xr, yr)

    def gamma_xy(self, dx_m: np.ndarray, dy_m: np.ndarray) -> np.ndarray:
        """Model semivariance for separations (dx_m, dy_m) (m), anisotropy included."""
        return self.gamma(self.scaled_distance(dx_m, dy_m))

    def as_dict(self) -> dict[str, float | str]:
        return asdict(self)


def _axes(angle_deg: float) -> tuple[float, float]:
    a = np.deg2rad(float(angle_deg))
    return float(np.cos(a)), float(np.sin(a))


def anisotropy_matrix(ratio: float, angle_deg: float) -> np.ndarray:
    """The linear map (2, 2) of :func:`anisotropic_coordinates` (about the origin), for
    geometry on separations: ``[[c, s], [−s·ratio, c·ratio]]`` with ``c, s`` the cosine and
    sine of ``angle_deg``."""
    c, s = _axes(angle_deg)
    r = float(ratio)
    return np.array([[c, s], [-s * r, c * r]])


def anisotropic_coordinates(x_m: np.ndarray, y_m: np.ndarray, ratio: float,
                            angle_deg: float, centre_xy: tuple[float, float] = (0.0, 0.0)
                            ) -> tuple[np.ndarray, np.ndarray]:
    """Coordinates in which a geometric anisotropy becomes isotropic: rotate about
    ``centre_xy`` by ``-angle_deg`` (so the major axis lies along x), then multiply the minor
    coordinate by ``ratio`` (pykrige's ``adjust_for_anisotropy``, in its order of
    operations). Distances between transformed points are the major-axis equivalent
    distances. The one anisotropy transform of the package."""
    c, s = _axes(angle_deg)
    cx, cy = float(centre_xy[0]), float(centre_xy[1])
    x = np.asarray(x_m, dtype=float) - cx
    y = np.asarray(y_m, dtype=float) - cy
    return c * x + s * y + cx, (-s * x + c * y) * float(ratio) + cy


#: Code of each structure family (its position in :data:`MODELS`), as the compiled kriging
#: kernel takes it.
STRUCTURE_CODES = {name: i for i, name in enumerate(MODELS)}


def structure(code: int, h: np.ndarray | float, a: float) -> np.ndarray | float:
    """Unit-sill structure function of family ``code`` (:data:`STRUCTURE_CODES`) at
    distances ``h`` (array or number) for practical range ``a`` > 0: spherical
    ``1.5 r − 0.5 r³`` (r = min(h/a, 1)), exponential ``1 − exp(−3h/a)``, gaussian
    ``1 − exp(−(h / (4a/7))²)`` (practical ranges as in pykrige, whose Gaussian range
    parameter is 4/7 of the practical range). The one set of formulas of the package: the
    compiled kernel of :mod:`aquitardmap.geostat.localkrige` compiles this function."""
    if code == 0:
        r = np.minimum(h / a, 1.0)
        return 1.5 * r - 0.5 * r**3
    if code == 1:
        return 1.0 - np.exp(-3.0 * h / a)
    return 1.0 - np.exp(-((h / (a * 4.0 / 7.0)) ** 2))


def _structure(model: str, h: np.ndarray, range_m: float) -> np.ndarray:
    """:func:`structure` of family ``model`` by name."""
    if model not in STRUCTURE_CODES:
        raise ValueError(f"unknown variogram model {model!r}")
    return structure(STRUCTURE_CODES[model], h, max(range_m, 1e-12))


def _mix64(v: np.ndarray) -> np.ndarray:
    """The splitmix64 finaliser (Steele, Lea & Flood 2014, OOPSLA, "Fast splittable
    pseudorandom number generators"): a bijection of uint64 that scatters nearby inputs."""
    v = v ^ (v >> np.uint64(30))
    v = v * np.uint64(0xBF58476D1CE4E5B9)
    v = v ^ (v >> np.uint64(27))
    v = v * np.uint64(0x94D049BB133111EB)
    return v ^ (v >> np.uint64(31))


def stable_subset(x_m: np.ndarray, y_m: np.ndarray, n: int, *, seed: int = 0) -> np.ndarray:
    """Indices (ascending) of ``n`` of the points, chosen by a hash of their coordinates:
    a pseudo-random subset that depends on the points themselves, not on their number or
    order, so that adding a few points changes it by at most as many points (a subset drawn
    with ``rng.choice(len(x), n)`` is a different one after every addition, and a variogram
    fitted to it moves by its sampling noise)."""
    with np.errstate(over="ignore"):
        bits = np.ascontiguousarray(np.column_stack([np.asarray(x_m, float),
                                                     np.asarray(y_m, float)])
                                    ).view(np.uint64)
        key = _mix64(bits[:, 0] ^ _mix64(bits[:, 1] + np.uint64(seed)))
    return np.sort(np.argsort(key, kind="stable")[:n])


def lag_classes(d: np.ndarray, edges: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lag class of the distances ``d`` that fall in a class, and their positions in ``d``
    (ascending): the class is ``np.digitize(d, edges) - 1`` (``edges[c] <= d <
    edges[c + 1]``), kept when it is one of the ``len(edges) - 1`` classes.

    For strictly increasing edges from 0 (those of :func:`experimental_variogram`) only the
    distances in ``[edges[0], edges[-1])`` are classed, and each by ``floor(d / width)``
    corrected against ``edges`` until ``edges[c] <= d < edges[c + 1]``: exactly the class
    of ``np.digitize``, without a binary search per distance. Other edges go to
    ``np.digitize`` itself.
    """
    d = np.asarray(d, dtype=float)
    edges = np.asarray(edges, dtype=float)
    n = edges.size - 1
    with np.errstate(over="ignore"):
        scale = n / edges[-1] if n >= 1 and edges[-1] > 0 else np.inf
    if not (n >= 1 and edges[0] == 0.0 and np.isfinite(scale) and np.all(np.diff(edges) > 0)):
        which = np.digitize(d, edges) - 1
        keep = np.flatnonzero((which >= 0) & (which < n))
        return which[keep], keep
    keep = np.flatnonzero(d < edges[-1])
    dk = d[keep]
    if dk.size and not dk.min() >= 0.0:  # (distances are not negative, but the rule is)
        keep = keep[dk >= 0.0]
        dk = d[keep]
    # 0 <= dk * scale < about n; a distance within a few units in the last place of an
    # edge may land one class off, which the two loops put right
    guess = dk * scale
    np.minimum(guess, n - 1, out=guess)
    which = guess.astype(np.intp)
    while True:
        low = np.flatnonzero(dk < edges[which])  # (never class 0: edges[0] = 0 <= dk)
        if low.size == 0:
            break
        which[low] -= 1
    while True:
        high = np.flatnonzero(dk >= edges[which + 1])  # (never class n - 1: dk < edges[n])
        if high.size == 0:
            break
        which[high] += 1
    return which, keep


def pair_indices(n: int, pairs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Points ``i < j`` of the pairs at positions ``pairs`` of the condensed pair order of
    ``pdist`` over ``n`` points (that of ``np.triu_indices(n, k=1)``): row ``i`` holds the
    ``n − 1 − i`` pairs ``(i, i + 1) … (i, n − 1)``, after the rows before it."""
    pairs = np.asarray(pairs, dtype=np.intp)
    counts = np.arange(n - 1, -1, -1, dtype=np.intp)
    i = np.repeat(np.arange(n, dtype=np.intp), counts)[pairs]
    # j = pairs − (first position of row i) + i + 1
    offset = np.cumsum(counts) - counts - np.arange(n, dtype=np.intp) - 1
    return i, pairs - offset[i]


def experimental_variogram(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray, *,
                           n_lags: int = 12, max_lag_m: float | None = None,
                           max_lag_fraction: float = 0.5, seed: int = 0,
                           direction_deg: float | None = None,
                           tolerance_deg: float = 22.5) -> ExperimentalVariogram:
    """Experimental variogram in ``n_lags`` equal lag classes up to ``max_lag_m``.

    ``max_lag_m`` defaults to ``max_lag_fraction`` times the largest pair distance (half the
    field size is the usual rule, Journel & Huijbregts 1978). Classes without pairs are
    dropped. With ``direction_deg`` (degrees counter-clockwise from east) only pairs whose
    separation direction lies within ``tolerance_deg`` of it (either way along the line) are
    used: a directional variogram (Isaaks & Srivastava 1989, ch. 7). Above
    :data:`MAX_POINTS_FOR_PAIRS` points the pairs of a subset are used
    (:func:`stable_subset`, which adding a few points hardly changes).
    """
    pairs = _Pairs.of(x_m, y_m, values, n_lags=n_lags, max_lag_m=max_lag_m,
                      max_lag_fraction=max_lag_fraction, seed=seed,
                      directions=direction_deg is not None)
    return pairs.variogram(direction_deg, tolerance_deg)


@dataclass(frozen=True)
class _Pairs:
    """The pairs of a data set that fall in the lag classes: lag class, distance (m) and
    squared difference of each (in the pair order of ``pdist``), and their direction
    (degrees counter-clockwise from east) when asked for; shared by the omnidirectional
    and the directional variograms of one data set."""

    n_lags: int
    which: np.ndarray
    d: np.ndarray
    sq: np.ndarray
    theta_deg: np.ndarray | None

    @classmethod
    def of(cls, x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray, *, n_lags: int,
           max_lag_m: float | None, max_lag_fraction: float, seed: int,
           directions: bool) -> _Pairs:
        x, y, z = (np.asarray(a, dtype=float) for a in (x_m, y_m, values))
        if x.size > MAX_POINTS_FOR_PAIRS:
            idx = stable_subset(x, y, MAX_POINTS_FOR_PAIRS, seed=seed)
            x, y, z = x[idx], y[idx], z[idx]
        d = pdist(np.column_stack([x, y]))
        sq = pdist(z[:, None], metric="sqeuclidean")
        if max_lag_m is None:
            max_lag_m = max_lag_fraction * (d.max() if d.size else 0.0)
        empty = np.array([], dtype=int)
        if d.size == 0 or max_lag_m <= 0:
            return cls(n_lags, empty, np.array([]), np.array([]), None)
        edges = np.linspace(0.0, max_lag_m, n_lags + 1)
        which, keep = lag_classes(d, edges)
        theta = None
        if directions:
            i, j = pair_indices(x.size, keep)
            theta = np.rad2deg(np.arctan2(y[j] - y[i], x[j] - x[i]))
        return cls(n_lags, which, d[keep], sq[keep], theta)

    def variogram(self, direction_deg: float | None = None, tolerance_deg: float = 22.5
                  ) -> ExperimentalVariogram:
        """Semivariance per lag class of all pairs, or of the pairs within
        ``tolerance_deg`` of ``direction_deg``."""
        which, d, sq = self.which, self.d, self.sq
        if direction_deg is not None and d.size:
            diff = np.abs((self.theta_deg - direction_deg + 90.0) % 180.0 - 90.0)
            sel = diff <= tolerance_deg
            which, d, sq = which[sel], d[sel], sq[sel]
        if d.size == 0:
            return ExperimentalVariogram(np.array([]), np.array([]), np.array([], dtype=int))
        counts = np.bincount(which, minlength=self.n_lags)
        sums = np.bincount(which, weights=sq, minlength=self.n_lags)
        dsum = np.bincount(which, weights=d, minlength=self.n_lags)
        ok = counts > 0
        return ExperimentalVariogram(
            lag_m=dsum[ok] / counts[ok], gamma=0.5 * sums[ok] / counts[ok],
            n_pairs=counts[ok])


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
                  weighting: str = "cressie", model2: str = "") -> VariogramModel:
    """Fit ``model`` (optionally nested with a second structure ``model2``) to an
    experimental variogram by weighted least squares.

    ``weighting="cressie"`` (default) minimises Σ N(h)·(γ̂(h)/γ(h) − 1)², the weights of
    Cressie (1985, Math. Geol. 17(5):563–586): lags with many pairs and small semivariance
    (the short lags that matter most for kriging) count most. ``weighting="pairs"`` weights
    squared residuals by pair counts alone.
    Nugget and partial sills are kept between 0 and twice the largest semivariance (or the
    sample variance); ranges between the first lag and twice the last. With ``model2`` the
    first structure is the shorter one (``range_m <= range2_m``).
    A flat or empty variogram (constant data) gives a pure-nugget model of that variance.
    """
    if weighting not in ("cressie", "pairs"):
        raise ValueError(f"unknown weighting {weighting!r}")
    for m in (model, model2 or model):
        if m not in MODELS:
            raise ValueError(f"unknown variogram model {m!r}")
    if exp.lag_m.size < 2 or not np.any(exp.gamma > 0):
        var = float(sample_variance or 0.0)
        last = float(exp.lag_m.max()) if exp.lag_m.size else 1.0
        return VariogramModel(model, nugget=var, psill=max(var, 1e-9) * 1e-6, range_m=last)
    top = float(max(exp.gamma.max(), sample_variance or 0.0))
    lo_range = float(exp.lag_m.min())
    hi_range = float(2.0 * exp.lag_m.max())
    n = exp.n_pairs.astype(float)

    def curve(p: np.ndarray) -> np.ndarray:
        g = p[0] + p[1] * _structure(model, exp.lag_m, p[2])
        if model2:
            g = g + p[3] * _structure(model2, exp.lag_m, p[2] + p[4])
        return g

    def resid(p: np.ndarray) -> np.ndarray:
        g = curve(p)
        if weighting == "cressie":
            return np.sqrt(n) * (exp.gamma / np.maximum(g, 1e-12 * top) - 1.0)
        return np.sqrt(n / n.sum()) * (g - exp.gamma)

    lo = [0.0, 1e-9 * top, lo_range]
    hi = [2 * top, 2 * top, hi_range]
    starts = []
    span = exp.lag_m.max() - lo_range
    for frac in (0.2, 0.5, 0.8):
        nug0 = min(exp.gamma[0], 0.5 * top)
        ps0 = max(top - exp.gamma[0], 1e-3 * top)
        if not model2:
            starts.append([nug0, ps0, lo_range + frac * span])
        else:
            for split in (0.3, 0.7):
                starts.append([nug0, split * ps0, lo_range + 0.5 * frac * span,
                               (1 - split) * ps0, max(frac * span, 1e-6)])
    if model2:
        lo += [1e-9 * top, 0.0]
        hi += [2 * top, hi_range]
    best = None
    for p0 in starts:
        p0 = np.clip(p0, lo, hi)
        r = least_squares(resid, p0, bounds=(lo, hi))
        if best is None or r.cost < best.cost:
            best = r
    v = [float(a) for a in best.x]
    if not model2:
        return VariogramModel(model, nugget=v[0], psill=max(v[1], 1e-9 * top), range_m=v[2])
    return VariogramModel(model, nugget=v[0], psill=max(v[1], 1e-9 * top), range_m=v[2],
                          model2=model2, psill2=max(v[3], 1e-9 * top), range2_m=v[2] + v[4])


@dataclass(frozen=True)
class DirectionalFit:
    """Directional variograms and the geometric anisotropy fitted to them.

    Attributes:
        directions_deg: azimuths of the directional variograms (degrees counter-clockwise
            from east).
        tolerance_deg: angular half-width of each direction class.
        experimental: one experimental variogram per direction.
        ranges_m: apparent range in each direction (m) — the range of the isotropic model
            rescaled to fit that direction alone (NaN where a direction had too few lags).
        ratio: major range / minor range of the ellipse fitted to ``ranges_m`` (≥ 1).
        angle_deg: direction of the major axis (degrees counter-clockwise from east, 0–180).
        major_range_m: range along the major axis (m).
    """

    directions_deg: tuple[float, ...]
    tolerance_deg: float
    experimental: tuple[ExperimentalVariogram, ...]
    ranges_m: tuple[float, ...]
    ratio: float
    angle_deg: float
    major_range_m: float

    def as_dict(self) -> dict[str, object]:
        return {"directions_deg": list(self.directions_deg),
                "tolerance_deg": self.tolerance_deg,
                "apparent_ranges_m": [float(r) for r in self.ranges_m],
                "anisotropy_ratio": self.ratio, "anisotropy_angle_deg": self.angle_deg,
                "major_range_m": self.major_range_m}


#: Largest anisotropy ratio :func:`fit_anisotropy` returns (a data-limited estimate).
MAX_ANISOTROPY_RATIO = 5.0


def _apparent_range(exp: ExperimentalVariogram, model: VariogramModel) -> float:
    """Range (m) of ``model`` rescaled along distance so that it best fits ``exp`` (Cressie
    weights), nugget and sills kept; NaN with fewer than 3 lags."""
    if exp.lag_m.size < 3:
        return float("nan")
    n = exp.n_pairs.astype(float)
    top = max(float(exp.gamma.max()), model.sill)

    def resid(p: np.ndarray) -> np.ndarray:
        g = model.gamma(exp.lag_m / p[0])
        return np.sqrt(n) * (exp.gamma / np.maximum(g, 1e-12 * top) - 1.0)

    r = least_squares(resid, [1.0], bounds=([0.05], [20.0]))
    return float(model.range_m * r.x[0])


def fit_anisotropy(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                   model: VariogramModel, *, n_lags: int, max_lag_m: float,
                   n_directions: int = 4, tolerance_deg: float = 22.5) -> DirectionalFit:
    """Directional variograms in ``n_directions`` azimuths (0°, 180°/n, ...) and the
    geometric anisotropy they suggest.

    The isotropic ``model`` is rescaled in distance to fit each direction (nugget and sills
    kept), giving an apparent range per direction; an ellipse
    ``r(θ) = a / sqrt(cos²(θ−φ) + k² sin²(θ−φ))`` (major range a, direction φ, ratio k) is
    fitted to those ranges by least squares on log r (geometric anisotropy, Isaaks &
    Srivastava 1989, ch. 16). The ratio is capped at :data:`MAX_ANISOTROPY_RATIO`.
    """
    dirs = tuple(float(180.0 * k / n_directions) for k in range(n_directions))
    pairs = _Pairs.of(x_m, y_m, values, n_lags=n_lags, max_lag_m=max_lag_m,
                      max_lag_fraction=0.5, seed=0, directions=True)
    exps = tuple(pairs.variogram(d, tolerance_deg) for d in dirs)
    iso = replace(model, anisotropy_ratio=1.0, anisotropy_angle_deg=0.0)
    ranges = np.array([_apparent_range(e, iso) for e in exps])
    ok = np.isfinite(ranges)
    if ok.sum() < 3:
        return DirectionalFit(dirs, tolerance_deg, exps, tuple(ranges), 1.0, 0.0,
                              float(model.range_m))
    th = np.deg2rad(np.array(dirs)[ok])
    logr = np.log(ranges[ok])

    def resid(p: np.ndarray) -> np.ndarray:
        loga, k, phi = p
        return logr - (loga - 0.5 * np.log(np.cos(th - phi) ** 2
                                           + k**2 * np.sin(th - phi) ** 2))

    best = None
    for phi0 in np.deg2rad(np.array(dirs)):
        r = least_squares(resid, [logr.max(), 1.5, phi0],
                          bounds=([logr.min() - 3, 1.0, phi0 - np.pi],
                                  [logr.max() + 3, MAX_ANISOTROPY_RATIO, phi0 + np.pi]))
        if best is None or r.cost < best.cost:
            best = r
    loga, k, phi = best.x
    return DirectionalFit(dirs, tolerance_deg, exps, tuple(float(r) for r in ranges),
                          float(k), float(np.rad2deg(phi) % 180.0), float(np.exp(loga)))


def with_anisotropy(model: VariogramModel, ratio: float, angle_deg: float,
                    major_range_m: float | None = None) -> VariogramModel:
    """``model`` with geometric anisotropy (ratio, angle); when ``major_range_m`` is given,
    both structures' ranges are rescaled so that the first structure's range is it."""
    f = 1.0 if major_range_m is None else major_range_m / model.range_m
    return replace(model, anisotropy_ratio=float(ratio), anisotropy_angle_deg=float(angle_deg),
                   range_m=model.range_m * f, range2_m=model.range2_m * f)
