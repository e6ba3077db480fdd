"""Experimental variogram and model fit."""

import numpy as np
import pytest
from scipy.spatial.distance import pdist

from aquitardmap.variogram import VariogramModel, experimental_variogram, fit_variogram


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
    from aquitardmap.variogram import ExperimentalVariogram

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
