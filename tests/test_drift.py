"""Ground elevation as an external drift (aquitardmap.geostat.drift and the drift path of
aquitardmap.geostat.probability)."""

from __future__ import annotations

import gstools as gs
import numpy as np
import pytest
from pyproj import CRS
from scipy.stats import norm
from shapely.geometry import box

from aquitardmap.config.settings import KrigingSettings
from aquitardmap.geostat.drift import choose_drift
from aquitardmap.geostat.probability import thickness_probabilities
from aquitardmap.geostat.surfaces import cross_validate
from aquitardmap.geostat.variogram import VariogramModel
from aquitardmap.grid import make_grid

CRS_M = CRS.from_epsg(32632)


def _ground(x, y):
    """A valley: low along y = 2500, rising to both sides."""
    return 40.0 + 12.0 * ((y - 2500.0) / 2500.0) ** 2 + 0.001 * x


def _region(seed=4, n=160, slope=-1.2, noise_m=1.0):
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 5000, n), rng.uniform(0, 5000, n)
    g = _ground(x, y)
    t = 70.0 + slope * g + rng.normal(0.0, noise_m, n)
    return x, y, np.maximum(t, 0.0), g


def _grid():
    return make_grid(box(0, 0, 5000, 5000), 250.0, CRS_M)


def _grid_ground(grid):
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    return _ground(xx, yy)


def test_probability_with_drift_is_the_gaussian_external_drift_one():
    # Reference: gstools.krige.ExtDrift (kriging with an external drift, all data in the
    # system) and scipy.stats.norm; with only positive full thicknesses nothing is drawn
    # and P(T < t) = Φ((t − Z*)/σ).
    g = _grid()
    x, y, t, ground = _region(n=60)
    model = VariogramModel("exponential", nugget=0.3, psill=2.0, range_m=1500.0)
    res = thickness_probabilities(x, y, t, np.full(t.size, "full"), model, g, {"thin": 20.0},
                                  n_draws=8, max_neighbours=100, drift=ground,
                                  grid_drift=_grid_ground(g))
    xs, ys = g.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    gs_model = gs.Exponential(dim=2, var=2.0, len_scale=1500.0 / 3.0, nugget=0.3)
    est, var = gs.krige.ExtDrift(gs_model, [x, y], t, ext_drift=ground, exact=False)(
        [xx[g.mask], yy[g.mask]], mesh_type="unstructured",
        ext_drift=_grid_ground(g)[g.mask], return_var=True)
    ref = norm.cdf((20.0 - est) / np.sqrt(var))
    assert np.allclose(res.p_below["thin"][g.mask], ref, rtol=1e-7, atol=1e-9)


def test_auto_uses_a_ground_that_explains_the_thickness():
    # Thickness = 70 − 1.2·ground + 1 m noise: the drift must win the cross-validation.
    x, y, t, ground = _region()
    status = np.full(t.size, "full")
    ok_model = VariogramModel("spherical", nugget=1.0, psill=20.0, range_m=3000.0)
    choice = choose_drift(x, y, t, status, ground, _grid_ground(_grid()), _grid(),
                          KrigingSettings(max_neighbours=32), cross_validate(x, y, t, ok_model, 32))
    assert choice.used, choice.reason
    assert choice.slope == pytest.approx(-1.2, abs=0.1)
    assert choice.cv_drift["rmse"] < 0.9 * choice.cv_ordinary["rmse"]
    assert choice.max_neighbours in (12, 16, 24, 32)
    assert "used" in choice.as_dict()["reason"]


def test_auto_leaves_out_a_ground_unrelated_to_the_thickness():
    # Thickness independent of the ground (a smooth field of its own): no gain, no drift.
    rng = np.random.default_rng(9)
    x, y = rng.uniform(0, 5000, 160), rng.uniform(0, 5000, 160)
    t = 20.0 + 4.0 * np.sin(x / 900.0) * np.cos(y / 1100.0) + rng.normal(0, 0.3, x.size)
    ground = 40.0 + rng.uniform(0, 10, x.size)  # uncorrelated, rough
    grid = _grid()
    model = VariogramModel("gaussian", nugget=0.1, psill=8.0, range_m=2000.0)
    choice = choose_drift(x, y, t, np.full(t.size, "full"), ground,
                          np.full(grid.mask.shape, 45.0), grid,
                          KrigingSettings(max_neighbours=32), cross_validate(x, y, t, model, 32))
    assert not choice.used
    assert "not used" in choice.reason


@pytest.mark.parametrize("case, reason", [
    ("none", "switched off"),
    ("no_dem", "no DEM"),
    ("hole_off_dem", "off the DEM"),
    ("few", "only 10 holes"),
])
def test_drift_is_refused_with_a_reason(case, reason):
    x, y, t, ground = _region(n=10 if case == "few" else 80)
    grid = _grid()
    gg = _grid_ground(grid)
    settings = KrigingSettings(external_drift="none" if case == "none" else "auto")
    if case == "hole_off_dem":
        ground = ground.copy()
        ground[3] = np.nan
    choice = choose_drift(x, y, t, np.full(t.size, "full"), ground,
                          None if case == "no_dem" else gg, grid, settings,
                          cross_validate(x, y, t, VariogramModel("spherical", 1.0, 20.0, 3000.0),
                                         64))
    assert not choice.used
    assert reason in choice.reason


def test_drift_finds_thin_clay_up_the_valley_side_that_ordinary_kriging_misses():
    # Clay thins up the valley sides with the ground; holes in the valley floor band and
    # only 4 on the sides. With the drift, P(thin) follows the ground onto the sides
    # (measured: 96 % of the thin cells flagged at P >= 0.5 with it, 43 % without).
    rng = np.random.default_rng(2)
    x = rng.uniform(0, 5000, 174)
    y = np.concatenate([rng.uniform(1500, 3500, 170), rng.uniform(0, 5000, 4)])
    g = _ground(x, y)
    t = np.maximum(70.0 - 1.2 * g + rng.normal(0, 0.5, x.size), 0.0)
    grid = _grid()
    gg = _grid_ground(grid)
    model = VariogramModel("spherical", 0.2, 1.0, 2000.0)
    status = np.full(t.size, "full")
    truth = 70.0 - 1.2 * gg
    with_drift = thickness_probabilities(x, y, t, status, model, grid, {"thin": 15.0},
                                         max_neighbours=24, drift=g, grid_drift=gg,
                                         n_draws=8)
    ok_model = VariogramModel("spherical", 1.0, 60.0, 6000.0)
    without = thickness_probabilities(x, y, t, status, ok_model, grid, {"thin": 15.0},
                                      max_neighbours=24, n_draws=8)
    thin = (truth < 15.0) & grid.mask
    hit_d = np.mean(with_drift.p_below["thin"][thin] >= 0.5)
    hit_o = np.mean(without.p_below["thin"][thin] >= 0.5)
    assert hit_d > hit_o + 0.3
    assert hit_d > 0.9


def test_drift_is_held_inside_the_ground_range_of_the_holes():
    # Holes only where the ground is below 48 m; the valley sides of the grid rise to 52 m.
    # A regression is not extrapolated beyond its covariate's range (common practice): the
    # drift on those cells is held at the holes' highest ground, so the thickness there is
    # not driven down the fitted slope to zero.
    x, y, t, ground = _region(n=400)
    low = ground < 48.0
    x, y, t, ground = x[low], y[low], t[low], ground[low]
    status = np.full(t.size, "full")
    grid = _grid()
    gg = _grid_ground(grid)
    ok_model = VariogramModel("spherical", nugget=1.0, psill=20.0, range_m=3000.0)
    choice = choose_drift(x, y, t, status, ground, gg, grid,
                          KrigingSettings(max_neighbours=32), cross_validate(x, y, t, ok_model, 32))
    assert choice.used, choice.reason
    assert choice.ground_range_m == (ground.min(), ground.max())
    outside = (gg[grid.mask] < ground.min()) | (gg[grid.mask] > ground.max())
    assert 0.05 < outside.mean() == pytest.approx(choice.share_cells_held)
    assert "held at its ends" in choice.reason
    held = choice.grid_drift(gg)
    inside = (gg >= ground.min()) & (gg <= ground.max())
    assert held.max() == ground.max() and np.array_equal(held[inside], gg[inside])
    # Truth on the high cells: 70 − 1.2·55.7 ≈ 3 m and more, so none of them is a window.
    high = grid.mask & (gg > 52.0)
    assert high.any()
    kw = {"max_neighbours": choice.max_neighbours, "n_draws": 4, "drift": ground}
    p_free = thickness_probabilities(x, y, t, status, choice.model, grid, {"w": 1.0},
                                     grid_drift=gg, **kw).p_below["w"]
    p_held = thickness_probabilities(x, y, t, status, choice.model, grid, {"w": 1.0},
                                     grid_drift=held, **kw).p_below["w"]
    assert p_held[high].max() < 0.05 <= p_free[high].max()
