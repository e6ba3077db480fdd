"""Probabilities of thin or absent clay by indicator kriging along the continuity the holes show.

The clay of a valley fill is mostly thick, with narrow features where it is thin or gone
(buried ridges, infilled channels, bedrock highs). One Gaussian of thickness cannot carry
both: the chance of a thin spot comes out as the far tail of a distribution centred on
30 m. Indicator kriging estimates the probability of the *event* itself, ``P(T < t)``, as
the kriged indicator ``I(x) = 1{T(x) < t}`` (Journel 1983, Math. Geol. 15(3):445–468;
Goovaerts 1997, *Geostatistics for Natural Resources Evaluation*, ch. 7), with no
assumption on the shape of the thickness distribution.

How the boreholes enter, per cutoff ``t``:

- a hole that passed through the clay and logged ``T`` gives the hard indicator
  ``1{T < t}`` (a hole proving a window gives 1 at every cutoff);
- a hole that stopped in the clay after ``b`` metres gives 0 when ``b ≥ t`` (the clay is
  at least ``b`` thick there) and is left out when ``b < t``: it cannot tell (inequality
  data as constraint intervals, Goovaerts 1997, §7.3, from memory);
- holes at one location are averaged.

**Continuity along chains of proving holes.** A narrow feature kilometres long is crossed by
several holes along its length, each far from the next compared with the feature's width.
Between two holes that prove thin clay, with no hole proving thick clay in the corridor
between them, the feature probably runs on: the kriging of cells near that segment uses a
geometric anisotropy along it (ratio ``continuity_ratio``), so the probability follows the
chain instead of fading in a disc around each hole — kriging with locally varying
anisotropy, the direction taken at the target (te Stroet & Snepvangers 2005, *Mapping
curvilinear structures with local anisotropy kriging*, Math. Geol. 37(6):635–649; Boisvert
& Deutsch 2011, Computers & Geosciences 37(4):495–510; both from memory). Each system uses
one model for all its pairs, so it stays a valid kriging system. Cells far from any chain
use the isotropic model.

**Variogram.** The indicator variogram is fitted to the experimental indicator variogram
(exponential, Cressie weights; :func:`aquitardmap.geostat.variogram.fit_variogram`); with too few
holes on each side of the cutoff, or a fit that is mostly nugget, a model of sill
``p(1 − p)`` and range three hole spacings is used instead (stated in the summary).

**Order relations.** Estimates are clipped to [0, 1]; over several cutoffs the cumulative
probabilities are made non-decreasing by the average of an upward and a downward
correction (Deutsch & Journel 1998, *GSLIB*, 2nd ed., §IV.1.9, from memory).

**Hard data.** A cell that holds a hole that proves the event (not excluded), or whose
centre lies within ``location_sd_m`` of it, gets at least ``hard_floor`` (0.9): the
location error of water-well records may spread the evidence, never erase it.

All functions work on plain arrays; :func:`indicator_probabilities` makes the grids.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field, replace

import numpy as np
from scipy.spatial import cKDTree

from aquitardmap.config.settings import ScreeningThresholds
from aquitardmap.geostat.context import DEFAULT_CONTEXT, KrigingContext
from aquitardmap.geostat.kriging import krige_points, merge_coincident
from aquitardmap.geostat.localkrige import numba_available
from aquitardmap.geostat.variogram import (
    VariogramModel,
    default_lags,
    experimental_variogram,
    fit_variogram,
)
from aquitardmap.grid import Grid

#: Name of the method, as recorded in ``summary.json``.
METHOD = "indicator kriging with continuity along chains of proving holes"
#: Data closer than this are taken as one location (m).
COINCIDENT_M = 0.01
#: Holes needed on each side of a cutoff before its indicator variogram is fitted.
MIN_EACH_SIDE = 4
#: Longest chain segment, in median hole spacings (when not set).
CHAIN_LENGTH_SPACINGS = 4.0
#: Reach of a chain's direction, in median hole spacings (when not set).
CHAIN_REACH_SPACINGS = 1.0
#: Family of the indicator variograms: the exponential gave the lower log-loss of P(thin)
#: against the truth in 18 of 25 synthetic regions of five characters (README, *How the
#: probabilities were chosen*).
INDICATOR_MODEL = "exponential"
#: Least share of the sill in the structured part of a fitted indicator variogram; below it
#: the default model is used (:func:`indicator_variogram`).
MIN_STRUCTURED_SHARE = 0.5
#: Directions the local anisotropy is rounded to (degrees between them: 180 / this).
DIRECTION_BINS = 12


@dataclass(frozen=True)
class IndicatorData:
    """Indicator data of one cutoff.

    Attributes:
        x_m, y_m: data locations (m), coincident holes merged.
        value: indicator per location (1 the event, 0 not; a merged location may lie
            between).
        threshold_m: the cutoff (m).
        n_left_out: holes that stopped in the clay above the cutoff (cannot tell).
    """

    x_m: np.ndarray
    y_m: np.ndarray
    value: np.ndarray
    threshold_m: float
    n_left_out: int = 0

    @property
    def n_event(self) -> int:
        """Locations where the event holds (indicator above one half)."""
        return int(np.sum(self.value > 0.5))


def indicator_data(x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                   status: np.ndarray, threshold_m: float) -> IndicatorData:
    """Hard indicators of ``T < threshold_m`` from borehole columns (module docstring).

    ``status`` per hole is ``"full"`` (passed through; ``thickness_m`` is the thickness),
    ``"lower_bound"`` (stopped in the clay; ``thickness_m`` is the depth reached in it) or
    anything else (ignored).
    """
    x, y, t = (np.asarray(a, float).ravel() for a in (x_m, y_m, thickness_m))
    status = np.asarray(status).ravel()
    full = (status == "full") & np.isfinite(t)
    lower = (status == "lower_bound") & np.isfinite(t)
    sure_zero = lower & (t >= threshold_m)
    keep = full | sure_zero
    ind = np.where(full, (t < threshold_m).astype(float), 0.0)
    mx, my, mv = merge_coincident(x[keep], y[keep], ind[keep], COINCIDENT_M)
    return IndicatorData(mx, my, mv, float(threshold_m), int(np.sum(lower & ~sure_zero)))


def mean_spacing_m(x_m: np.ndarray, y_m: np.ndarray) -> float:
    """Median distance from a hole to its nearest neighbour (m; 1 with fewer than 2)."""
    pts = np.column_stack([np.asarray(x_m, float), np.asarray(y_m, float)])
    if len(pts) < 2:
        return 1.0
    d, _ = cKDTree(pts).query(pts, k=2)
    return float(max(np.median(d[:, 1]), 1.0))


def indicator_variogram(data: IndicatorData, spacing_m: float) -> tuple[VariogramModel, str]:
    """Indicator variogram of ``data`` and how it was obtained (``"fitted"`` or
    ``"default"``): the fitted spherical model, or, with fewer than :data:`MIN_EACH_SIDE`
    locations on either side of the cutoff, a failed fit or a fit that is mostly nugget
    (structured part under :data:`MIN_STRUCTURED_SHARE` of the sill), a spherical model of
    sill ``p(1 − p)`` (the indicator variance, Goovaerts 1997 §7.2, from memory) and range
    three hole spacings (family :data:`INDICATOR_MODEL`)."""
    v = data.value
    p = float(np.clip(v.mean() if v.size else 0.0, 1e-3, 1 - 1e-3))
    var = p * (1.0 - p)
    n_event = int(np.sum(v > 0.5))
    default = VariogramModel(INDICATOR_MODEL, nugget=0.0, psill=var, range_m=3.0 * spacing_m)
    if n_event < MIN_EACH_SIDE or v.size - n_event < MIN_EACH_SIDE:
        return default, "default"
    n_lags, max_lag = default_lags(data.x_m, data.y_m)
    exp = experimental_variogram(data.x_m, data.y_m, v, n_lags=n_lags, max_lag_m=max_lag)
    try:
        model = fit_variogram(exp, INDICATOR_MODEL, sample_variance=var)
    except (ValueError, RuntimeError, np.linalg.LinAlgError):
        return default, "default"
    if not (np.isfinite(model.sill) and model.sill > 0
            and model.psill >= MIN_STRUCTURED_SHARE * model.sill):
        # Mostly nugget at the lags the holes sample: a feature narrower than the hole
        # spacing looks like that, yet the clay is continuous below the spacing.
        return default, "default"
    return model, "fitted"


def continuity_segments(data: IndicatorData, *, max_length_m: float, corridor_m: float
                        ) -> np.ndarray:
    """Segments (n, 4: x0, y0, x1, y1) between pairs of event locations at most
    ``max_length_m`` apart with no non-event location within ``corridor_m`` of the segment
    between them: where the holes suggest a feature runs on (module docstring).

    Pairs come in the order of the data (first by the earlier location, then by the later).
    Only pairs a k-d tree finds within ``max_length_m`` are tested (the test itself is
    unchanged), and the corridors of all pairs are searched in one call.
    """
    ev = np.flatnonzero(data.value > 0.5)
    non = np.flatnonzero(data.value <= 0.5)
    if ev.size < 2:
        return np.empty((0, 4))
    x, y = data.x_m, data.y_m
    # candidate pairs: a slightly larger radius, so that the exact length test below (the
    # one that decides) sees every pair it would accept
    pairs = cKDTree(np.column_stack([x[ev], y[ev]])).query_pairs(
        max_length_m * (1.0 + 1e-9) + 1e-9, output_type="ndarray")
    if pairs.size == 0:
        return np.empty((0, 4))
    pairs = pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))]
    a, b = ev[pairs[:, 0]], ev[pairs[:, 1]]
    dx, dy = x[b] - x[a], y[b] - y[a]
    # lengths and their squares in Python floats, as the tests of the pairs always were
    length_list = [math.hypot(u, v) for u, v in zip(dx.tolist(), dy.tolist(), strict=True)]
    length = np.array(length_list)
    length2 = np.array([v**2 for v in length_list])
    keep = (length <= max_length_m) & (length > COINCIDENT_M)
    a, b, dx, dy = a[keep], b[keep], dx[keep], dy[keep]
    length, length2 = length[keep], length2[keep]
    if a.size == 0:
        return np.empty((0, 4))
    blocked = np.zeros(a.size, bool)
    if non.size:
        tree = cKDTree(np.column_stack([x[non], y[non]]))
        near = tree.query_ball_point(np.column_stack([(x[a] + x[b]) / 2, (y[a] + y[b]) / 2]),
                                     length / 2 + corridor_m)
        counts = np.fromiter((len(n) for n in near), dtype=np.int64, count=a.size)
        if counts.sum():
            pair = np.repeat(np.arange(a.size), counts)
            pts = non[np.fromiter(itertools.chain.from_iterable(near), dtype=np.int64,
                                  count=int(counts.sum()))]
            px, py = x[pts] - x[a[pair]], y[pts] - y[a[pair]]
            pdx, pdy = dx[pair], dy[pair]
            s = (px * pdx + py * pdy) / length2[pair]
            off = np.abs(py * pdx - px * pdy) / length[pair]
            hit = (s > 0) & (s < 1) & (off < corridor_m)
            blocked = np.bincount(pair[hit], minlength=a.size) > 0
    ok = ~blocked
    return np.column_stack([x[a[ok]], y[a[ok]], x[b[ok]], y[b[ok]]]).astype(float).reshape(-1, 4)


def local_direction_deg(segments: np.ndarray, xt_m: np.ndarray, yt_m: np.ndarray,
                        reach_m: float, *, accelerate: bool | None = None) -> np.ndarray:
    """Direction (degrees counter-clockwise from east, in [0, 180)) of the segment nearest
    each target within ``reach_m`` of it; NaN where no segment is that near (on a tie, the
    earlier segment).

    A segment is tried at the targets inside its bounding box grown by ``reach_m`` (bounds
    included); its distance to a target is that to the nearest point ``s`` of the segment,
    ``s`` the projection clipped to [0, 1]. The targets are sorted once into square buckets
    (:class:`_TargetBuckets`), so each segment looks only at the rows of buckets its box
    covers. With numba (``accelerate``; default: when
    :func:`aquitardmap.geostat.localkrige.numba_available`) a compiled loop does the
    segments one after another, otherwise numpy does each segment's targets at once: the
    same operations in the same order, so the same numbers.
    """
    tx, ty = np.asarray(xt_m, float).ravel(), np.asarray(yt_m, float).ravel()
    angle = np.full(tx.size, np.nan)
    segs = np.asarray(segments, float).reshape(-1, 4)
    if tx.size == 0 or segs.shape[0] == 0:
        return angle
    boxes, directions = _segment_boxes(segs, tx, ty, reach_m)
    if accelerate is None:
        accelerate = numba_available()
    elif accelerate and not numba_available():
        raise RuntimeError("the compiled loop is not available (numba missing or disabled)")
    buckets = _TargetBuckets(tx, ty, reach_m)
    if accelerate:
        near = np.full(buckets.order.size, np.nan)
        _compiled_directions()(buckets.x, buckets.y, buckets.start, buckets.nx, buckets.ny,
                               buckets.x0, buckets.y0, buckets.side,
                               np.ascontiguousarray(segs), boxes,
                               directions, float(reach_m), near)
    else:
        near = _directions_numpy(buckets, segs, boxes, directions, float(reach_m))
    angle[buckets.order] = near
    return angle


def _segment_boxes(segs: np.ndarray, tx: np.ndarray, ty: np.ndarray, reach_m: float
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Each segment's bounding box grown by ``reach_m`` (n, 4: lo_x, hi_x, lo_y, hi_y) and
    direction (degrees counter-clockwise from east, in [0, 180)), in Python floats.

    A box that cannot be placed among buckets of the targets (NaN or infinite, e.g. an
    infinite ``reach_m``) raises ``ValueError`` (NaN) or ``OverflowError`` (infinite), as
    the bucket search of the former version of :func:`local_direction_deg` did: its
    buckets' origin and side are computed here for that test only.
    """
    finite = np.isfinite(tx) & np.isfinite(ty)
    any_finite = bool(finite.any())
    ox = float(tx[finite].min()) if any_finite else 0.0
    oy = float(ty[finite].min()) if any_finite else 0.0
    span = max(float(np.ptp(tx[finite])) if any_finite else 0.0,
               float(np.ptp(ty[finite])) if any_finite else 0.0, 1.0)
    side = max(float(reach_m), span / max(2.0 * math.sqrt(tx.size), 1.0), 1e-6)
    boxes = []
    directions = []
    for x0, y0, x1, y1 in segs.tolist():
        lo_x, hi_x = min(x0, x1) - reach_m, max(x0, x1) + reach_m
        lo_y, hi_y = min(y0, y1) - reach_m, max(y0, y1) + reach_m
        for v, o in ((lo_x, ox), (hi_x, ox), (lo_y, oy), (hi_y, oy)):
            math.floor((v - o) / side)  # raises on NaN or infinity
        boxes.append((float(lo_x), float(hi_x), float(lo_y), float(hi_y)))
        directions.append(math.degrees(math.atan2(y1 - y0, x1 - x0)) % 180.0)
    return np.array(boxes, dtype=float).reshape(-1, 4), np.array(directions, dtype=float)


class _TargetBuckets:
    """The targets with finite coordinates sorted into square buckets, row by row (x, y:
    their coordinates in that order; ``order``: their indices among all targets; ``start``:
    where each bucket begins, with one more entry for the end).

    A target's bucket is ``floor((x − x0) / side)`` (and the same in y); that is monotone in
    x, so every target inside a box lies in the buckets of the box's corners and between
    them (:meth:`columns`). The side is a quarter of ``reach_m`` (a segment's box is then
    read with little waste), but never so small that there would be more than about four
    buckets per target.
    """

    def __init__(self, x_m: np.ndarray, y_m: np.ndarray, reach_m: float) -> None:
        finite = np.flatnonzero(np.isfinite(x_m) & np.isfinite(y_m))
        x, y = x_m[finite], y_m[finite]
        self.x0 = float(x.min()) if x.size else 0.0
        self.y0 = float(y.min()) if y.size else 0.0
        span = max(float(np.ptp(x)) if x.size else 0.0, float(np.ptp(y)) if y.size else 0.0,
                   1.0)
        reach = float(reach_m) if math.isfinite(float(reach_m)) else 0.0
        self.side = max(0.25 * reach, span / max(2.0 * math.sqrt(max(x.size, 1)), 1.0), 1e-6)
        ix = np.floor((x - self.x0) / self.side).astype(np.int64)
        iy = np.floor((y - self.y0) / self.side).astype(np.int64)
        self.nx = int(ix.max()) + 1 if x.size else 1
        self.ny = int(iy.max()) + 1 if x.size else 1
        key = iy * self.nx + ix
        sort = np.argsort(key, kind="stable")
        self.start = np.searchsorted(key[sort], np.arange(self.nx * self.ny + 1)
                                     ).astype(np.int64)
        self.order = finite[sort]
        self.x, self.y = np.ascontiguousarray(x[sort]), np.ascontiguousarray(y[sort])

    def columns(self, lo: float, hi: float, origin: float, n: int) -> tuple[int, int]:
        """First and last bucket (columns or rows, ``n`` of them) that the range lo..hi
        touches (first > last when none)."""
        a = math.floor(min(max((lo - origin) / self.side, -1.0), float(n)))
        b = math.floor(min(max((hi - origin) / self.side, -1.0), float(n)))
        return max(a, 0), min(b, n - 1)


def _directions_numpy(buckets: _TargetBuckets, segs: np.ndarray, boxes: np.ndarray,
                      directions: np.ndarray, reach_m: float) -> np.ndarray:
    """:func:`local_direction_deg` at the bucketed targets (in bucket order), each segment's
    targets at once with numpy."""
    near = np.full(buckets.order.size, np.nan)
    best = np.full(buckets.order.size, np.inf)
    bx, by, start, nx = buckets.x, buckets.y, buckets.start, buckets.nx
    for (x0, y0, x1, y1), (lo_x, hi_x, lo_y, hi_y), a in zip(
            segs.tolist(), boxes.tolist(), directions.tolist(), strict=True):
        c0, c1 = buckets.columns(lo_x, hi_x, buckets.x0, nx)
        r0, r1 = buckets.columns(lo_y, hi_y, buckets.y0, buckets.ny)
        if c0 > c1 or r0 > r1:
            continue
        rows = np.arange(r0, r1 + 1) * nx
        lo, hi = start[rows + c0], start[rows + c1 + 1]
        n = hi - lo
        total = int(n.sum())
        if total == 0:
            continue
        box = np.repeat(lo - np.cumsum(np.r_[0, n[:-1]]), n) + np.arange(total)
        px, py = bx[box], by[box]
        inside = (px >= lo_x) & (px <= hi_x) & (py >= lo_y) & (py <= hi_y)
        box, px, py = box[inside], px[inside], py[inside]
        if box.size == 0:
            continue
        dx, dy = x1 - x0, y1 - y0
        with np.errstate(divide="ignore", invalid="ignore"):
            s = np.clip(((px - x0) * dx + (py - y0) * dy) / (dx * dx + dy * dy), 0, 1)
        d = np.hypot(px - x0 - s * dx, py - y0 - s * dy)
        better = (d < best[box]) & (d <= reach_m)
        best[box[better]] = d[better]
        near[box[better]] = a
    return near


_DIRECTIONS_NB = None


def _compiled_directions():
    """:func:`_directions_loop` compiled with numba (on first use; numba caches the machine
    code on disk), as :func:`aquitardmap.geostat.kernel.compiled_kernel` does."""
    global _DIRECTIONS_NB
    if _DIRECTIONS_NB is None:
        import numba

        _DIRECTIONS_NB = numba.njit(cache=True, nogil=True, error_model="numpy")(
            _directions_loop)
    return _DIRECTIONS_NB


#: Relative margin of the squared-distance test that lets the compiled loop skip the exact
#: distance of targets that are clearly too far (:func:`_directions_loop`).
_SKIP_MARGIN = 1e-9
#: Below this (m) a distance is not used for that test (squares could underflow).
_SKIP_FLOOR_M = 1e-100


def _directions_loop(bx, by, start, nx, ny, x0b, y0b, side, segs, boxes, directions,
                     reach, near):  # pragma: no cover - compiled
    """:func:`_directions_numpy` as one loop (numba subset of Python): segments in order,
    the targets of each box's rows of buckets one by one, the same operations.

    The exact distance ``hypot`` is skipped where the squared distance ``e²`` already
    exceeds ``(1 + 1e-9)`` times the square of the reach, or of the target's best distance
    so far: ``e²`` is within a few units in the last place of the true square and hypot
    within one of the true distance, so that distance would be over the reach, or not
    below the best, anyway.
    """
    n = bx.shape[0]
    best = np.full(n, np.inf)
    if reach >= _SKIP_FLOOR_M:
        reach_lim = reach * reach * (1.0 + _SKIP_MARGIN)
    elif reach < 0.0:
        reach_lim = -1.0  # every distance is over it
    else:
        reach_lim = np.inf  # (0 ≤ reach < floor: never skip)
    lim = np.full(n, reach_lim)
    fn_x = float(nx)
    fn_y = float(ny)
    for k in range(segs.shape[0]):
        lo_x = boxes[k, 0]
        hi_x = boxes[k, 1]
        lo_y = boxes[k, 2]
        hi_y = boxes[k, 3]
        c0 = max(int(np.floor(min(max((lo_x - x0b) / side, -1.0), fn_x))), 0)
        c1 = min(int(np.floor(min(max((hi_x - x0b) / side, -1.0), fn_x))), nx - 1)
        r0 = max(int(np.floor(min(max((lo_y - y0b) / side, -1.0), fn_y))), 0)
        r1 = min(int(np.floor(min(max((hi_y - y0b) / side, -1.0), fn_y))), ny - 1)
        if c0 > c1 or r0 > r1:
            continue
        x0 = segs[k, 0]
        y0 = segs[k, 1]
        dx = segs[k, 2] - x0
        dy = segs[k, 3] - y0
        den = dx * dx + dy * dy
        a = directions[k]
        for r in range(r0, r1 + 1):
            for i in range(start[r * nx + c0], start[r * nx + c1 + 1]):
                px = bx[i]
                py = by[i]
                if px >= lo_x and px <= hi_x and py >= lo_y and py <= hi_y:
                    s = ((px - x0) * dx + (py - y0) * dy) / den
                    if s < 0.0:  # np.clip(s, 0, 1): NaN stays NaN
                        s = 0.0
                    elif s > 1.0:
                        s = 1.0
                    ex = px - x0 - s * dx
                    ey = py - y0 - s * dy
                    if ex * ex + ey * ey > lim[i]:
                        continue
                    d = np.hypot(ex, ey)
                    if d < best[i] and d <= reach:
                        best[i] = d
                        near[i] = a
                        if d >= _SKIP_FLOOR_M:
                            lim[i] = min(reach_lim, d * d * (1.0 + _SKIP_MARGIN))
                        elif d == 0.0:
                            lim[i] = 0.0  # any e² > 0 gives a distance > 0, not below
    return 0


def krige_indicator(data: IndicatorData, model: VariogramModel, xt_m: np.ndarray,
                    yt_m: np.ndarray, *, max_neighbours: int = 32,
                    direction_deg: np.ndarray | None = None, continuity_ratio: float = 1.0,
                    context: KrigingContext = DEFAULT_CONTEXT) -> np.ndarray:
    """Ordinary indicator kriging estimates at the targets, clipped to [0, 1].

    Where ``direction_deg`` is finite the target is kriged with ``model`` made
    geometrically anisotropic along that direction (rounded to one of
    :data:`DIRECTION_BINS`): the major range stays the model's range and the minor one is
    divided by ``continuity_ratio``.

    Each model's targets are kriged by :func:`aquitardmap.geostat.kriging.krige_points` (the local
    engine, nearest ``max_neighbours`` data in the anisotropy frame), so memory stays
    bounded by its tiles whatever the number of targets.
    """
    tx, ty = np.asarray(xt_m, float).ravel(), np.asarray(yt_m, float).ravel()
    out = np.empty(tx.size)
    if data.value.size == 0:
        out[:] = 0.0
        return out
    groups: list[tuple[VariogramModel, np.ndarray]] = []
    directed = (np.zeros(tx.size, bool) if direction_deg is None or continuity_ratio <= 1.0
                else np.isfinite(direction_deg))
    groups.append((model, np.flatnonzero(~directed)))
    if directed.any():
        step = 180.0 / DIRECTION_BINS
        b = np.round(np.asarray(direction_deg)[directed] / step).astype(int) % DIRECTION_BINS
        idx = np.flatnonzero(directed)
        for j in np.unique(b):
            groups.append((replace(model, anisotropy_ratio=float(continuity_ratio),
                                   anisotropy_angle_deg=float(j * step)), idx[b == j]))
    for m, sel in groups:
        if sel.size == 0:
            continue
        out[sel] = krige_points(data.x_m, data.y_m, data.value, m, tx[sel], ty[sel],
                                max_neighbours=max_neighbours, context=context).estimate
    return np.clip(out, 0.0, 1.0)


def correct_order(cdf: np.ndarray) -> np.ndarray:
    """Make cumulative probabilities (..., n_cutoffs, increasing cutoffs) non-decreasing
    along the last axis and within [0, 1]: the average of the upward correction (running
    maximum from the lowest cutoff) and the downward one (running minimum from the
    highest) (GSLIB §IV.1.9, from memory)."""
    c = np.clip(np.asarray(cdf, float), 0.0, 1.0)
    up = np.maximum.accumulate(c, axis=-1)
    down = np.minimum.accumulate(c[..., ::-1], axis=-1)[..., ::-1]
    return 0.5 * (up + down)


@dataclass(frozen=True)
class IndicatorSettings:
    """Choices of the indicator method (``[screening]`` settings of the same names).

    Attributes:
        continuity_ratio: anisotropy ratio along chains of proving holes (1 = none).
        chain_max_length_m: longest segment between two proving holes that may form a
            chain (m; 0 = :data:`CHAIN_LENGTH_SPACINGS` median hole spacings).
        chain_corridor_m: a hole proving thick clay within this distance of a segment
            breaks it (m).
        chain_reach_m: cells within this distance of a segment use its direction (m; 0 =
:data:`CHAIN_REACH_SPACINGS` median hole spacings).
        location_sd_m: location error of the hole records: cells within it of a proving
            hole get at least ``hard_floor`` (m).
        hard_floor: least probability in a cell that holds a hole proving the event.
        max_neighbours: kriging neighbourhood.
    """

    continuity_ratio: float = ScreeningThresholds.continuity_ratio
    chain_max_length_m: float = 0.0
    chain_corridor_m: float = ScreeningThresholds.chain_corridor_m
    chain_reach_m: float = 0.0
    location_sd_m: float = ScreeningThresholds.location_sd_m
    hard_floor: float = 0.9
    max_neighbours: int = 32


@dataclass(frozen=True)
class CutoffResult:
    """What one cutoff's kriging used (for the summary)."""

    threshold_m: float
    n_data: int
    n_event: int
    n_left_out: int
    variogram: VariogramModel
    variogram_source: str
    n_segments: int

    def as_dict(self) -> dict[str, object]:
        return {"threshold_m": self.threshold_m, "n_data": self.n_data,
                "n_event": self.n_event, "n_left_out_lower_bounds": self.n_left_out,
                "variogram": self.variogram.as_dict(),
                "variogram_source": self.variogram_source,
                "n_continuity_segments": self.n_segments}


@dataclass(frozen=True)
class IndicatorProbabilities:
    """P(T < t) at targets for a ladder of cutoffs, order-corrected.

    Attributes:
        cutoffs_m: increasing cutoffs (m).
        cdf: (n_targets, n_cutoffs) cumulative probabilities.
        cutoffs: what each cutoff's kriging used.
        notes: plain-language notes.
    """

    cutoffs_m: np.ndarray
    cdf: np.ndarray
    cutoffs: list[CutoffResult] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    def at(self, threshold_m: np.ndarray | float) -> np.ndarray:
        """P(T < threshold) per target, by linear interpolation of the cdf between
        cutoffs (0 below 0 m; the highest cutoff's value above it)."""
        t = np.broadcast_to(np.asarray(threshold_m, float), (self.cdf.shape[0],))
        c = np.concatenate([np.zeros((self.cdf.shape[0], 1)), self.cdf], axis=1)
        k = np.concatenate([[0.0], self.cutoffs_m])
        j = np.clip(np.searchsorted(k, t, side="right") - 1, 0, k.size - 1)
        j1 = np.minimum(j + 1, k.size - 1)
        rows = np.arange(t.size)
        span = np.where(j1 > j, k[j1] - k[j], 1.0)
        f = np.where(j1 > j, np.clip((t - k[j]) / span, 0.0, 1.0), 0.0)
        out = c[rows, j] + f * (c[rows, j1] - c[rows, j])
        return np.where(t <= 0, 0.0, out)


def indicator_cdf(x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                  status: np.ndarray, cutoffs_m: list[float], xt_m: np.ndarray,
                  yt_m: np.ndarray, settings: IndicatorSettings = IndicatorSettings(),
                  own_target: np.ndarray | None = None, *,
                  context: KrigingContext = DEFAULT_CONTEXT) -> IndicatorProbabilities:
    """Indicator-kriged P(T < t) at targets for each cutoff (module docstring), with the
    chains of proving holes of each cutoff, order-corrected, hard data honoured
    (:func:`honour_hard_data`; ``own_target`` the target index of each hole, -1 for
    none); the kriging runs on ``context``'s runner."""
    cut = np.unique(np.asarray(cutoffs_m, float))
    tx, ty = np.asarray(xt_m, float).ravel(), np.asarray(yt_m, float).ravel()
    x, y = np.asarray(x_m, float).ravel(), np.asarray(y_m, float).ravel()
    spacing = mean_spacing_m(x, y)
    max_len = settings.chain_max_length_m or CHAIN_LENGTH_SPACINGS * spacing
    reach = settings.chain_reach_m or CHAIN_REACH_SPACINGS * spacing
    cdf = np.empty((tx.size, cut.size))
    results: list[CutoffResult] = []
    notes: list[str] = []
    for k, t in enumerate(cut):
        data = indicator_data(x, y, thickness_m, status, float(t))
        model, source = indicator_variogram(data, spacing)
        segs = (continuity_segments(data, max_length_m=max_len,
                                    corridor_m=settings.chain_corridor_m)
                if settings.continuity_ratio > 1.0 else np.empty((0, 4)))
        direction = local_direction_deg(segs, tx, ty, reach) if len(segs) else None
        cdf[:, k] = krige_indicator(data, model, tx, ty,
                                    max_neighbours=settings.max_neighbours,
                                    direction_deg=direction,
                                    continuity_ratio=settings.continuity_ratio,
                                    context=context)
        results.append(CutoffResult(float(t), int(data.value.size), data.n_event,
                                    data.n_left_out, model, source, int(len(segs))))
        if source == "default":
            notes.append(f"cutoff {t:g} m: {data.n_event} of {data.value.size} locations "
                         "prove it; the indicator variogram could not be fitted with a "
                         "structure (too few holes, or mostly nugget at the hole spacing): "
                         f"an {model.model} model of range {model.range_m:.0f} m (three "
                         "hole spacings) was used")
    cdf = correct_order(cdf)
    cdf = honour_hard_data(cdf, cut, x, y, thickness_m, status, tx, ty,
                           settings.location_sd_m, settings.hard_floor, own_target)
    return IndicatorProbabilities(cut, cdf, results, notes)


def honour_hard_data(cdf: np.ndarray, cutoffs_m: np.ndarray, x_m: np.ndarray,
                     y_m: np.ndarray, thickness_m: np.ndarray, status: np.ndarray,
                     xt_m: np.ndarray, yt_m: np.ndarray, radius_m: float, floor: float,
                     own_target: np.ndarray | None = None) -> np.ndarray:
    """Raise to ``floor`` the cdf, at each cutoff above the logged thickness, of the targets
    within ``radius_m`` of a hole that passed through the clay thinner than that cutoff, and
    of the hole's own target (``own_target``: index per hole, -1 for none; for a grid, the
    cell that holds it). The cdf stays non-decreasing."""
    t = np.asarray(thickness_m, float).ravel()
    proves = (np.asarray(status).ravel() == "full") & np.isfinite(t)
    if not proves.any() or np.size(xt_m) == 0:
        return cdf
    out = cdf.copy()
    tree = cKDTree(np.column_stack([xt_m, yt_m]))
    hx, hy, ht = (np.asarray(a, float).ravel()[proves] for a in (x_m, y_m, t))
    own = (np.full(hx.size, -1) if own_target is None
           else np.asarray(own_target, int).ravel()[proves])
    near = tree.query_ball_point(np.column_stack([hx, hy]), max(radius_m, 0.0))
    # every (cell, hole) pair, the hole's own cell included; a cell is raised at each cutoff
    # above the thinnest thickness proven in it (raising to the floor twice changes nothing)
    counts = np.fromiter((len(n) for n in near), dtype=np.int64, count=hx.size)
    cells = np.r_[np.fromiter(itertools.chain.from_iterable(near), dtype=np.int64,
                              count=int(counts.sum())), own[own >= 0]]
    thin = np.r_[np.repeat(ht, counts), ht[own >= 0]]
    cut = np.asarray(cutoffs_m, float)
    for j in range(cut.size):
        rows = np.unique(cells[cut[j] > thin])
        if rows.size:
            out[rows, j] = np.maximum(out[rows, j], floor)
    return out


#: Extra cutoffs used when a threshold varies by cell (hazard cuts, crust), m.
LADDER_M = (2.5, 7.5, 10.0, 15.0, 20.0, 25.0, 30.0, 40.0, 60.0)


def indicator_probabilities(x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                            status: np.ndarray, grid: Grid,
                            thresholds_m: dict[str, float | np.ndarray],
                            settings: IndicatorSettings = IndicatorSettings(), *,
                            context: KrigingContext = DEFAULT_CONTEXT
                            ) -> tuple[dict[str, np.ndarray], IndicatorProbabilities]:
    """``{name: P(T < threshold)}`` grids (NaN outside the study area) for thresholds that
    are numbers or grids; the cutoffs are the distinct constant thresholds, plus
    :data:`LADDER_M` when a threshold varies by cell. Also returns the cdf behind them."""
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    inside = grid.mask
    thr = {k: (np.broadcast_to(np.asarray(v, float), inside.shape)[inside]
               if np.ndim(v) else np.full(int(inside.sum()), float(v)))
           for k, v in thresholds_m.items()}
    cutoffs: set[float] = set()
    for v in thr.values():
        u = np.unique(v)
        if u.size <= 2:
            cutoffs.update(float(a) for a in u)
        else:
            cutoffs.update(float(a) for a in np.unique(np.round(np.percentile(v, [0, 100]),
                                                                3)))
            cutoffs.update(LADDER_M)
    cutoffs = {c for c in cutoffs if c > 0} or {1.0}
    # each hole's own cell, as an index among the study-area cells (-1 outside)
    order = np.full(inside.shape, -1)
    order[inside] = np.arange(int(inside.sum()))
    rows, cols = grid.rowcol(np.asarray(x_m, float), np.asarray(y_m, float))
    ok = (rows >= 0) & (rows < inside.shape[0]) & (cols >= 0) & (cols < inside.shape[1])
    own = np.full(rows.size, -1)
    own[ok] = order[rows[ok], cols[ok]]
    res = indicator_cdf(x_m, y_m, thickness_m, status, sorted(cutoffs), xx[inside],
                        yy[inside], settings, own, context=context)
    out = {}
    for name, v in thr.items():
        g = np.full(inside.shape, np.nan)
        g[inside] = res.at(v)
        out[name] = g
    return out, res


def thickness_probabilities_by_indicator(x_m: np.ndarray, y_m: np.ndarray,
                                         thickness_m: np.ndarray, status: np.ndarray,
                                         grid: Grid,
                                         thresholds_m: dict[str, float | np.ndarray],
                                         settings: IndicatorSettings = IndicatorSettings(), *,
                                         context: KrigingContext = DEFAULT_CONTEXT):
    """:func:`indicator_probabilities` as the pipeline's
    :class:`aquitardmap.geostat.probability.ThicknessProbabilities` (its ``as_dict`` then tells
    this method, its cutoffs and variograms)."""
    from aquitardmap.geostat.probability import ThicknessProbabilities

    grids, res = indicator_probabilities(x_m, y_m, thickness_m, status, grid, thresholds_m,
                                         settings, context=context)
    st = np.asarray(status)
    t = np.asarray(thickness_m, float)
    full = st == "full"
    summary = {"method": METHOD,
               "n_full_positive": int(np.sum(full & (t > 0))),
               "n_proving_absence": int(np.sum(full & (t <= 0))),
               "n_lower_bounds": int(np.sum(st == "lower_bound")),
               "continuity_ratio": settings.continuity_ratio,
               "chain_corridor_m": settings.chain_corridor_m,
               "location_sd_m": settings.location_sd_m,
               "hard_data_floor": settings.hard_floor,
               "cutoffs": [c.as_dict() for c in res.cutoffs],
               "external_drift": {"used": False}}
    return ThicknessProbabilities(grids, summary["n_full_positive"],
                                  summary["n_proving_absence"], summary["n_lower_bounds"],
                                  0, 0, 0, list(res.notes), other_method=summary)


#: Side of the held-out blocks of :func:`cross_validate`, in median hole spacings.
CV_BLOCK_SPACINGS = 3.0


def cross_validate(x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                   status: np.ndarray, thresholds_m: dict[str, float],
                   settings: IndicatorSettings = IndicatorSettings(),
                   block_m: float | None = None, *,
                   context: KrigingContext = DEFAULT_CONTEXT):
    """Spatial cross-validation of this method's probabilities at the holes
    (:func:`aquitardmap.geostat.calibration.block_cross_validation`): every block of
    ``block_m`` (default :data:`CV_BLOCK_SPACINGS` median hole spacings) is held out and its
    holes predicted from the rest, chains and variograms made again without them. A hole
    is scored for ``T < t`` when it passed through the clay, or stopped in it at or below
    ``t``. Returns ``{name: BlockCrossValidation}``."""
    from aquitardmap.geostat.calibration import block_cross_validation

    x, y, t = (np.asarray(a, float).ravel() for a in (x_m, y_m, thickness_m))
    st = np.asarray(status).ravel()
    block = block_m or CV_BLOCK_SPACINGS * mean_spacing_m(x, y)
    events = {}
    for name, thr in thresholds_m.items():
        full = (st == "full") & np.isfinite(t)
        scored = full | ((st == "lower_bound") & (t >= thr))
        events[name] = (float(thr), scored, full & (t < thr))

    def predict(train: np.ndarray, test: np.ndarray) -> dict[str, np.ndarray]:
        res = indicator_cdf(x[train], y[train], t[train], st[train],
                            sorted({float(v) for v in thresholds_m.values()}),
                            x[test], y[test], settings, context=context)
        return {name: res.at(thr) for name, thr in thresholds_m.items()}

    return block_cross_validation(x, y, events, predict, block)
