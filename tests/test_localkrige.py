"""The local kriging engine against pykrige's C backend, and its two paths against each other."""

import pickle

import numpy as np
import pytest
from pykrige.ok import OrdinaryKriging

from aquitardmap.geostat import localkrige
from aquitardmap.geostat.kriging import cross_validation_statistics, loo_cross_validation
from aquitardmap.geostat.variogram import VariogramModel

needs_numba = pytest.mark.skipif(not localkrige.numba_available(),
                                 reason="numba not installed (extra 'fast')")
PATHS = [pytest.param(True, marks=needs_numba, id="compiled"),
         pytest.param(False, id="numpy")]


def _data(seed: int, n: int, n_targets: int):
    rng = np.random.default_rng(seed)
    x = rng.uniform(0, 20_000, n) + 548_000.0
    y = rng.uniform(0, 14_000, n) + 6_712_000.0
    z = 10.0 + 3.0 * np.sin(x / 3000.0) + rng.normal(0, 1.0, n)
    xt = rng.uniform(0, 20_000, n_targets) + 548_000.0
    yt = rng.uniform(0, 14_000, n_targets) + 6_712_000.0
    m = min(4, n_targets)
    xt[:m], yt[:m] = x[:m], y[:m]  # targets on data: exact interpolation
    return x, y, z, xt, yt


def _pykrige(x, y, z, m: VariogramModel, xt, yt, k):
    """Reference: pykrige (PyPI) OrdinaryKriging, C backend, n_closest_points=k."""
    ok = OrdinaryKriging(
        x, y, z, variogram_model=m.model,
        variogram_parameters={"psill": m.psill, "range": m.range_m, "nugget": m.nugget},
        anisotropy_scaling=m.anisotropy_ratio, anisotropy_angle=m.anisotropy_angle_deg,
        exact_values=True)
    e, v = ok.execute("points", xt, yt, backend="C", n_closest_points=k)
    return np.asarray(e, float), np.asarray(v, float)


def _close(a, b, rel=1e-8):
    # "equal to 1e-8 relative": |a - b| <= 1e-8 |b|, with an absolute floor of 1e-8 of the
    # largest value for quantities that are 0 at the data (the variance there)
    return np.all(np.abs(a - b) <= rel * np.maximum(np.abs(b), np.abs(b).max()))


@pytest.mark.parametrize("accelerate", PATHS)
@pytest.mark.parametrize("model,k", [
    (VariogramModel("spherical", nugget=1.0, psill=8.0, range_m=3000.0), 16),
    (VariogramModel("exponential", nugget=0.3, psill=5.0, range_m=4000.0,
                    anisotropy_ratio=2.5, anisotropy_angle_deg=30.0), 16),
    (VariogramModel("gaussian", nugget=0.5, psill=6.0, range_m=2500.0), 12),
    (VariogramModel("spherical", nugget=0.2, psill=4.0, range_m=5000.0,
                    anisotropy_ratio=1.8, anisotropy_angle_deg=-60.0), 48),
])
def test_engine_equals_pykrige_c_backend_with_n_closest_points(model, k, accelerate):
    # Reference: pykrige's OrdinaryKriging.execute(backend="C", n_closest_points=k), same
    # model and anisotropy; estimate and variance to 1e-8 relative.
    x, y, z, xt, yt = _data(seed=5, n=600, n_targets=3000)
    e0, v0 = _pykrige(x, y, z, model, xt, yt, k)
    data = localkrige.prepare(x, y, z, model, k)
    e, v = localkrige.krige_targets(data, xt, yt, accelerate=accelerate)
    assert _close(e, e0)
    assert _close(v, v0)
    assert np.allclose(e[:4], z[:4], rtol=0, atol=1e-9)
    assert np.all(np.abs(v[:4]) < 1e-9)


@pytest.mark.parametrize("accelerate", PATHS)
def test_engine_on_a_fine_grid_equals_pykrige(accelerate):
    # A fine grid: neighbouring cells share or nearly share neighbour sets, so the compiled
    # path reuses and updates systems; still pykrige's numbers (reference as above).
    x, y, z, _, _ = _data(seed=8, n=800, n_targets=1)
    m = VariogramModel("spherical", nugget=0.5, psill=8.0, range_m=4000.0)
    xs = 548_000.0 + np.arange(0, 20_000, 40.0)
    ys = 6_712_000.0 + np.arange(0, 6_000, 40.0)
    xx, yy = (a.ravel() for a in np.meshgrid(xs, ys))
    e0, v0 = _pykrige(x, y, z, m, xx, yy, 24)
    e, v = localkrige.krige_targets(localkrige.prepare(x, y, z, m, 24), xx, yy,
                                    accelerate=accelerate)
    assert _close(e, e0)
    assert _close(v, v0)


@needs_numba
def test_compiled_and_numpy_paths_agree_and_chunks_do_not_matter(monkeypatch):
    x, y, z, xt, yt = _data(seed=9, n=900, n_targets=20_000)
    m = VariogramModel("exponential", nugget=0.4, psill=6.0, range_m=3500.0)
    data = localkrige.prepare(x, y, z, m, 16)
    e1, v1 = localkrige.krige_targets(data, xt, yt, accelerate=True)
    e2, v2 = localkrige.krige_targets(data, xt, yt, accelerate=False)
    assert np.allclose(e1, e2, rtol=1e-10, atol=1e-10)
    assert np.allclose(v1, v2, rtol=1e-10, atol=1e-10)
    monkeypatch.setattr(localkrige, "CHUNK_TARGETS", 997)
    e3, v3 = localkrige.krige_targets(data, xt, yt, accelerate=True)
    assert np.allclose(e3, e1, rtol=1e-10, atol=1e-10)
    assert np.allclose(v3, v1, rtol=1e-10, atol=1e-10)


@pytest.mark.parametrize("accelerate", PATHS)
def test_all_data_as_neighbours_equals_global_kriging(accelerate):
    # k >= n: every target uses every datum; reference pykrige without a moving
    # neighbourhood (vectorised backend).
    x, y, z, xt, yt = _data(seed=2, n=40, n_targets=500)
    m = VariogramModel("spherical", nugget=0.3, psill=8.0, range_m=6000.0)
    ok = OrdinaryKriging(x, y, z, variogram_model="spherical",
                         variogram_parameters={"psill": 8.0, "range": 6000.0, "nugget": 0.3})
    e0, v0 = ok.execute("points", xt, yt, backend="vectorized")
    e, v = localkrige.krige_targets(localkrige.prepare(x, y, z, m, 100), xt, yt,
                                    accelerate=accelerate)
    assert _close(e, np.asarray(e0))
    assert _close(v, np.asarray(v0))


@pytest.mark.parametrize("accelerate", PATHS)
def test_single_datum(accelerate):
    # One datum: λ = 1, μ = γ(h), so the estimate is the datum and the variance 2γ(h)
    # (the OK system of Isaaks & Srivastava 1989, eq. 12.14, with n = 1).
    m = VariogramModel("spherical", nugget=1.0, psill=4.0, range_m=100.0)
    data = localkrige.prepare([0.0], [0.0], [7.0], m, 16)
    e, v = localkrige.krige_targets(data, np.array([0.0, 30.0, 500.0]), np.zeros(3),
                                    accelerate=accelerate)
    assert np.allclose(e, 7.0)
    assert np.allclose(v, 2 * m.gamma(np.array([0.0, 30.0, 500.0])))


@pytest.mark.parametrize("accelerate", PATHS)
def test_leave_one_out_equals_kriging_without_the_datum(accelerate):
    # Reference: pykrige (C backend, n_closest_points=k) built on the data without datum i,
    # kriging at datum i.
    x, y, z, _, _ = _data(seed=4, n=300, n_targets=1)
    m = VariogramModel("exponential", nugget=0.5, psill=5.0, range_m=5000.0,
                       anisotropy_ratio=1.5, anisotropy_angle_deg=20.0)
    k = 20
    e, v = localkrige.leave_one_out(localkrige.prepare(x, y, z, m, k), accelerate=accelerate)
    for i in (0, 17, 123, 299):
        keep = np.arange(x.size) != i
        e0, v0 = _pykrige(x[keep], y[keep], z[keep], m, x[i:i + 1], y[i:i + 1], k)
        assert e[i] == pytest.approx(e0[0], rel=1e-8)
        assert v[i] == pytest.approx(v0[0], rel=1e-8)


def test_loo_cross_validation_matches_the_one_by_one_loop():
    # The one-pass function against the definition: krige every datum from the others.
    from aquitardmap.geostat.kriging import krige_points

    x, y, z, _, _ = _data(seed=6, n=120, n_targets=1)
    m = VariogramModel("spherical", nugget=0.8, psill=6.0, range_m=4000.0)
    loo = loo_cross_validation(x, y, z, m, 16)
    e = np.empty(x.size)
    v = np.empty(x.size)
    for i in range(x.size):
        keep = np.arange(x.size) != i
        r = krige_points(x[keep], y[keep], z[keep], m, x[i:i + 1], y[i:i + 1],
                         max_neighbours=16)
        e[i], v[i] = r.estimate[0], r.variance[0]
    assert np.allclose(loo.estimate, e, rtol=1e-9)
    assert np.allclose(loo.variance, v, rtol=1e-9)
    stats = cross_validation_statistics(z, loo)
    err = e - z
    assert stats["rmse"] == pytest.approx(np.sqrt(np.mean(err**2)))
    assert stats["mean_standardised_error"] == pytest.approx(np.mean(err / np.sqrt(v)))
    assert set(stats) == {"n", "mean_error", "rmse", "mean_standardised_error",
                          "variance_standardised_error"}


def test_prepared_data_survives_pickling():
    # Tiles may run in other processes: the prepared data must travel and give the same
    # numbers there.
    x, y, z, xt, yt = _data(seed=3, n=200, n_targets=500)
    m = VariogramModel("gaussian", nugget=0.5, psill=4.0, range_m=3000.0)
    data = localkrige.prepare(x, y, z, m, 16)
    copy = pickle.loads(pickle.dumps(data))
    a = localkrige.krige_targets(data, xt, yt)
    b = localkrige.krige_targets(copy, xt, yt)
    assert np.array_equal(a[0], b[0]) and np.array_equal(a[1], b[1])


def test_bad_input_is_refused():
    m = VariogramModel("spherical", nugget=0.0, psill=1.0, range_m=10.0)
    with pytest.raises(ValueError, match="no data"):
        localkrige.prepare([], [], [], m, 8)
    with pytest.raises(ValueError, match="finite"):
        localkrige.prepare([0.0, 1.0], [0.0, np.nan], [1.0, 2.0], m, 8)
    with pytest.raises(ValueError, match="differ in length"):
        localkrige.prepare([0.0, 1.0], [0.0], [1.0, 2.0], m, 8)
    with pytest.raises(ValueError, match="at least 2"):
        localkrige.leave_one_out(localkrige.prepare([0.0], [0.0], [1.0], m, 8))


@pytest.mark.parametrize("accelerate", PATHS)
def test_nested_model_equals_the_textbook_system(accelerate):
    # Nested model (nugget + spherical + exponential): reference is the ordinary kriging
    # system in variogram form, Isaaks & Srivastava (1989) eq. 12.14, solved with numpy on
    # all data (k >= n).
    from scipy.spatial.distance import cdist

    x, y, z, xt, yt = _data(seed=12, n=60, n_targets=400)
    m = VariogramModel("spherical", nugget=0.3, psill=3.0, range_m=1500.0,
                       model2="exponential", psill2=4.0, range2_m=9000.0)
    n = x.size
    a = np.ones((n + 1, n + 1))
    a[:n, :n] = m.gamma(cdist(np.c_[x, y], np.c_[x, y]))
    a[n, n] = 0.0
    b = np.ones((n + 1, xt.size))
    b[:n] = m.gamma(cdist(np.c_[x, y], np.c_[xt, yt]))
    w = np.linalg.solve(a, b)
    e, v = localkrige.krige_targets(localkrige.prepare(x, y, z, m, 64), xt, yt,
                                    accelerate=accelerate)
    assert _close(e, w[:n].T @ z)
    assert _close(v, (w * b).sum(axis=0))
