"""Zones from grids."""

import numpy as np
import pytest
from pyproj import CRS
from scipy.stats import norm
from shapely.geometry import box

from aquitardmap.config.settings import ScreeningThresholds
from aquitardmap.grid import make_grid
from aquitardmap.screening.zones import probability_below, zone_areas_m2, zones_from_grids


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
    # with none within the radius. The proven patch is a likely window zone; the other is at
    # most a possible window, and likely thin here (P(thin) 0.9 reaches the likely thin
    # tier, which outranks a possible window), and says why (common practice: map a window
    # where a log shows it, treat an unproven one as possible).
    from aquitardmap.screening.zones import window_proof_cells, zone_masks

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
    assert thin.tier == "likely"
    assert "no hole proving a window lies within 300 m" in thin.reason
    win = zones[zones.kind == "window"].iloc[0]
    assert win.tier == "likely"
    assert win.n_cells_unproven_window == 0 and "no hole proving" not in win.reason
    # A P(window) below the likely threshold stays out of the likely tier of both, whatever
    # the proof; at 0.4 and 0.45 both patches are possible windows.
    low = zone_masks(t, t * 100, g, th, p_window=pw * 0.5, p_thin=pt * 0.5,
                     window_proven=proof, tiers=("likely",))
    assert not low["window"].any() and not low["thin"].any()
    low_all = zone_masks(t, t * 100, g, th, p_window=pw * 0.5, p_thin=pt * 0.5,
                         window_proven=proof)
    assert np.array_equal(low_all["window"], a | b) and not low_all["thin"].any()
    assert not window_proof_cells(np.array([]), np.array([]), g, 300.0).any()


# --- tiers ---------------------------------------------------------------------------------
# The tier rules are our own screening choices (common practice in protection screening:
# show what the holes prove apart from what they cannot rule out); the checks count cells by
# hand on hand-made grids.


def _square_patches(g, centres, half_m=100.0):
    xs, ys = g.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    return [(np.abs(xx - cx) < half_m) & (np.abs(yy - cy) < half_m) for cx, cy in centres]


def test_a_cell_at_0_3_is_possible_and_one_at_0_6_likely():
    from aquitardmap.screening.zones import zone_tier_areas_m2

    g = make_grid(box(0, 0, 3000, 1000), 50.0, CRS.from_epsg(32632))
    hi, mid, lo = _square_patches(g, [(500, 500), (1500, 500), (2500, 500)])
    p = np.where(hi, 0.6, np.where(mid, 0.3, np.where(lo, 0.1, 0.0)))
    t = np.full(p.shape, 20.0)
    th = ScreeningThresholds()  # likely 0.5, possible 0.2 (README, Zones)
    assert (th.p_window_threshold, th.p_window_possible_threshold) == (0.5, 0.2)
    # Thin zones from P(thin) alone (P(window) 0 everywhere).
    zones = zones_from_grids(t, t * 0 + 1, t * 100, p, g, th, p_window=np.zeros(p.shape))
    thin = zones[zones.kind == "thin"].set_index("tier")
    assert set(thin.index) == {"likely", "possible"}
    assert thin.loc["likely", "n_cells"] == hi.sum()
    assert thin.loc["possible", "n_cells"] == mid.sum()  # 0.1 is below both tiers
    assert thin.loc["likely", "probability"] == pytest.approx(0.6)
    assert thin.loc["possible", "max_probability"] == pytest.approx(0.3)
    assert thin.loc["likely", "p_threshold"] == 0.5
    assert thin.loc["possible", "p_threshold"] == 0.2
    assert "tier likely: the probability is at least 50%" in thin.loc["likely", "reason"]
    assert ("tier possible: cannot be ruled out, probability at least 20%; a hole here "
            "would "
            "tell" in thin.loc["possible", "reason"])
    areas = zone_tier_areas_m2(zones)
    assert areas["thin"] == {"likely": hi.sum() * 2500.0, "possible": mid.sum() * 2500.0}
    assert areas["window"] == {"likely": 0.0, "possible": 0.0}
    # Window zones from P(window) likewise (P(thin) >= P(window), as a probability of a
    # larger threshold always is); every window cell is then also thin, and window wins.
    zw = zones_from_grids(t, t * 0 + 1, t * 100, p, g, th, p_window=p)
    assert set(zip(zw.kind, zw.tier, strict=True)) == {("window", "likely"),
                                                       ("window", "possible")}
    win = zw.set_index("tier")
    assert win.loc["likely", "n_cells"] == hi.sum() and win.loc["possible", "n_cells"] == \
        mid.sum()
    # A mean below the maximum: a zone of two probabilities.
    p2 = np.where(hi, np.where(np.arange(p.shape[1]) % 2 == 0, 0.6, 0.8), 0.0)
    z2 = zones_from_grids(t, t * 0 + 1, t * 100, p2, g, th, p_window=np.zeros(p.shape))
    assert z2.iloc[0].probability == pytest.approx(p2[hi].mean())
    assert z2.iloc[0].max_probability == pytest.approx(0.8)


def test_each_cell_takes_one_kind_and_tier_higher_tier_first_then_window():
    from aquitardmap.screening.zones import zone_tier_masks

    g = make_grid(box(0, 0, 4000, 1000), 50.0, CRS.from_epsg(32632))
    a, b, c, d = _square_patches(g, [(500, 500), (1500, 500), (2500, 500), (3500, 500)])
    # a: likely window (proven) ; b: possible window, likely thin -> thin likely;
    # c: likely window by probability but unproven, P(thin) under a strict likely thin
    #    tier -> possible window ; d: possible thin only.
    pw = np.where(a, 0.8, np.where(b, 0.3, np.where(c, 0.7, 0.0)))
    pt = np.where(a, 0.9, np.where(b, 0.95, np.where(c, 0.75, np.where(d, 0.2, 0.0))))
    proven = _square_patches(g, [(500, 500)], half_m=300.0)[0]
    th = ScreeningThresholds(p_thin_threshold=0.9)
    m = zone_tier_masks(pw, pt, g, th, window_proven=proven)
    assert np.array_equal(m[("window", "likely")], a)
    assert np.array_equal(m[("thin", "likely")], b)
    assert np.array_equal(m[("window", "possible")], c)
    assert np.array_equal(m[("thin", "possible")], d)
    total = sum(v.astype(int) for v in m.values())
    assert total.max() == 1  # at most one (kind, tier) per cell
    # With the default likely thin threshold (0.5) the unproven likely window c is likely
    # thin (likely beats possible); it is never a likely window.
    m2 = zone_tier_masks(pw, pt, g, ScreeningThresholds(), window_proven=proven)
    assert np.array_equal(m2[("thin", "likely")], b | c)
    assert not (m2[("window", "likely")] & c).any()


def _holes(rows):
    import geopandas as gpd

    ids, xs, ys, win, thin = zip(*rows, strict=True)
    return gpd.GeoDataFrame({"borehole_id": list(ids), "proves_window": list(win),
                             "proves_thin": list(thin)},
                            geometry=gpd.points_from_xy(xs, ys), crs="EPSG:32632")


def test_a_hole_proving_a_window_makes_a_likely_window_where_the_grid_says_0():
    # Hard data honoured: the cells holding a hole that proves a window (W-1) or thin clay
    # (T-1) are likely zones although both probabilities are 0 there; a hole that proves
    # neither (F-1) flags nothing.
    g = make_grid(box(0, 0, 2000, 1000), 50.0, CRS.from_epsg(32632))
    zero = np.zeros((g.height, g.width))
    t = np.full(zero.shape, 20.0)
    holes = _holes([("W-1", 510.0, 520.0, True, True), ("T-1", 1510.0, 520.0, False, True),
                    ("F-1", 1010.0, 520.0, False, False)])
    th = ScreeningThresholds()
    zones = zones_from_grids(t, t * 0 + 1, t * 100, zero, g, th, holes, p_window=zero,
                             window_proven=np.zeros(zero.shape, dtype=bool))
    assert list(zip(zones.kind, zones.tier, strict=True)) == [("thin", "likely"),
                                                             ("window", "likely")]
    win = zones[zones.kind == "window"].iloc[0]
    thin = zones[zones.kind == "thin"].iloc[0]
    for z, hole in ((win, holes.iloc[0]), (thin, holes.iloc[1])):
        assert z.n_cells == 1 and z.n_cells_from_holes == 1
        assert z.geometry.contains(hole.geometry)
        assert z.probability == 0.0 and z.n_boreholes == 1
        assert "flagged likely whatever the probability there says" in z.reason
    assert win.supporting_holes == "W-1" and thin.supporting_holes == "T-1"
    # The same with the kriged-thickness basis (20 m of clay everywhere on the grid).
    zk = zones_from_grids(t, t * 0 + 1, t * 100, zero, g,
                          ScreeningThresholds(zone_basis="kriged_thickness"), holes)
    assert sorted(zk.kind) == ["thin", "window"] and set(zk.tier) == {""}
    assert (zk.n_cells_from_holes == 1).all()


def test_supporting_holes_are_the_proving_holes_in_or_near_the_zone():
    # A likely thin zone 200 m square; proving holes inside it, 250 m outside it, 450 m
    # outside it; a hole that proves nothing inside it. Reference: shapely's distance from
    # each hole to the zone polygon, against window_proof_radius_m = 300 m.
    g = make_grid(box(0, 0, 2000, 2000), 50.0, CRS.from_epsg(32632))
    (patch,) = _square_patches(g, [(1000, 1000)])
    pt = np.where(patch, 0.7, 0.0)
    t = np.full(pt.shape, 20.0)
    holes = _holes([("in", 1010.0, 1010.0, False, True), ("near", 1350.0, 1000.0, False, True),
                    ("far", 1550.0, 1000.0, True, True), ("none", 990.0, 990.0, False, False)])
    th = ScreeningThresholds(window_proof_radius_m=300.0)
    zones = zones_from_grids(t, t * 0 + 1, t * 100, pt, g, th, holes,
                             p_window=np.zeros(pt.shape))
    thin = zones[(zones.kind == "thin") & (zones.tier == "likely")]
    z = thin[thin.geometry.contains(holes.geometry.iloc[0])].iloc[0]
    expect = sorted(h.borehole_id for h in holes.itertuples()
                    if h.proves_thin and h.geometry.distance(z.geometry) <= 300.0)
    assert expect == ["in", "near"]
    assert z.supporting_holes == ",".join(expect) and z.n_supporting_holes == 2
    # Fast zones name no supporting holes (nor have a tier or a probability).
    fast = zones_from_grids(t, t * 0 + 1, t * 0, pt * 0, g, th, holes)
    fast = fast[fast.kind == "fast"]
    assert len(fast) == 1 and (fast.supporting_holes == "").all()
    assert (fast.tier == "").all() and fast.max_probability.isna().all()
