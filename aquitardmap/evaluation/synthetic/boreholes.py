"""Drilling a synthetic region: borehole positions, reported collars and logs, samples.

Holes are placed on the truth by layout (:data:`HOLE_LAYOUTS`), their true columns read
from it, and the records made the way such data arrive: water wells with noisy positions,
elevations and contacts (a few with a gross elevation error), geotechnical holes that stop
inside the clay (censored), cored holes with grain-size, porosity and lab-K samples. The
tables are then written as the project's CSV files and the truth's ``boreholes.csv``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.ndimage import binary_erosion
from shapely import contains_xy
from shapely.geometry import Polygon

from aquitardmap.evaluation.demo_stack import AQUIFER_UNIT, CLAY_UNITS, COVER_UNIT, K_TRUE_M_S
from aquitardmap.evaluation.synthetic.truth import Column, Truth, points_in
from aquitardmap.grid import Grid

__all__ = [
    "CORED",
    "GEOTECHNICAL",
    "HOLE_LAYOUTS",
    "WATER_WELL",
    "Hole",
    "drill_holes",
    "recording_noise",
    "write_borehole_tables",
    "write_truth_holes",
]

#: Borehole layouts (see :func:`make_synthetic_region`).
HOLE_LAYOUTS = ("clustered", "even")

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
class Hole:
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
        """True total thickness of the clay units at the hole (m)."""
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


def _settlements(rng: np.random.Generator, truth: Truth, polygon: Polygon
                 ) -> dict[str, tuple[float, float]]:
    """Marrowdene (town, on thick clay) and Lidderholt (village), invented places."""
    tx, ty = points_in(rng, polygon, 1, lambda x, y: truth.column(x, y).clay_m >= 18.0)
    if tx.size == 0:
        tx, ty = points_in(rng, polygon, 1)
    vx, vy = points_in(rng, polygon, 1, lambda x, y: truth.valley.across(x, y) < 0.7)
    return {"Marrowdene": (float(tx[0]), float(ty[0])),
            "Lidderholt": (float(vx[0]), float(vy[0]))}


def _gt_ok(col: Column) -> np.ndarray:
    """Where a geotechnical hole can stop inside the clay: at least 10 m of clay and a
    stopping depth between max(6 m, cover + 1 m) and min(20 m, clay base - 1 m) at least
    1 m wide."""
    sand = col.thickness_m["SAND"]
    lo = np.maximum(6.0, sand + 1.0)
    hi = np.minimum(20.0, sand + col.clay_m - 1.0)
    return (col.clay_m >= 10.0) & (hi - lo >= 1.0)


def _cored_ok(col: Column) -> np.ndarray:
    """Where a cored hole goes: every clay unit at least 1.5 m thick."""
    return np.all([col.thickness_m[u] >= 1.5 for u in CLAY_UNITS], axis=0)


def _holes_at(kind: str, hx: np.ndarray, hy: np.ndarray, truth: Truth,
              in_window: bool = False) -> list[Hole]:
    """Holes of one kind at true positions (hx, hy), with the true column there."""
    if hx.size == 0:
        return []
    col = truth.column(np.asarray(hx, float), np.asarray(hy, float))
    return [Hole(kind, float(hx[i]), float(hy[i]), float(col.ground_m[i]),
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


def _place_holes_even(rng: np.random.Generator, truth: Truth, polygon: Polygon, n_ow: int,
                      n_gt: int, n_ch: int
                      ) -> tuple[list[Hole], dict[str, tuple[float, float]]]:
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
    holes: list[Hole] = []
    for kind in (WATER_WELL, GEOTECHNICAL, CORED):
        idx = np.sort(picked[kind])
        holes.extend(_holes_at(kind, x[idx], y[idx], truth))
    return holes, places


def _place_holes(rng: np.random.Generator, truth: Truth, polygon: Polygon, grid: Grid,
                 clay_grid_m: np.ndarray, n_ow: int, n_gt: int, n_ch: int,
                 n_window_wells: int) -> tuple[list[Hole], dict[str, tuple[float, float]]]:
    """True positions of every hole, by kind, for the ``"clustered"`` layout."""
    valley = truth.valley

    def column_at(x: np.ndarray, y: np.ndarray) -> Column:
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
    ux, uy = points_in(rng, polygon, n_uniform)
    mx, my = points_in(rng, polygon, n_town, centre=places["Marrowdene"], sd_m=800.0)
    lx, ly = points_in(rng, polygon, n_village, centre=places["Lidderholt"], sd_m=600.0)
    ow_x = np.concatenate([ux, mx, lx])
    ow_y = np.concatenate([uy, my, ly])
    short = n_rest - ow_x.size  # a tiny polygon may not fit every clustered well
    if short > 0:
        ex, ey = points_in(rng, polygon, short)
        ow_x, ow_y = np.concatenate([ow_x, ex]), np.concatenate([ow_y, ey])

    # geotechnical holes: town and a road across the valley, where the clay is thick enough
    # for the hole to stop inside it
    def gt_ok(x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return _gt_ok(column_at(x, y))

    n_road = n_gt // 3
    gx1, gy1 = points_in(rng, polygon, n_gt - n_road, gt_ok, centre=places["Marrowdene"],
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
        ex, ey = points_in(rng, polygon, n_gt - gt_x.size, gt_ok)
        gt_x, gt_y = np.concatenate([gt_x, ex]), np.concatenate([gt_y, ey])

    # cored holes: spread over the valley where every clay unit is present
    def cored_ok(x: np.ndarray, y: np.ndarray) -> np.ndarray:
        return _cored_ok(column_at(x, y))

    cand_x, cand_y = points_in(rng, polygon, 40 * max(1, n_ch), cored_ok)
    spacing = 0.6 * math.sqrt(polygon.area / max(1, n_ch))
    pick = _spread(cand_x, cand_y, n_ch, spacing)
    while pick.size < min(n_ch, cand_x.size):
        spacing *= 0.8
        pick = _spread(cand_x, cand_y, n_ch, spacing)
    ch_x, ch_y = cand_x[pick], cand_y[pick]

    holes: list[Hole] = []
    for kind, hx, hy, win in (
        (WATER_WELL, win_x, win_y, True),
        (WATER_WELL, ow_x, ow_y, False),
        (GEOTECHNICAL, gt_x, gt_y, False),
        (CORED, ch_x, ch_y, False),
    ):
        holes.extend(_holes_at(kind, hx, hy, truth, win))
    return holes, places


def _record_holes(rng: np.random.Generator, holes: list[Hole], n_blunders: int) -> None:
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


def drill_holes(rng: np.random.Generator, truth: Truth, polygon: Polygon, grid: Grid,
                clay_grid_m: np.ndarray, *, hole_layout: str, n_water_wells: int,
                n_geotechnical: int, n_cored: int, n_window_wells: int,
                n_elevation_blunders: int
                ) -> tuple[list[Hole], dict[str, tuple[float, float]]]:
    """Place, name and record every hole of a region; also the invented settlements.

    ``clay_grid_m`` is the true clay thickness on ``grid`` (m; the clustered layout plants
    its window wells in its windows). Ids are shuffled within each kind, so an id says
    nothing about where a hole is. Returns the holes and the settlements' positions by name.
    """
    if hole_layout == "even":
        holes, places = _place_holes_even(rng, truth, polygon, n_water_wells, n_geotechnical,
                                          n_cored)
    else:
        holes, places = _place_holes(rng, truth, polygon, grid, clay_grid_m, n_water_wells,
                                     n_geotechnical, n_cored, n_window_wells)
    for kind in (WATER_WELL, GEOTECHNICAL, CORED):
        members = [h for h in holes if h.kind == kind]
        for k, j in enumerate(rng.permutation(len(members))):
            members[j].borehole_id = _ID_FORMAT[kind].format(k + 1)
    _record_holes(rng, holes, n_elevation_blunders)
    return holes, places


def recording_noise() -> dict[str, float | list[float]]:
    """The recording noise of the water wells and the logging limit, for ``truth.json``."""
    return {
        "water_well_xy_sd_m": WELL_XY_SD_M,
        "water_well_ground_elev_sd_m": WELL_ELEV_SD_M,
        "water_well_ground_elev_noise_clip_m": WELL_ELEV_NOISE_CLIP_M,
        "water_well_ground_elev_rounding_m": 0.5,
        "water_well_contact_sd_m": WELL_CONTACT_SD_M,
        "water_well_depth_rounding_m": 0.1,
        "elevation_blunder_range_m": list(BLUNDER_RANGE_M),
        "min_logged_thickness_m": MIN_LOGGED_THICKNESS_M,
    }


# ------------------------------------------------------------------------------- writers


def _fmt(value: float, spec: str) -> str:
    return "" if value is None or not math.isfinite(value) else format(value, spec)


def _write_lines(path: Path, header: str, rows: list[str]) -> Path:
    path.write_text("\n".join([header, *rows]) + "\n", encoding="utf-8", newline="\n")
    return path


def write_borehole_tables(root: Path, holes: list[Hole]) -> dict[str, Path]:
    """Write ``collars.csv``, ``intervals.csv`` and ``samples.csv`` (the reported records)
    into ``root``, holes in id order; returns the files by key."""
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


def write_truth_holes(path: Path, holes: list[Hole]) -> Path:
    """Write the true position, column and flags of every hole (truth ``boreholes.csv``)."""
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
