"""The fast parts of the indicator method (aquitardmap.geostat.indicator) give the numbers of the
straightforward versions they replaced.

Reference: the loop versions of ``continuity_segments``, ``local_direction_deg`` and
``honour_hard_data``, and ``krige_indicator`` on :func:`aquitardmap.geostat.kriging.weights_at`
(batched LAPACK solves of every system; itself checked against gstools in
tests/test_indicator.py), copied below as they were before the speed-up. Segments, directions
and the honoured cdf must be identical; the kriged indicators equal to 1e-12 near the origin
(the local engine orders each neighbourhood's sums differently and reuses factorisations),
and to 1e-10 at projected coordinates of millions of metres, where the former code's own
result moves by about 1e-11 under a shift of the origin.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.spatial import cKDTree

from aquitardmap.geostat.indicator import (
    COINCIDENT_M,
    DIRECTION_BINS,
    IndicatorData,
    continuity_segments,
    honour_hard_data,
    krige_indicator,
    local_direction_deg,
)
from aquitardmap.geostat.kriging import prepare_locations, weights_at
from aquitardmap.geostat.variogram import VariogramModel

# ------------------------------------------------------------------ reference versions


def ref_continuity_segments(data, *, max_length_m, corridor_m):
    ev = np.flatnonzero(data.value > 0.5)
    non = np.flatnonzero(data.value <= 0.5)
    if ev.size < 2:
        return np.empty((0, 4))
    x, y = data.x_m, data.y_m
    tree = cKDTree(np.column_stack([x[non], y[non]])) if non.size else None
    segs = []
    for a_i, a in enumerate(ev[:-1]):
        for b in ev[a_i + 1:]:
            dx, dy = x[b] - x[a], y[b] - y[a]
            length = math.hypot(dx, dy)
            if length > max_length_m or length <= COINCIDENT_M:
                continue
            blocked = False
            if tree is not None:
                near = tree.query_ball_point([(x[a] + x[b]) / 2, (y[a] + y[b]) / 2],
                                             length / 2 + corridor_m)
                if near:
                    px, py = x[non[near]] - x[a], y[non[near]] - y[a]
                    s = (px * dx + py * dy) / length**2
                    off = np.abs(py * dx - px * dy) / length
                    blocked = bool(np.any((s > 0) & (s < 1) & (off < corridor_m)))
            if not blocked:
                segs.append((x[a], y[a], x[b], y[b]))
    return np.array(segs, dtype=float).reshape(-1, 4)


def ref_local_direction_deg(segments, xt_m, yt_m, reach_m):
    tx, ty = np.asarray(xt_m, float).ravel(), np.asarray(yt_m, float).ravel()
    angle = np.full(tx.size, np.nan)
    best = np.full(tx.size, np.inf)
    for x0, y0, x1, y1 in segments:
        dx, dy = x1 - x0, y1 - y0
        lo_x, hi_x = min(x0, x1) - reach_m, max(x0, x1) + reach_m
        lo_y, hi_y = min(y0, y1) - reach_m, max(y0, y1) + reach_m
        box = np.flatnonzero((tx >= lo_x) & (tx <= hi_x) & (ty >= lo_y) & (ty <= hi_y))
        if box.size == 0:
            continue
        with np.errstate(invalid="ignore", divide="ignore"):
            s = np.clip(((tx[box] - x0) * dx + (ty[box] - y0) * dy) / (dx * dx + dy * dy),
                        0, 1)
        d = np.hypot(tx[box] - x0 - s * dx, ty[box] - y0 - s * dy)
        better = (d < best[box]) & (d <= reach_m)
        best[box[better]] = d[better]
        angle[box[better]] = math.degrees(math.atan2(dy, dx)) % 180.0
    return angle


def ref_krige_indicator(data, model, xt_m, yt_m, *, max_neighbours=32, direction_deg=None,
                        continuity_ratio=1.0, cells_per_block=65_536):
    tx, ty = np.asarray(xt_m, float).ravel(), np.asarray(yt_m, float).ravel()
    out = np.empty(tx.size)
    if data.value.size == 0:
        out[:] = 0.0
        return out
    groups = []
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
        loc = prepare_locations(data.x_m, data.y_m, m)
        for start in range(0, sel.size, cells_per_block):
            part = sel[start:start + cells_per_block]
            w = weights_at(loc, tx[part], ty[part], max_neighbours=max_neighbours)
            out[part] = w.apply(data.value)
    return np.clip(out, 0.0, 1.0)


def ref_honour_hard_data(cdf, cutoffs_m, x_m, y_m, thickness_m, status, xt_m, yt_m,
                         radius_m, floor, own_target=None):
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
    for i in range(hx.size):
        cols = np.flatnonzero(cutoffs_m > ht[i])
        cells = np.asarray(near[i], int)
        if own[i] >= 0:
            cells = np.unique(np.r_[own[i], cells])
        if cols.size == 0 or cells.size == 0:
            continue
        out[np.ix_(cells, cols)] = np.maximum(out[np.ix_(cells, cols)], floor)
    return out


# ------------------------------------------------------------------ data


def _data(n, seed, p_event=0.3, side_m=3000.0, lattice=False):
    rng = np.random.default_rng(seed)
    if lattice:  # holes on a square lattice: many equal pair lengths and exact collinearity
        k = int(math.ceil(math.sqrt(n)))
        gx, gy = np.meshgrid(np.arange(k) * side_m / k, np.arange(k) * side_m / k)
        x, y = gx.ravel()[:n], gy.ravel()[:n]
    else:
        x, y = rng.uniform(0, side_m, n), rng.uniform(0, side_m * 0.7, n)
    v = (rng.uniform(size=n) < p_event).astype(float)
    return IndicatorData(x, y, v, 5.0)


CASES = [  # (n, seed, share of events, lattice)
    (0, 1, 0.3, False), (1, 2, 1.0, False), (2, 3, 1.0, False), (5, 4, 0.0, False),
    (40, 5, 0.3, False), (120, 6, 0.5, False), (300, 7, 0.15, False), (200, 8, 1.0, False),
    (150, 9, 0.4, True), (64, 10, 1.0, True),
]


# ------------------------------------------------------------------ continuity_segments


@pytest.mark.parametrize(("n", "seed", "p", "lattice"), CASES)
@pytest.mark.parametrize(("max_len", "corridor"), [(900.0, 150.0), (400.0, 0.0),
                                                   (5000.0, 60.0), (0.0, 150.0)])
def test_segments_identical_to_the_pairwise_loop(n, seed, p, lattice, max_len, corridor):
    data = _data(n, seed, p, lattice=lattice)
    got = continuity_segments(data, max_length_m=max_len, corridor_m=corridor)
    ref = ref_continuity_segments(data, max_length_m=max_len, corridor_m=corridor)
    assert got.shape == ref.shape
    assert np.array_equal(got, ref)


def test_segments_with_coincident_and_exactly_spaced_events():
    # two events at one point (no segment between them: shorter than COINCIDENT_M), events
    # exactly max_length apart (kept: the test is length <= max), a blocker exactly on the
    # end of a segment (s = 1, not inside) and one exactly at the corridor (off = corridor,
    # not inside)
    x = np.array([0.0, 0.0, 1000.0, 2000.0, 1000.0, 1500.0])
    y = np.array([0.0, 0.005, 0.0, 0.0, 0.0, 150.0])
    v = np.array([1.0, 1.0, 1.0, 1.0, 0.0, 0.0])
    # the non-event at (1000, 0) sits on the event there: segments through it are blocked
    data = IndicatorData(x, y, v, 5.0)
    for max_len in (1000.0, 2000.0, 999.999):
        got = continuity_segments(data, max_length_m=max_len, corridor_m=150.0)
        ref = ref_continuity_segments(data, max_length_m=max_len, corridor_m=150.0)
        assert np.array_equal(got, ref)
    assert continuity_segments(data, max_length_m=1000.0, corridor_m=150.0).shape[0] > 0


# ------------------------------------------------------------------ local_direction_deg


def _segments(n, seed, side_m=3000.0):
    rng = np.random.default_rng(seed)
    a = rng.uniform(0, side_m, (n, 2))
    b = a + rng.normal(0, 500, (n, 2))
    s = np.column_stack([a, b])
    if n >= 3:
        s[1, 2:] = s[1, :2]  # a segment of zero length
        s[2] = s[0]  # the same segment twice
    if n >= 4:  # another direction from the same end point: the earlier wins the tie there
        s[3, :2] = s[0, :2]
        s[3, 2:] = s[0, :2] + np.array([-300.0, 400.0])
    return s


@pytest.mark.parametrize("n_seg", [0, 1, 3, 25, 200])
@pytest.mark.parametrize("reach", [0.0, 50.0, 300.0, 5000.0])
def test_directions_identical_to_the_loop_over_all_targets(n_seg, reach):
    segs = _segments(n_seg, seed=n_seg + 1)
    rng = np.random.default_rng(11)
    # scattered targets, a lattice of cell centres, and the segments' own end points
    gx, gy = np.meshgrid(np.arange(-500, 3500, 37.5), np.arange(-500, 3000, 37.5))
    tx = np.r_[rng.uniform(-500, 3500, 500), gx.ravel(), segs[:, 0], segs[:, 2]]
    ty = np.r_[rng.uniform(-500, 3000, 500), gy.ravel(), segs[:, 1], segs[:, 3]]
    with np.errstate(invalid="ignore", divide="ignore"):
        got = local_direction_deg(segs, tx, ty, reach)
    ref = ref_local_direction_deg(segs, tx, ty, reach)
    assert np.array_equal(got, ref, equal_nan=True)


def test_directions_with_no_target_one_target_and_coincident_targets():
    segs = _segments(5, seed=3)
    for tx, ty in [(np.array([]), np.array([])), (np.array([1000.0]), np.array([800.0])),
                   (np.full(7, segs[0, 0]), np.full(7, segs[0, 1]))]:
        with np.errstate(invalid="ignore", divide="ignore"):
            got = local_direction_deg(segs, tx, ty, 400.0)
        assert np.array_equal(got, ref_local_direction_deg(segs, tx, ty, 400.0),
                              equal_nan=True)


# ------------------------------------------------------------------ krige_indicator


def _targets(seed, n=700):
    rng = np.random.default_rng(seed)
    return rng.uniform(-200, 3200, n), rng.uniform(-200, 2300, n)


@pytest.mark.parametrize(("n", "seed", "p", "lattice"), CASES)
@pytest.mark.parametrize("model", [
    VariogramModel("exponential", nugget=0.0, psill=0.21, range_m=800.0),
    VariogramModel("spherical", nugget=0.03, psill=0.15, range_m=1200.0),
])
def test_kriged_indicators_equal_the_batched_solves(n, seed, p, lattice, model):
    data = _data(n, seed, p, lattice=lattice)
    xt, yt = _targets(seed)
    rng = np.random.default_rng(seed)
    direction = np.where(rng.uniform(size=xt.size) < 0.5, rng.uniform(0, 180, xt.size), np.nan)
    for kwargs in ({}, {"direction_deg": direction, "continuity_ratio": 4.0},
                   {"direction_deg": direction, "continuity_ratio": 1.0}):
        for k in (1, 8, 32):
            got = krige_indicator(data, model, xt, yt, max_neighbours=k, **kwargs)
            ref = ref_krige_indicator(data, model, xt, yt, max_neighbours=k, **kwargs)
            assert np.allclose(got, ref, rtol=0, atol=1e-12)


def test_kriged_indicators_at_the_data_and_across_blocks():
    # targets on the data themselves (the estimate is the datum) and more targets than one
    # block of the former code
    data = _data(400, 12)
    rng = np.random.default_rng(12)
    xt = np.r_[data.x_m, rng.uniform(0, 3000, 70_000)]
    yt = np.r_[data.y_m, rng.uniform(0, 2100, 70_000)]
    m = VariogramModel("exponential", nugget=0.0, psill=0.2, range_m=700.0)
    got = krige_indicator(data, m, xt, yt, max_neighbours=32)
    ref = ref_krige_indicator(data, m, xt, yt, max_neighbours=32)
    assert np.allclose(got, ref, rtol=0, atol=1e-12)
    assert np.allclose(got[:400], data.value, atol=1e-12)


def test_kriged_indicators_in_projected_coordinates_agree_to_their_own_rounding():
    # Data and targets at UTM-like coordinates (6.7e6 m: one unit in the last place is
    # about 1e-9 m). The former code rotates about the origin, the engine about the data's
    # centre, so distances differ in their last places: the former code's own result moves
    # by about as much when everything is shifted to the origin (checked here), and the new
    # one stays within 1e-10 of it.
    data, (xt, yt) = _data(600, 13, 0.2, side_m=12_000.0), _targets(13, n=2_000)
    xt, yt = xt * 4, yt * 4
    rng = np.random.default_rng(13)
    direction = np.where(rng.uniform(size=xt.size) < 0.5, rng.uniform(0, 180, xt.size), np.nan)
    m = VariogramModel("exponential", nugget=0.0, psill=0.16, range_m=1500.0)
    ox, oy = 548_000.0, 6_712_000.0
    far = IndicatorData(data.x_m + ox, data.y_m + oy, data.value, 5.0)
    for kwargs in ({}, {"direction_deg": direction, "continuity_ratio": 4.0}):
        ref_here = ref_krige_indicator(data, m, xt, yt, **kwargs)
        ref_far = ref_krige_indicator(far, m, xt + ox, yt + oy, **kwargs)
        got_far = krige_indicator(far, m, xt + ox, yt + oy, **kwargs)
        assert np.abs(ref_far - ref_here).max() > 1e-13  # the former code's own rounding
        assert np.allclose(got_far, ref_far, rtol=0, atol=1e-10)
        assert np.allclose(got_far, ref_here, rtol=0, atol=1e-10)


# ------------------------------------------------------------------ honour_hard_data


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("radius", [0.0, 20.0, 250.0])
def test_honoured_cdf_identical_to_the_loop_over_holes(seed, radius):
    rng = np.random.default_rng(seed)
    n = 150
    x, y = rng.uniform(0, 2000, n), rng.uniform(0, 2000, n)
    x[1], y[1] = x[0], y[0]  # two holes at one point
    t = rng.choice([0.0, 0.5, 3.0, 5.0, 8.0, 30.0, np.nan], n)
    status = rng.choice(["full", "lower_bound", "other"], n, p=[0.7, 0.2, 0.1])
    gx, gy = np.meshgrid(np.arange(12.5, 2000, 25.0), np.arange(12.5, 2000, 25.0))
    tx, ty = gx.ravel(), gy.ravel()
    own = np.where(rng.uniform(size=n) < 0.8, rng.integers(0, tx.size, n), -1)
    cut = np.array([1.0, 2.5, 5.0, 10.0])
    cdf = np.sort(rng.uniform(size=(tx.size, cut.size)), axis=1)
    for own_target in (None, own):
        got = honour_hard_data(cdf, cut, x, y, t, status, tx, ty, radius, 0.9, own_target)
        ref = ref_honour_hard_data(cdf, cut, x, y, t, status, tx, ty, radius, 0.9,
                                   own_target)
        assert np.array_equal(got, ref)
    assert not np.array_equal(got, cdf)  # the case raises something


def test_honoured_cdf_without_proving_holes_or_targets():
    cdf = np.full((3, 2), 0.2)
    cut = np.array([1.0, 5.0])
    x = np.array([0.0, 10.0])
    for status, tx in [(np.array(["lower_bound"] * 2), np.array([0.0, 5.0, 10.0])),
                       (np.array(["full"] * 2), np.array([]))]:
        c = cdf[:tx.size]
        got = honour_hard_data(c, cut, x, x, np.array([0.0, 3.0]), status, tx, tx, 20.0, 0.9)
        ref = ref_honour_hard_data(c, cut, x, x, np.array([0.0, 3.0]), status, tx, tx, 20.0,
                                   0.9)
        assert np.array_equal(got, ref)
