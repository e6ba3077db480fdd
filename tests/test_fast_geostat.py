"""The faster ``local_direction_deg`` (aquitardmap.geostat.indicator) and lag classes of the
experimental variogram (aquitardmap.geostat.variogram) give exactly the numbers of the code
they replaced.

Reference (every check below): the former implementations, copied into this file as they
were at commit 072d02f (``ref_local_direction_deg`` with its ``_RefBuckets``;
``ref_pairs``, on ``np.digitize`` and ``np.triu_indices``). Results must be identical, bit
for bit (``np.array_equal``, NaN equal to NaN), with the same dtypes. Two facts of the
reference libraries are also used and named where they are: ``np.digitize(d, edges)`` for
increasing edges is ``np.searchsorted(edges, d, side="right")`` (numpy documentation of
``digitize``), and the condensed order of ``scipy.spatial.distance.pdist`` is that of
``np.triu_indices(n, k=1)`` (scipy documentation of ``squareform``/``pdist``: row-major
upper triangle).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from aquitardmap.geostat import indicator
from aquitardmap.geostat.indicator import local_direction_deg
from aquitardmap.geostat.localkrige import numba_available
from aquitardmap.geostat.variogram import (
    MAX_POINTS_FOR_PAIRS,
    _Pairs,
    default_lags,
    lag_classes,
    pair_indices,
    stable_subset,
)

# the compiled loop when numba is there, and the numpy path always
PATHS = [pytest.param(True, marks=pytest.mark.skipif(not numba_available(),
                                                     reason="numba not installed")),
         False]

# ------------------------------------------------------------------ reference versions


def ref_local_direction_deg(segments, xt_m, yt_m, reach_m):
    """``local_direction_deg`` at commit 072d02f (warnings of zero-length segments
    silenced)."""
    tx, ty = np.asarray(xt_m, float).ravel(), np.asarray(yt_m, float).ravel()
    angle = np.full(tx.size, np.nan)
    best = np.full(tx.size, np.inf)
    segs = np.asarray(segments, float).reshape(-1, 4)
    if tx.size == 0 or segs.shape[0] == 0:
        return angle
    buckets = _RefBuckets(tx, ty, reach_m)
    for x0, y0, x1, y1 in segs.tolist():
        dx, dy = x1 - x0, y1 - y0
        lo_x, hi_x = min(x0, x1) - reach_m, max(x0, x1) + reach_m
        lo_y, hi_y = min(y0, y1) - reach_m, max(y0, y1) + reach_m
        box = buckets.within(lo_x, hi_x, lo_y, hi_y)
        if box.size == 0:
            continue
        with np.errstate(divide="ignore", invalid="ignore"):
            s = np.clip(((tx[box] - x0) * dx + (ty[box] - y0) * dy) / (dx * dx + dy * dy),
                        0, 1)
        d = np.hypot(tx[box] - x0 - s * dx, ty[box] - y0 - s * dy)
        better = (d < best[box]) & (d <= reach_m)
        best[box[better]] = d[better]
        angle[box[better]] = math.degrees(math.atan2(dy, dx)) % 180.0
    return angle


class _RefBuckets:
    """``_TargetBuckets`` at commit 072d02f."""

    def __init__(self, x_m, y_m, side_m):
        self.x, self.y = x_m, y_m
        finite = np.isfinite(x_m) & np.isfinite(y_m)
        self.x0 = float(x_m[finite].min()) if finite.any() else 0.0
        self.y0 = float(y_m[finite].min()) if finite.any() else 0.0
        span = max(float(np.ptp(x_m[finite])) if finite.any() else 0.0,
                   float(np.ptp(y_m[finite])) if finite.any() else 0.0, 1.0)
        self.side = max(float(side_m), span / max(2.0 * math.sqrt(x_m.size), 1.0), 1e-6)
        ix = np.where(finite, np.floor((x_m - self.x0) / self.side), 0).astype(np.int64)
        iy = np.where(finite, np.floor((y_m - self.y0) / self.side), 0).astype(np.int64)
        self.nx, self.ny = int(ix.max()) + 1, int(iy.max()) + 1
        key = iy * self.nx + ix
        self.order = np.argsort(key, kind="stable")
        self.start = np.searchsorted(key[self.order], np.arange(self.nx * self.ny + 1))
        self.finite = finite

    def within(self, lo_x, hi_x, lo_y, hi_y):
        c0 = max(int(math.floor((lo_x - self.x0) / self.side)) - 1, 0)
        c1 = min(int(math.floor((hi_x - self.x0) / self.side)) + 1, self.nx - 1)
        r0 = max(int(math.floor((lo_y - self.y0) / self.side)) - 1, 0)
        r1 = min(int(math.floor((hi_y - self.y0) / self.side)) + 1, self.ny - 1)
        if c0 > c1 or r0 > r1:
            return np.empty(0, dtype=np.int64)
        rows = np.arange(r0, r1 + 1) * self.nx
        lo, hi = self.start[rows + c0], self.start[rows + c1 + 1]
        n = hi - lo
        if n.sum() == 0:
            return np.empty(0, dtype=np.int64)
        idx = self.order[np.repeat(lo - np.cumsum(np.r_[0, n[:-1]]), n)
                         + np.arange(int(n.sum()))]
        tx, ty = self.x[idx], self.y[idx]
        inside = (tx >= lo_x) & (tx <= hi_x) & (ty >= lo_y) & (ty <= hi_y)
        return np.sort(idx[inside])


def ref_pairs(x_m, y_m, values, *, n_lags, max_lag_m, max_lag_fraction, seed, directions):
    """``_Pairs.of`` at commit 072d02f, as (which, d, sq, theta)."""
    from scipy.spatial.distance import pdist

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
        return empty, np.array([]), np.array([]), None
    edges = np.linspace(0.0, max_lag_m, n_lags + 1)
    which = np.digitize(d, edges) - 1
    keep = np.flatnonzero((which >= 0) & (which < n_lags))
    theta = None
    if directions:
        i, j = np.triu_indices(x.size, k=1)
        i, j = i[keep], j[keep]
        theta = np.rad2deg(np.arctan2(y[j] - y[i], x[j] - x[i]))
    return which[keep], d[keep], sq[keep], theta


def _same(a: np.ndarray, b: np.ndarray) -> bool:
    return a.dtype == b.dtype and a.shape == b.shape and np.array_equal(a, b, equal_nan=True)


# ------------------------------------------------------------------ local_direction_deg


def _segments(n, seed, side_m=3000.0, origin=(0.0, 0.0)):
    """Random segments of about 0.1–2 km, with the awkward cases: zero length, the same
    segment twice, two segments from one end point, a segment reversed, an axis-parallel
    pair (targets midway are tied), and lengths whose square underflows to 0."""
    rng = np.random.default_rng(seed)
    a = rng.uniform(0, side_m, (n, 2))
    b = a + rng.normal(0, 700, (n, 2))
    s = np.column_stack([a, b])
    if n >= 8:
        s[1, 2:] = s[1, :2]  # zero length
        s[2] = s[0]  # the same segment again (later: loses every tie)
        s[3, :2] = s[0, :2]
        s[3, 2:] = s[0, :2] + np.array([-300.0, 400.0])
        s[4] = s[5, [2, 3, 0, 1]]  # segment 5 reversed
        s[6] = (500.0, 1000.0, 1500.0, 1000.0)
        s[7] = (500.0, 1400.0, 1500.0, 1400.0)  # cells at y = 1200 are tied between 6 and 7
    if n >= 10:
        s[8, 2:] = s[8, :2] + np.array([1e-200, 0.0])  # dx² + dy² underflows: s = ±inf
        s[9, 2:] = s[9, :2] + np.array([1e-160, -1e-170])
    return s + np.array([origin[0], origin[1], origin[0], origin[1]])


def _targets(segs, reach, seed, origin=(0.0, 0.0)):
    """Scattered targets, a 25 m lattice of cell centres and corners, the segments' end
    points, the corners and edges of their grown boxes, and points exactly ``reach``
    (and one unit in the last place more or less) from segment ends."""
    rng = np.random.default_rng(seed)
    ox, oy = origin
    gx, gy = np.meshgrid(np.arange(-500, 3500, 25.0), np.arange(-500, 3000, 25.0))
    parts_x = [rng.uniform(-500, 3500, 400) + ox, gx.ravel() + ox, gx.ravel()[::7] + 12.5 + ox]
    parts_y = [rng.uniform(-500, 3000, 400) + oy, gy.ravel() + oy, gy.ravel()[::7] + 12.5 + oy]
    if len(segs):
        lo_x = np.minimum(segs[:, 0], segs[:, 2]) - reach
        hi_x = np.maximum(segs[:, 0], segs[:, 2]) + reach
        lo_y = np.minimum(segs[:, 1], segs[:, 3]) - reach
        hi_y = np.maximum(segs[:, 1], segs[:, 3]) + reach
        mid_y = 0.5 * (segs[:, 1] + segs[:, 3])
        mid_x = 0.5 * (segs[:, 0] + segs[:, 2])
        up = segs[:, 1] + reach
        parts_x += [segs[:, 0], segs[:, 2], lo_x, hi_x, lo_x, hi_x, lo_x, mid_x,
                    np.nextafter(lo_x, -np.inf), np.nextafter(hi_x, np.inf), segs[:, 0],
                    segs[:, 0], segs[:, 0]]
        parts_y += [segs[:, 1], segs[:, 3], lo_y, hi_y, hi_y, lo_y, mid_y, hi_y, mid_y, mid_y,
                    up, np.nextafter(up, np.inf), np.nextafter(up, -np.inf)]
    return np.concatenate(parts_x), np.concatenate(parts_y)


@pytest.mark.parametrize("accelerate", PATHS)
@pytest.mark.parametrize("n_seg", [0, 1, 2, 10, 60, 300])
@pytest.mark.parametrize("reach", [0.0, 25.0, 200.0, 1000.0, 6000.0, -50.0])
def test_directions_identical_to_the_former_code(accelerate, n_seg, reach):
    segs = _segments(n_seg, seed=n_seg + 7)
    tx, ty = _targets(segs, reach, seed=n_seg)
    got = local_direction_deg(segs, tx, ty, reach, accelerate=accelerate)
    ref = ref_local_direction_deg(segs, tx, ty, reach)
    assert _same(got, ref)
    if n_seg >= 10 and reach >= 200.0:
        assert np.isfinite(got).sum() > 1000  # the case does direct many cells


@pytest.mark.parametrize("accelerate", PATHS)
def test_directions_in_projected_coordinates_and_shuffled_targets(accelerate):
    # UTM-like coordinates (one unit in the last place is about 1e-9 m there), the targets
    # in random order with duplicates, and a reach of one hole spacing
    origin = (512_000.0, 6_704_000.0)
    segs = _segments(400, seed=3, side_m=3000.0, origin=origin)
    tx, ty = _targets(segs, 350.0, seed=4, origin=origin)
    perm = np.random.default_rng(5).permutation(tx.size)
    tx, ty = np.r_[tx[perm], tx[:500]], np.r_[ty[perm], ty[:500]]
    for reach in (350.0, 350.000001, 1500.0):
        got = local_direction_deg(segs, tx, ty, reach, accelerate=accelerate)
        assert _same(got, ref_local_direction_deg(segs, tx, ty, reach))


@pytest.mark.parametrize("accelerate", PATHS)
def test_directions_at_exact_distances_and_ties(accelerate):
    # a horizontal segment 0..1000 at y = 0 and a parallel one at y = 600, reach 300:
    # targets at y = 300 exactly (on both reaches: tied, the first segment wins), one unit
    # in the last place either side, on the box corners, beyond the ends at exactly the
    # reach (s clipped to 0 or 1), and the second segment listed first in a second run
    segs = np.array([[0.0, 0.0, 1000.0, 0.0], [1000.0, 600.0, 0.0, 600.0],
                     [0.0, 0.0, 1000.0, 1000.0], [500.0, 300.0, 500.0, 300.0]])
    r = 300.0
    ys = np.array([r, np.nextafter(r, 0), np.nextafter(r, 1e9), -r, np.nextafter(-r, -1e9),
                   0.0, 600.0 + r, 600.0 - r, 450.0])
    xs = np.array([-r, np.nextafter(-r, -1e9), 0.0, 0.5, 500.0, 1000.0, 1000.0 + r,
                   np.nextafter(1000.0 + r, 1e9), 1212.0])
    gx, gy = np.meshgrid(xs, ys)
    tx, ty = gx.ravel(), gy.ravel()
    for order in ([0, 1, 2, 3], [1, 0, 3, 2], [3, 2, 1, 0]):
        for reach in (r, np.nextafter(r, 0), 0.0):
            got = local_direction_deg(segs[order], tx, ty, reach, accelerate=accelerate)
            ref = ref_local_direction_deg(segs[order], tx, ty, reach)
            assert _same(got, ref)
    # hand check of the rule (nearest segment, a tie to the earlier one; the brief's
    # definition, common practice): (500, 300) is exactly 300 m from the horizontal
    # segment at y = 0 (0°) and from the vertical one at x = 800 (90°)
    a, b = [0.0, 0.0, 1000.0, 0.0], [800.0, -1000.0, 800.0, 1000.0]
    for pair, want in (([a, b], 0.0), ([b, a], 90.0)):
        one = local_direction_deg(np.array(pair), np.array([500.0, 500.0]),
                                  np.array([300.0, 301.0]), r, accelerate=accelerate)
        assert one[0] == want and one[1] == 90.0  # (500, 301): 301 m from a, 300 m from b


@pytest.mark.parametrize("accelerate", PATHS)
def test_directions_with_non_finite_targets_and_segments(accelerate):
    segs = _segments(20, seed=9)
    tx, ty = _targets(segs, 300.0, seed=9)
    tx, ty = tx.copy(), ty.copy()
    tx[::97], ty[5::89] = np.nan, np.inf
    tx[3::101] = -np.inf
    # a segment with one NaN end: its box is still finite (min/max keep the other end)
    segs_nan = segs.copy()
    segs_nan[4, 2] = np.nan
    segs_nan[6, 3] = np.nan
    for s in (segs, segs_nan):
        got = local_direction_deg(s, tx, ty, 300.0, accelerate=accelerate)
        assert _same(got, ref_local_direction_deg(s, tx, ty, 300.0))
    # all targets non-finite, one target, coincident targets, no target
    for ttx, tty in [(np.full(5, np.nan), np.zeros(5)), (np.array([1000.0]), np.array([800.0])),
                     (np.full(7, segs[0, 0]), np.full(7, segs[0, 1])),
                     (np.array([]), np.array([]))]:
        got = local_direction_deg(segs, ttx, tty, 400.0, accelerate=accelerate)
        assert _same(got, ref_local_direction_deg(segs, ttx, tty, 400.0))


@pytest.mark.parametrize("accelerate", PATHS)
def test_directions_raise_as_before_on_boxes_that_cannot_be_placed(accelerate):
    segs = _segments(12, seed=2)
    tx, ty = _targets(segs, 100.0, seed=2)
    bad_start = segs.copy()
    bad_start[3, 0] = np.nan  # min(nan, x1) is nan: a NaN box
    bad_end = segs.copy()
    bad_end[6, 3] = np.inf  # max(y0, inf) is inf: an infinite box
    # (an infinite reach makes the former buckets' side infinite: -inf / inf is NaN)
    for s, reach, err in [(segs, np.inf, ValueError), (segs, np.nan, ValueError),
                          (bad_start, 100.0, ValueError), (bad_end, 100.0, OverflowError)]:
        with pytest.raises(err), np.errstate(invalid="ignore"):  # (its NaN-side casts)
            ref_local_direction_deg(s, tx, ty, reach)
        with pytest.raises(err):
            local_direction_deg(s, tx, ty, reach, accelerate=accelerate)


def test_numpy_path_when_numba_is_absent(monkeypatch):
    # numba reported missing: the default takes the numpy path (the compiled loop is not
    # touched) and gives the former numbers; asking for the compiled loop is an error
    segs = _segments(80, seed=21)
    tx, ty = _targets(segs, 400.0, seed=21)
    monkeypatch.setattr(indicator, "numba_available", lambda: False)

    def no_compiled():
        raise AssertionError("the compiled loop was used")

    monkeypatch.setattr(indicator, "_compiled_directions", no_compiled)
    got = local_direction_deg(segs, tx, ty, 400.0)
    assert _same(got, ref_local_direction_deg(segs, tx, ty, 400.0))
    with pytest.raises(RuntimeError):
        local_direction_deg(segs, tx, ty, 400.0, accelerate=True)


def test_environment_switch_disables_the_compiled_loop(monkeypatch):
    # AQUITARDMAP_NUMBA=0 (localkrige.numba_available) also turns this loop off
    monkeypatch.setenv("AQUITARDMAP_NUMBA", "0")

    def no_compiled():
        raise AssertionError("the compiled loop was used")

    monkeypatch.setattr(indicator, "_compiled_directions", no_compiled)
    segs = _segments(15, seed=1)
    tx, ty = _targets(segs, 250.0, seed=1)
    assert _same(local_direction_deg(segs, tx, ty, 250.0),
                 ref_local_direction_deg(segs, tx, ty, 250.0))


@pytest.mark.skipif(not numba_available(), reason="numba not installed")
def test_compiled_and_numpy_paths_agree_on_a_larger_grid():
    # a 25 m grid of 6 x 4 km at projected coordinates, 300 segments of 1-3 km (the shape
    # of a real run, smaller), reach 1500 m: both paths and the former code agree
    rng = np.random.default_rng(31)
    ox, oy = 431_000.0, 5_802_000.0
    gx, gy = np.meshgrid(np.arange(12.5, 6000, 25.0) + ox, np.arange(12.5, 4000, 25.0) + oy)
    tx, ty = gx.ravel(), gy.ravel()
    a = rng.uniform(0, 1, (300, 2)) * [6000, 4000] + [ox, oy]
    length, th = rng.uniform(1000, 3000, 300), rng.uniform(0, 2 * np.pi, 300)
    segs = np.column_stack([a, a + np.column_stack([length * np.cos(th), length * np.sin(th)])])
    ref = ref_local_direction_deg(segs, tx, ty, 1500.0)
    assert _same(local_direction_deg(segs, tx, ty, 1500.0, accelerate=True), ref)
    assert _same(local_direction_deg(segs, tx, ty, 1500.0, accelerate=False), ref)


# ------------------------------------------------------------------ lag classes


def _digitize_classes(d, edges):
    which = np.digitize(d, edges) - 1
    keep = np.flatnonzero((which >= 0) & (which < edges.size - 1))
    return which[keep], keep


@pytest.mark.parametrize("n_lags", [1, 2, 3, 12, 40, 97])
@pytest.mark.parametrize("max_lag", [1.0, 0.1, 1234.5678, 20_000.0 / 3.0, 1e-300, 5e-324,
                                     3e300])
def test_lag_classes_equal_digitize_on_and_around_the_edges(n_lags, max_lag):
    edges = np.linspace(0.0, max_lag, n_lags + 1)
    rng = np.random.default_rng(n_lags)
    d = np.concatenate([
        edges, np.nextafter(edges, np.inf), np.nextafter(edges, -np.inf),
        edges * (1 + 1e-15), edges * (1 - 1e-15),
        rng.uniform(0, 1.2 * max_lag, 2000), rng.uniform(0, max_lag, 2000)[::-1],
        [0.0, -0.0, -1.0, np.nan, np.inf, -np.inf, max_lag, 2 * max_lag, 5e-324]])
    d = d[rng.permutation(d.size)]
    got_w, got_k = lag_classes(d, edges)
    ref_w, ref_k = _digitize_classes(d, edges)
    assert _same(got_w, ref_w) and _same(got_k, ref_k)


def test_lag_classes_with_edges_digitize_alone_handles():
    d = np.array([0.0, 0.5, 1.0, 1.5, 2.0, 2.5, np.nan])
    for edges in (np.array([0.0, 1.0, 1.0, 2.0]), np.array([0.0]), np.array([0.5, 1.0, 3.0]),
                  np.array([0.0, np.nan]), np.array([-1.0, 0.0, 2.0])):
        got_w, got_k = lag_classes(d, edges)
        ref_w, ref_k = _digitize_classes(d, edges)
        assert _same(got_w, ref_w) and _same(got_k, ref_k)
    for edges in (np.array([0.0, 2.0, 1.0]),):  # not monotonic: digitize's own error
        with pytest.raises(ValueError):
            np.digitize(d, edges)
        with pytest.raises(ValueError):
            lag_classes(d, edges)


@settings(max_examples=300, deadline=None, derandomize=True, database=None)
@given(n_lags=st.integers(1, 60),
       max_lag=st.floats(1e-300, 1e300, allow_nan=False, allow_infinity=False),
       frac=st.lists(st.floats(0.0, 1.3, allow_nan=False), min_size=1, max_size=60))
def test_lag_classes_equal_digitize_for_drawn_edges(n_lags, max_lag, frac):
    edges = np.linspace(0.0, max_lag, n_lags + 1)
    f = np.array(frac)
    d = np.concatenate([f * max_lag, edges[np.minimum((f * n_lags).astype(int), n_lags)]])
    got_w, got_k = lag_classes(d, edges)
    ref_w, ref_k = _digitize_classes(d, edges)
    assert _same(got_w, ref_w) and _same(got_k, ref_k)


@pytest.mark.parametrize("n", [0, 1, 2, 3, 7, 50, 401])
def test_pair_indices_are_the_pdist_order_of_triu_indices(n):
    i_all, j_all = np.triu_indices(n, k=1)
    rng = np.random.default_rng(n)
    m = n * (n - 1) // 2
    for pairs in (np.arange(m), np.flatnonzero(rng.uniform(size=m) < 0.3),
                  np.array([], dtype=np.intp)):
        i, j = pair_indices(n, pairs)
        assert _same(i, i_all[pairs]) and _same(j, j_all[pairs])


# ------------------------------------------------------------------ _Pairs.of


def _points(n, seed, kind):
    rng = np.random.default_rng(seed)
    if kind == "lattice":  # many equal distances, some exactly on lag edges
        k = int(math.ceil(math.sqrt(n)))
        gx, gy = np.meshgrid(np.arange(k) * 100.0, np.arange(k) * 100.0)
        x, y = gx.ravel()[:n], gy.ravel()[:n]
    elif kind == "projected":
        x = rng.uniform(0, 40_000, n) + 500_000.0
        y = rng.uniform(0, 28_000, n) + 6_700_000.0
    else:
        x, y = rng.uniform(0, 5000, n), rng.uniform(0, 3000, n)
    if n >= 4:  # two holes at one point (distance 0, class 0)
        x[1], y[1] = x[0], y[0]
    z = rng.normal(10, 3, n)
    return x, y, z


def _check_pairs(x, y, z, **kw):
    got = _Pairs.of(x, y, z, **kw)
    ref = ref_pairs(x, y, z, **kw)
    assert _same(got.which, ref[0]) and _same(got.d, ref[1]) and _same(got.sq, ref[2])
    if ref[3] is None:
        assert got.theta_deg is None
    else:
        assert _same(got.theta_deg, ref[3])
    return got


@pytest.mark.parametrize(("n", "kind"), [(0, "random"), (1, "random"), (2, "random"),
                                         (5, "random"), (120, "random"), (400, "lattice"),
                                         (900, "projected"), (MAX_POINTS_FOR_PAIRS + 300,
                                                              "projected")])
@pytest.mark.parametrize("directions", [False, True])
def test_pairs_identical_to_the_former_code(n, kind, directions):
    x, y, z = _points(n, n + 1, kind)
    n_lags, max_lag = default_lags(x, y)
    for kw in (dict(n_lags=n_lags, max_lag_m=max_lag), dict(n_lags=12, max_lag_m=None),
               dict(n_lags=1, max_lag_m=None), dict(n_lags=7, max_lag_m=1e9),
               dict(n_lags=5, max_lag_m=0.0), dict(n_lags=0, max_lag_m=500.0)):
        _check_pairs(x, y, z, max_lag_fraction=0.5, seed=0, directions=directions, **kw)


@pytest.mark.parametrize("directions", [False, True])
def test_pairs_with_distances_exactly_on_the_lag_edges(directions):
    # points on the x axis at the edges themselves: sqrt(x²) = |x| exactly in IEEE
    # arithmetic (common practice), so pair distances to the origin are the edges
    for n_lags, max_lag in ((12, 1200.0), (40, 7777.7), (3, 0.3)):
        edges = np.linspace(0.0, max_lag, n_lags + 1)
        x = np.r_[0.0, edges, np.nextafter(edges, -np.inf)[1:], 0.5 * max_lag]
        y = np.zeros_like(x)
        z = np.arange(x.size, dtype=float)
        got = _check_pairs(x, y, z, n_lags=n_lags, max_lag_m=max_lag, max_lag_fraction=0.5,
                           seed=0, directions=directions)
        on_edge = np.isin(got.d, edges[1:-1])
        assert on_edge.any()  # distances on inner edges do occur here ...
        # ... and each is in the class that starts there (digitize: edges[c] <= d)
        assert np.array_equal(edges[got.which[on_edge]], got.d[on_edge])
