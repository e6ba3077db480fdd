"""An independent generator of test regions with a known clay thickness.

This generator shares no truth-building code with :mod:`aquitardmap.evaluation.synthetic`, so that a
method tuned on one family of synthetic regions can be checked on another. It differs on
purpose in every step:

* background clay thickness, ground and cover are spectral (FFT) Gaussian random fields with
  a Gaussian covariance ``exp(-(r / L)^2)`` (mean 15-35 m, sd 3-8 m, L 1-3 km for the clay);
  the ground also carries a gentle planar slope;
* features are analytic functions of the distance to polylines and ellipses (shapely);
* the feature extent is calibrated so that the share of the study area with less than 5 m
  of clay lands on a target drawn uniformly in 3-8 %;
* holes follow one of three layouts and carry their own recording noise.

Characters (invented names):

``"straight_cuts"``
    2-4 nearly straight channels (250-500 m wide, random orientations) cut the clay to 0 in
    their middle, with tapering shoulders; the cut is sand-filled.
``"sinuous_ridges"``
    1-3 meandering buried gravel ridges (200-400 m wide) whose crest rises through the clay
    in stretches (windows) and stays buried elsewhere.
``"patchy_highs"``
    5-15 elliptical highs of till or bedrock (semi-axes 200-800 m), about half of them
    opening a window (in a small region the calibration may keep only some of them, at least 2).
``"thinning_edge"``
    the clay thins smoothly to nothing toward one side of the region, plus one channel.

The stack is the demo stack (``SAND`` cover; ``UMC``, ``LMC``, ``LAM`` aquitard, split
about 0.4/0.4/0.2 from the top; ``GRAV`` aquifer). Every draw comes from one
``numpy.random.default_rng(seed)``, so a seed reproduces the files byte for byte.

Example::

    >>> from aquitardmap.evaluation.independent import make_independent_region
    >>> r = make_independent_region("/tmp/r", seed=3, character="patchy_highs",
    ...                             n_holes=60, extent_m=(4000.0, 3000.0))  # doctest: +SKIP
    >>> 0.02 <= r["share_below_5m"] <= 0.10                                  # doctest: +SKIP
    True
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import shapely
from affine import Affine
from pyproj import CRS
from scipy.interpolate import RegularGridInterpolator
from shapely.geometry import LineString, Polygon

from aquitardmap.evaluation.demo_stack import K_TRUE_M_S, project_toml_text
from aquitardmap.grid import Grid, make_grid, snapped_bounds, write_raster
from aquitardmap.outputs import names as outputs

__all__ = ["INDEPENDENT_CHARACTERS", "LAYOUTS", "make_independent_region"]

INDEPENDENT_CHARACTERS = ("straight_cuts", "sinuous_ridges", "patchy_highs", "thinning_edge")
LAYOUTS = ("poisson", "jittered", "clustered")

_CLAY = ("UMC", "LMC", "LAM")
_CRS = "EPSG:32633"
_ORIGIN = (402_000.0, 5_311_000.0)  # south-west corner of the rectangle (m)
_FIELD_STEP_M = 50.0  # lattice spacing of the random fields
_THIN_M = 5.0
_TARGET_SHARE = (0.03, 0.08)  # share of the area under 5 m of clay the features aim at
_LAM_RANGE = (0.05, 1.0)  # range of the feature-extent scale the calibration searches

#: Recording noise of water wells.
XY_SD_M = 20.0
CONTACT_SD_M = 0.25
GROUND_SD_M = 0.5

_TOML_COMMENT = """\
# {name}: an INVENTED test region written by aquitardmap.evaluation.independent
# (seed {seed}, character "{character}", layout "{layout}"). Every borehole and value is
# synthetic; the truth is in truth/.
"""


# ------------------------------------------------------------------------ random fields


def _fft_field(rng: np.random.Generator, shape: tuple[int, int], corr_m: float
               ) -> np.ndarray:
    """Stationary Gaussian random field with covariance exp(-(r / corr_m)^2), mean 0, sd 1,
    on a lattice of ``_FIELD_STEP_M`` (spectral method: white noise filtered by the square
    root of the spectral density, exp(-k^2 L^2 / 8) for angular wavenumber k)."""
    ny, nx = shape
    ky = 2.0 * np.pi * np.fft.fftfreq(ny, d=_FIELD_STEP_M)
    kx = 2.0 * np.pi * np.fft.rfftfreq(nx, d=_FIELD_STEP_M)
    k2 = ky[:, None] ** 2 + kx[None, :] ** 2
    spec = np.fft.rfft2(rng.standard_normal(shape)) * np.exp(-k2 * corr_m ** 2 / 8.0)
    f = np.fft.irfft2(spec, s=shape)
    return (f - f.mean()) / f.std()


@dataclass(frozen=True)
class _Lattice:
    """Fields on one lattice, read anywhere by bilinear interpolation."""

    xs: np.ndarray
    ys: np.ndarray
    values: dict[str, np.ndarray]

    def at(self, name: str, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        f = RegularGridInterpolator((self.ys, self.xs), self.values[name])
        return f(np.column_stack([np.ravel(y), np.ravel(x)])).reshape(np.shape(x))


def _smoothstep(t: np.ndarray) -> np.ndarray:
    t = np.clip(t, 0.0, 1.0)
    return t * t * (3.0 - 2.0 * t)


# ----------------------------------------------------------------------------- features


@dataclass(frozen=True)
class _Strip:
    """A channel or ridge along a polyline: removes ``height(s) * across(d)`` of the clay
    (capped at 1), ``across`` 1 within ``core_m`` of the line and 0 beyond
    ``core_m + shoulder_m``; ``height`` along the line is a sum of stretches, each a
    plateau of length ``lam * length`` tapering over ``taper_m``, plus ``base``."""

    line: LineString
    core_m: float
    shoulder_m: float
    from_top: bool  # True: eroded channel (sand-filled); False: ridge rising from below
    base: float
    stretch_at_m: tuple[float, ...]  # centre of each stretch along the line (m)
    stretch_len_m: tuple[float, ...]
    stretch_height: tuple[float, ...]
    taper_m: float

    def geometry(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        pts = shapely.points(np.ravel(x), np.ravel(y))
        return (shapely.distance(self.line, pts).reshape(np.shape(x)),
                shapely.line_locate_point(self.line, pts).reshape(np.shape(x)))

    def removed(self, d: np.ndarray, s: np.ndarray, lam: float) -> np.ndarray:
        across = 1.0 - _smoothstep((d - self.core_m) / self.shoulder_m)
        height = np.full(np.shape(d), self.base)
        for c, length, h in zip(self.stretch_at_m, self.stretch_len_m, self.stretch_height,
                                strict=True):
            half = 0.5 * lam * length
            height = height + h * _smoothstep((half - np.abs(s - c)) / self.taper_m + 1.0)
        return np.minimum(1.0, height * across)


@dataclass(frozen=True)
class _Highs:
    """Elliptical highs rising from below; ``lam`` keeps the first ``ceil(lam * n)``."""

    cx: np.ndarray
    cy: np.ndarray
    a_m: np.ndarray  # semi-axes
    b_m: np.ndarray
    angle: np.ndarray
    height: np.ndarray

    def geometry(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        out = []
        for k in range(self.cx.size):
            dx, dy = x - self.cx[k], y - self.cy[k]
            c, s = math.cos(self.angle[k]), math.sin(self.angle[k])
            out.append(np.hypot((c * dx + s * dy) / self.a_m[k],
                                (-s * dx + c * dy) / self.b_m[k]))
        return np.array(out)

    def removed(self, r: np.ndarray, lam: float) -> np.ndarray:
        n = max(2, int(math.ceil(lam * self.cx.size)))
        out = np.zeros(r.shape[1:])
        for k in range(min(n, self.cx.size)):
            prof = 1.0 - _smoothstep((r[k] - 0.6) / 0.8)  # 1 inside 0.6, 0 beyond 1.4
            out = np.maximum(out, np.minimum(1.0, self.height[k] * prof))
        return out


@dataclass(frozen=True)
class _Edge:
    """Clay thinning to nothing toward one side: kept fraction rises from 0 at
    ``lam * zero_m`` from the side to 1 at ``lam * (zero_m + taper_m)``."""

    normal: tuple[float, float]  # unit vector pointing into the region from the side
    offset_m: float  # value of normal . (x, y) on the side
    zero_m: float
    taper_m: float

    def geometry(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return self.normal[0] * x + self.normal[1] * y - self.offset_m

    def removed(self, u: np.ndarray, lam: float) -> np.ndarray:
        return 1.0 - _smoothstep((u - lam * self.zero_m) / (lam * self.taper_m))


def _polyline(rng: np.random.Generator, centre: tuple[float, float], heading: float,
              length_m: float, amp_m: float, wavelength_m: float) -> LineString:
    """Polyline of ``length_m`` through ``centre`` in direction ``heading`` (radians),
    meandering sideways with amplitude ``amp_m`` and the given wavelength."""
    u = np.linspace(-0.5, 0.5, 241) * length_m
    phase = rng.uniform(0.0, 2.0 * np.pi)
    v = amp_m * np.sin(2.0 * np.pi * u / wavelength_m + phase)
    v = v - np.interp(0.0, u, v)
    c, s = math.cos(heading), math.sin(heading)
    return LineString(np.column_stack([centre[0] + c * u - s * v, centre[1] + s * u + c * v]))


def _stretches(rng: np.random.Generator, length_m: float, n: int, frac: tuple[float, float],
               height: tuple[float, float]) -> tuple[tuple[float, ...], ...]:
    """Centres, lengths and heights of ``n`` stretches spread along a line."""
    slots = (np.arange(n) + rng.uniform(0.3, 0.7, n)) / n * length_m
    lens = rng.uniform(*frac, n) * length_m / n
    hts = rng.uniform(*height, n)
    return tuple(slots.tolist()), tuple(lens.tolist()), tuple(hts.tolist())


def _cut(rng: np.random.Generator, x0: float, y0: float, w: float, h: float,
         straightness: float) -> _Strip:
    """A sand-filled channel crossing the rectangle, 250-500 m wide, cut to zero clay along
    one long stretch (its length the calibrated share of the crossing)."""
    centre = (x0 + rng.uniform(0.15, 0.85) * w, y0 + rng.uniform(0.15, 0.85) * h)
    length = 1.3 * math.hypot(w, h)
    line = _polyline(rng, centre, rng.uniform(0.0, np.pi), length,
                     straightness * rng.uniform(0.0, 0.02) * length,
                     rng.uniform(0.8, 1.5) * length)
    width = rng.uniform(250.0, 500.0)
    shoulder = rng.uniform(60.0, 150.0)
    at = 0.5 * length + rng.uniform(-0.15, 0.15) * length
    return _Strip(line, 0.5 * width - 0.3 * shoulder, shoulder, True, 0.0, (at,),
                  (rng.uniform(0.5, 0.8) * length,), (1.2,), 300.0)


def _features(rng: np.random.Generator, character: str, x0: float, y0: float, w: float,
              h: float) -> list:
    if character == "straight_cuts":
        return [_cut(rng, x0, y0, w, h, 1.0) for _ in range(int(rng.integers(2, 5)))]
    if character == "sinuous_ridges":
        out = []
        for _ in range(int(rng.integers(1, 4))):
            centre = (x0 + rng.uniform(0.2, 0.8) * w, y0 + rng.uniform(0.2, 0.8) * h)
            length = 1.2 * math.hypot(w, h)
            line = _polyline(rng, centre, rng.uniform(0.0, np.pi), length,
                             rng.uniform(150.0, 450.0), rng.uniform(1200.0, 2500.0))
            width = rng.uniform(200.0, 400.0)
            shoulder = rng.uniform(80.0, 150.0)
            at, lens, hts = _stretches(rng, length, int(rng.integers(1, 4)), (0.3, 0.7),
                                       (0.9, 1.3))
            out.append(_Strip(line, 0.5 * width - 0.3 * shoulder, shoulder, False,
                              rng.uniform(0.25, 0.5), at, lens, hts, 400.0))
        return out
    if character == "patchy_highs":
        n = int(rng.integers(5, 16))
        opens = np.arange(n) % 2 == 0  # alternate, so any leading subset is about half
        height = np.where(opens, rng.uniform(1.2, 1.8, n), rng.uniform(0.4, 0.9, n))
        return [_Highs(x0 + rng.uniform(0.05, 0.95, n) * w, y0 + rng.uniform(0.05, 0.95, n) * h,
                       rng.uniform(200.0, 800.0, n), rng.uniform(200.0, 800.0, n),
                       rng.uniform(0.0, np.pi, n), height)]
    if character == "thinning_edge":
        side = int(rng.integers(4))  # 0 west, 1 east, 2 south, 3 north
        tilt = math.radians(rng.uniform(-15.0, 15.0))
        base = [(1.0, 0.0), (-1.0, 0.0), (0.0, 1.0), (0.0, -1.0)][side]
        nx, ny = (base[0] * math.cos(tilt) - base[1] * math.sin(tilt),
                  base[0] * math.sin(tilt) + base[1] * math.cos(tilt))
        corners = np.array([[x0, y0], [x0 + w, y0], [x0, y0 + h], [x0 + w, y0 + h]])
        offset = float(np.min(corners @ np.array([nx, ny])))
        across = w if side < 2 else h
        edge = _Edge((nx, ny), offset, rng.uniform(0.03, 0.08) * across,
                     rng.uniform(0.2, 0.4) * across)
        return [edge, _cut(rng, x0, y0, w, h, 1.0)]
    raise ValueError(character)  # pragma: no cover - checked by the caller


# -------------------------------------------------------------------------------- truth


@dataclass(frozen=True)
class _Scene:
    """The truth: fields, features and the calibrated feature extent ``lam``."""

    lattice: _Lattice
    clay_mean_m: float
    clay_sd_m: float
    ground: tuple[float, float, float, float]  # base, slope x, slope y (m/m), amplitude
    features: list
    lam: float = 1.0

    def removal(self, x: np.ndarray, y: np.ndarray):
        """Closure lam -> (fraction removed from the top, fraction removed from below)."""
        geo = [f.geometry(x, y) for f in self.features]

        def at(lam: float) -> tuple[np.ndarray, np.ndarray]:
            top = np.zeros(np.shape(x))
            below = np.zeros(np.shape(x))
            for f, g in zip(self.features, geo, strict=True):
                if isinstance(f, _Strip):
                    r = f.removed(g[0], g[1], lam)
                    if f.from_top:
                        top = np.maximum(top, r)
                    else:
                        below = np.maximum(below, r)
                else:
                    below = np.maximum(below, f.removed(g, lam))
            return top, below
        return at

    def background_clay_m(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        g = self.lattice.at("clay", x, y)
        return np.maximum(0.0, self.clay_mean_m + self.clay_sd_m * g)

    def column(self, x: np.ndarray, y: np.ndarray) -> dict[str, np.ndarray]:
        """True ground (m) and thickness of SAND, UMC, LMC, LAM (m) at points (x, y)."""
        x = np.asarray(x, float)
        y = np.asarray(y, float)
        lat = self.lattice
        clay = self.background_clay_m(x, y)
        top, below = self.removal(x, y)(self.lam)
        kept_top = clay * (1.0 - top)  # clay left after the channels
        remain = kept_top * (1.0 - below)  # and after the ridges and highs
        cut_top = clay - kept_top  # depth of clay eroded from the top (sand-filled)
        f_lam = np.clip(0.2 + 0.03 * lat.at("split_a", x, y), 0.1, 0.3)
        f_umc = (1.0 - f_lam) * np.clip(0.5 + 0.06 * lat.at("split_b", x, y), 0.35, 0.65)
        bounds = np.cumsum([np.zeros_like(clay), f_umc * clay, (1.0 - f_lam - f_umc) * clay,
                            f_lam * clay], axis=0)  # unit contacts below the clay top
        lo, hi = cut_top, cut_top + remain
        th = {u: np.clip(np.minimum(bounds[i + 1], hi) - np.maximum(bounds[i], lo), 0.0, None)
              for i, u in enumerate(_CLAY)}
        base, sx, sy, amp = self.ground
        ground = base + sx * x + sy * y + amp * lat.at("ground", x, y)
        sand = np.clip(2.5 + 1.0 * lat.at("sand", x, y), 0.3, 8.0) + cut_top
        return {"ground": ground, "SAND": sand, **th}


def _clay_total(col: dict[str, np.ndarray]) -> np.ndarray:
    return col["UMC"] + col["LMC"] + col["LAM"]


def _calibrate(scene: _Scene, grid: Grid, target: float) -> float:
    """Feature extent ``lam`` that puts the share of the grid's study-area cells under
    5 m of clay closest to ``target`` (bisection; the share grows with ``lam``)."""
    xs, ys = grid.cell_centres()
    gx, gy = np.meshgrid(xs, ys)
    x, y = gx[grid.mask], gy[grid.mask]
    clay = scene.background_clay_m(x, y)
    at = scene.removal(x, y)

    def share(lam: float) -> float:
        top, below = at(lam)
        return float(np.mean(clay * (1.0 - top) * (1.0 - below) < _THIN_M))

    lo, hi = _LAM_RANGE
    if share(hi) <= target:
        return hi
    if share(lo) >= target:
        return lo
    for _ in range(30):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if share(mid) < target else (lo, mid)
    return 0.5 * (lo + hi)


# ---------------------------------------------------------------------------- boreholes


def _layout(rng: np.random.Generator, polygon: Polygon, n: int, layout: str
            ) -> tuple[np.ndarray, np.ndarray]:
    """True hole positions inside ``polygon``."""
    xmin, ymin, xmax, ymax = polygon.bounds

    def uniform(m: int) -> tuple[np.ndarray, np.ndarray]:
        xs, ys = np.empty(0), np.empty(0)
        while xs.size < m:
            x = rng.uniform(xmin, xmax, 2 * m)
            y = rng.uniform(ymin, ymax, 2 * m)
            ok = shapely.contains_xy(polygon, x, y)
            xs, ys = np.concatenate([xs, x[ok]]), np.concatenate([ys, y[ok]])
        return xs[:m], ys[:m]

    if layout == "poisson":
        return uniform(n)
    if layout == "jittered":
        step = math.sqrt(polygon.area / n)
        gx, gy = np.meshgrid(np.arange(xmin + 0.5 * step, xmax, step),
                             np.arange(ymin + 0.5 * step, ymax, step))
        x = gx.ravel() + rng.uniform(-0.4, 0.4, gx.size) * step
        y = gy.ravel() + rng.uniform(-0.4, 0.4, gy.size) * step
        ok = shapely.contains_xy(polygon, x, y)
        x, y = x[ok], y[ok]
        if x.size > n:
            keep = np.sort(rng.choice(x.size, n, replace=False))
            x, y = x[keep], y[keep]
        if x.size < n:
            ex, ey = uniform(n - x.size)
            x, y = np.concatenate([x, ex]), np.concatenate([y, ey])
        return x, y
    # clustered: 60 % in 3-6 Gaussian clusters, the rest uniform
    k = int(rng.integers(3, 7))
    cx, cy = uniform(k)
    sd = rng.uniform(250.0, 700.0, k)
    n_cl = int(round(0.6 * n))
    member = rng.integers(0, k, n_cl)
    xs, ys = np.empty(0), np.empty(0)
    while xs.size < n_cl:
        x = cx[member] + sd[member] * rng.standard_normal(n_cl)
        y = cy[member] + sd[member] * rng.standard_normal(n_cl)
        ok = shapely.contains_xy(polygon, x, y)
        xs, ys = np.concatenate([xs, x[ok]]), np.concatenate([ys, y[ok]])
    ux, uy = uniform(n - n_cl)
    return np.concatenate([xs[:n_cl], ux]), np.concatenate([ys[:n_cl], uy])


def _noisy_log(rng: np.random.Generator, thick: dict[str, float], total_depth_m: float,
               noisy: bool) -> list[tuple[str, float, float]]:
    """Intervals from 0 to ``total_depth_m``: SAND, each clay unit present, then GRAV
    (when the hole is deeper than the clay base). Water wells: contacts with noise
    (sd ``CONTACT_SD_M``) rounded to 0.1 m; other holes: exact to 0.01 m."""
    step = 0.1 if noisy else 0.01
    out: list[tuple[str, float, float]] = []
    top = depth = 0.0
    for unit in ("SAND", *_CLAY):
        depth += thick[unit]
        if thick[unit] <= 0.0:
            continue
        b = depth + (CONTACT_SD_M * rng.standard_normal() if noisy else 0.0)
        b = round(round(min(b, total_depth_m) / step) * step, 2)
        if b - top < step / 2:
            continue
        out.append((unit, top, b))
        top = b
        if top >= total_depth_m:
            break
    if top < total_depth_m:
        if depth < total_depth_m:  # the hole reaches the aquifer
            out.append(("GRAV", top, total_depth_m))
        else:  # it stops in the clay: the last logged unit reaches the bottom
            u, t, _ = out.pop()
            out.append((u, t, total_depth_m))
    return out


def _clay_samples(rng: np.random.Generator, intervals: list[tuple[str, float, float]]
                  ) -> list[tuple[float, float, float, float, float]]:
    """Two samples in each clay interval: D10 and D60 (mm), porosity, lab K (m/s);
    ranges common practice for marine and lake clays; lab K log-normal around the demo
    stack's K of the unit (sd of ln K 0.4)."""
    out = []
    for unit, top, bottom in intervals:
        if unit not in _CLAY or bottom - top < 0.6:
            continue
        for depth in np.sort(rng.uniform(top + 0.2, bottom - 0.2, 2)):
            d10 = math.exp(rng.uniform(math.log(0.0006), math.log(0.002)))
            d60 = math.exp(rng.uniform(math.log(0.006), math.log(0.03)))
            por = rng.uniform(0.45, 0.6)
            k = K_TRUE_M_S[unit] * math.exp(0.4 * rng.standard_normal())
            out.append((round(float(depth), 2), d10, d60, por, k))
    return out


# ------------------------------------------------------------------------------ writers


def _write(path: Path, header: str, rows: list[str]) -> Path:
    path.write_text("\n".join([header, *rows]) + "\n", encoding="utf-8", newline="\n")
    return path


def _boundary(x0: float, y0: float, w: float, h: float) -> Polygon:
    """The rectangle with its corners cut off (so the study area is not the grid)."""
    c = round(0.06 * min(w, h), 2)
    return Polygon([(x0 + c, y0), (x0 + w - c, y0), (x0 + w, y0 + c), (x0 + w, y0 + h - c),
                    (x0 + w - c, y0 + h), (x0 + c, y0 + h), (x0, y0 + h - c), (x0, y0 + c)])


def make_independent_region(out_dir: str | Path, *, seed: int, character: str,
                            n_holes: int = 400,
                            extent_m: tuple[float, float] = (10000.0, 8000.0),
                            cell_size_m: float = 50.0, partial_fraction: float = 0.2,
                            layout: str = "poisson") -> dict:
    """Write a complete project folder drawn from an independently built truth.

    Files: ``collars.csv``, ``intervals.csv``, ``samples.csv``, ``dem.tif`` (25 m),
    ``boundary.geojson``, ``project.toml`` (the demo stack) and ``truth/`` with
    ``aquitard_thickness_m.tif`` (true total clay thickness on the screening grid the
    pipeline builds from the boundary), ``boreholes.csv`` (true positions and columns) and
    ``truth.json``.

    Args:
        out_dir: folder to write (created; files of the same names are replaced).
        seed: seed of the one ``numpy.random.default_rng`` every draw comes from.
        character: one of :data:`INDEPENDENT_CHARACTERS`.
        n_holes: number of boreholes of all kinds (at least 20).
        extent_m: (east-west, north-south) size of the region (m), each at least 2000.
        cell_size_m: screening-grid cell size (m).
        partial_fraction: share of the holes drawn as geotechnical holes stopping inside
            the clay (0 to 0.8); where the true clay is under 8 m they become water wells.
        layout: ``"poisson"`` (uniform), ``"jittered"`` (jittered regular grid) or
            ``"clustered"`` (60 % in 3-6 clusters, the rest uniform).

    Returns:
        dict with ``root``, ``seed``, ``character``, ``layout``, ``counts`` (by kind and
        total), ``area_km2`` (study-area grid cells), ``area_below_1m_km2``,
        ``area_below_5m_km2``, ``share_below_5m`` and ``target_share_below_5m``.

    Raises:
        ValueError: for an unknown character or layout or an argument out of range.
    """
    if character not in INDEPENDENT_CHARACTERS:
        raise ValueError(f"character must be one of {', '.join(INDEPENDENT_CHARACTERS)}, "
                         f"got {character!r}")
    if layout not in LAYOUTS:
        raise ValueError(f"layout must be one of {', '.join(LAYOUTS)}, got {layout!r}")
    if not 0.0 <= partial_fraction <= 0.8:
        raise ValueError(f"partial_fraction must be within 0 to 0.8, got {partial_fraction}")
    if min(extent_m) < 2000.0:
        raise ValueError(f"extent_m must be at least 2000 m each way, got {extent_m}")
    if n_holes < 20:
        raise ValueError(f"n_holes must be at least 20, got {n_holes}")

    rng = np.random.default_rng(seed)
    root = Path(out_dir)
    tdir = root / "truth"
    tdir.mkdir(parents=True, exist_ok=True)
    crs = CRS.from_user_input(_CRS)
    x0, y0 = _ORIGIN
    w, h = float(extent_m[0]), float(extent_m[1])
    polygon = _boundary(x0, y0, w, h)
    grid = make_grid(polygon, cell_size_m, crs)

    # fields on a padded lattice (the FFT field is periodic; the pad keeps opposite edges
    # of the region uncorrelated)
    clay_corr = rng.uniform(1000.0, 3000.0)
    corr = {"clay": clay_corr, "ground": rng.uniform(1500.0, 4000.0),
            "sand": rng.uniform(600.0, 1500.0), "split_a": 1500.0, "split_b": 1500.0}
    pad = 2.0 * max(corr.values())
    lx = np.arange(x0 - pad, x0 + w + pad + _FIELD_STEP_M, _FIELD_STEP_M)
    ly = np.arange(y0 - pad, y0 + h + pad + _FIELD_STEP_M, _FIELD_STEP_M)
    lattice = _Lattice(lx, ly, {k: _fft_field(rng, (ly.size, lx.size), c)
                                for k, c in corr.items()})
    clay_mean = rng.uniform(15.0, 35.0)
    clay_sd = rng.uniform(3.0, max(3.0, min(8.0, (clay_mean - _THIN_M) / 2.5)))
    slope = rng.uniform(0.0005, 0.002)
    heading = rng.uniform(0.0, 2.0 * np.pi)
    sx, sy = slope * math.cos(heading), slope * math.sin(heading)
    base = rng.uniform(60.0, 110.0) - sx * (x0 + 0.5 * w) - sy * (y0 + 0.5 * h)
    scene = _Scene(lattice, clay_mean, clay_sd, (base, sx, sy, rng.uniform(2.0, 5.0)),
                   _features(rng, character, x0, y0, w, h))
    target = rng.uniform(*_TARGET_SHARE)
    scene = _Scene(scene.lattice, scene.clay_mean_m, scene.clay_sd_m, scene.ground,
                   scene.features, _calibrate(scene, grid, target))

    # truth on the screening grid
    xs_c, ys_c = grid.cell_centres()
    gx, gy = np.meshgrid(xs_c, ys_c)
    clay_grid = _clay_total(scene.column(gx, gy))
    write_raster(tdir / outputs.AQUITARD_THICKNESS, clay_grid, grid,
                 description="true total aquitard thickness", units="m")

    # DEM: 25 m cells, a little beyond the study area
    dc = 25.0
    bx0, by0, bx1, by1 = snapped_bounds(polygon.bounds, cell_size_m)
    bx0, by0, bx1, by1 = bx0 - 100.0, by0 - 100.0, bx1 + 100.0, by1 + 100.0
    dw, dh = int(round((bx1 - bx0) / dc)), int(round((by1 - by0) / dc))
    dem_grid = Grid(Affine(dc, 0.0, bx0, 0.0, -dc, by1), dw, dh, crs, np.ones((dh, dw), bool))
    dxs, dys = dem_grid.cell_centres()
    dgx, dgy = np.meshgrid(dxs, dys)
    write_raster(root / "dem.tif", np.round(scene.column(dgx, dgy)["ground"], 2), dem_grid,
                 description="ground elevation", units="m")
    if (root / "boundary.geojson").exists():
        (root / "boundary.geojson").unlink()
    gpd.GeoDataFrame({"name": ["independent test region"]}, geometry=[polygon],
                     crs=crs).to_file(root / "boundary.geojson", driver="GeoJSON")

    # boreholes
    hx, hy = _layout(rng, polygon, n_holes, layout)
    col = scene.column(hx, hy)
    clay_h = _clay_total(col)
    kind = np.where(rng.uniform(size=n_holes) < partial_fraction, "geotechnical",
                    "water_well").astype(object)
    kind[(kind == "geotechnical") & (clay_h < 8.0)] = "water_well"
    wells = np.flatnonzero(kind == "water_well")
    suits = wells[np.all([col[u][wells] >= 1.5 for u in _CLAY], axis=0)]
    n_cored = min(suits.size, max(2, n_holes // 50))
    kind[rng.choice(suits, n_cored, replace=False)] = "cored"
    prefix = {"water_well": "WW{:04d}", "geotechnical": "BH{:03d}", "cored": "CR{:02d}"}
    ids = np.empty(n_holes, dtype=object)
    for k, fmt in prefix.items():
        idx = np.flatnonzero(kind == k)
        for j, i in enumerate(rng.permutation(idx)):
            ids[i] = fmt.format(j + 1)

    collars, intervals, samples, truth_rows = [], [], [], []
    for i in np.argsort(ids):
        th = {u: float(col[u][i]) for u in ("SAND", *_CLAY)}
        sand, clay = th["SAND"], float(clay_h[i])
        ww = kind[i] == "water_well"
        if kind[i] == "geotechnical":
            depth = round(rng.uniform(sand + 1.0, sand + clay - 1.0), 2)
        else:
            depth = round(sand + clay + rng.uniform(1.0, 6.0), 1 if ww else 2)
        log = _noisy_log(rng, th, depth, ww)
        if ww:
            xr = hx[i] + XY_SD_M * rng.standard_normal()
            yr = hy[i] + XY_SD_M * rng.standard_normal()
            gr = round(float(col["ground"][i]) + GROUND_SD_M * rng.standard_normal(), 1)
        else:
            xr, yr, gr = hx[i], hy[i], round(float(col["ground"][i]), 2)
        collars.append(f"{ids[i]},{xr:.2f},{yr:.2f},{gr:.2f},{depth:.2f}")
        intervals += [f"{ids[i]},{t:.2f},{b:.2f},{u}" for u, t, b in log]
        if kind[i] == "cored":
            samples += [f"{ids[i]},{d:.2f},{d10:.3g},{d60:.3g},{p:.2f},{k:.3g}"
                        for d, d10, d60, p, k in _clay_samples(rng, log)]
        truth_rows.append(f"{ids[i]},{kind[i]},{hx[i]:.2f},{hy[i]:.2f},"
                          f"{col['ground'][i]:.3f},"
                          + ",".join(f"{th[u]:.3f}" for u in ("SAND", *_CLAY))
                          + f",{clay:.3f},{int(log[-1][0] == 'GRAV')}")
    _write(root / "collars.csv", "borehole_id,x,y,ground_elev_m,total_depth_m", collars)
    _write(root / "intervals.csv", "borehole_id,from_m,to_m,unit", intervals)
    _write(root / "samples.csv", "borehole_id,depth_m,d10_mm,d60_mm,porosity,k_lab_m_s",
           samples)
    _write(tdir / "boreholes.csv",
           "borehole_id,kind,x_true,y_true,ground_elev_true_m,thickness_SAND_m,"
           "thickness_UMC_m,thickness_LMC_m,thickness_LAM_m,aquitard_thickness_m,"
           "reaches_aquifer", truth_rows)
    name = f"Independent {character} region (seed {seed})"
    comment = _TOML_COMMENT.format(name=name, seed=seed, character=character, layout=layout)
    (root / "project.toml").write_text(
        project_toml_text(name, comment=comment, crs=_CRS, cell_size_m=cell_size_m),
        encoding="utf-8")

    inside = grid.mask
    cell_km2 = grid.cell_area_m2 / 1e6
    counts = {k: int(np.sum(kind == k)) for k in prefix}
    counts["total"] = n_holes
    result = {
        "root": root, "seed": seed, "character": character, "layout": layout,
        "counts": counts,
        "area_km2": float(inside.sum() * cell_km2),
        "area_below_1m_km2": float(np.sum(inside & (clay_grid < 1.0)) * cell_km2),
        "area_below_5m_km2": float(np.sum(inside & (clay_grid < _THIN_M)) * cell_km2),
        "share_below_5m": float(np.mean(clay_grid[inside] < _THIN_M)),
        "target_share_below_5m": target,
    }
    meta = {k: (str(v) if isinstance(v, Path) else v) for k, v in result.items()}
    meta.update({"synthetic": True, "generator": "aquitardmap.evaluation.independent",
                 "clay_mean_m": clay_mean, "clay_sd_m": clay_sd, "clay_corr_m": clay_corr,
                 "feature_extent": scene.lam, "noise": {
                     "water_well_xy_sd_m": XY_SD_M, "water_well_contact_sd_m": CONTACT_SD_M,
                     "water_well_ground_sd_m": GROUND_SD_M, "water_well_rounding_m": 0.1}})
    (tdir / "truth.json").write_text(json.dumps(meta, indent=2, sort_keys=True) + "\n",
                                     encoding="utf-8")
    return result
