"""Synthetic regions built from a known truth: the demo region, test regions, benchmarks.

A synthetic region is a complete project folder (collars, intervals, samples, DEM, study-area
boundary, optionally ``project.toml``) generated from a *truth*: continuous surfaces of the
ground and of every unit's thickness. The truth is written beside the data (``truth/``) on
the screening grid of the project, so a run of the pipeline can be scored against it.

The truth is a deterministic function of position, built from seeded smooth random fields
(Gaussian-filtered white noise) and a few geological features that depend on the region's
*character*:

``"esker_window"``
    a sinuous buried sand-gravel ridge (esker) rises through the clay from below and opens a
    window along part of its crest; an old eroded channel, later filled with sand, leaves
    only a few metres of clay; the clay thins toward the valley margins.
``"channel_cut"``
    a meandering river channel cuts through the clay along much of its course; the clay is
    thick elsewhere, also near the margins.
``"bedrock_highs"``
    knobs of till or bedrock rise through the clay here and there, some far enough to open
    patchy windows.
``"ridge_and_channel"``
    a broad plain (the study area is nearly the whole rectangle; meant for about
    12 x 10 km) with 20-40 m of clay, crossed by a buried sand-gravel ridge and an infilled
    channel: each a gently curving strip 300-450 m wide and 5-10 km long, of random
    orientation, the two crossing at 30-90 degrees. Along most of each strip the clay is
    absent, with thin shoulders on both sides; about 4-5 % of the area has under 5 m of
    clay.

Borehole logs are then drawn from the truth the way such data arrive: many noisy water
wells, accurate geotechnical holes that stop inside the clay (censored), and a few cored
holes with grain-size, porosity and lab-conductivity samples. Two hole layouts:
``"clustered"`` (water wells in and around a town and a village, geotechnical holes by the
town and along a road, a few water wells planted in windows) and ``"even"`` (every hole
uniform at random over the study area with a minimum spacing, kinds assigned at random among
the positions, no planted window wells). The stack is the demo stack
(``SAND`` cover; ``UMC``, ``LMC``, ``LAM`` aquitards; ``GRAV`` aquifer).

Every random draw comes from one ``numpy.random.default_rng(seed)``, in a fixed order, so a
seed reproduces the CSV files byte for byte.

Example::

    >>> from aquitardmap.evaluation.synthetic import make_synthetic_region
    >>> region = make_synthetic_region("/tmp/ostrel", seed=7, n_holes=80,
    ...                                write_project_toml=True)   # doctest: +SKIP
    >>> region.counts["geotechnical"]                              # doctest: +SKIP
    24
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
from affine import Affine
from pyproj import CRS
from scipy.interpolate import RegularGridInterpolator
from scipy.ndimage import binary_erosion, gaussian_filter
from scipy.spatial import cKDTree
from scipy.special import ndtr
from shapely import contains_xy
from shapely.geometry import Polygon

from aquitardmap.grid import Grid, make_grid, snapped_bounds, write_raster
from aquitardmap.outputs import names as outputs

__all__ = [
    "CHARACTERS",
    "CLAY_UNITS",
    "DEMO_SEED",
    "HOLE_LAYOUTS",
    "K_TRUE_M_S",
    "STACK",
    "SyntheticRegion",
    "make_synthetic_region",
    "project_toml_text",
]

#: Seed of the bundled demo region (``demo_region/``).
DEMO_SEED = 20_515

#: The stack of every synthetic region, top to bottom.
STACK = ("SAND", "UMC", "LMC", "LAM", "GRAV")
COVER_UNIT = "SAND"
CLAY_UNITS = ("UMC", "LMC", "LAM")
AQUIFER_UNIT = "GRAV"

#: Characters of region the generator can build.
CHARACTERS = ("esker_window", "channel_cut", "bedrock_highs", "ridge_and_channel")

#: Borehole layouts (see :func:`make_synthetic_region`).
HOLE_LAYOUTS = ("clustered", "even")

#: True hydraulic conductivity of each unit (m/s). Lab values of clay samples scatter
#: log-normally around these. Intact marine clay 1e-11 to 1e-9 m/s (Freeze & Cherry 1979,
#: Table 2.2, from memory); clean sand and gravel values are common practice.
K_TRUE_M_S = {"SAND": 1e-4, "UMC": 5e-10, "LMC": 2e-10, "LAM": 1e-9, "GRAV": 1e-3}

#: Borehole kinds and their id patterns.
WATER_WELL, GEOTECHNICAL, CORED = "water_well", "geotechnical", "cored"
_ID_FORMAT = {WATER_WELL: "OW-{:04d}", GEOTECHNICAL: "GT-{:03d}", CORED: "CH-{:02d}"}

#: Noise of water-well records (standard deviations, m).
WELL_XY_SD_M = 20.0
WELL_ELEV_SD_M = 1.0
WELL_ELEV_NOISE_CLIP_M = 2.4  # ordinary elevation noise is cut at 2.4 sd
WELL_CONTACT_SD_M = 0.3
#: Gross ground-elevation errors of a few water wells (m, absolute value).
BLUNDER_RANGE_M = (6.0, 15.0)
#: A unit thinner than this in a borehole is not logged (m).
MIN_LOGGED_THICKNESS_M = 0.1

_NOISE_STEP_M = 50.0  # lattice spacing of the smooth random fields
_NOISE_PAD_M = 600.0  # lattice margin around the extent
_LINE_STEP_M = 10.0  # vertex spacing of feature centre lines

#: The demo's stack of units as ``project.toml`` text (also used by the tests).
DEMO_STACK_TOML = """\
[[units]]
code = "SAND"
name = "Surficial sand"
role = "cover"
effective_porosity = 0.30
k_default_m_s = 1e-4
k_method = "hazen"

[[units]]
code = "UMC"
name = "Upper marine clay"
role = "aquitard"
effective_porosity = 0.40
k_default_m_s = 5e-10
k_method = "kozeny_carman"

[[units]]
code = "LMC"
name = "Lower marine clay"
role = "aquitard"
effective_porosity = 0.40
k_default_m_s = 2e-10
k_method = "kozeny_carman"

[[units]]
code = "LAM"
name = "Laminated lake clay"
role = "aquitard"
effective_porosity = 0.35
k_default_m_s = 1e-9
k_method = "kozeny_carman"
anisotropy_kh_kv = 4.0

[[units]]
code = "GRAV"
name = "Buried sand and gravel aquifer"
role = "aquifer"
effective_porosity = 0.25
k_default_m_s = 1e-3
k_method = "hazen"
"""

#: The settings sections of a generated region's ``project.toml`` (after the stack).
SETTINGS_TOML = """
[kriging]
variogram_model = "spherical"
n_lags = 12
max_neighbours = 64

[hydraulics]
groundwater_temp_c = 8.0
vertical_gradient = 1.0

[screening]
window_thickness_m = 1.0
thin_thickness_m = 5.0
fast_travel_time_yr = 50.0

[qa]
dem_misfit_m = 3.0
exclude_boreholes = []
"""

_PROJECT_TOML = """\
# {name} — an INVENTED, synthetic region written by aquitardmap.evaluation.synthetic (seed {seed},
# character "{character}"). Every place, borehole and value here is synthetic; the truth it
# was drawn from is in truth/.

[project]
name = "{name}"
crs = "{crs}"

[grid]
cell_size_m = {cell_size_m:g}
buffer_m = 250

""" + DEMO_STACK_TOML + SETTINGS_TOML


def project_toml_text(name: str, *, seed: int, character: str, crs: str = "EPSG:32632",
                      cell_size_m: float = 50.0) -> str:
    """Text of a ``project.toml`` with the demo stack (same units and settings as the demo)."""
    return _PROJECT_TOML.format(name=name, seed=seed, character=character, crs=crs,
                                cell_size_m=cell_size_m)


@dataclass(frozen=True)
class SyntheticRegion:
    """What :func:`make_synthetic_region` wrote.

    Attributes:
        root: the project folder.
        seed, character: generator seed and region character.
        files: input files by key (``collars``, ``intervals``, ``samples``, ``dem``,
            ``boundary``, and ``project`` when a ``project.toml`` was written).
        truth: truth files by key (``ground``, ``SAND``, ``UMC``, ``LMC``, ``LAM``,
            ``aquitard``, ``boreholes``, ``json``).
        grid: the screening grid the truth rasters are on.
        counts: boreholes by kind (``water_well``, ``geotechnical``, ``cored``, ``total``),
            plus ``window_wells`` (water wells placed to prove a window) and
            ``elevation_blunders`` (water wells with a gross ground-elevation error).
        area_km2: study-area polygon area (km²).
        window_area_km2: area of grid cells with no clay at all (truth thickness 0, km²).
        thin_area_km2: area of grid cells with less than 5 m of clay, windows included (km²).
        k_true_m_s: true hydraulic conductivity per unit (m/s).
    """

    root: Path
    seed: int
    character: str
    files: dict[str, Path]
    truth: dict[str, Path]
    grid: Grid
    counts: dict[str, int]
    area_km2: float
    window_area_km2: float
    thin_area_km2: float
    k_true_m_s: dict[str, float]


# --------------------------------------------------------------------------- random fields


def _smooth_noise_2d(rng: np.random.Generator, shape: tuple[int, int],
                     sigma_cells: float) -> np.ndarray:
    """Gaussian-filtered white noise, rescaled to mean 0 and standard deviation 1."""
    f = gaussian_filter(rng.standard_normal(shape), sigma_cells, mode="reflect")
    return (f - f.mean()) / f.std()


def _smooth_noise_1d(rng: np.random.Generator, n: int, sigma_pts: float) -> np.ndarray:
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
            + 0.025 * height * _smooth_noise_1d(rng, n, 12))
    hw_north = 0.38 * height + 0.035 * height * _smooth_noise_1d(rng, n, 8)
    hw_south = 0.38 * height + 0.035 * height * _smooth_noise_1d(rng, n, 8)
    # small irregularities of the margin and one side valley that widens the polygon
    hw_north += 0.008 * height * _smooth_noise_1d(rng, n, 1.5)
    hw_south += 0.008 * height * _smooth_noise_1d(rng, n, 1.5)
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
    top = height * (0.992 - 0.004 * np.abs(_smooth_noise_1d(rng, n, 6)))
    bottom = height * (0.008 + 0.004 * np.abs(_smooth_noise_1d(rng, n, 6)))
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
    return _smooth_noise_1d(rng, line.s.size, scale_m / _LINE_STEP_M)


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
class _Column:
    """The true column at a set of points: ground elevation and unit thicknesses (m)."""

    ground_m: np.ndarray
    thickness_m: dict[str, np.ndarray]  # SAND, UMC, LMC, LAM

    @property
    def clay_m(self) -> np.ndarray:
        return sum(self.thickness_m[u] for u in CLAY_UNITS)


_CHARACTER_CLAY = {  # clay thickness in the valley centre and at the margins (m)
    "esker_window": {"centre_m": 27.0, "margin_m": 2.5},
    "channel_cut": {"centre_m": 30.0, "margin_m": 7.5},
    "bedrock_highs": {"centre_m": 25.0, "margin_m": 3.0},
    "ridge_and_channel": {"centre_m": 31.0, "margin_m": 24.0},
}


@dataclass(frozen=True)
class _Truth:
    """The truth of a region: evaluate the column at any points."""

    valley: _Valley
    fields: dict[str, _NoiseField]
    clay_centre_m: float
    clay_margin_m: float
    ridges: tuple[_Ridge | _BroadRidge, ...]
    knobs: _Knobs | None
    channels: tuple[_Channel, ...]

    def column(self, x: np.ndarray, y: np.ndarray) -> _Column:
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
        return _Column(ground, {"SAND": sand, **{u: units[u] for u in CLAY_UNITS}})


def _line_along_valley(rng: np.random.Generator, valley: _Valley, x_from: float, x_to: float,
                       offset_m: float, amplitude_m: float, wavelength_m: float) -> _Line:
    xs = np.linspace(x_from, x_to, max(50, int((x_to - x_from) / 20.0)))
    yc, _, _ = valley.edges_at(xs)
    phase = rng.uniform(0.0, 2.0 * np.pi)
    wobble = 60.0 * _smooth_noise_1d(rng, xs.size, 40)
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
                  + 40.0 * _smooth_noise_1d(rng, u.size, 20))
        offset = offset - np.interp(0.0, u, offset)  # the lines still meet at (px, py)
        c, sn = math.cos(theta), math.sin(theta)
        lines.append(_Line.through(px + c * u - sn * offset, py + sn * u + c * offset))
    return lines[0], lines[1]


def _make_truth(rng: np.random.Generator, valley: _Valley, character: str,
                polygon: Polygon) -> _Truth:
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
        cx, cy = _points_in(rng, polygon, n, lambda x, y: valley.across(x, y) < 0.8)
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
    return _Truth(valley, fields, clay["centre_m"], clay["margin_m"], tuple(ridges), knobs,
                  tuple(channels))


# ----------------------------------------------------------------------------- boreholes


def _points_in(rng: np.random.Generator, polygon: Polygon, n: int, accept=None, *,
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


def _spread(x: np.ndarray, y: np.ndarray, n: int, min_spacing_m: float) -> np.ndarray:
    """Indices of up to ``n`` candidates, taken in order, at least ``min_spacing_m`` apart."""
    chosen: list[int] = []
    for i in range(x.size):
        if len(chosen) == n:
            break
        if all(math.hypot(x[i] - x[j], y[i] - y[j]) >= min_spacing_m for j in chosen):
            chosen.append(i)
    return np.array(chosen, dtype=int)


@dataclass
class _Hole:
    """One borehole: true position and column, reported collar and log, samples."""

    kind: str
    x: float
    y: float
    ground_m: float
    thickness_m: dict[str, float]
    total_depth_m: float = 0.0
    x_rep: float = 0.0
    y_rep: float = 0.0
    ground_rep_m: float = 0.0
    blunder_m: float = 0.0
    in_window: bool = False
    borehole_id: str = ""
    intervals: list[tuple[str, float, float]] | None = None
    samples: list[tuple[float, float, float, float, float]] | None = None

    @property
    def clay_m(self) -> float:
        return sum(self.thickness_m[u] for u in CLAY_UNITS)

    def true_bottoms(self) -> list[tuple[str, float]]:
        """(unit, depth of its base) down the true column, the aquifer without a base."""
        out, depth = [], 0.0
        for u in (COVER_UNIT, *CLAY_UNITS):
            depth += self.thickness_m[u]
            out.append((u, depth))
        out.append((AQUIFER_UNIT, math.inf))
        return out


def _log(bottoms: list[tuple[str, float]], total_depth_m: float
         ) -> list[tuple[str, float, float]]:
    """Contiguous intervals from 0 to ``total_depth_m``; units thinner than
    ``MIN_LOGGED_THICKNESS_M`` are not logged (the unit below takes their place)."""
    out: list[tuple[str, float, float]] = []
    top = 0.0
    for unit, bottom in bottoms:
        if top >= total_depth_m:
            break
        b = min(bottom, total_depth_m)
        if b >= total_depth_m:
            if b - top < MIN_LOGGED_THICKNESS_M and out:
                u0, t0, _ = out.pop()
                out.append((u0, t0, total_depth_m))
            else:
                out.append((unit, top, total_depth_m))
            break
        if b - top >= MIN_LOGGED_THICKNESS_M:
            out.append((unit, top, b))
            top = b
    return out


def _round_log(intervals: list[tuple[str, float, float]], step_m: float
               ) -> list[tuple[str, float, float]]:
    """Round contacts to ``step_m`` and drop intervals that round to nothing."""
    out: list[tuple[str, float, float]] = []
    top = 0.0
    for i, (unit, _, bottom) in enumerate(intervals):
        b = round(round(bottom / step_m) * step_m, 2)
        last = i == len(intervals) - 1
        if b - top < step_m / 2 and not last:
            continue
        if last and b - top < step_m / 2:
            if out:
                u0, t0, _ = out.pop()
                out.append((u0, t0, b))
            continue
        out.append((unit, top, b))
        top = b
    return out


def _clay_sample(rng: np.random.Generator, unit: str) -> tuple[float, float, float, float]:
    """(d10 mm, d60 mm, porosity, lab K m/s or NaN) of one clay sample of ``unit``.

    Ranges are common practice for post-glacial marine and lake clays; lab K is log-normal
    around the unit's true K (sd of ln K 0.5) and is present on about half the samples.
    """
    d10_range, d60_range, por_range = {
        "UMC": ((0.0008, 0.0020), (0.010, 0.030), (0.45, 0.58)),
        "LMC": ((0.0005, 0.0012), (0.005, 0.015), (0.50, 0.65)),
        "LAM": ((0.0010, 0.0020), (0.012, 0.030), (0.45, 0.55)),
    }[unit]
    d10 = math.exp(rng.uniform(*np.log(d10_range)))
    d60 = math.exp(rng.uniform(*np.log(d60_range)))
    por = rng.uniform(*por_range)
    k_lab = K_TRUE_M_S[unit] * math.exp(0.5 * rng.standard_normal())
    if rng.uniform() < 0.5:
        k_lab = math.nan
    return d10, d60, por, k_lab


def _sand_sample(rng: np.random.Generator) -> tuple[float, float, float, float]:
    d10 = rng.uniform(0.08, 0.25)
    d60 = float(np.clip(d10 * rng.uniform(2.0, 3.5), 0.25, 0.8))
    return d10, d60, rng.uniform(0.30, 0.38), math.nan


def _gravel_sample(rng: np.random.Generator) -> tuple[float, float, float, float]:
    d10 = math.exp(rng.uniform(math.log(0.2), math.log(1.0)))
    d60 = rng.uniform(2.0, 8.0)
    return d10, d60, rng.uniform(0.22, 0.32), math.nan


def _samples(rng: np.random.Generator, intervals: list[tuple[str, float, float]]
             ) -> list[tuple[float, float, float, float, float]]:
    """Samples of a cored hole: 2-4 per clay unit, one in the sand, one in the gravel;
    some values are left blank (NaN), as in real laboratory tables."""
    out = []
    for unit, top, bottom in intervals:
        if bottom - top < 0.2:
            continue
        edge = min(0.2, 0.25 * (bottom - top))  # keep samples off the contacts
        if unit in CLAY_UNITS:
            n = int(rng.integers(2, 5))
            depths = np.sort(rng.uniform(top + edge, bottom - edge, n))
            values = [_clay_sample(rng, unit) for _ in range(n)]
        else:
            depths = np.array([rng.uniform(top + edge, bottom - edge)])
            values = [_sand_sample(rng) if unit == COVER_UNIT else _gravel_sample(rng)]
        for depth, (d10, d60, por, k) in zip(depths, values, strict=True):
            blank = rng.uniform(size=3)
            d10 = math.nan if blank[0] < 0.05 else d10
            d60 = math.nan if blank[1] < 0.10 else d60
            por = math.nan if blank[2] < 0.15 else por
            out.append((round(float(depth), 2), d10, d60, por, k))
    return out


def _settlements(rng: np.random.Generator, truth: _Truth, polygon: Polygon
                 ) -> dict[str, tuple[float, float]]:
    """Marrowdene (town, on thick clay) and Lidderholt (village), invented places."""
    tx, ty = _points_in(rng, polygon, 1, lambda x, y: truth.column(x, y).clay_m >= 18.0)
    if tx.size == 0:
        tx, ty = _points_in(rng, polygon, 1)
    vx, vy = _points_in(rng, polygon, 1, lambda x, y: truth.valley.across(x, y) < 0.7)
    return {"Marrowdene": (float(tx[0]), float(ty[0])),
            "Lidderholt": (float(vx[0]), float(vy[0]))}


def _gt_ok(col: _Column) -> np.ndarray:
    """Where a geotechnical hole can stop inside the clay: at least 10 m of clay and a
    stopping depth between max(6 m, cover + 1 m) and min(20 m, clay base - 1 m) at least
    1 m wide."""
    sand = col.thickness_m["SAND"]
    lo = np.maximum(6.0, sand + 1.0)
    hi = np.minimum(20.0, sand + col.clay_m - 1.0)
    return (col.clay_m >= 10.0) & (hi - lo >= 1.0)


def _cored_ok(col: _Column) -> np.ndarray:
    """Where a cored hole goes: every clay unit at least 1.5 m thick."""
    return np.all([col.thickness_m[u] >= 1.5 for u in CLAY_UNITS], axis=0)


def _holes_at(kind: str, hx: np.ndarray, hy: np.ndarray, truth: _Truth,
              in_window: bool = False) -> list[_Hole]:
    """Holes of one kind at true positions (hx, hy), with the true column there."""
    if hx.size == 0:
        return []
    col = truth.column(np.asarray(hx, float), np.asarray(hy, float))
    return [_Hole(kind, float(hx[i]), float(hy[i]), float(col.ground_m[i]),
                  {u: float(col.thickness_m[u][i]) for u in (COVER_UNIT, *CLAY_UNITS)},
                  in_window=in_window) for i in range(hx.size)]


def _even_points(rng: np.random.Generator, polygon: Polygon, n: int, min_spacing_m: float,
                 max_rounds: int = 200) -> tuple[np.ndarray, np.ndarray]:
    """``n`` points uniform at random over ``polygon``, each at least ``min_spacing_m`` from
    the ones before (random sequential adsorption); the spacing shrinks by 10 % whenever a
    batch of candidates adds no point."""
    xmin, ymin, xmax, ymax = polygon.bounds
    px: list[float] = []
    py: list[float] = []
    spacing = min_spacing_m
    for _ in range(max_rounds):
        if len(px) >= n:
            break
        x = rng.uniform(xmin, xmax, 4 * n)
        y = rng.uniform(ymin, ymax, 4 * n)
        ok = contains_xy(polygon, x, y)
        before = len(px)
        for xi, yi in zip(x[ok], y[ok], strict=True):
            if len(px) >= n:
                break
            if not px or np.min(np.hypot(np.asarray(px) - xi, np.asarray(py) - yi)) >= spacing:
                px.append(float(xi))
                py.append(float(yi))
        if len(px) == before:
            spacing *= 0.9
    return np.asarray(px), np.asarray(py)


def _place_holes_even(rng: np.random.Generator, truth: _Truth, polygon: Polygon, n_ow: int,
                      n_gt: int, n_ch: int
                      ) -> tuple[list[_Hole], dict[str, tuple[float, float]]]:
    """True positions for the ``"even"`` layout: every hole uniform at random over the
    study area at least 0.5 * sqrt(area / n) from the others; cored holes, then
    geotechnical holes, are taken at random among the positions that suit them (the clay
    thick enough), the rest are water wells. No hole is planted in a window."""
    places = _settlements(rng, truth, polygon)  # for the hazards only; holes ignore them
    n = n_ow + n_gt + n_ch
    x, y = _even_points(rng, polygon, n, 0.5 * math.sqrt(polygon.area / n))
    col = truth.column(x, y)
    order = rng.permutation(x.size)
    free = np.ones(x.size, bool)
    picked = {}
    for kind, count, ok in ((CORED, n_ch, _cored_ok(col)), (GEOTECHNICAL, n_gt, _gt_ok(col))):
        idx = order[(ok & free)[order]][:count]
        free[idx] = False
        picked[kind] = idx
    picked[WATER_WELL] = order[free[order]]
    holes: list[_Hole] = []
    for kind in (WATER_WELL, GEOTECHNICAL, CORED):
        idx = np.sort(picked[kind])
        holes.extend(_holes_at(kind, x[idx], y[idx], truth))
    return holes, places


def _place_holes(rng: np.random.Generator, truth: _Truth, polygon: Polygon, grid: Grid,
                 clay_grid_m: np.ndarray, n_ow: int, n_gt: int, n_ch: int,
                 n_window_wells: int) -> tuple[list[_Hole], dict[str, tuple[float, float]]]:
    """True positions of every hole, by kind, for the ``"clustered"`` layout."""
    valley = truth.valley

    def column_at(x: np.ndarray, y: np.ndarray) -> _Column:
        return truth.column(np.asarray(x, float), np.asarray(y, float))

    places = _settlements(rng, truth, polygon)

    # water wells proving a window: interior cells of windows away from the margins
    xs_c, ys_c = grid.cell_centres()
    gx, gy = np.meshgrid(xs_c, ys_c)
    feature = grid.mask & (clay_grid_m <= 0.0) & (valley.across(gx, gy) < 0.85)
    interior = binary_erosion(feature)  # cells whose four neighbours are windows too
    rows, cols = np.nonzero(interior)
    order = rng.permutation(rows.size)
    cx = xs_c[cols[order]] + rng.uniform(-15.0, 15.0, rows.size)
    cy = ys_c[rows[order]] + rng.uniform(-15.0, 15.0, rows.size)
    dry = column_at(cx, cy).clay_m <= 0.0
    cx, cy = cx[dry], cy[dry]
    pick = _spread(cx, cy, min(n_window_wells, n_ow), 150.0)
    win_x, win_y = cx[pick], cy[pick]

    n_rest = n_ow - win_x.size
    n_uniform = int(round(0.55 * n_rest))
    n_town = int(round(0.3 * n_rest))
    n_village = n_rest - n_uniform - n_town
    ux, uy = _points_in(rng, polygon, n_uniform)
    mx, my = _points_in(rng, polygon, n_town, centre=places["Marrowdene"], sd_m=800.0)
    lx, ly = _points_in(rng, polygon, n_village, centre=places["Lidderholt"], sd_m=600.0)
    ow_x = np.concatenate([ux, mx, lx])
    ow_y = np.concatenate([uy, my, ly])
    short = n_rest - ow_x.size  # a tiny polygon may not fit every clustered well
    if short > 0:
        ex, ey = _points_in(rng, polygon, short)
        ow_x, ow_y = np.concatenate([ow_x, ex]), np.concatenate([ow_y, ey])

    # geotechnical holes: town and a road across the valley, where the clay is thick enough
    # for the hole to stop inside it
    def gt_ok(x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return _gt_ok(column_at(x, y))

    n_road = n_gt // 3
    gx1, gy1 = _points_in(rng, polygon, n_gt - n_road, gt_ok, centre=places["Marrowdene"],
                          sd_m=700.0)
    # the road crosses the valley through the town, roughly north-south
    heading = rng.uniform(-0.5, 0.5)
    reach = float(valley.top.max() - valley.bottom.min())
    t = rng.uniform(-reach, reach, 8 * max(1, n_road))
    off = rng.normal(0.0, 40.0, t.size)
    road_x = places["Marrowdene"][0] + t * math.sin(heading) + off * math.cos(heading)
    road_y = places["Marrowdene"][1] + t * math.cos(heading) - off * math.sin(heading)
    ok = contains_xy(polygon, road_x, road_y)
    ok[ok] = gt_ok(road_x[ok], road_y[ok])
    gx2, gy2 = road_x[ok][:n_road], road_y[ok][:n_road]
    gt_x, gt_y = np.concatenate([gx1, gx2]), np.concatenate([gy1, gy2])
    if gt_x.size < n_gt:
        ex, ey = _points_in(rng, polygon, n_gt - gt_x.size, gt_ok)
        gt_x, gt_y = np.concatenate([gt_x, ex]), np.concatenate([gt_y, ey])

    # cored holes: spread over the valley where every clay unit is present
    def cored_ok(x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return _cored_ok(column_at(x, y))

    cand_x, cand_y = _points_in(rng, polygon, 40 * max(1, n_ch), cored_ok)
    spacing = 0.6 * math.sqrt(polygon.area / max(1, n_ch))
    pick = _spread(cand_x, cand_y, n_ch, spacing)
    while pick.size < min(n_ch, cand_x.size):
        spacing *= 0.8
        pick = _spread(cand_x, cand_y, n_ch, spacing)
    ch_x, ch_y = cand_x[pick], cand_y[pick]

    holes: list[_Hole] = []
    for kind, hx, hy, win in (
        (WATER_WELL, win_x, win_y, True),
        (WATER_WELL, ow_x, ow_y, False),
        (GEOTECHNICAL, gt_x, gt_y, False),
        (CORED, ch_x, ch_y, False),
    ):
        holes.extend(_holes_at(kind, hx, hy, truth, win))
    return holes, places


def _record_holes(rng: np.random.Generator, holes: list[_Hole], n_blunders: int) -> None:
    """Turn true columns into reported collars, logs and samples (noise for water wells)."""
    wells = [i for i, h in enumerate(holes) if h.kind == WATER_WELL and not h.in_window]
    blunder_ids = set(rng.choice(wells, size=min(n_blunders, len(wells)), replace=False)
                      .tolist()) if wells else set()
    for i, h in enumerate(holes):
        bottoms = h.true_bottoms()
        if h.kind == WATER_WELL:
            h.x_rep = h.x + WELL_XY_SD_M * rng.standard_normal()
            h.y_rep = h.y + WELL_XY_SD_M * rng.standard_normal()
            e = float(np.clip(WELL_ELEV_SD_M * rng.standard_normal(), -WELL_ELEV_NOISE_CLIP_M,
                              WELL_ELEV_NOISE_CLIP_M))
            if i in blunder_ids:
                h.blunder_m = float(rng.choice([-1.0, 1.0]) * rng.uniform(*BLUNDER_RANGE_M))
            h.ground_rep_m = round((h.ground_m + e + h.blunder_m) * 2.0) / 2.0
            aquifer_top = sum(h.thickness_m.values())
            h.total_depth_m = round(aquifer_top + rng.uniform(2.0, 10.0), 1)
            # a driller reports only the contacts he sees, each with some error
            noisy: list[tuple[str, float]] = []
            top = prev = 0.0
            for u, b in bottoms[:-1]:
                if b - top >= MIN_LOGGED_THICKNESS_M:
                    b_noisy = max(b + WELL_CONTACT_SD_M * rng.standard_normal(),
                                  prev + MIN_LOGGED_THICKNESS_M)
                    noisy.append((u, b_noisy))
                    prev = b_noisy
                top = b
            noisy.append((AQUIFER_UNIT, math.inf))
            depth = max(h.total_depth_m, round(prev + 1.0, 1))
            h.total_depth_m = depth
            h.intervals = _round_log(_log(noisy, depth), 0.1)
        else:
            h.x_rep, h.y_rep, h.ground_rep_m = h.x, h.y, round(h.ground_m, 2)
            sand, clay = h.thickness_m[COVER_UNIT], h.clay_m
            if h.kind == GEOTECHNICAL:
                lo, hi = max(6.0, sand + 1.0), min(20.0, sand + clay - 1.0)
                depth = round(rng.uniform(lo, hi), 2)
            else:
                depth = round(sand + clay + rng.uniform(2.0, 10.0), 2)
            h.total_depth_m = depth
            h.intervals = _round_log(_log(bottoms, depth), 0.01)
            if h.kind == CORED:
                h.samples = _samples(rng, h.intervals)


# ------------------------------------------------------------------------------- writers


def _fmt(value: float, spec: str) -> str:
    return "" if value is None or not math.isfinite(value) else format(value, spec)


def _write_lines(path: Path, header: str, rows: list[str]) -> Path:
    path.write_text("\n".join([header, *rows]) + "\n", encoding="utf-8", newline="\n")
    return path


def _write_csvs(root: Path, holes: list[_Hole]) -> dict[str, Path]:
    ordered = sorted(holes, key=lambda h: h.borehole_id)
    collars = [f"{h.borehole_id},{h.x_rep:.2f},{h.y_rep:.2f},{h.ground_rep_m:.2f},"
               f"{h.total_depth_m:.2f}" for h in ordered]
    intervals = [f"{h.borehole_id},{top:.2f},{bottom:.2f},{unit}"
                 for h in ordered for unit, top, bottom in (h.intervals or [])]
    samples = [f"{h.borehole_id},{depth:.2f},{_fmt(d10, '.3g')},{_fmt(d60, '.3g')},"
               f"{_fmt(por, '.2f')},{_fmt(k, '.3g')}"
               for h in ordered for depth, d10, d60, por, k in (h.samples or [])]
    return {
        "collars": _write_lines(root / "collars.csv",
                                "borehole_id,x,y,ground_elev_m,total_depth_m", collars),
        "intervals": _write_lines(root / "intervals.csv", "borehole_id,from_m,to_m,unit",
                                  intervals),
        "samples": _write_lines(root / "samples.csv",
                                "borehole_id,depth_m,d10_mm,d60_mm,porosity,k_lab_m_s",
                                samples),
    }


def _write_truth_holes(path: Path, holes: list[_Hole]) -> Path:
    header = ("borehole_id,kind,x_true,y_true,ground_elev_true_m,"
              + ",".join(f"thickness_{u}_m" for u in (COVER_UNIT, *CLAY_UNITS))
              + ",aquitard_thickness_m,reaches_aquifer,window_well,ground_elev_blunder_m")
    rows = []
    for h in sorted(holes, key=lambda h: h.borehole_id):
        reaches = int(h.intervals is not None and h.intervals[-1][0] == AQUIFER_UNIT)
        th = ",".join(f"{h.thickness_m[u]:.3f}" for u in (COVER_UNIT, *CLAY_UNITS))
        rows.append(f"{h.borehole_id},{h.kind},{h.x:.2f},{h.y:.2f},{h.ground_m:.3f},{th},"
                    f"{h.clay_m:.3f},{reaches},{int(h.in_window)},{h.blunder_m:.2f}")
    return _write_lines(path, header, rows)


def _write_boundary(path: Path, polygon: Polygon, crs: CRS) -> Path:
    if path.exists():
        path.unlink()
    gdf = gpd.GeoDataFrame({"name": ["Ostrel Valley study area (synthetic)"]},
                           geometry=[polygon], crs=crs)
    gdf.to_file(path, driver="GeoJSON")
    return path


def _lobe(rng: np.random.Generator, cx: float, cy: float, a_m: float, b_m: float,
          angle: float, wobble: float = 0.15, n: int = 36) -> Polygon:
    """An irregular elliptical polygon (semi-axes a, b; rotated by ``angle`` radians)."""
    t = np.linspace(0.0, 2.0 * np.pi, n, endpoint=False)
    r = 1.0 + wobble * _smooth_noise_1d(rng, n, 2.0)
    x, y = a_m * r * np.cos(t), b_m * r * np.sin(t)
    ca, sa = math.cos(angle), math.sin(angle)
    ring = np.round(np.column_stack([cx + ca * x - sa * y, cy + sa * x + ca * y]), 2)
    return Polygon(ring)


def _write_hazards(path: Path, seed: int, truth: _Truth, polygon: Polygon,
                   places: dict[str, tuple[float, float]], crs: CRS) -> list[dict]:
    """Invented man-made and slope hazards, written to ``hazards.geojson``.

    A clay pit by the town, a road cutting by the village and a landslide scar on a valley
    side where the clay is moderately thick. Drawn from their own random stream (seeded by
    ``seed``), so the borehole files do not depend on them. They are not in the truth
    grids (the geology) nor in any log. Returns their descriptions for ``truth.json``.
    """
    rng = np.random.default_rng([seed, 4])
    valley = truth.valley

    def clay(x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return truth.column(x, y).clay_m

    specs = []
    px, py = _points_in(rng, polygon, 1, lambda x, y: (clay(x, y) >= 14.0)
                        & (clay(x, y) <= 18.0), centre=places["Marrowdene"], sd_m=1500.0)
    if px.size:
        specs.append(("Marrowdene brickworks clay pit", "pit", 16.0,
                      _lobe(rng, px[0], py[0], 110.0, 70.0, rng.uniform(0, np.pi), 0.08)))
    ex, ey = _points_in(rng, polygon, 1, lambda x, y: clay(x, y) >= 3.0,
                        centre=places["Lidderholt"], sd_m=500.0)
    if ex.size:
        ang = rng.uniform(0, np.pi)
        ca, sa = math.cos(ang), math.sin(ang)
        hw, hl = 20.0, 180.0
        corners = [(-hl, -hw), (hl, -hw), (hl, hw), (-hl, hw)]
        specs.append(("Lidderholt road cutting", "excavation", 6.0, Polygon(
            [(round(ex[0] + ca * u - sa * v, 2), round(ey[0] + sa * u + ca * v, 2))
             for u, v in corners])))
    sx, sy = _points_in(rng, polygon, 1, lambda x, y: (valley.across(x, y) > 0.6)
                        & (valley.across(x, y) < 0.8) & (clay(x, y) >= 8.0)
                        & (clay(x, y) <= 12.0))
    if sx.size:
        specs.append(("Old slide scar on the valley side", "landslide_scar", 11.0,
                      _lobe(rng, sx[0], sy[0], 260.0, 150.0, rng.uniform(0, np.pi))))
    if path.exists():
        path.unlink()
    gdf = gpd.GeoDataFrame({"name": [n for n, _, _, _ in specs],
                            "kind": [k for _, k, _, _ in specs],
                            "removed_depth_m": [d for _, _, d, _ in specs]},
                           geometry=[g for _, _, _, g in specs], crs=crs)
    gdf.to_file(path, driver="GeoJSON")
    return [{"name": n, "kind": k, "removed_depth_m": d, "area_m2": round(g.area, 1)}
            for n, k, d, g in specs]


# ------------------------------------------------------------------------------ main API


def make_synthetic_region(
    out_dir: str | Path,
    *,
    seed: int,
    n_holes: int = 400,
    extent_m: tuple[float, float] = (10_000.0, 7_000.0),
    origin_xy: tuple[float, float] = (548_000.0, 6_712_000.0),
    cell_size_m: float = 50.0,
    character: str = "esker_window",
    hole_layout: str | None = None,
    partial_fraction: float | None = None,
    n_cored: int | None = None,
    n_window_wells: int = 6,
    n_elevation_blunders: int = 4,
    dem_cell_size_m: float = 25.0,
    crs: str = "EPSG:32632",
    write_project_toml: bool = False,
    project_name: str | None = None,
    hazards: bool = True,
) -> SyntheticRegion:
    """Generate a synthetic project folder from a known truth and write the truth beside it.

    Args:
        out_dir: folder to write (created if needed; files of the same names are replaced).
        seed: seed of ``numpy.random.default_rng``; the same seed and arguments give the same
            CSV files byte for byte.
        n_holes: number of boreholes of all kinds.
        extent_m: (east-west, north-south) size of the rectangle holding the valley (m);
            about (12000, 10000) for ``"ridge_and_channel"``.
        origin_xy: south-west corner of that rectangle in ``crs`` (m).
        cell_size_m: cell size of the screening grid the truth rasters are written on (m).
        character: one of :data:`CHARACTERS` (``"esker_window"``, ``"channel_cut"``,
            ``"bedrock_highs"``, ``"ridge_and_channel"``).
        hole_layout: ``"clustered"`` (water wells around a town and a village and uniform,
            geotechnical holes by the town and along a road, ``n_window_wells`` planted in
            windows) or ``"even"`` (all holes uniform at random over the study area at least
            0.5 * sqrt(area / n_holes) apart; cored and geotechnical holes taken at random
            among the positions where the clay suits them, fewer if too few do; no planted
            window wells). Default: ``"even"`` for ``"ridge_and_channel"``, else
            ``"clustered"``.
        partial_fraction: fraction of the holes that are geotechnical holes stopping inside
            the clay (censored); default 0.2 for the even layout, 0.3 for the clustered.
        n_cored: number of cored holes with samples (default: ``n_holes / 30``, 2 to 15).
        n_window_wells: water wells placed inside clay windows, reaching the aquifer with no
            clay in their log (fewer if the windows are too small to hold them); clustered
            layout only (the even layout plants none).
        n_elevation_blunders: water wells whose reported ground elevation is off by 6-15 m.
        dem_cell_size_m: cell size of ``dem.tif`` (m).
        crs: projected CRS of every coordinate (metres).
        write_project_toml: also write ``project.toml`` with the demo stack.
        project_name: name written in ``project.toml``.
        hazards: also write ``hazards.geojson`` (a clay pit, a road cutting, a landslide
            scar; from their own random stream, so the other files do not change).

    Returns:
        A :class:`SyntheticRegion` describing the files and the truth.

    Raises:
        ValueError: for an unknown character or inconsistent counts.
    """
    if character not in CHARACTERS:
        raise ValueError(f"character must be one of {', '.join(CHARACTERS)}, got {character!r}")
    if hole_layout is None:
        hole_layout = "even" if character == "ridge_and_channel" else "clustered"
    if hole_layout not in HOLE_LAYOUTS:
        raise ValueError(f"hole_layout must be one of {', '.join(HOLE_LAYOUTS)}, "
                         f"got {hole_layout!r}")
    if hole_layout == "even":
        n_window_wells = 0
    if partial_fraction is None:
        partial_fraction = 0.2 if hole_layout == "even" else 0.3
    if not 0.0 <= partial_fraction <= 0.8:
        raise ValueError(f"partial_fraction must be within 0 to 0.8, got {partial_fraction}")
    if min(extent_m) < 2000.0:
        raise ValueError(f"extent_m must be at least 2000 m each way, got {extent_m}")
    if n_cored is None:
        n_cored = int(min(15, max(2, round(n_holes / 30))))
    n_gt = int(round(partial_fraction * n_holes))
    n_ow = n_holes - n_gt - n_cored
    if n_ow < n_window_wells + n_elevation_blunders or n_ow < 1:
        raise ValueError(f"n_holes={n_holes} leaves {n_ow} water wells, fewer than the "
                         f"{n_window_wells} window wells and {n_elevation_blunders} "
                         "blunders asked for")

    root = Path(out_dir)
    (root / "truth").mkdir(parents=True, exist_ok=True)
    crs_obj = CRS.from_user_input(crs)
    rng = np.random.default_rng(seed)

    if character == "ridge_and_channel":
        valley = _make_plain(rng, origin_xy, extent_m)
    else:
        valley = _make_valley(rng, origin_xy, extent_m)
    polygon = valley.polygon()
    truth = _make_truth(rng, valley, character, polygon)
    grid = make_grid(polygon, cell_size_m, crs_obj)

    # truth grids at the centres of the screening grid
    xs_c, ys_c = grid.cell_centres()
    gx, gy = np.meshgrid(xs_c, ys_c)
    col = truth.column(gx, gy)
    clay = col.clay_m
    truth_files: dict[str, Path] = {}
    tdir = root / "truth"
    truth_files["ground"] = write_raster(tdir / "ground_elev_m.tif", col.ground_m, grid,
                                         description="true ground elevation", units="m")
    for u in (COVER_UNIT, *CLAY_UNITS):
        truth_files[u] = write_raster(tdir / outputs.unit_thickness(u), col.thickness_m[u],
                                      grid, description=f"true thickness of {u}", units="m")
    truth_files["aquitard"] = write_raster(tdir / outputs.AQUITARD_THICKNESS, clay, grid,
                                           description="true total aquitard thickness",
                                           units="m")

    # DEM: the true ground on a finer grid reaching a little beyond the study area
    pad = 4 * dem_cell_size_m
    bx0, by0, bx1, by1 = snapped_bounds(polygon.bounds, max(cell_size_m, dem_cell_size_m))
    bx0, by0, bx1, by1 = bx0 - pad, by0 - pad, bx1 + pad, by1 + pad
    dw = int(round((bx1 - bx0) / dem_cell_size_m))
    dh = int(round((by1 - by0) / dem_cell_size_m))
    dem_grid = Grid(Affine(dem_cell_size_m, 0.0, bx0, 0.0, -dem_cell_size_m, by1), dw, dh,
                    crs_obj, np.ones((dh, dw), bool))
    dx, dy = dem_grid.cell_centres()
    dgx, dgy = np.meshgrid(dx, dy)
    dem = truth.column(dgx, dgy).ground_m
    files: dict[str, Path] = {}
    files["dem"] = write_raster(root / "dem.tif", np.round(dem, 2), dem_grid,
                                description="ground elevation", units="m")
    files["boundary"] = _write_boundary(root / "boundary.geojson", polygon, crs_obj)

    if hole_layout == "even":
        holes, places = _place_holes_even(rng, truth, polygon, n_ow, n_gt, n_cored)
    else:
        holes, places = _place_holes(rng, truth, polygon, grid, clay, n_ow, n_gt, n_cored,
                                     n_window_wells)
    # ids: shuffled within each kind so that the id says nothing about where a hole is
    for kind in (WATER_WELL, GEOTECHNICAL, CORED):
        members = [h for h in holes if h.kind == kind]
        for k, j in enumerate(rng.permutation(len(members))):
            members[j].borehole_id = _ID_FORMAT[kind].format(k + 1)
    _record_holes(rng, holes, n_elevation_blunders)
    files.update(_write_csvs(root, holes))
    truth_files["boreholes"] = _write_truth_holes(tdir / "boreholes.csv", holes)
    hazard_meta: list[dict] = []
    if hazards:
        files["hazards"] = root / "hazards.geojson"
        hazard_meta = _write_hazards(files["hazards"], seed, truth, polygon, places, crs_obj)

    if write_project_toml:
        name = project_name or f"Synthetic {character} region (seed {seed})"
        path = root / "project.toml"
        path.write_text(project_toml_text(name, seed=seed, character=character, crs=crs,
                                          cell_size_m=cell_size_m), encoding="utf-8")
        files["project"] = path

    counts = {kind: sum(h.kind == kind for h in holes)
              for kind in (WATER_WELL, GEOTECHNICAL, CORED)}
    counts["total"] = len(holes)
    counts["window_wells"] = sum(h.in_window for h in holes)
    counts["elevation_blunders"] = sum(h.blunder_m != 0.0 for h in holes)
    cell_km2 = grid.cell_area_m2 / 1e6
    inside = grid.mask
    area_km2 = polygon.area / 1e6
    window_km2 = float(np.sum(inside & (clay <= 0.0)) * cell_km2)
    below_1_km2 = float(np.sum(inside & (clay < 1.0)) * cell_km2)
    thin_km2 = float(np.sum(inside & (clay < 5.0)) * cell_km2)

    meta = {
        "synthetic": True,
        "note": "Invented region generated by aquitardmap.evaluation.synthetic; not real data.",
        "seed": seed,
        "character": character,
        "parameters": {
            "n_holes": n_holes, "extent_m": list(extent_m), "origin_xy": list(origin_xy),
            "cell_size_m": cell_size_m, "partial_fraction": partial_fraction,
            "n_cored": n_cored, "n_window_wells": n_window_wells,
            "n_elevation_blunders": n_elevation_blunders,
            "dem_cell_size_m": dem_cell_size_m, "crs": crs,
        },
        "stack": list(STACK),
        "k_true_m_s": K_TRUE_M_S,
        "hole_counts": counts,
        "areas_km2": {
            "study_area": round(area_km2, 4),
            "study_area_grid_cells": round(float(inside.sum()) * cell_km2, 4),
            "clay_absent": round(window_km2, 4),
            "clay_below_1m": round(below_1_km2, 4),
            "clay_below_5m": round(thin_km2, 4),
        },
        "clay_m_inside": {
            "min": round(float(clay[inside].min()), 3),
            "median": round(float(np.median(clay[inside])), 3),
            "max": round(float(clay[inside].max()), 3),
        },
        "noise": {
            "water_well_xy_sd_m": WELL_XY_SD_M,
            "water_well_ground_elev_sd_m": WELL_ELEV_SD_M,
            "water_well_ground_elev_noise_clip_m": WELL_ELEV_NOISE_CLIP_M,
            "water_well_ground_elev_rounding_m": 0.5,
            "water_well_contact_sd_m": WELL_CONTACT_SD_M,
            "water_well_depth_rounding_m": 0.1,
            "elevation_blunder_range_m": list(BLUNDER_RANGE_M),
            "min_logged_thickness_m": MIN_LOGGED_THICKNESS_M,
        },
        "places": {k: [round(v[0], 1), round(v[1], 1)] for k, v in places.items()},
        "hazards": hazard_meta,
        "files": {k: p.name for k, p in sorted(files.items()) if k != "project"},
        "truth_files": {k: f"truth/{p.name}" for k, p in sorted(truth_files.items())},
    }
    if hole_layout != "clustered":  # recorded only when not the original layout, so the
        meta["parameters"]["hole_layout"] = hole_layout  # demo's truth.json is unchanged
    truth_files["json"] = tdir / "truth.json"
    truth_files["json"].write_text(json.dumps(meta, indent=2, sort_keys=True) + "\n",
                                   encoding="utf-8")

    return SyntheticRegion(root=root, seed=seed, character=character, files=files,
                           truth=truth_files, grid=grid, counts=counts,
                           area_km2=area_km2, window_area_km2=window_km2,
                           thin_area_km2=thin_km2, k_true_m_s=dict(K_TRUE_M_S))


def hold_back_holes(project_dir: str | Path, incoming_dir: str | Path, n_holes: int, *,
                    seed: int) -> list[Path]:
    """Take ``n_holes`` boreholes, chosen at random, out of a project's ``collars.csv``,
    ``intervals.csv`` and ``samples.csv`` and write their rows to ``<table>_new.csv`` in
    ``incoming_dir`` (created): the project then holds the earlier drilling and the
    incoming files the new logs to ``aquitardmap add``. Returns the incoming files."""
    import pandas as pd

    project_dir, incoming_dir = Path(project_dir), Path(incoming_dir)
    tables = {n: pd.read_csv(project_dir / f"{n}.csv", dtype=str)
              for n in ("collars", "intervals", "samples")}
    ids = tables["collars"]["borehole_id"].to_numpy()
    new = set(np.random.default_rng(seed).choice(ids, n_holes, replace=False))
    incoming_dir.mkdir(parents=True, exist_ok=True)
    for name, df in tables.items():
        df[~df["borehole_id"].isin(new)].to_csv(project_dir / f"{name}.csv", index=False)
        df[df["borehole_id"].isin(new)].to_csv(incoming_dir / f"{name}_new.csv", index=False)
    return sorted(incoming_dir.iterdir())
