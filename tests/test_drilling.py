"""Where to drill next: the exact variance update, the preposterior probability, the greedy
design. References: pykrige and gstools (independent ordinary kriging), scipy (quadrature),
the kriging update equations of Emery (2009, Comput. Geosci. 13(3):269-280)."""

import gstools as gs
import numpy as np
import pytest
from pykrige.ok import OrdinaryKriging
from scipy import integrate
from scipy.stats import norm

from aquitardmap.drilling import design as drilling
from aquitardmap.drilling.design import (
    _Design,
    error_covariance,
    plan_holes,
    probability_still_uncertain,
    solve_at,
)
from aquitardmap.geostat.kriging import prepare_locations
from aquitardmap.geostat.variogram import VariogramModel


def _pykrige(x, y, z, m, xt, yt, n_closest=None):
    """Reference ordinary kriging (pykrige) with the model's parameters."""
    ok = OrdinaryKriging(x, y, z, variogram_model=m.model,
                         variogram_parameters={"psill": m.psill, "range": m.range_m,
                                               "nugget": m.nugget},
                         anisotropy_scaling=m.anisotropy_ratio,
                         anisotropy_angle=m.anisotropy_angle_deg, exact_values=True)
    if n_closest:
        e, v = ok.execute("points", xt, yt, backend="C", n_closest_points=n_closest)
    else:
        e, v = ok.execute("points", xt, yt, backend="vectorized")
    return np.asarray(e, float), np.asarray(v, float)


def _layout(seed=5, n=30, size=1000.0, m=200):
    rng = np.random.default_rng(seed)
    return (rng.uniform(0, size, n), rng.uniform(0, size, n), rng.normal(10, 4, n),
            rng.uniform(0, size, m), rng.uniform(0, size, m))


@pytest.mark.parametrize("model", [
    VariogramModel("spherical", nugget=0.5, psill=9.0, range_m=700.0),
    VariogramModel("exponential", nugget=0.0, psill=4.0, range_m=500.0),
    VariogramModel("gaussian", nugget=0.2, psill=3.0, range_m=600.0),
    VariogramModel("spherical", nugget=0.3, psill=5.0, range_m=900.0, anisotropy_ratio=2.5,
                   anisotropy_angle_deg=30.0),
])
def test_kriging_variance_matches_pykrige(model):
    # Reference: pykrige's ordinary-kriging variance (global system, and its C backend with
    # the nearest 12 data).
    x, y, _, xt, yt = _layout()
    nb = solve_at(prepare_locations(x, y, model), xt, yt, max_neighbours=100)
    _, var = _pykrige(x, y, np.zeros_like(x), model, xt, yt)
    assert np.allclose(nb.variance, var, rtol=1e-9, atol=1e-9)
    assert np.allclose(nb.weights.sum(axis=1), 1.0)
    nb12 = solve_at(prepare_locations(x, y, model), xt, yt, max_neighbours=12)
    _, var12 = _pykrige(x, y, np.zeros_like(x), model, xt, yt, n_closest=12)
    assert np.allclose(nb12.variance, var12, rtol=1e-8, atol=1e-8)


def test_kriging_variance_matches_gstools():
    # Reference: gstools.krige.Ordinary; spherical len_scale = range (gstools docs).
    x, y, _, xt, yt = _layout(seed=8)
    m = VariogramModel("spherical", nugget=1.0, psill=6.0, range_m=450.0)
    gm = gs.Spherical(dim=2, var=m.psill, len_scale=m.range_m, nugget=m.nugget)
    _, var = gs.krige.Ordinary(gm, [x, y], np.zeros_like(x), exact=False)(
        [xt, yt], mesh_type="unstructured", return_var=True)
    nb = solve_at(prepare_locations(x, y, m), xt, yt, 100)
    assert np.allclose(nb.variance, var, rtol=1e-8, atol=1e-8)


@pytest.mark.parametrize("model", [
    VariogramModel("spherical", nugget=0.5, psill=9.0, range_m=700.0),
    VariogramModel("exponential", nugget=1.0, psill=4.0, range_m=400.0, anisotropy_ratio=1.8,
                   anisotropy_angle_deg=-40.0),
])
def test_one_new_hole_updates_variance_and_estimate_exactly(model):
    # Emery (2009): sigma2_{n+1}(x) = sigma2_n(x) - C_n(x,s)^2 / sigma2_n(s), and the new
    # datum's weight is C_n(x,s) / sigma2_n(s). Reference: pykrige re-kriged with the hole.
    x, y, z, xt, yt = _layout(seed=2)
    s = (431.0, 612.0)
    nb = solve_at(prepare_locations(x, y, model), [s[0]], [s[1]], 100)
    c = error_covariance(model, x, y, nb, 0, xt, yt)
    _, var0 = _pykrige(x, y, z, model, xt, yt)
    xs, ys = np.r_[x, s[0]], np.r_[y, s[1]]
    _, var1 = _pykrige(xs, ys, np.r_[z, 0.0], model, xt, yt)
    assert np.allclose(var0 - c * c / nb.variance[0], var1, rtol=1e-8, atol=1e-8)
    # the estimate moves by weight * innovation: compare values 0 and 1 at the new hole
    e_a, _ = _pykrige(xs, ys, np.r_[np.zeros_like(z), 0.0], model, xt, yt)
    e_b, _ = _pykrige(xs, ys, np.r_[np.zeros_like(z), 1.0], model, xt, yt)
    assert np.allclose(e_b - e_a, c / nb.variance[0], atol=1e-9)


def test_holes_added_one_after_the_other_match_kriging_with_all_of_them():
    # Rank-one updates in sequence (each accounting for the ones before) equal the kriging
    # variance with every new hole added at once. Reference: pykrige.
    m = VariogramModel("spherical", nugget=0.4, psill=9.0, range_m=1500.0)
    x, y, z, xt, yt = _layout(seed=4, n=15)
    est = np.full(xt.size, 5.0)
    _, var0 = _pykrige(x, y, z, m, xt, yt)
    d = _Design(m, x, y, xt, yt, est, np.sqrt(var0), np.ones(xt.size), (5.0,), 0.1, 0.9, 100)
    assert d.cells.size == xt.size  # every target is relevant (estimate on the threshold)
    holes = [(120.0, 880.0), (700.0, 300.0), (180.0, 800.0)]
    for hx, hy in holes:
        d.add(hx, hy)
    hx, hy = np.array(holes).T
    _, var3 = _pykrige(np.r_[x, hx], np.r_[y, hy], np.r_[z, 0, 0, 0], m, xt, yt)
    assert np.allclose(d.var_s, var3, rtol=1e-7, atol=1e-7)


def test_probability_still_uncertain_matches_quadrature():
    # Reference: scipy quadrature of P(p_low <= Phi((t - T')/sa) <= p_high) over
    # T' ~ N(T, sigma^2 - sa^2).
    t, p_lo, p_hi = 5.0, 0.1, 0.9
    for est, sd, sda in [(6.0, 4.0, 2.5), (2.0, 3.0, 1.0), (12.0, 5.0, 4.0), (5.0, 2.0, 0.3)]:
        s = np.sqrt(sd**2 - sda**2)

        def integrand(tp, est=est, s=s, sda=sda):
            p = norm.cdf((t - tp) / sda)
            return norm.pdf(tp, est, s) * float(p_lo <= p <= p_hi)

        ref, _ = integrate.quad(integrand, est - 12 * s, est + 12 * s, points=[
            t - norm.ppf(p_hi) * sda, t - norm.ppf(p_lo) * sda], limit=200)
        got = probability_still_uncertain(est, sd, sda, t, p_lo, p_hi)
        assert got == pytest.approx(ref, abs=1e-6)


def test_probability_still_uncertain_limits():
    # No new information: today's classification; a hole in the cell: settled.
    est = np.array([4.0, 9.0, 5.0, 30.0])
    sd = np.array([3.0, 3.0, 1.0, 2.0])
    today = (norm.cdf((5.0 - est) / sd) >= 0.1) & (norm.cdf((5.0 - est) / sd) <= 0.9)
    assert np.array_equal(probability_still_uncertain(est, sd, sd, 5.0, 0.1, 0.9),
                          today.astype(float))
    assert np.allclose(probability_still_uncertain(est, sd, 0.0 * sd, 5.0, 0.1, 0.9), 0.0)


def test_expected_uncertain_area_matches_monte_carlo_of_the_new_value():
    # Preposterior check: draw the value at the new hole from N(T*(s), sigma2(s)), re-krige
    # with pykrige, count the uncertain cells, average. The closed form must agree.
    m = VariogramModel("spherical", nugget=0.2, psill=16.0, range_m=800.0)
    rng = np.random.default_rng(12)
    x, y = rng.uniform(0, 1000, 12), rng.uniform(0, 1000, 12)
    z = rng.normal(7.0, 3.0, 12)
    gx, gy = np.meshgrid(np.arange(25.0, 1000, 50), np.arange(25.0, 1000, 50))
    xt, yt = gx.ravel(), gy.ravel()
    est, var = _pykrige(x, y, z, m, xt, yt)
    sd = np.sqrt(var)
    s = (520.0, 480.0)
    plan = plan_holes(m, x, y, xt, yt, est, sd, np.ones(xt.size), np.array([s[0]]),
                      np.array([s[1]]), 1, thresholds_m=(5.0,), p_low=0.1, p_high=0.9,
                      max_neighbours=100)
    e_s, v_s = _pykrige(x, y, z, m, np.array([s[0]]), np.array([s[1]]))
    xs, ys = np.r_[x, s[0]], np.r_[y, s[1]]
    e0, v1 = _pykrige(xs, ys, np.r_[z, 0.0], m, xt, yt)
    e1, _ = _pykrige(xs, ys, np.r_[z, 1.0], m, xt, yt)
    zs = rng.normal(e_s[0], np.sqrt(v_s[0]), 20000)
    new_est = e0[None, :] + (e1 - e0)[None, :] * zs[:, None]  # OK is linear in the data
    p = norm.cdf((5.0 - new_est) / np.sqrt(v1)[None, :])
    mc = np.mean(np.sum((p >= 0.1) & (p <= 0.9), axis=1))
    assert plan.uncertain_now_m2 == np.sum((norm.cdf((5 - est) / sd) >= 0.1)
                                           & (norm.cdf((5 - est) / sd) <= 0.9))
    assert plan.expected_uncertain_after_m2[0] == pytest.approx(mc, rel=0.01)
    assert plan.expected_reduction_m2[0] == pytest.approx(plan.uncertain_now_m2 - mc,
                                                          abs=0.01 * mc)


def _gap_case():
    """Holes on a 200 m lattice over a 2 km square except two empty 600 m squares; the
    estimate is at the thin threshold everywhere, so the gaps are where it is uncertain."""
    m = VariogramModel("spherical", nugget=0.0, psill=25.0, range_m=600.0)
    gx, gy = np.meshgrid(np.arange(50.0, 2000, 200), np.arange(50.0, 2000, 200))
    x, y = gx.ravel(), gy.ravel()
    gap_a = (x > 200) & (x < 800) & (y > 200) & (y < 800)
    gap_b = (x > 1200) & (x < 1800) & (y > 1200) & (y < 1800)
    keep = ~(gap_a | gap_b)
    cx, cy = np.meshgrid(np.arange(50.0, 2000, 100), np.arange(50.0, 2000, 100))
    cx, cy = cx.ravel(), cy.ravel()
    var = solve_at(prepare_locations(x[keep], y[keep], m), cx, cy, 64).variance
    return m, x[keep], y[keep], cx, cy, np.full(cx.size, 5.5), np.sqrt(var)


def test_first_hole_goes_into_the_largest_uncertain_gap_second_into_the_other():
    m, x, y, cx, cy, est, sd = _gap_case()
    plan = plan_holes(m, x, y, cx, cy, est, sd, np.full(cx.size, 1e4), cx, cy, 2,
                      thresholds_m=(5.0,), min_spacing_m=0.0)
    a = (plan.x_m > 200) & (plan.x_m < 800) & (plan.y_m > 200) & (plan.y_m < 800)
    b = (plan.x_m > 1200) & (plan.x_m < 1800) & (plan.y_m > 1200) & (plan.y_m < 1800)
    assert (a | b).all() and a.sum() == 1 and b.sum() == 1  # one in each gap, not both in one
    assert np.all(plan.expected_reduction_m2 > 0)
    assert np.all(np.diff(plan.expected_uncertain_after_m2) < 0)
    assert plan.sd_before_m[0] > 3.0  # chosen where the kriging SD is large


def test_priority_weights_spacing_and_candidates_are_honoured():
    m, x, y, cx, cy, est, sd = _gap_case()
    # priority only on the upper-right half: both holes go to gap b
    w = np.where(cx + cy > 2000, 1e4, 0.0)
    plan = plan_holes(m, x, y, cx, cy, est, sd, w, cx, cy, 2, thresholds_m=(5.0,),
                      min_spacing_m=150.0)
    assert np.all(plan.x_m + plan.y_m > 2000)
    assert np.hypot(*(np.diff(plan.x_m), np.diff(plan.y_m)))[0] >= 150.0
    # candidates restricted to three sites: the chosen ones come from them
    sx, sy = np.array([100.0, 500.0, 1900.0]), np.array([100.0, 500.0, 100.0])
    plan = plan_holes(m, x, y, cx, cy, est, sd, np.full(cx.size, 1e4), sx, sy, 3,
                      thresholds_m=(5.0,))
    assert plan.chosen[0] == 1  # the site in a gap
    assert set(plan.chosen.tolist()) <= {0, 1, 2}


def test_no_hole_is_suggested_when_nothing_is_uncertain():
    m, x, y, cx, cy, _, sd = _gap_case()
    plan = plan_holes(m, x, y, cx, cy, np.full(cx.size, 60.0), sd, np.ones(cx.size), cx, cy,
                      3, thresholds_m=(5.0,))
    assert plan.chosen.size == 0 and plan.uncertain_now_m2 == 0.0


def test_coarse_search_with_refinement_finds_the_gap(monkeypatch):
    # Above MAX_COARSE_CANDIDATES the search runs on a lattice first, then refines.
    m, x, y, cx, cy, est, sd = _gap_case()
    monkeypatch.setattr(drilling, "MAX_COARSE_CANDIDATES", 10_000)
    full = plan_holes(m, x, y, cx, cy, est, sd, np.full(cx.size, 1e4), cx, cy, 1,
                      thresholds_m=(5.0,))
    monkeypatch.setattr(drilling, "MAX_COARSE_CANDIDATES", 40)
    plan = plan_holes(m, x, y, cx, cy, est, sd, np.full(cx.size, 1e4), cx, cy, 1,
                      thresholds_m=(5.0,))
    assert plan.expected_reduction_m2[0] >= 0.95 * full.expected_reduction_m2[0]
