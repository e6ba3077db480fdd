"""Experimental variogram and model fit."""

import numpy as np
import pytest
from scipy.spatial.distance import pdist

from aquitardmap.geostat.variogram import VariogramModel, experimental_variogram, fit_variogram


def test_experimental_variogram_matches_brute_force_matheron():
    # Reference: Matheron's estimator γ(h) = Σ(zi−zj)²/(2N(h)) by brute force over pairs
    # (Isaaks & Srivastava 1989, ch. 7).
    rng = np.random.default_rng(0)
    x, y, z = rng.uniform(0, 100, 60), rng.uniform(0, 100, 60), rng.normal(0, 1, 60)
    exp = experimental_variogram(x, y, z, n_lags=5, max_lag_m=50.0)
    d = pdist(np.c_[x, y])
    sq = pdist(z[:, None]) ** 2
    edges = np.linspace(0, 50, 6)
    for k in range(5):
        sel = (d >= edges[k]) & (d < edges[k + 1])
        assert exp.n_pairs[k] == sel.sum()
        assert exp.gamma[k] == pytest.approx(0.5 * sq[sel].mean())


def test_spherical_model_reaches_sill_at_range():
    m = VariogramModel("spherical", nugget=1.0, psill=4.0, range_m=300.0)
    assert m.gamma(np.array([0.0]))[0] == 0.0
    assert m.gamma(np.array([300.0]))[0] == pytest.approx(5.0)
    assert m.gamma(np.array([150.0]))[0] == pytest.approx(1.0 + 4.0 * (0.75 - 0.0625))


def test_fit_recovers_a_known_model_from_its_own_curve():
    # A model fitted to points lying exactly on a spherical curve must return that curve.
    true = VariogramModel("spherical", nugget=0.5, psill=3.0, range_m=800.0)
    from aquitardmap.geostat.variogram import ExperimentalVariogram

    lags = np.linspace(50, 1500, 15)
    exp = ExperimentalVariogram(lags, true.gamma(lags), np.full(15, 100))
    fit = fit_variogram(exp, "spherical")
    assert fit.nugget == pytest.approx(0.5, abs=1e-3)
    assert fit.psill == pytest.approx(3.0, rel=1e-3)
    assert fit.range_m == pytest.approx(800.0, rel=1e-3)


def test_constant_data_give_flat_model():
    x = np.arange(20.0)
    exp = experimental_variogram(x, x * 0, np.full(20, 3.0))
    fit = fit_variogram(exp, "spherical", sample_variance=0.0)
    assert fit.nugget == 0.0 and fit.psill < 1e-6


# --- directional variograms, anisotropy, nested models ----------------------------------

def test_directional_variogram_matches_brute_force_pair_selection():
    # Reference: brute force over pairs; a pair belongs to azimuth θ (counter-clockwise from
    # east) when its direction is within the tolerance of θ either way along the line
    # (Isaaks & Srivastava 1989, ch. 7).
    rng = np.random.default_rng(1)
    x, y, z = rng.uniform(0, 100, 80), rng.uniform(0, 100, 80), rng.normal(0, 1, 80)
    exp = experimental_variogram(x, y, z, n_lags=4, max_lag_m=40.0, direction_deg=60.0,
                                 tolerance_deg=20.0)
    i, j = np.triu_indices(80, k=1)
    ang = np.degrees(np.arctan2(y[j] - y[i], x[j] - x[i])) % 180.0
    sel_dir = np.minimum(np.abs(ang - 60.0), 180.0 - np.abs(ang - 60.0)) <= 20.0
    d = np.hypot(x[j] - x[i], y[j] - y[i])
    sq = (z[j] - z[i]) ** 2
    edges = np.linspace(0, 40, 5)
    k_out = 0
    for k in range(4):
        sel = sel_dir & (d >= edges[k]) & (d < edges[k + 1])
        if sel.sum() == 0:
            continue
        assert exp.n_pairs[k_out] == sel.sum()
        assert exp.gamma[k_out] == pytest.approx(0.5 * sq[sel].mean())
        k_out += 1
    assert k_out == exp.lag_m.size


def test_nested_fit_recovers_its_own_curve():
    # Points lying exactly on a nested curve (nugget + spherical + exponential) must give
    # that curve back.
    from aquitardmap.geostat.variogram import ExperimentalVariogram

    true = VariogramModel("spherical", nugget=0.3, psill=2.0, range_m=300.0,
                          model2="exponential", psill2=4.0, range2_m=2500.0)
    lags = np.linspace(40, 3000, 30)
    exp = ExperimentalVariogram(lags, true.gamma(lags), np.full(30, 200))
    fit = fit_variogram(exp, "spherical", model2="exponential")
    assert np.allclose(fit.gamma(lags), true.gamma(lags), rtol=1e-3)
    assert fit.range_m == pytest.approx(300.0, rel=0.02)
    assert fit.range2_m == pytest.approx(2500.0, rel=0.05)
    assert fit.sill == pytest.approx(true.sill, rel=0.02)


def _srf_points(model, seed, n=2500, extent=4000.0, nugget=0.0):
    """A gstools spectral random field (gstools.SRF, randomisation method) sampled at n
    random points, plus independent white noise of variance ``nugget`` (numpy)."""
    import gstools as gs

    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, extent, (2, n))
    z = gs.SRF(model, seed=1000 + seed)((x, y), mesh_type="unstructured")
    return x, y, z + rng.normal(0.0, np.sqrt(nugget), n) if nugget else z


def test_fit_recovers_a_known_model_from_large_synthetic_fields():
    # Reference field: gstools.SRF of an exponential covariance, var 4, len_scale 150 m
    # (practical range 3·150 = 450 m in pykrige's convention), plus white noise of variance
    # 0.5 as the nugget; 2500 points on 4 km × 4 km (about nine ranges). One realisation
    # fluctuates (ergodic fluctuation), so the fits of four realisations are averaged and
    # must recover the model within 25 % (sill, range) and 0.35 (nugget).
    import gstools as gs

    fits = []
    for seed in range(4):
        x, y, z = _srf_points(gs.Exponential(dim=2, var=4.0, len_scale=150.0), seed,
                              nugget=0.5)
        exp = experimental_variogram(x, y, z, n_lags=15, max_lag_m=1200.0)
        fits.append(fit_variogram(exp, "exponential"))
    nugget = np.mean([f.nugget for f in fits])
    sill = np.mean([f.sill for f in fits])
    range_m = np.mean([f.range_m for f in fits])
    assert nugget == pytest.approx(0.5, abs=0.35)
    assert sill == pytest.approx(4.5, rel=0.25)
    assert range_m == pytest.approx(450.0, rel=0.25)


def test_fit_anisotropy_recovers_direction_and_ratio_of_a_synthetic_field():
    # Reference field: gstools.SRF of an exponential covariance with geometric anisotropy,
    # len_scale [300, 100] m (ratio 3) and the main axis at 30° counter-clockwise from east.
    # 2500 points on 7 km × 7 km. Directional variograms in 6 directions (±15°) must find
    # the axis within 10° and the ratio between 2.2 and 4 on each of two realisations.
    import gstools as gs

    from aquitardmap.geostat.variogram import fit_anisotropy

    model = gs.Exponential(dim=2, var=1.0, len_scale=[300.0, 100.0], angles=np.deg2rad(30))
    for seed in (0, 4):
        x, y, z = _srf_points(model, seed, extent=7000.0)
        exp = experimental_variogram(x, y, z, n_lags=15, max_lag_m=1200.0)
        iso = fit_variogram(exp, "exponential")
        d = fit_anisotropy(x, y, z, iso, n_lags=15, max_lag_m=1200.0, n_directions=6,
                           tolerance_deg=15.0)
        assert abs((d.angle_deg - 30.0 + 90.0) % 180.0 - 90.0) < 10.0
        assert 2.2 <= d.ratio <= 4.0
        assert len(d.ranges_m) == 6


def test_isotropic_field_shows_no_strong_anisotropy():
    import gstools as gs

    from aquitardmap.geostat.variogram import fit_anisotropy

    x, y, z = _srf_points(gs.Exponential(dim=2, var=1.0, len_scale=150.0), 7)
    exp = experimental_variogram(x, y, z, n_lags=15, max_lag_m=1200.0)
    d = fit_anisotropy(x, y, z, fit_variogram(exp, "exponential"), n_lags=15,
                       max_lag_m=1200.0)
    assert d.ratio < 1.6


def test_pair_subset_depends_on_the_points_not_on_their_number_or_order():
    """Above MAX_POINTS_FOR_PAIRS the experimental variogram uses a subset; adding 10 holes
    to 5,000 must change it by at most 10 points, whatever the order of the holes, so that
    a refit after a few new holes does not move by sampling noise (common practice: a
    variogram should not jump when a few data are added)."""
    from aquitardmap.geostat.variogram import MAX_POINTS_FOR_PAIRS, stable_subset

    rng = np.random.default_rng(3)
    x, y = rng.uniform(0, 2e4, 5000), rng.uniform(0, 2e4, 5000)
    first = stable_subset(x, y, MAX_POINTS_FOR_PAIRS)
    assert first.size == MAX_POINTS_FOR_PAIRS and np.all(np.diff(first) > 0)
    x2, y2 = np.r_[x, rng.uniform(0, 2e4, 10)], np.r_[y, rng.uniform(0, 2e4, 10)]
    order = rng.permutation(x2.size)
    again = stable_subset(x2[order], y2[order], MAX_POINTS_FOR_PAIRS)
    before = set(zip(x[first], y[first], strict=True))
    after = set(zip(x2[order][again], y2[order][again], strict=True))
    assert len(before - after) <= 10 and len(after - before) <= 10
    assert set(stable_subset(x, y, MAX_POINTS_FOR_PAIRS, seed=1)) != set(first)
