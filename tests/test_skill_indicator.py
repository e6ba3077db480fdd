"""Ordinary indicator kriging of I(total clay thickness < t), the textbook baseline of the
skill benchmark (aquitardmap.evaluation.skill.indicator_kriging_probability).

References: gstools.krige.Ordinary (an independent ordinary kriging implementation, PyPI;
spherical ``len_scale`` = range, gstools documentation), all data in the system when
``max_neighbours`` ≥ the number of data; the indicator coding of censored data of
Goovaerts (1997, *Geostatistics for Natural Resources Evaluation*, ch. 7, from memory);
the order-relation correction of a single cutoff, clipping to [0, 1] (Journel 1983, from
memory); hand-made layouts whose answers are worked out in the comments.
"""

from __future__ import annotations

import gstools as gs
import numpy as np
import pytest
from pyproj import CRS
from shapely.geometry import box

from aquitardmap.evaluation.skill import (
    FALLBACK_RANGE_SPACINGS,
    indicator_kriging_probability,
    indicator_variogram,
    thickness_indicators,
)
from aquitardmap.grid import make_grid

THRESHOLD_M = 5.0


@pytest.fixture(scope="module")
def grid():
    """10 × 10 cells of 100 m, centres at 50, 150, ..., 950 m."""
    return make_grid(box(0.0, 0.0, 1000.0, 1000.0), 100.0, CRS.from_epsg(32632))


def _lattice():
    """25 holes on a 200 m lattice, at 150, 350, ..., 950 m each way (on cell centres)."""
    hx, hy = np.meshgrid(np.arange(150.0, 1000.0, 200.0), np.arange(150.0, 1000.0, 200.0))
    return hx.ravel(), hy.ravel()


def _gstools_estimate(model, x, y, ind, grid):
    """Unclipped ordinary kriging estimates of gstools at every cell centre (row order)."""
    gm = gs.Spherical(dim=2, var=model.psill, len_scale=model.range_m, nugget=model.nugget)
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    # exact=False with the default cond_err ("nugget") keeps the nugget at the data, as
    # aquitardmap's kriging does (tests/test_geostat_references.py).
    est = gs.krige.Ordinary(gm, [x, y], ind, exact=False)(
        [xx.ravel(), yy.ravel()], mesh_type="unstructured", return_var=False)
    return np.asarray(est).reshape(grid.mask.shape)


def test_indicator_kriging_equals_gstools_with_the_fitted_indicator_variogram(grid):
    rng = np.random.default_rng(7)
    n = 60
    x, y = rng.uniform(0.0, 1000.0, n), rng.uniform(0.0, 1000.0, n)
    # thin clay towards the west, thick to the east, with scatter; no hole on a cell centre
    t = np.maximum(0.0, 2.0 + x / 60.0 + rng.normal(0.0, 3.0, n))
    status = np.where(rng.uniform(size=n) < 0.2, "lower_bound", "full")
    status[:3] = "unknown"
    xi, yi, ind = thickness_indicators(x, y, t, status, THRESHOLD_M)
    model = indicator_variogram(xi, yi, ind)
    p = ind.mean()
    assert (ind > 0).sum() >= 3
    assert not (model.nugget == 0.0 and np.isclose(model.psill, p * (1 - p))), \
        "the variogram should be the fitted one here, not the fallback"
    got = indicator_kriging_probability(x, y, t, status, grid, THRESHOLD_M,
                                        max_neighbours=64)
    ref = _gstools_estimate(model, xi, yi, ind, grid)
    assert np.allclose(got, np.clip(ref, 0.0, 1.0), rtol=0.0, atol=1e-6)


def test_fallback_variogram_is_nugget_free_spherical_of_indicator_variance():
    # Two positive indicators among 25 holes on a 200 m lattice: p = 2/25, sill p(1 - p),
    # median nearest-hole spacing 200 m, range 3 × 200 m.
    x, y = _lattice()
    ind = np.zeros(x.size)
    ind[[0, 1]] = 1.0
    model = indicator_variogram(x, y, ind)
    assert model.model == "spherical"
    assert model.nugget == 0.0
    assert model.psill == pytest.approx(2 / 25 * 23 / 25, rel=1e-12)
    assert model.range_m == pytest.approx(FALLBACK_RANGE_SPACINGS * 200.0, rel=1e-12)


@pytest.mark.parametrize("thin_at_two", [True, False], ids=["two thin", "two thick"])
def test_estimates_are_clipped_to_zero_one_and_honour_the_holes(grid, thin_at_two):
    # With the fallback model some raw ordinary kriging estimates leave [0, 1] (negative
    # weights of screened data; gstools gives the same raw values): below 0 with two thin
    # holes among thick ones, above 1 with the coding reversed (the weights sum to 1, so
    # the estimate of 1 − I is 1 minus that of I; there the indicator variogram is fitted,
    # with a nugget). The map is their clip. Holes sit on cell centres, and those cells
    # return the hole's indicator: the kriging is an exact interpolator (γ(0) = 0, as
    # pykrige), where gstools with exact=False smooths the nugget at the data, so gstools
    # is compared on the other cells.
    x, y = _lattice()
    t = np.full(x.size, 10.0 if thin_at_two else 0.5)
    t[[0, 1]] = 0.5 if thin_at_two else 10.0
    status = np.full(x.size, "full")
    got = indicator_kriging_probability(x, y, t, status, grid, THRESHOLD_M)
    xi, yi, ind = thickness_indicators(x, y, t, status, THRESHOLD_M)
    raw = _gstools_estimate(indicator_variogram(xi, yi, ind), xi, yi, ind, grid)
    row, col = grid.rowcol(x, y)
    off = np.ones(grid.mask.shape, bool)
    off[row, col] = False
    assert (raw[off].min() < -1e-3) if thin_at_two else (raw[off].max() > 1.0 + 1e-3)
    assert np.allclose(got[off], np.clip(raw[off], 0.0, 1.0), rtol=0.0, atol=1e-6)
    assert got.min() >= 0.0 and got.max() <= 1.0
    assert np.allclose(got[row, col], (t < THRESHOLD_M).astype(float), atol=1e-9)


def test_indicator_coding_of_full_lower_bound_and_unknown_holes():
    # full 0.5 m -> 1; full 7 m -> 0; stopped in the clay at 8 m (>= 5) -> 0;
    # stopped at 2 m (< 5: the clay may still end within 5 m) -> left out; unknown -> left
    # out; two full holes at one spot (2 m and 9 m) -> one datum 0.5.
    x = np.array([0.0, 100.0, 200.0, 300.0, 400.0, 500.0, 500.0])
    y = np.zeros(7)
    t = np.array([0.5, 7.0, 8.0, 2.0, 1.0, 2.0, 9.0])
    status = np.array(["full", "full", "lower_bound", "lower_bound", "unknown", "full",
                       "full"])
    xi, yi, ind = thickness_indicators(x, y, t, status, THRESHOLD_M)
    order = np.argsort(xi)
    assert np.allclose(xi[order], [0.0, 100.0, 200.0, 500.0])
    assert np.allclose(ind[order], [1.0, 0.0, 0.0, 0.5])


def test_lower_bound_holes_count_only_when_their_bound_reaches_the_threshold(grid):
    x, y = _lattice()
    t = np.full(x.size, 12.0)
    t[[0, 6, 12]] = [0.0, 3.0, 4.5]
    status = np.full(x.size, "full", dtype=object)
    base = indicator_kriging_probability(x, y, t, status, grid, THRESHOLD_M)

    # a hole stopped at 8 m is the same datum as one through 8 m of clay (I = 0)
    t8 = t.copy()
    t8[20] = 8.0
    stopped = status.copy()
    stopped[20] = "lower_bound"
    assert np.allclose(indicator_kriging_probability(x, y, t8, stopped, grid, THRESHOLD_M),
                       indicator_kriging_probability(x, y, t8, status, grid, THRESHOLD_M),
                       atol=1e-12)

    # a hole stopped at 2 m, or of unknown status, is as if it were not there
    keep = np.arange(x.size) != 20
    without = indicator_kriging_probability(x[keep], y[keep], t[keep], status[keep], grid,
                                            THRESHOLD_M)
    for st in ("lower_bound", "unknown"):
        t2, s2 = t.copy(), status.copy()
        t2[20], s2[20] = 2.0, st
        assert np.allclose(indicator_kriging_probability(x, y, t2, s2, grid, THRESHOLD_M),
                           without, atol=1e-12)
    assert not np.allclose(base, without)  # leaving a hole out does change the map


def test_equal_indicators_give_a_flat_map_and_no_hole_is_refused(grid):
    x, y = _lattice()
    thick = np.full(x.size, 20.0)
    status = np.full(x.size, "full")
    p = indicator_kriging_probability(x, y, thick, status, grid, THRESHOLD_M)
    assert np.all(p[grid.mask] == 0.0) and np.isnan(p[~grid.mask]).all()
    with pytest.raises(ValueError, match="no borehole decides"):
        indicator_kriging_probability(x, y, np.full(x.size, 2.0),
                                      np.full(x.size, "lower_bound"), grid, THRESHOLD_M)
