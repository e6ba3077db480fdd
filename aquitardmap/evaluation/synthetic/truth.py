"""The truth of a synthetic region: ground and unit thicknesses as functions of position.

A valley (or, for ``"ridge_and_channel"``, a broad plain) with irregular margins, smooth
random fields (Gaussian-filtered white noise on a 50 m lattice, evaluated anywhere by
bilinear interpolation) and the features of the region's character: buried ridges and
knobs that remove clay from below, channels that erode it from the top. See
:mod:`aquitardmap.evaluation.synthetic` for the characters.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import RegularGridInterpolator
from scipy.ndimage import gaussian_filter
from scipy.spatial import cKDTree
from scipy.special import ndtr
from shapely import contains_xy
from shapely.geometry import Polygon

from aquitardmap.evaluation.demo_stack import CLAY_UNITS

__all__ = ["CHARACTERS", "Column", "Truth", "draw_truth", "points_in", "smooth_noise_1d"]

#: Characters of region the generator can build.
CHARACTERS = ("esker_window", "channel_cut", "bedrock_highs", "ridge_and_channel")

_NOISE_STEP_M = 50.0  # lattice spacing of the smooth random fields
_NOISE_PAD_M = 600.0  # lattice margin around the extent
_LINE_STEP_M = 10.0  # vertex spacing of feature centre lines

# --------------------------------------------------------------------------- random fields


def _smooth_noise_2d(rng: np.random.Generator, shape: tuple[int, int],
                     sigma_cells: float) -> np.ndarray:
    """Gaussian-filtered white noise, rescaled to mean 0 and standard deviation 1."""
    f = gaussian_filter(rng.standard_normal(shape), sigma_cells, mode="reflect")
    return (f - f.mean()) / f.std()


def smooth_noise_1d(rng: np.random.Generator, n: int, sigma_pts: float) -> np.ndarray:
    """1-D Gaussian-filtered white noise with mean 0 and standard deviation 1."""
    f = gaussian_filter(rng.standard_normal(n), sigma_pts, mode="reflect")
    return (f - f.mean()) / f.std()


@dataclass(frozen=True)
class _NoiseField:
    """A smooth random field on a lattice, evaluated anywhere by bilinear interpolation."""

    interp: RegularGridInterpolator

    def __call__(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return self.interp(np.column_stack([np.ravel(y), np.ravel(x)])).reshape(np.shape(x))


def _noise_field(rng: np.random.Generator, xs: np.ndarray, ys: np.ndarray,
                 scale_m: float) -> _NoiseField:
    values = _smooth_noise_2d(rng, (ys.size, xs.size), scale_m / _NOISE_STEP_M)
    return _NoiseField(RegularGridInterpolator((ys, xs), values, bounds_error=False,
                                               fill_value=None))


def _bump(s: np.ndarray, centre: float, length: float) -> np.ndarray:
    """Raised-cosine bump: 1 at ``centre``, 0 at ``centre ± length/2`` and beyond."""
    t = np.clip((s - centre) / (0.5 * length), -1.0, 1.0)
    return 0.5 * (1.0 + np.cos(np.pi * t))


def _ramp(s: np.ndarray, length: float) -> np.ndarray:
    """Smooth step from 0 at s = 0 to 1 at s = ``length``."""
    t = np.clip(s / length, 0.0, 1.0)
    return t * t * (3.0 - 2.0 * t)


# ------------------------------------------------------------------------------ geometry


@dataclass(frozen=True)
class _Valley:
    """The valley: a sinuous axis and two irregular margins, functions of x."""

    x0: float
    y0: float
    xs: np.ndarray  # x of the edge samples relative to x0 (m)
    axis: np.ndarray  # y of the axis relative to y0 (m)
    top: np.ndarray  # y of the north margin relative to y0 (m)
    bottom: np.ndarray  # y of the south margin relative to y0 (m)

    def polygon(self) -> Polygon:
        north = [(self.x0 + x, self.y0 + y) for x, y in zip(self.xs, self.top, strict=True)]
        south = [(self.x0 + x, self.y0 + y) for x, y in zip(self.xs[::-1], self.bottom[::-1],
                                                             strict=True)]
        ring = np.round(np.array(north + south), 2)
        return Polygon(ring)

    def edges_at(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Absolute y of axis, north and south margins at absolute x (clamped to the ends)."""
        xr = np.asarray(x, float) - self.x0
        return (self.y0 + np.interp(xr, self.xs, self.axis),
                self.y0 + np.interp(xr, self.xs, self.top),
                self.y0 + np.interp(xr, self.xs, self.bottom))

    def across(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        """Normalised distance from the axis: 0 on the axis, 1 on a margin, >1 outside."""
        yc, yt, yb = self.edges_at(x)
        v = np.asarray(y, float) - yc
        return np.where(v >= 0.0, v / (yt - yc), -v / (yc - yb))

    def along(self, x: np.ndarray) -> np.ndarray:
        """Fraction of the valley length, 0 at the west end, 1 at the east end."""
        return np.clip((np.asarray(x, float) - self.x0) / self.xs[-1], 0.0, 1.0)


def _make_valley(rng: np.random.Generator, origin_xy: tuple[float, float],
                 extent_m: tuple[float, float]) -> _Valley:
    width, height = extent_m
    n = int(width // 100.0) + 1
    xs = np.linspace(0.0, width, n)
    phase = rng.uniform(0.0, 2.0 * np.pi)
    axis = (0.5 * height + 0.05 * height * np.sin(2 * np.pi * xs / (1.6 * width) + phase)
            + 0.025 * height * smooth_noise_1d(rng, n, 12))
    hw_north = 0.38 * height + 0.035 * height * smooth_noise_1d(rng, n, 8)
    hw_south = 0.38 * height + 0.035 * height * smooth_noise_1d(rng, n, 8)
    # small irregularities of the margin and one side valley that widens the polygon
    hw_north += 0.008 * height * smooth_noise_1d(rng, n, 1.5)
    hw_south += 0.008 * height * smooth_noise_1d(rng, n, 1.5)
    lobe_x = rng.uniform(0.25, 0.75) * width
    lobe = 0.10 * height * np.exp(-0.5 * ((xs - lobe_x) / (0.06 * width)) ** 2)
    if rng.uniform() < 0.5:
        hw_north += lobe
    else:
        hw_south += lobe
    top = np.minimum(axis + hw_north, 0.985 * height)
    bottom = np.maximum(axis - hw_south, 0.015 * height)
    return _Valley(float(origin_xy[0]), float(origin_xy[1]), xs, axis, top, bottom)


def _make_plain(rng: np.random.Generator, origin_xy: tuple[float, float],
                extent_m: tuple[float, float]) -> _Valley:
    """A "valley" filling nearly the whole rectangle: straight axis, margins within about
    1 % of the north and south edges (the study area of a broad plain)."""
    width, height = extent_m
    n = int(width // 100.0) + 1
    xs = np.linspace(0.0, width, n)
    axis = np.full(n, 0.5 * height)
    top = height * (0.992 - 0.004 * np.abs(smooth_noise_1d(rng, n, 6)))
    bottom = height * (0.008 + 0.004 * np.abs(smooth_noise_1d(rng, n, 6)))
    return _Valley(float(origin_xy[0]), float(origin_xy[1]), xs, axis, top, bottom)


@dataclass(frozen=True)
class _Line:
    """A densely sampled centre line; nearest-vertex look-ups give distance and chainage."""

    xy: np.ndarray  # (n, 2) vertices, absolute metres
    s: np.ndarray  # chainage of each vertex (m)
    tree: cKDTree

    @classmethod
    def through(cls, x: np.ndarray, y: np.ndarray) -> _Line:
        seg = np.hypot(np.diff(x), np.diff(y))
        s = np.concatenate([[0.0], np.cumsum(seg)])
        n = max(2, int(math.ceil(s[-1] / _LINE_STEP_M)) + 1)
        sd = np.linspace(0.0, s[-1], n)
        xy = np.column_stack([np.interp(sd, s, x), np.interp(sd, s, y)])
        return cls(xy, sd, cKDTree(xy))

    @property
    def length_m(self) -> float:
        return float(self.s[-1])

    def locate(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Distance to the line (m) and index of the nearest vertex for every point."""
        dist, idx = self.tree.query(np.column_stack([np.ravel(x), np.ravel(y)]))
        return dist.reshape(np.shape(x)), idx.reshape(np.shape(x))


def _along_noise(rng: np.random.Generator, line: _Line, scale_m: float) -> np.ndarray:
    """Smooth noise (sd 1) sampled at the vertices of ``line``."""
    return smooth_noise_1d(rng, line.s.size, scale_m / _LINE_STEP_M)


@dataclass(frozen=True)
class _Ridge:
    """A buried ridge rising from below: removes a fraction of the clay across a Gaussian
    cross-profile; the fraction varies along the crest and exceeds 1 where it is a window."""

    line: _Line
    sigma_m: float
    crest_fraction: np.ndarray  # per vertex

    def rise(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        dist, idx = self.line.locate(x, y)
        return self.crest_fraction[idx] * np.exp(-0.5 * (dist / self.sigma_m) ** 2)


@dataclass(frozen=True)
class _BroadRidge:
    """A flat-crested buried ridge: removes ``crest_fraction`` of the clay within
    ``half_width_m`` of its line, tapering to nothing across ``shoulder_m`` (raised cosine);
    a fraction of at least 1 is a window (same meaning as :class:`_Ridge`)."""

    line: _Line
    half_width_m: float
    shoulder_m: float
    crest_fraction: np.ndarray  # per vertex

    def rise(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        dist, idx = self.line.locate(x, y)
        t = np.clip((dist - self.half_width_m) / self.shoulder_m, 0.0, 1.0)
        return self.crest_fraction[idx] * 0.5 * (1.0 + np.cos(np.pi * t))


@dataclass(frozen=True)
class _Knobs:
    """Elliptical knobs of till or bedrock rising from below (same meaning as a ridge)."""

    cx: np.ndarray
    cy: np.ndarray
    rx: np.ndarray
    ry: np.ndarray
    angle: np.ndarray
    height: np.ndarray

    def rise(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        out = np.zeros(np.shape(x))
        for k in range(self.cx.size):
            dx, dy = np.asarray(x) - self.cx[k], np.asarray(y) - self.cy[k]
            c, s = math.cos(self.angle[k]), math.sin(self.angle[k])
            u, v = (c * dx + s * dy) / self.rx[k], (-s * dx + c * dy) / self.ry[k]
            out = np.maximum(out, self.height[k] * np.exp(-0.5 * (u * u + v * v)))
        return out


@dataclass(frozen=True)
class _Channel:
    """An eroded channel: removes clay from the top across a flat-floored cross-profile.

    Under the channel floor the clay keeps ``max(floor_m, clay * (1 - cut_fraction))``;
    ``ground_drop_fraction`` of the eroded depth shows as a low in today's ground, the rest
    is filled with sand.
    """

    line: _Line
    half_width_m: float
    shoulder_m: float
    cut_fraction: np.ndarray  # per vertex, 0..1
    floor_m: np.ndarray  # per vertex
    ground_drop_fraction: float
    max_ground_drop_m: float

    def erosion_m(self, x: np.ndarray, y: np.ndarray, clay_m: np.ndarray) -> np.ndarray:
        dist, idx = self.line.locate(x, y)
        t = np.clip((dist - self.half_width_m) / self.shoulder_m, 0.0, 1.0)
        profile = 0.5 * (1.0 + np.cos(np.pi * t))
        keep = np.maximum(self.floor_m[idx], clay_m * (1.0 - self.cut_fraction[idx]))
        return profile * np.maximum(0.0, clay_m - keep)


# --------------------------------------------------------------------------------- truth


@dataclass(frozen=True)
class Column:
    """The true column at a set of points: ground elevation and unit thicknesses (m)."""

    ground_m: np.ndarray
    thickness_m: dict[str, np.ndarray]  # SAND, UMC, LMC, LAM

    @property
    def clay_m(self) -> np.ndarray:
        """Total thickness of the clay units (m)."""
        return sum(self.thickness_m[u] for u in CLAY_UNITS)


_CHARACTER_CLAY = {  # clay thickness in the valley centre and at the margins (m)
    "esker_window": {"centre_m": 27.0, "margin_m": 2.5},
    "channel_cut": {"centre_m": 30.0, "margin_m": 7.5},
    "bedrock_highs": {"centre_m": 25.0, "margin_m": 3.0},
    "ridge_and_channel": {"centre_m": 31.0, "margin_m": 24.0},
}


@dataclass(frozen=True)
class Truth:
    """The truth of a region: evaluate the column at any points."""

    valley: _Valley
    fields: dict[str, _NoiseField]
    clay_centre_m: float
    clay_margin_m: float
    ridges: tuple[_Ridge | _BroadRidge, ...]
    knobs: _Knobs | None
    channels: tuple[_Channel, ...]

    def column(self, x: np.ndarray, y: np.ndarray) -> Column:
        """The true column at points (x, y) (m, in the region's CRS)."""
        x = np.asarray(x, float)
        y = np.asarray(y, float)
        f = {k: fld(x, y) for k, fld in self.fields.items()}
        d = self.valley.across(x, y)
        dc = np.clip(d, 0.0, 1.3)
        a = self.valley.along(x)
        ground = 48.0 + 10.0 * a + 20.0 * dc ** 2 + 3.0 * f["ground_broad"] + 0.7 * f[
            "ground_fine"]
        sand = 0.5 + 4.5 * ndtr(1.2 * f["sand"])
        centre = np.clip(self.clay_centre_m + 5.0 * f["clay_centre"], 15.0, 40.0)
        margin = np.clip(self.clay_margin_m + 1.3 * f["clay_margin"], 0.0,
                         self.clay_margin_m + 3.0)
        shape = 1.0 - np.clip(d, 0.0, 1.0) ** 2.2
        clay = margin + (centre - margin) * shape
        rise = np.zeros_like(clay)
        for ridge in self.ridges:
            rise = rise + ridge.rise(x, y)
        if self.knobs is not None:
            rise = np.maximum(rise, self.knobs.rise(x, y))
        clay = clay * np.clip(1.0 - rise, 0.0, 1.0)
        f_lam = np.clip(0.22 + 0.06 * f["split_lam"], 0.08, 0.40)
        f_lmc = np.clip(0.40 + 0.07 * f["split_lmc"], 0.20, 0.55)
        units = {"LAM": f_lam * clay, "LMC": f_lmc * clay, "UMC": (1.0 - f_lam - f_lmc) * clay}
        for ch in self.channels:
            eroded = ch.erosion_m(x, y, units["UMC"] + units["LMC"] + units["LAM"])
            left = eroded.copy()
            for u in CLAY_UNITS:  # the top unit goes first
                cut = np.minimum(units[u], left)
                units[u] = units[u] - cut
                left = left - cut
            drop = np.minimum(ch.ground_drop_fraction * eroded, ch.max_ground_drop_m)
            ground = ground - drop
            sand = sand + eroded - drop
        ground = np.clip(ground, 40.0, 90.0)
        return Column(ground, {"SAND": sand, **{u: units[u] for u in CLAY_UNITS}})


def _line_along_valley(rng: np.random.Generator, valley: _Valley, x_from: float, x_to: float,
                       offset_m: float, amplitude_m: float, wavelength_m: float) -> _Line:
    xs = np.linspace(x_from, x_to, max(50, int((x_to - x_from) / 20.0)))
    yc, _, _ = valley.edges_at(xs)
    phase = rng.uniform(0.0, 2.0 * np.pi)
    wobble = 60.0 * smooth_noise_1d(rng, xs.size, 40)
    ys = yc + offset_m + amplitude_m * np.sin(2 * np.pi * (xs - x_from) / wavelength_m + phase)
    return _Line.through(xs, ys + wobble)


def _line_across_valley(rng: np.random.Generator, valley: _Valley, x_centre: float,
                        skew_m: float, amplitude_m: float, wavelength_m: float) -> _Line:
    """A line from beyond the south margin to beyond the north margin near ``x_centre``."""
    _, yt, yb = valley.edges_at(np.array([x_centre]))
    y_from, y_to = float(yb[0]) - 400.0, float(yt[0]) + 400.0
    ys = np.linspace(y_from, y_to, max(50, int((y_to - y_from) / 20.0)))
    t = (ys - y_from) / (y_to - y_from)
    phase = rng.uniform(0.0, 2.0 * np.pi)
    xs = (x_centre + skew_m * (t - 0.5)
          + amplitude_m * np.sin(2 * np.pi * (ys - y_from) / wavelength_m + phase))
    return _Line.through(xs, ys)


#: Width of each strip of the ``ridge_and_channel`` character where the clay is under
#: about 5 m (m), and the width of the shoulder on each side over which it thickens back.
_STRIP_WIDTH_M = (300.0, 450.0)
_STRIP_SHOULDER_M = (80.0, 150.0)


def _strip_half_width(rng: np.random.Generator) -> tuple[float, float]:
    """(half width of the flat core, shoulder) of a ridge or channel strip (m).

    The clay is under 5 m within about 0.3 shoulder of the core's edge (20-40 m of clay
    under a raised-cosine shoulder), so the core is set to make that strip 300-450 m wide.
    """
    width = rng.uniform(*_STRIP_WIDTH_M)
    shoulder = rng.uniform(*_STRIP_SHOULDER_M)
    return 0.5 * width - 0.3 * shoulder, shoulder


def _crossing_lines(rng: np.random.Generator, valley: _Valley) -> tuple[_Line, _Line]:
    """Two gently curving lines 5-10 km long that cross near the middle of the rectangle at
    30-90 degrees, each in a random direction."""
    width, height = float(valley.xs[-1]), float(valley.top.max())
    px = valley.x0 + rng.uniform(0.3, 0.7) * width
    py = valley.y0 + rng.uniform(0.3, 0.7) * height
    heading = rng.uniform(0.0, np.pi)
    headings = (heading, heading + rng.choice([-1.0, 1.0]) * np.radians(rng.uniform(30, 90)))
    lines = []
    for theta in headings:
        length = rng.uniform(5000.0, 10000.0)
        s = np.linspace(0.0, 1.0, 400)  # fraction of the length
        at = rng.uniform(0.3, 0.7)  # where along it the crossing lies
        u = (s - at) * length
        wavelength = rng.uniform(3000.0, 6000.0)
        offset = (rng.uniform(80.0, 250.0) * np.sin(2 * np.pi * u / wavelength
                                                     + rng.uniform(0.0, 2.0 * np.pi))
                  + 40.0 * smooth_noise_1d(rng, u.size, 20))
        offset = offset - np.interp(0.0, u, offset)  # the lines still meet at (px, py)
        c, sn = math.cos(theta), math.sin(theta)
        lines.append(_Line.through(px + c * u - sn * offset, py + sn * u + c * offset))
    return lines[0], lines[1]


def _make_truth(rng: np.random.Generator, valley: _Valley, character: str,
                polygon: Polygon) -> Truth:
    ox, oy = valley.x0, valley.y0
    width, height = valley.xs[-1], float(valley.top.max())
    lx = np.arange(ox - _NOISE_PAD_M, ox + width + _NOISE_PAD_M + 1.0, _NOISE_STEP_M)
    ly = np.arange(oy - _NOISE_PAD_M, oy + height + 2 * _NOISE_PAD_M + 1.0, _NOISE_STEP_M)
    scales = {"ground_broad": 1500.0, "ground_fine": 350.0, "sand": 500.0,
              "clay_centre": 1400.0, "clay_margin": 700.0, "split_lam": 1200.0,
              "split_lmc": 1200.0}
    fields = {k: _noise_field(rng, lx, ly, s) for k, s in scales.items()}
    hw_mean = float(np.mean(valley.top - valley.bottom)) / 2.0
    ridges: list[_Ridge | _BroadRidge] = []
    knobs: _Knobs | None = None
    channels: list[_Channel] = []

    if character == "esker_window":
        line = _line_along_valley(rng, valley, ox + 0.06 * width, ox + 0.94 * width,
                                  offset_m=rng.uniform(-0.2, 0.2) * hw_mean,
                                  amplitude_m=rng.uniform(150.0, 300.0),
                                  wavelength_m=rng.uniform(2200.0, 3500.0))
        s, length = line.s, line.length_m
        window_len = min(4000.0, 0.4 * length)
        crest = (0.35 + 0.05 * _along_noise(rng, line, 800.0)
                 + rng.uniform(1.05, 1.25) * _bump(s, rng.uniform(0.58, 0.72) * length,
                                                   window_len)
                 + 0.45 * _bump(s, rng.uniform(0.18, 0.28) * length, 0.5 * window_len))
        crest = crest * _ramp(s, 500.0) * _ramp(length - s, 500.0)
        ridges.append(_Ridge(line, rng.uniform(160.0, 220.0), crest))
        old = _line_across_valley(rng, valley, ox + rng.uniform(0.38, 0.46) * width,
                                  skew_m=rng.uniform(0.1, 0.25) * width,
                                  amplitude_m=rng.uniform(80.0, 160.0),
                                  wavelength_m=rng.uniform(1200.0, 2000.0))
        floor = 2.0 + 2.0 * ndtr(_along_noise(rng, old, 600.0))
        channels.append(_Channel(old, rng.uniform(110.0, 160.0), 120.0,
                                 np.ones_like(old.s), floor, 0.05, 1.0))
    elif character == "channel_cut":
        line = _line_along_valley(rng, valley, ox - 0.05 * width, ox + 1.05 * width,
                                  offset_m=rng.uniform(-0.15, 0.15) * hw_mean,
                                  amplitude_m=rng.uniform(300.0, 500.0),
                                  wavelength_m=rng.uniform(2500.0, 4000.0))
        cut = np.clip(1.05 + 0.3 * _along_noise(rng, line, 1500.0), 0.6, 1.0)
        channels.append(_Channel(line, rng.uniform(120.0, 170.0), 100.0, cut,
                                 np.zeros_like(line.s), 0.5, 4.0))
    elif character == "bedrock_highs":
        n = max(3, int(round(polygon.area / 1e6 / 5.0)))
        cx, cy = points_in(rng, polygon, n, lambda x, y: valley.across(x, y) < 0.8)
        knobs = _Knobs(cx, cy, rng.uniform(200.0, 550.0, n), rng.uniform(200.0, 550.0, n),
                       rng.uniform(0.0, np.pi, n), rng.uniform(0.4, 1.7, n))
    elif character == "ridge_and_channel":
        ridge_line, channel_line = _crossing_lines(rng, valley)
        hw, shoulder = _strip_half_width(rng)
        crest = (rng.uniform(1.15, 1.35) + 0.08 * _along_noise(rng, ridge_line, 1500.0))
        crest = crest * _ramp(ridge_line.s, 500.0) * _ramp(ridge_line.length_m - ridge_line.s,
                                                           500.0)
        ridges.append(_BroadRidge(ridge_line, hw, shoulder, crest))
        hw, shoulder = _strip_half_width(rng)
        s, length = channel_line.s, channel_line.length_m
        cut = np.clip(1.25 * _ramp(s, 500.0) * _ramp(length - s, 500.0), 0.0, 1.0)
        channels.append(_Channel(channel_line, hw, shoulder, cut, np.zeros_like(s), 0.05,
                                 1.0))
    else:  # pragma: no cover - checked by the caller
        raise ValueError(character)

    clay = _CHARACTER_CLAY[character]
    return Truth(valley, fields, clay["centre_m"], clay["margin_m"], tuple(ridges), knobs,
                 tuple(channels))


def points_in(rng: np.random.Generator, polygon: Polygon, n: int,
              accept: Callable[[np.ndarray, np.ndarray], np.ndarray] | None = None, *,
              centre: tuple[float, float] | None = None, sd_m: float = 0.0,
              max_rounds: int = 200) -> tuple[np.ndarray, np.ndarray]:
    """``n`` random points inside ``polygon`` where ``accept(x, y)`` holds.

    Uniform over the polygon, or Gaussian around ``centre`` with standard deviation ``sd_m``.
    Fewer points come back if too few candidates pass after ``max_rounds`` batches.
    """
    xmin, ymin, xmax, ymax = polygon.bounds
    xs: list[np.ndarray] = []
    ys: list[np.ndarray] = []
    have = 0
    for _ in range(max_rounds):
        if have >= n:
            break
        m = max(64, 4 * (n - have))
        if centre is None:
            x = rng.uniform(xmin, xmax, m)
            y = rng.uniform(ymin, ymax, m)
        else:
            x = rng.normal(centre[0], sd_m, m)
            y = rng.normal(centre[1], sd_m, m)
        ok = contains_xy(polygon, x, y)
        if accept is not None and ok.any():
            ok[ok] = accept(x[ok], y[ok])
        xs.append(x[ok])
        ys.append(y[ok])
        have += int(ok.sum())
    x_all = np.concatenate(xs)[:n] if xs else np.empty(0)
    y_all = np.concatenate(ys)[:n] if ys else np.empty(0)
    return x_all, y_all


def draw_truth(rng: np.random.Generator, character: str, origin_xy: tuple[float, float],
               extent_m: tuple[float, float]) -> tuple[Truth, Polygon]:
    """The truth of a region of ``character`` in the rectangle at ``origin_xy`` (south-west
    corner, m) of size ``extent_m`` (east-west, north-south, m), and its study-area polygon.

    Draws from ``rng`` in a fixed order: the valley (or plain), then the fields and features.
    """
    if character == "ridge_and_channel":
        valley = _make_plain(rng, origin_xy, extent_m)
    else:
        valley = _make_valley(rng, origin_xy, extent_m)
    polygon = valley.polygon()
    return _make_truth(rng, valley, character, polygon), polygon
