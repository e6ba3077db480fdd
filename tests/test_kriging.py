"""Ordinary kriging against independent references."""

import gstools as gs
import numpy as np
import pytest
from scipy.spatial.distance import cdist

from aquitardmap.geostat.kriging import krige_points, merge_coincident
from aquitardmap.geostat.variogram import VariogramModel


def _data(seed=3, n=40):
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 1000, n), rng.uniform(0, 1000, n)
    z = rng.normal(10, 3, n)
    xt, yt = rng.uniform(0, 1000, 150), rng.uniform(0, 1000, 150)
    return x, y, z, xt, yt


def _gstools_model(m: VariogramModel):
    """The same model in gstools' parameterisation (gstools documentation, covariance
    models): spherical len_scale = range; exponential exp(-h/l) so l = a/3; Gaussian
    exp(-(pi/4)(h/l)^2) so l = (4a/7)·sqrt(pi/4) for pykrige's exp(-(h/(4a/7))^2)."""
    if m.model == "spherical":
        return gs.Spherical(dim=2, var=m.psill, len_scale=m.range_m, nugget=m.nugget)
    if m.model == "exponential":
        return gs.Exponential(dim=2, var=m.psill, len_scale=m.range_m / 3, nugget=m.nugget)
    return gs.Gaussian(dim=2, var=m.psill, len_scale=m.range_m * 4 / 7 * np.sqrt(np.pi / 4),
                       nugget=m.nugget)


@pytest.mark.parametrize("model", ["spherical", "exponential", "gaussian"])
def test_kriging_matches_gstools_ordinary_kriging(model):
    # Reference: gstools.krige.Ordinary (an independent implementation from PyPI) on the
    # same variogram; nugget treated as micro-scale variance (cond_err = nugget).
    x, y, z, xt, yt = _data()
    m = VariogramModel(model, nugget=1.0, psill=8.0, range_m=400.0)
    gm = _gstools_model(m)
    assert np.allclose(gm.variogram(np.array([50.0, 200.0, 399.0])),
                       m.gamma(np.array([50.0, 200.0, 399.0])))
    est, var = gs.krige.Ordinary(gm, [x, y], z, exact=False)([xt, yt],
                                                             mesh_type="unstructured",
                                                             return_var=True)
    r = krige_points(x, y, z, m, xt, yt, max_neighbours=100)
    assert np.allclose(r.estimate, est, rtol=1e-8, atol=1e-8)
    assert np.allclose(r.variance, var, rtol=1e-8, atol=1e-8)


def test_kriging_matches_textbook_system():
    # Reference: the ordinary kriging system in variogram form, Isaaks & Srivastava (1989),
    # eq. 12.14: [Γ 1; 1ᵀ 0][λ; μ] = [γ0; 1], variance = λᵀγ0 + μ; solved with numpy.
    x, y, z, xt, yt = _data(seed=11, n=25)
    m = VariogramModel("exponential", nugget=0.5, psill=4.0, range_m=600.0)
    n = x.size
    a = np.ones((n + 1, n + 1))
    a[:n, :n] = m.gamma(cdist(np.c_[x, y], np.c_[x, y]))
    a[n, n] = 0.0
    b = np.ones((n + 1, xt.size))
    b[:n] = m.gamma(cdist(np.c_[x, y], np.c_[xt, yt]))
    w = np.linalg.solve(a, b)
    r = krige_points(x, y, z, m, xt, yt)
    assert np.allclose(r.estimate, w[:n].T @ z, rtol=1e-10)
    assert np.allclose(r.variance, (w * b).sum(axis=0), rtol=1e-10)


def test_two_point_weights_are_symmetric_at_midpoint():
    # Analytic case (common practice): midway between two data the weights are 1/2 each.
    m = VariogramModel("spherical", nugget=0.0, psill=1.0, range_m=100.0)
    r = krige_points(np.array([0.0, 40.0]), np.array([0.0, 0.0]), np.array([2.0, 6.0]), m,
                     np.array([20.0]), np.array([0.0]))
    assert r.estimate[0] == pytest.approx(4.0)


def test_exact_at_data_and_zero_variance():
    x, y, z, _, _ = _data()
    m = VariogramModel("spherical", nugget=1.0, psill=8.0, range_m=400.0)
    r = krige_points(x, y, z, m, x[:5], y[:5])
    assert np.allclose(r.estimate, z[:5])
    assert np.allclose(r.variance, 0.0, atol=1e-9)


def test_moving_neighbourhood_equals_full_when_it_holds_all_data():
    x, y, z, xt, yt = _data(n=30)
    m = VariogramModel("spherical", nugget=0.2, psill=8.0, range_m=400.0)
    a = krige_points(x, y, z, m, xt, yt, max_neighbours=29)  # local path, all 30 minus 1
    b = krige_points(x, y, z, m, xt, yt, max_neighbours=100)  # full path
    # 29 of 30 neighbours: close but not identical; the one dropped is the farthest.
    assert np.max(np.abs(a.estimate - b.estimate)) < 0.5
    c = krige_points(x, y, z, m, xt, yt, max_neighbours=30)
    assert np.allclose(c.estimate, b.estimate)


def test_merge_coincident_averages_duplicates():
    x, y, v = merge_coincident(np.array([1.0, 1.0, 5.0]), np.array([2.0, 2.0, 5.0]),
                               np.array([3.0, 5.0, 7.0]))
    assert sorted(v.tolist()) == [4.0, 7.0]
