"""Tests of aquitardmap.hydraulics against hand-computed layered columns and AVI classes."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import hmean

from aquitardmap.hydraulics import (
    AVI_CLASSES,
    AVI_NO_DATA,
    SECONDS_PER_YEAR,
    advective_travel_time_yr,
    avi_class,
    equivalent_kv_m_s,
    leakance_per_s,
    series_resistance_s,
)

# Three-layer column (layers in series, any hydrogeology text), top to bottom:
#   2 m of sand      Kv = 1e-4  m/s, nₑ = 0.30  -> b/K =  2 / 1e-4  = 2.0e4  s
#   10 m of clay     Kv = 5e-10 m/s, nₑ = 0.40  -> b/K = 10 / 5e-10 = 2.0e10 s
#   5 m of silty clay Kv = 1e-9 m/s, nₑ = 0.35  -> b/K =  5 / 1e-9  = 5.0e9  s
# c  = 2.0e4 + 2.0e10 + 5.0e9 = 2.500002e10 s = 2.500002e10 / 31 557 600 = 792.20 yr
# Kv = Σb / c = 17 / 2.500002e10 = 6.79999e-10 m/s
# L  = 1 / c = 3.99999680e-11 1/s
# travel time with i = 0.5: Σ nₑb/K = 0.30·2e4 + 0.40·2e10 + 0.35·5e9 = 9.750006e9 s;
#   / 0.5 = 1.9500012e10 s = 617.918 yr
# AVI: log10(792.20) = 2.899 -> class 3, "moderate".
B3 = np.array([2.0, 10.0, 5.0])
K3 = np.array([1e-4, 5e-10, 1e-9])
N3 = np.array([0.30, 0.40, 0.35])


def test_julian_year():
    # Julian year: 365.25 days of 86 400 s (IAU definition) = 31 557 600 s.
    assert SECONDS_PER_YEAR == 31_557_600.0


def test_three_layer_column_matches_hand_computation():
    c = series_resistance_s(B3, K3)
    assert c == pytest.approx(2.500002e10, rel=1e-12)
    assert c / SECONDS_PER_YEAR == pytest.approx(792.2028, rel=1e-6)
    assert equivalent_kv_m_s(B3, K3) == pytest.approx(6.799994560e-10, rel=1e-9)
    assert leakance_per_s(B3, K3) == pytest.approx(3.9999968e-11, rel=1e-9)
    assert advective_travel_time_yr(B3, K3, N3, 0.5) == pytest.approx(617.91809, rel=1e-7)
    assert avi_class(c / SECONDS_PER_YEAR) == 3


def test_equivalent_kv_is_thickness_weighted_harmonic_mean():
    # Series layers: Kv is the harmonic mean of K weighted by thickness (scipy reference).
    assert equivalent_kv_m_s(B3, K3) == pytest.approx(hmean(K3, weights=B3), rel=1e-12)


def test_single_layer_limit():
    # One layer: c = b/K, Kv = K, L = K/b, t = nₑ b / (K i) (Darcy seepage velocity
    # v = K i / nₑ, Freeze & Cherry 1979).
    b, k, n, i = np.array([8.0]), np.array([2e-9]), np.array([0.4]), 1.0
    assert series_resistance_s(b, k) == pytest.approx(8.0 / 2e-9, rel=1e-12)
    assert equivalent_kv_m_s(b, k) == pytest.approx(2e-9, rel=1e-12)
    assert leakance_per_s(b, k) == pytest.approx(2e-9 / 8.0, rel=1e-12)
    assert advective_travel_time_yr(b, k, n, i) == pytest.approx(
        0.4 * 8.0 / (2e-9 * 1.0) / SECONDS_PER_YEAR, rel=1e-12)


def test_equal_conductivity_gives_that_conductivity():
    b = np.array([[1.0, 3.0], [4.0, 0.5], [2.0, 7.0]])
    k = np.full(3, 3e-10)
    assert np.allclose(equivalent_kv_m_s(b, k), 3e-10, rtol=1e-12, atol=0)
    # Travel time then equals nₑ Σb / (K i) for a uniform porosity.
    t = advective_travel_time_yr(b, k, np.full(3, 0.2), 2.0)
    assert np.allclose(t, 0.2 * b.sum(axis=0) / (3e-10 * 2.0) / SECONDS_PER_YEAR, rtol=1e-12)


def test_grid_cells_are_independent_columns():
    # (n_units, ny, nx) = (3, 2, 2): cell (0, 0) is the three-layer column above; cell
    # (0, 1) has only the clay (c = 10 / 5e-10 = 2e10 s); cell (1, 0) has no column at all;
    # cell (1, 1) is outside the mapped area (NaN).
    b = np.zeros((3, 2, 2))
    b[:, 0, 0] = B3
    b[1, 0, 1] = 10.0
    b[:, 1, 1] = np.nan
    c = series_resistance_s(b, K3)
    assert c.shape == (2, 2)
    assert c[0, 0] == pytest.approx(2.500002e10, rel=1e-12)
    assert c[0, 1] == pytest.approx(2e10, rel=1e-12)
    assert c[1, 0] == 0.0 and np.isnan(c[1, 1])

    kv = equivalent_kv_m_s(b, K3)
    assert kv[0, 1] == pytest.approx(5e-10, rel=1e-12)
    assert np.isnan(kv[1, 0])            # no column: undefined
    assert np.isnan(kv[1, 1])

    leak = leakance_per_s(b, K3)
    assert leak[1, 0] == np.inf          # no column: nothing separates the aquifer
    assert np.isnan(leak[1, 1])

    t = advective_travel_time_yr(b, K3, N3, np.array([[0.5, 1.0], [1.0, 1.0]]))
    assert t[0, 0] == pytest.approx(617.91809, rel=1e-7)
    assert t[0, 1] == pytest.approx(0.40 * 10 / 5e-10 / SECONDS_PER_YEAR, rel=1e-12)
    assert t[1, 0] == 0.0 and np.isnan(t[1, 1])

    cls = avi_class(c / SECONDS_PER_YEAR)
    assert cls.dtype == np.int8
    assert cls.tolist() == [[3, 3], [1, AVI_NO_DATA]]


def test_zero_thickness_unit_adds_nothing():
    with_zero = series_resistance_s(np.array([2.0, 0.0, 5.0]), K3)
    assert with_zero == pytest.approx(2.0 / 1e-4 + 5.0 / 1e-9, rel=1e-12)


@pytest.mark.parametrize("call", [
    lambda: series_resistance_s(np.array([1.0, -0.1, 2.0]), K3),
    lambda: series_resistance_s(np.array([1.0, 2.0]), K3),
    lambda: series_resistance_s(B3, np.array([1e-4, 0.0, 1e-9])),
    lambda: advective_travel_time_yr(B3, K3, N3, 0.0),
    lambda: advective_travel_time_yr(B3, K3, np.array([0.3, 0.0, 0.3]), 1.0),
    lambda: avi_class(-1.0),
])
def test_impossible_inputs_are_refused(call):
    with pytest.raises(ValueError):
        call()


def test_avi_classes_table():
    # Van Stempvoort, Ewert & Wassenaar (1993), bounds from memory: log10(c in years)
    # < 1 extremely high, 1–2 high, 2–3 moderate, 3–4 low, > 4 extremely low vulnerability.
    assert [(code, lo, hi, label) for code, lo, hi, label in AVI_CLASSES] == [
        (1, -np.inf, 1.0, "extremely high"),
        (2, 1.0, 2.0, "high"),
        (3, 2.0, 3.0, "moderate"),
        (4, 3.0, 4.0, "low"),
        (5, 4.0, np.inf, "extremely low"),
    ]


def test_avi_class_boundaries():
    # Same source; a value on a bound goes to the class above (10 yr -> class 2).
    c_yr = np.array([0.0, 1e-3, 9.99, 10.0, 99.9, 100.0, 999.0, 1000.0, 9999.0, 10000.0,
                     1e7, np.nan])
    assert avi_class(c_yr).tolist() == [1, 1, 1, 2, 2, 3, 3, 4, 4, 5, 5, AVI_NO_DATA]
