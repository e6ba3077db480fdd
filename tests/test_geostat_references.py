"""Kriging weights, nested and anisotropic models against outside references.

References: gstools (an independent kriging implementation, PyPI), the closed-form ordinary
kriging weights of two data, symmetry of three data, and pykrige through
:func:`aquitardmap.geostat.kriging.krige_points`.
"""

from __future__ import annotations

import gstools as gs
import numpy as np
import pytest

from aquitardmap.geostat.kriging import krige_points, kriging_weights
from aquitardmap.geostat.variogram import VariogramModel


def _data(seed=3, n=40):
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 1000, n), rng.uniform(0, 1000, n)
    z = rng.normal(10, 3, n)
    xt, yt = rng.uniform(0, 1000, 120), rng.uniform(0, 1000, 120)
    return x, y, z, xt, yt


def _gs_structure(model: str, var: float, range_m: float, ratio: float, angle_deg: float):
    """One structure in gstools' parameterisation (gstools documentation, covariance
    models): spherical len_scale = range; exponential exp(-h/l), so l = a/3; Gaussian
    exp(-(pi/4)(h/l)^2), so l = (4a/7)·sqrt(pi/4) for pykrige's exp(-(h/(4a/7))^2). Geometric
    anisotropy: len_scale [major, major/ratio], main axis rotated by ``angles`` (radians,
    counter-clockwise from x)."""
    length = {"spherical": range_m, "exponential": range_m / 3.0,
              "gaussian": range_m * 4.0 / 7.0 * np.sqrt(np.pi / 4.0)}[model]
    cls = {"spherical": gs.Spherical, "exponential": gs.Exponential,
           "gaussian": gs.Gaussian}[model]
    return cls(dim=2, var=var, len_scale=[length, length / ratio],
               angles=np.deg2rad(angle_deg))


def _gs_model(m: VariogramModel):
    first = _gs_structure(m.model, m.psill, m.range_m, m.anisotropy_ratio,
                          m.anisotropy_angle_deg)
    if not m.is_nested:
        first.nugget = m.nugget
        return first
    second = _gs_structure(m.model2, m.psill2, m.range2_m, m.anisotropy_ratio,
                           m.anisotropy_angle_deg)
    return gs.SumModel(first, second, nugget=m.nugget)


MODELS = [
    VariogramModel("spherical", 1.0, 8.0, 400.0),
    VariogramModel("exponential", 0.5, 6.0, 600.0, anisotropy_ratio=2.5,
                   anisotropy_angle_deg=35.0),
    VariogramModel("gaussian", 0.8, 5.0, 500.0, anisotropy_ratio=1.6,
                   anisotropy_angle_deg=120.0),
    VariogramModel("spherical", 0.3, 3.0, 200.0, model2="exponential", psill2=5.0,
                   range2_m=1500.0),
    VariogramModel("spherical", 0.3, 3.0, 250.0, anisotropy_ratio=2.0,
                   anisotropy_angle_deg=-20.0, model2="gaussian", psill2=4.0, range2_m=900.0),
]


@pytest.mark.parametrize("m", MODELS, ids=lambda m: f"{m.model}+{m.model2 or '-'}"
                         f"-ratio{m.anisotropy_ratio:g}")
def test_model_semivariance_equals_gstools(m):
    # Reference: gstools' variogram of the same model (vario_spatial takes separations).
    rng = np.random.default_rng(0)
    dx, dy = rng.uniform(-900, 900, (2, 50))
    ref = _gs_model(m).vario_spatial(np.vstack([dx, dy]))
    assert np.allclose(m.gamma_xy(dx, dy), ref, rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("m", MODELS, ids=lambda m: f"{m.model}+{m.model2 or '-'}"
                         f"-ratio{m.anisotropy_ratio:g}")
def test_kriging_equals_gstools_to_1e8(m):
    # Reference: gstools.krige.Ordinary, all data in the system; exact=False with the default
    # cond_err ("nugget") treats the nugget as at the data, as pykrige and aquitardmap do.
    x, y, z, xt, yt = _data()
    est, var = gs.krige.Ordinary(_gs_model(m), [x, y], z, exact=False)(
        [xt, yt], mesh_type="unstructured", return_var=True)
    w = kriging_weights(x, y, m, xt, yt, max_neighbours=100)
    assert np.allclose(w.apply(z), est, rtol=1e-8, atol=0)
    assert np.allclose(w.variance, var, rtol=1e-8, atol=0)
    r = krige_points(x, y, z, m, xt, yt, max_neighbours=100)   # pykrige, or weights if nested
    assert np.allclose(r.estimate, est, rtol=1e-8, atol=0)
    assert np.allclose(r.variance, var, rtol=1e-8, atol=0)


@pytest.mark.parametrize("m", MODELS, ids=lambda m: f"{m.model}+{m.model2 or '-'}"
                         f"-ratio{m.anisotropy_ratio:g}")
def test_external_drift_kriging_equals_gstools_to_1e8(m):
    # Reference: gstools.krige.ExtDrift (kriging with an external drift), all data in the
    # system, the drift a smooth "ground elevation" known at data and targets.
    x, y, z, xt, yt = _data()
    ground = 50.0 + 0.004 * x - 0.002 * y + 3.0 * np.sin(x / 400.0)
    ground_t = 50.0 + 0.004 * xt - 0.002 * yt + 3.0 * np.sin(xt / 400.0)
    zd = z - 0.8 * ground
    krig = gs.krige.ExtDrift(_gs_model(m), [x, y], zd, ext_drift=ground, exact=False)
    est, var = krig([xt, yt], mesh_type="unstructured", ext_drift=ground_t, return_var=True)
    w = kriging_weights(x, y, m, xt, yt, max_neighbours=100, drift=ground,
                        target_drift=ground_t)
    assert np.allclose(w.apply(zd), est, rtol=1e-8, atol=0)
    assert np.allclose(w.variance, var, rtol=1e-8, atol=0)
    # The weights honour both unbiasedness conditions (definition of the method).
    assert np.allclose(w.weights.sum(axis=1), 1.0)
    assert np.allclose(np.einsum("tk,tk->t", w.weights, ground[w.index]), ground_t)


def test_external_drift_with_a_flat_neighbourhood_falls_back_to_ordinary_kriging():
    # A drift that does not vary among the neighbours cannot be estimated (common
    # practice): those targets get the ordinary kriging weights and variance.
    m = MODELS[0]
    x, y, z, xt, yt = _data()
    ok = kriging_weights(x, y, m, xt, yt, max_neighbours=100)
    flat = kriging_weights(x, y, m, xt, yt, max_neighbours=100, drift=np.full(x.size, 60.0),
                           target_drift=np.full(xt.size, 61.0))
    assert np.allclose(flat.weights, ok.weights, rtol=1e-12)
    assert np.allclose(flat.variance, ok.variance, rtol=1e-12)


@pytest.mark.parametrize("m", MODELS[:3], ids=lambda m: m.model)
def test_weights_equal_pykrige_moving_neighbourhood(m):
    # Reference: pykrige's compiled moving-window solver (n_closest_points) behind
    # krige_points, on 200 data with 24 neighbours per target.
    x, y, z, xt, yt = _data(seed=8, n=200)
    r = krige_points(x, y, z, m, xt, yt, max_neighbours=24)
    w = kriging_weights(x, y, m, xt, yt, max_neighbours=24)
    assert np.allclose(w.apply(z), r.estimate, rtol=1e-8, atol=1e-10)
    assert np.allclose(w.variance, r.variance, rtol=1e-8, atol=1e-10)
    assert np.allclose(w.weights.sum(axis=1), 1.0)


def test_two_point_weights_match_closed_form():
    # Closed form of ordinary kriging with two data (solve λ1 + λ2 = 1 with the two kriging
    # equations by hand): λ1 = 1/2 + (γ02 − γ01) / (2 γ12), μ = γ01 − λ2 γ12,
    # σ² = λ1 γ01 + λ2 γ02 + μ.
    m = VariogramModel("exponential", 0.2, 2.0, 300.0)
    x, y = np.array([0.0, 120.0]), np.array([0.0, 50.0])
    xt, yt = np.array([30.0, 200.0, -40.0]), np.array([10.0, -60.0, 90.0])
    g01 = m.gamma(np.hypot(xt - x[0], yt - y[0]))
    g02 = m.gamma(np.hypot(xt - x[1], yt - y[1]))
    g12 = m.gamma(np.hypot(x[1] - x[0], y[1] - y[0]))
    lam1 = 0.5 + (g02 - g01) / (2.0 * g12)
    lam2 = 1.0 - lam1
    mu = g01 - lam2 * g12
    w = kriging_weights(x, y, m, xt, yt)
    order = np.argsort(w.index, axis=1)
    got = np.take_along_axis(w.weights, order, axis=1)
    assert np.allclose(got[:, 0], lam1, rtol=1e-12)
    assert np.allclose(got[:, 1], lam2, rtol=1e-12)
    assert np.allclose(w.variance, lam1 * g01 + lam2 * g02 + mu, rtol=1e-12)


def test_three_point_weights_at_centroid_of_equilateral_triangle_are_a_third():
    # Symmetry (closed form): at the centroid of an equilateral triangle every datum has the
    # same distances, so each weight is 1/3 and σ² = γ(r) + μ with μ = γ(r) − 2/3·γ(s)
    # (r: centroid distance, s: side), from one kriging equation: λ(0 + 2γ(s)) + μ = γ(r).
    m = VariogramModel("spherical", 0.5, 4.0, 500.0)
    s = 300.0
    x = np.array([0.0, s, s / 2])
    y = np.array([0.0, 0.0, s * np.sqrt(3) / 2])
    w = kriging_weights(x, y, m, np.array([x.mean()]), np.array([y.mean()]))
    assert np.allclose(w.weights, 1.0 / 3.0, rtol=1e-12)
    gr = m.gamma(np.array([s / np.sqrt(3)]))[0]
    gs_ = m.gamma(np.array([s]))[0]
    mu = gr - 2.0 / 3.0 * gs_
    assert w.variance[0] == pytest.approx(gr + mu, rel=1e-12)


def test_pure_nugget_weights_are_equal():
    # With a pure-nugget model every datum is equally (un)informative: ordinary kriging
    # reduces to the arithmetic mean, variance nugget·(1 + 1/n) (Isaaks & Srivastava 1989,
    # ch. 12, from memory; follows from the system with Γ = c(11ᵀ − I)).
    m = VariogramModel("spherical", 2.0, 1e-12, 1.0)
    x, y, z, xt, yt = _data(n=10)
    w = kriging_weights(x, y, m, xt, yt)
    assert np.allclose(w.weights, 0.1, rtol=1e-6)
    assert np.allclose(w.variance, 2.0 * 1.1, rtol=1e-6)


def test_leave_one_out_weights_equal_kriging_without_the_datum():
    # Reference: krige_points (pykrige) with the datum removed from the data set.
    x, y, z, _, _ = _data(seed=5, n=30)
    m = VariogramModel("spherical", 0.4, 6.0, 500.0)
    w = kriging_weights(x, y, m, x, y, max_neighbours=64, exclude_coincident=True)
    loo = w.apply(z)
    for i in (0, 7, 29):
        keep = np.arange(30) != i
        r = krige_points(x[keep], y[keep], z[keep], m, x[i:i + 1], y[i:i + 1])
        assert loo[i] == pytest.approx(r.estimate[0], rel=1e-9)
        assert w.variance[i] == pytest.approx(r.variance[0], rel=1e-9)
    assert not np.any(w.index == np.arange(30)[:, None])
