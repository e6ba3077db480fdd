"""Probabilities of thin and absent clay with inequality data (aquitardmap.geostat.probability)."""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import CRS
from scipy.stats import norm, truncnorm
from shapely.geometry import box

from aquitardmap.geostat.kriging import krige_points
from aquitardmap.geostat.probability import (
    censored_data,
    gibbs_draws,
    thickness_probabilities,
    truncated_normal,
)
from aquitardmap.geostat.variogram import VariogramModel
from aquitardmap.grid import make_grid

CRS_M = CRS.from_epsg(32632)
MODEL = VariogramModel("spherical", nugget=0.5, psill=30.0, range_m=1200.0)


@pytest.mark.parametrize("mean, sd, low, high", [
    (0.0, 1.0, 0.5, np.inf),       # upper tail
    (2.0, 0.5, -np.inf, 1.0),      # lower tail, 2 SD below
    (0.0, 1.0, 6.0, np.inf),       # far upper tail (mirrored internally)
    (10.0, 3.0, 4.0, 9.0),         # two-sided
])
def test_truncated_normal_matches_scipy_truncnorm(mean, sd, low, high):
    # Reference: scipy.stats.truncnorm mean and variance of the same truncated normal; the
    # sample of 40 000 draws must agree within 4 standard errors.
    rng = np.random.default_rng(1)
    x = truncated_normal(rng, np.full(40_000, mean), sd, low, high)
    assert np.all((x >= low) & (x <= high))
    a, b = (low - mean) / sd, (high - mean) / sd
    ref_mean = truncnorm.mean(a, b, loc=mean, scale=sd)
    ref_var = truncnorm.var(a, b, loc=mean, scale=sd)
    assert x.mean() == pytest.approx(ref_mean, abs=4 * np.sqrt(ref_var / x.size))
    assert x.var() == pytest.approx(ref_var, rel=0.05)


def _grid():
    return make_grid(box(0, 0, 3000, 3000), 100.0, CRS_M)


def _full_holes(seed=5, mean=20.0):
    rng = np.random.default_rng(seed)
    gx, gy = np.meshgrid(np.linspace(150, 2850, 5), np.linspace(150, 2850, 5))
    x, y = gx.ravel(), gy.ravel()
    return x, y, mean + rng.normal(0, 2.0, x.size)


def test_without_inequalities_probability_is_the_gaussian_kriging_one():
    # Reference: with only positive full thicknesses there is nothing to draw, and
    # P(T < t) = Φ((t − Z*)/σ) with Z*, σ² from ordinary kriging (pykrige via krige_points;
    # scipy.stats.norm for Φ).
    g = _grid()
    x, y, t = _full_holes()
    res = thickness_probabilities(x, y, t, np.full(t.size, "full"), MODEL, g,
                                  {"thin": 18.0}, n_draws=8)
    xs, ys = g.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    k = krige_points(x, y, t, MODEL, xx[g.mask], yy[g.mask], max_neighbours=64)
    sd = np.sqrt(k.variance)
    with np.errstate(divide="ignore", invalid="ignore"):
        ref = np.where(sd > 0, norm.cdf((18.0 - k.estimate) / sd), k.estimate < 18.0)
    assert np.allclose(res.p_below["thin"][g.mask], ref, rtol=1e-8, atol=1e-10)
    assert res.n_absent == 0 and res.n_lower_bounds == 0


def test_one_censored_site_is_drawn_from_its_truncated_conditional():
    # With a single inequality the Gibbs sampler draws exactly from the normal given the
    # other data (kriging estimate and variance, from krige_points) truncated to the
    # interval; reference moments from scipy.stats.truncnorm, 4 standard errors.
    x, y, t = _full_holes()
    data = censored_data(np.append(x, 1000.0), np.append(y, 1100.0), np.append(t, 21.0),
                         np.array(["full"] * t.size + ["lower_bound"]))
    draws = gibbs_draws(data, MODEL, n_draws=4000, sweeps=2,
                        rng=np.random.default_rng(3))
    k = krige_points(x, y, t, MODEL, np.array([1000.0]), np.array([1100.0]),
                     max_neighbours=32)
    m, s = k.estimate[0], np.sqrt(k.variance[0])
    a = (21.0 - m) / s
    ref_mean = truncnorm.mean(a, np.inf, loc=m, scale=s)
    ref_sd = truncnorm.std(a, np.inf, loc=m, scale=s)
    assert draws.shape == (1, 4000)
    assert draws.min() >= 21.0
    assert draws.mean() == pytest.approx(ref_mean, abs=4 * ref_sd / np.sqrt(4000))


def test_window_holes_are_upper_bounds_and_draws_respect_every_interval():
    x, y, t = _full_holes()
    status = np.array(["full"] * t.size)
    t = t.copy()
    t[[6, 7]] = 0.0                           # two holes prove the clay absent
    xb, yb = np.array([2000.0, 2100.0]), np.array([2000.0, 2050.0])
    data = censored_data(np.concatenate([x, xb]), np.concatenate([y, yb]),
                         np.concatenate([t, [12.0, 25.0]]),
                         np.concatenate([status, ["lower_bound", "lower_bound"]]))
    assert data.n_absent == 2 and data.n_lower_bounds == 2 and data.x_m.size == 23
    d = gibbs_draws(data, MODEL, n_draws=200, rng=np.random.default_rng(0))
    assert np.all(d[:2] <= 0.0)
    assert np.all(d[2] >= 12.0) and np.all(d[3] >= 25.0)


def test_holes_stopped_in_thick_clay_do_not_make_thin_clay_likely():
    # The classic error (DOMAIN §3, common practice): holes that stop at 4 m inside 20 m of
    # clay. As lower bounds they leave P(thin) near 0; kriged as thicknesses they would make
    # thin clay near certain there.
    g = _grid()
    x, y, t = _full_holes()
    rng = np.random.default_rng(2)
    px, py = rng.uniform(1000, 2000, 12), rng.uniform(1000, 2000, 12)
    xa, ya = np.concatenate([x, px]), np.concatenate([y, py])
    ta = np.concatenate([t, np.full(12, 4.0)])
    honest = thickness_probabilities(
        xa, ya, ta, np.array(["full"] * t.size + ["lower_bound"] * 12), MODEL, g,
        {"thin": 5.0}, n_draws=32)
    naive = thickness_probabilities(xa, ya, ta, np.full(ta.size, "full"), MODEL, g,
                                    {"thin": 5.0}, n_draws=8)
    r, c = g.rowcol(px, py)
    assert np.all(honest.p_below["thin"][r, c] < 0.05)
    assert np.all(naive.p_below["thin"][r, c] > 0.25)
    assert naive.p_below["thin"][r, c].mean() > 0.5


def test_a_cluster_of_window_holes_makes_a_likely_window_and_nothing_far_away():
    g = _grid()
    x, y, t = _full_holes()
    wx = np.array([1050.0, 1150.0, 1250.0, 1100.0, 1200.0])  # between full holes
    wy = np.array([1150.0, 1100.0, 1150.0, 1250.0, 1250.0])
    xa, ya = np.concatenate([x, wx]), np.concatenate([y, wy])
    ta = np.concatenate([t, np.zeros(5)])
    res = thickness_probabilities(xa, ya, ta, np.full(ta.size, "full"), MODEL, g,
                                  {"window": 1.0, "thin": 5.0}, n_draws=48, seed=4)
    pw, pt = res.p_below["window"], res.p_below["thin"]
    r, c = g.rowcol(np.array([1150.0]), np.array([1180.0]))
    assert pw[r[0], c[0]] > 0.9
    far_r, far_c = g.rowcol(np.array([300.0]), np.array([2700.0]))
    assert pt[far_r[0], far_c[0]] < 0.01
    # Probabilities of nested events are ordered cell by cell: P(T < 1) <= P(T < 5).
    m = g.mask
    assert np.all(pw[m] <= pt[m] + 1e-12)
    assert np.all((pw[m] >= 0) & (pt[m] <= 1))
    assert np.all(np.isnan(pw[~m]))
    assert res.n_absent == 5


def test_same_seed_same_grids_and_threshold_grids_accepted():
    g = _grid()
    x, y, t = _full_holes()
    t = t.copy()
    t[3] = 0.0
    status = np.full(t.size, "full")
    thr = np.full(g.mask.shape, 5.0)
    thr[:, :10] = 25.0  # a threshold that varies by cell (e.g. a cut by excavations)
    a = thickness_probabilities(x, y, t, status, MODEL, g, {"thin": thr}, seed=9, n_draws=16)
    b = thickness_probabilities(x, y, t, status, MODEL, g, {"thin": thr}, seed=9, n_draws=16)
    assert np.array_equal(a.p_below["thin"], b.p_below["thin"], equal_nan=True)
    assert np.nanmean(a.p_below["thin"][:, :10]) > np.nanmean(a.p_below["thin"][:, 12:])


def test_coincident_inequality_and_full_hole_keeps_the_full_thickness():
    data = censored_data(np.array([0.0, 0.0, 500.0, 500.0]), np.array([0.0, 0.0, 0.0, 0.0]),
                         np.array([12.0, 6.0, 3.0, 8.0]),
                         np.array(["full", "lower_bound", "lower_bound", "lower_bound"]))
    assert data.x_m.size == 1 and data.cx_m.size == 1
    assert data.low_m[0] == 8.0  # the tighter of two bounds at one place
    assert any("share a location" in n for n in data.notes)


def test_cells_in_blocks_give_the_same_grids(monkeypatch):
    # Memory is bounded by computing the weights block by block; the numbers must not
    # depend on the block size (same kriging systems, same draws).
    import aquitardmap.geostat.probability as prob

    g = _grid()
    x, y, t = _full_holes()
    status = np.full(t.size, "full")
    t = t.copy()
    t[:3] = 0.0  # three holes proving a window: draws are used
    status[5:8] = "lower_bound"
    one = thickness_probabilities(x, y, t, status, MODEL, g, {"thin": 18.0, "window": 0.0},
                                  n_draws=8, seed=3)
    monkeypatch.setattr(prob, "CELLS_PER_BLOCK", 7)
    many = thickness_probabilities(x, y, t, status, MODEL, g, {"thin": 18.0, "window": 0.0},
                                   n_draws=8, seed=3)
    for k in ("thin", "window"):
        assert np.allclose(one.p_below[k], many.p_below[k], rtol=1e-12, atol=1e-14,
                           equal_nan=True)
    assert np.nanmax(one.p_below["window"]) > 0.5


def _holes_with_every_kind_and_ground():
    """25 holes (3 proving a window, 3 stopped in the clay) and a ground elevation (m) that
    rises to the east, at the holes and on :func:`_grid`."""
    x, y, t = _full_holes()
    status = np.full(t.size, "full")
    t = t.copy()
    t[:3] = 0.0
    status[5:8] = "lower_bound"
    g = _grid()
    xs, ys = g.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    ground = 120.0 + 0.01 * x + 3.0 * np.sin(y / 700.0)
    grid_ground = 120.0 + 0.01 * xx + 3.0 * np.sin(yy / 700.0)
    return g, x, y, t, status, ground, grid_ground


@pytest.mark.parametrize("with_drift", [False, True])
def test_block_size_leaves_grids_identical_with_and_without_drift(monkeypatch, with_drift):
    # Invariance: a cell's kriging system (neighbours, semivariances, centred and scaled
    # drift) does not depend on the block it is computed in; the drift is centred by the
    # data's mean and SD, never a block's. Small neighbourhoods so they differ across blocks.
    import aquitardmap.geostat.probability as prob

    g, x, y, t, status, ground, grid_ground = _holes_with_every_kind_and_ground()
    drift = {"drift": ground, "grid_drift": grid_ground} if with_drift else {}

    def run():
        return thickness_probabilities(x, y, t, status, MODEL, g,
                                       {"thin": 18.0, "window": 0.0}, n_draws=4, seed=11,
                                       max_neighbours=12, **drift).p_below

    monkeypatch.setattr(prob, "CELLS_PER_BLOCK", 1_000_000)
    whole = run()
    monkeypatch.setattr(prob, "CELLS_PER_BLOCK", 100)
    blocks = run()
    for k in ("thin", "window"):
        assert np.array_equal(np.isnan(whole[k]), np.isnan(blocks[k]))
        assert np.nanmax(np.abs(whole[k] - blocks[k])) <= 1e-12
    assert np.nanmax(whole["window"]) > 0.2  # the window holes matter


@pytest.mark.parametrize("with_drift", [False, True])
def test_data_semivariance_table_is_built_once_per_grid(monkeypatch, with_drift):
    # The n × n table of semivariances between the data is the costly per-data setup; it
    # must be built once for the whole grid, not once per block of cells.
    import aquitardmap.geostat.probability as prob
    from aquitardmap.geostat.variogram import VariogramModel as Model

    g, x, y, t, status, ground, grid_ground = _holes_with_every_kind_and_ground()
    data = censored_data(x, y, t, status, ground if with_drift else None)
    draws = gibbs_draws(data, MODEL, n_draws=4, max_neighbours=8,
                        rng=np.random.default_rng(2))
    n = data.x_m.size + data.cx_m.size
    original = Model.gamma
    square = []

    def counting_gamma(self, h_m):
        if np.shape(h_m) == (n, n):
            square.append(1)
        return original(self, h_m)

    monkeypatch.setattr(Model, "gamma", counting_gamma)
    monkeypatch.setattr(prob, "CELLS_PER_BLOCK", 100)
    n_cells = int(g.mask.sum())
    assert n_cells > 3 * 100 and n_cells % 100 != n  # several blocks; none of n cells
    prob.probability_below_grid(data, draws, MODEL, g, {"thin": 18.0}, max_neighbours=12,
                                grid_drift=grid_ground if with_drift else None)
    assert len(square) == 1


def test_window_holes_are_drawn_between_the_floor_and_zero():
    # A cluster of 9 holes proving a window inside thick clay: without a floor the holes pull
    # one another below zero; with the floor every draw stays in [-floor, 0] (the interval
    # of a truncated normal: common practice), and the counts of each kind are unchanged.
    x, y, t = _full_holes()
    cx, cy = np.meshgrid([1060.0, 1160.0, 1260.0], [1060.0, 1160.0, 1260.0])
    xa, ya = np.append(x, cx.ravel()), np.append(y, cy.ravel())
    ta = np.append(t, np.zeros(9))
    status = np.full(ta.size, "full")
    steep = VariogramModel("spherical", nugget=0.01, psill=400.0, range_m=900.0)
    free = censored_data(xa, ya, ta, status)
    floored = censored_data(xa, ya, ta, status, window_floor_m=1.5)
    assert (free.n_absent, free.n_lower_bounds) == (floored.n_absent, floored.n_lower_bounds)
    assert (floored.n_absent, floored.n_lower_bounds) == (9, 0)
    d_free = gibbs_draws(free, steep, n_draws=32, rng=np.random.default_rng(3))
    d_floor = gibbs_draws(floored, steep, n_draws=32, rng=np.random.default_rng(3))
    assert d_free.max() <= 0 and d_free.min() < -1.5
    assert d_floor.max() <= 0 and d_floor.min() >= -1.5
    # Holes that stopped in the clay keep an open upper end.
    lb = censored_data(xa, ya, np.append(t, np.full(9, 3.0)),
                       np.append(status[:25], ["lower_bound"] * 9), window_floor_m=1.5)
    assert lb.n_lower_bounds == 9 and np.all(np.isinf(lb.high_m))
