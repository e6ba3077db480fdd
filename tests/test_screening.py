"""Zones from grids."""

import numpy as np
import pytest
from pyproj import CRS
from scipy.stats import norm
from shapely.geometry import box

from aquitardmap.grid import make_grid
from aquitardmap.project import ScreeningThresholds
from aquitardmap.screening import probability_below, zone_areas_m2, zones_from_grids


def test_probability_below_is_gaussian_cdf():
    # Reference: scipy.stats.norm.cdf, P(T < t) = Φ((t − T*)/σ).
    p = probability_below(5.0, np.array([3.0, 5.0, 9.0, 2.0]), np.array([2.0, 1.0, 2.0, 0.0]))
    assert p[0] == pytest.approx(norm.cdf(1.0))
    assert p[1] == pytest.approx(0.5)
    assert p[2] == pytest.approx(norm.cdf(-2.0))
    assert p[3] == 1.0


def test_window_and_thin_zones_have_the_right_areas():
    g = make_grid(box(0, 0, 2000, 2000), 50.0, CRS.from_epsg(32632))
    xs, ys = g.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    r = np.hypot(xx - 1000, yy - 1000)
    # 0 m inside r < 300 m, 3 m in the ring 300–500 m, 20 m outside.
    t = np.where(r < 300, 0.0, np.where(r < 500, 3.0, 20.0))
    sd = np.full(t.shape, 1.0)
    tt = t * 10.0  # years: fast where thickness < 5 m with a 50-year threshold
    th = ScreeningThresholds(window_thickness_m=1.0, thin_thickness_m=5.0,
                             fast_travel_time_yr=50.0)
    zones = zones_from_grids(t, sd, tt, probability_below(5.0, t, sd), g, th)
    areas = zone_areas_m2(zones)
    cell = 50.0 * 50.0
    assert areas["window"] == pytest.approx((r < 300).sum() * cell)
    assert areas["thin"] == pytest.approx(((r >= 300) & (r < 500)).sum() * cell)
    assert areas["fast"] == pytest.approx((r < 500).sum() * cell)
    # Polygon areas agree with cell counts (the vectorisation loses nothing).
    for z in zones.itertuples():
        assert z.geometry.area == pytest.approx(z.area_m2)
    win = zones[zones.kind == "window"].iloc[0]
    assert "Clay likely absent" in win.reason and win.mean_p_thin > 0.99
    assert set(zones.kind) == {"window", "thin", "fast"}


def test_no_zone_when_clay_is_thick_everywhere():
    g = make_grid(box(0, 0, 500, 500), 50.0, CRS.from_epsg(32632))
    t = np.full((g.height, g.width), 30.0)
    zones = zones_from_grids(t, t * 0 + 1, t * 100, t * 0, g, ScreeningThresholds())
    assert len(zones) == 0
    assert zone_areas_m2(zones) == {"window": 0.0, "thin": 0.0, "fast": 0.0, "pierced": 0.0}


def test_pierced_zones_where_many_holes_pass_through_the_clay():
    """Cells whose piercing-borehole density reaches the flag form pierced zones (the flag
    is inclusive); the zone's mean density is the mean of the grid over its cells, counted
    here by hand."""
    g = make_grid(box(0, 0, 1000, 500), 50.0, CRS.from_epsg(32632))
    xs, _ = g.cell_centres()
    dens = np.broadcast_to(np.where(xs < 300, 12.0, np.where(xs < 400, 10.0, 4.0)),
                           (g.height, g.width)).copy()
    t = np.full(dens.shape, 30.0)
    th = ScreeningThresholds(piercing_flag_per_km2=10.0)
    zones = zones_from_grids(t, t * 0 + 1, t * 100, t * 0, g, th,
                             piercing_density_per_km2=dens)
    assert list(zones["kind"]) == ["pierced"]
    z = zones.iloc[0]
    flagged = g.mask & (dens >= 10.0)
    assert z.n_cells == flagged.sum()
    assert z.area_m2 == pytest.approx(flagged.sum() * 2500.0)
    assert z.mean_piercing_per_km2 == pytest.approx(dens[flagged].mean())
    assert "pierce the clay" in z.reason and "10 per km²" in z.reason
    none = zones_from_grids(t, t * 0 + 1, t * 100, t * 0, g, th)
    assert len(none) == 0


def test_a_window_zone_needs_a_hole_proving_a_window_nearby():
    # Two patches where P(window) = 0.8: one with a hole proving a window at its centre, one
    # with none within the radius. The proven patch is a window zone; the other is flagged
    # thin and says why (common practice: map a window where a log shows it, treat an
    # unproven one as possible).
    from aquitardmap.screening import window_proof_cells, zone_masks

    g = make_grid(box(0, 0, 4000, 2000), 50.0, CRS.from_epsg(32632))
    xs, ys = g.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    a = np.hypot(xx - 1000, yy - 1000) < 200
    b = np.hypot(xx - 3000, yy - 1000) < 200
    pw = np.where(a | b, 0.8, 0.01)
    pt = np.where(a | b, 0.9, 0.05)
    t = np.full(pw.shape, 20.0)
    th = ScreeningThresholds(window_proof_radius_m=300.0)
    proof = window_proof_cells(np.array([1010.0]), np.array([990.0]), g, 300.0)
    # Distance rule against a brute-force check of every cell centre.
    assert np.array_equal(proof, np.hypot(xx - 1010.0, yy - 990.0) <= 300.0)
    m = zone_masks(t, t * 100, g, th, p_window=pw, p_thin=pt, window_proven=proof)
    assert np.array_equal(m["window"], a) and np.array_equal(m["thin"], b)
    # Without the proof grid every likely window is a window (the rule is opt-in here).
    m0 = zone_masks(t, t * 100, g, th, p_window=pw, p_thin=pt)
    assert np.array_equal(m0["window"], a | b)
    zones = zones_from_grids(t, t * 0 + 1, t * 100, pt, g, th, p_window=pw,
                             window_proven=proof)
    thin = zones[zones.kind == "thin"].iloc[0]
    assert thin.n_cells_unproven_window == b.sum() == thin.n_cells
    assert "no hole proving a window lies within 300 m" in thin.reason
    win = zones[zones.kind == "window"].iloc[0]
    assert win.n_cells_unproven_window == 0 and "no hole proving" not in win.reason
    # A P(window) below the threshold stays out of both, whatever the proof.
    low = zone_masks(t, t * 100, g, th, p_window=pw * 0.5, p_thin=pt * 0.5,
                     window_proven=proof)
    assert not low["window"].any() and not low["thin"].any()
    assert not window_proof_cells(np.array([]), np.array([]), g, 300.0).any()
