"""Thickness surfaces and partial-penetration (censored) holes."""

import numpy as np
import pytest
from pyproj import CRS
from shapely.geometry import box

from aquitardmap.config.settings import KrigingSettings
from aquitardmap.geostat.surfaces import krige_thickness, scale_units_to_total
from aquitardmap.geostat.variogram import VariogramModel
from aquitardmap.grid import make_grid

CRS_M = CRS.from_epsg(32632)


def _region(seed=5):
    """A 3 km square with 20 ± 1 m of clay everywhere; 16 holes reach the base and give
    the full thickness; 12 geotechnical holes in the middle stop at 4 m depth inside it."""
    rng = np.random.default_rng(seed)
    g = make_grid(box(0, 0, 3000, 3000), 100.0, CRS_M)
    gx, gy = np.meshgrid(np.linspace(150, 2850, 4), np.linspace(150, 2850, 4))
    fx, fy = gx.ravel(), gy.ravel()
    ft = 20 + rng.normal(0, 1, fx.size)
    px, py = rng.uniform(1000, 2000, 12), rng.uniform(1000, 2000, 12)
    pt = np.full(12, 4.0)
    x = np.concatenate([fx, px])
    y = np.concatenate([fy, py])
    t = np.concatenate([ft, pt])
    status = np.array(["full"] * fx.size + ["lower_bound"] * 12)
    return g, x, y, t, status


def test_partial_hole_is_lower_bound_not_thickness():
    # The classic error (DOMAIN §3, common practice): kriging the depth reached by holes
    # that stop in the clay as if it were the thickness invents a thin zone.
    g, x, y, t, status = _region()
    settings = KrigingSettings(variogram_model="spherical", max_neighbours=64)
    # The same variogram for both, so that only the treatment of partial holes differs.
    model = VariogramModel("spherical", nugget=0.5, psill=30.0, range_m=1200.0)
    naive = krige_thickness("naive", x, y, t, np.full(t.size, "full"), g, settings,
                            with_cv=False, model=model)
    assert np.nanmin(naive.thickness_m) < 5.0  # the false thin zone exists
    honest = krige_thickness("aquitard", x, y, t, status, g, settings, with_cv=False,
                             model=model)
    assert np.nanmin(honest.thickness_m) > 15.0
    assert honest.n_lower_bounds == 12 and honest.n_bounds_active == 0


def test_violated_lower_bound_raises_the_surface():
    # A hole that stopped at 30 m in clay proves at least 30 m there: the estimate at the
    # hole must honour it although the full holes around say 20 m.
    g, x, y, t, status = _region()
    x = np.append(x, 1550.0)
    y = np.append(y, 1450.0)
    t = np.append(t, 30.0)
    status = np.append(status, "lower_bound")
    s = krige_thickness("aquitard", x, y, t, status, g, KrigingSettings(), with_cv=False)
    row, col = g.rowcol(np.array([1550.0]), np.array([1450.0]))
    assert s.n_bounds_active >= 1
    assert s.thickness_m[row[0], col[0]] >= 27.0  # cell centre 50 m from the hole
    assert s.thickness_m[row[0], col[0]] > np.nanmedian(s.thickness_m) + 3


def test_unknown_status_is_ignored_and_zero_is_data():
    g, x, y, t, status = _region()
    t = t.copy()
    t[:4] = 0.0  # four holes where the unit is absent: zero is data
    status = status.copy()
    status[-3:] = "unknown"
    s = krige_thickness("u", x, y, t, status, g, KrigingSettings(), with_cv=False)
    r, c = g.rowcol(x[:4], y[:4])
    assert np.all(s.thickness_m[r, c] < 5.0)
    assert np.all(s.thickness_m[g.mask] >= 0)


def test_cross_validation_statistics_are_reported():
    g, x, y, t, status = _region()
    s = krige_thickness("aquitard", x, y, t, status, g, KrigingSettings(), with_cv=True)
    assert s.cv["n"] == 16
    assert abs(s.cv["mean_error"]) < 1.0
    assert s.cv["rmse"] > 0


def test_unit_thicknesses_add_up_to_total():
    a = np.array([[2.0, 0.0], [1.0, 3.0]])
    b = np.array([[2.0, 0.0], [3.0, 1.0]])
    total = np.array([[8.0, 6.0], [2.0, 0.0]])
    out = scale_units_to_total({"A": a, "B": b}, total)
    assert np.allclose(out["A"] + out["B"], total)
    assert out["A"][0, 0] == pytest.approx(4.0)
    assert out["A"][0, 1] == pytest.approx(3.0)  # no unit kriged there: shared equally
