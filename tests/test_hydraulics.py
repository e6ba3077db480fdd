"""Tests of aquitardmap.hydraulics.column against hand-computed layered columns and AVI classes."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import hmean

from aquitardmap.hydraulics.column import (
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


# --- hazards, crust, diffusion, Péclet, heads --------------------------------------------

def test_removal_from_the_top_takes_cover_first_then_clay():
    from aquitardmap.hydraulics.column import remove_from_top_m
    # Column 2 m sand / 10 m clay / 5 m silty clay (B3). A 6 m pit removes the sand and
    # 4 m of clay; a 20 m cut removes everything; 0 m changes nothing (hand computation).
    out = remove_from_top_m(np.stack([B3, B3, B3], axis=1), np.array([6.0, 20.0, 0.0]))
    assert out[:, 0].tolist() == [0.0, 6.0, 5.0]
    assert out[:, 1].tolist() == [0.0, 0.0, 0.0]
    assert out[:, 2].tolist() == B3.tolist()
    with pytest.raises(ValueError):
        remove_from_top_m(B3, -1.0)


def test_crust_is_the_top_of_the_clay_across_units():
    from aquitardmap.hydraulics.column import crust_thickness_m
    # 3 m crust from the top of the clay: sand (cover) is not crust; 3 m of the 10 m clay;
    # with only 1 m of the first clay, 1 m there and 2 m in the next (hand computation).
    is_aq = np.array([False, True, True])
    assert crust_thickness_m(B3, is_aq, 3.0).tolist() == [0.0, 3.0, 0.0]
    assert crust_thickness_m(np.array([2.0, 1.0, 5.0]), is_aq, 3.0).tolist() == [0.0, 1.0, 2.0]
    assert crust_thickness_m(np.array([2.0, 1.0, 0.5]), is_aq, 3.0).tolist() == [0.0, 1.0, 0.5]
    assert crust_thickness_m(B3, is_aq, 0.0).tolist() == [0.0, 0.0, 0.0]


def test_crust_with_raised_k_as_two_layers_in_series():
    # Hand computation: the 10 m clay (K 5e-10) with a 3 m crust at 100 K: 7/5e-10 +
    # 3/5e-8 = 1.4e10 + 6e7 = 1.406e10 s; the column c = 2e4 + 1.406e10 + 5e9 = 1.906002e10 s.
    b = np.array([2.0, 7.0, 5.0, 0.0, 3.0, 0.0])
    k = np.concatenate([K3, K3 * 100.0])
    assert series_resistance_s(b, k) == pytest.approx(1.906002e10, rel=1e-12)


def test_diffusion_time_scale_hand_computation():
    from aquitardmap.hydraulics.column import diffusion_time_yr
    # B = 20 m, De = 5e-10 m²/s: B²/De = 400 / 5e-10 = 8e11 s = 8e11 / 31 557 600 yr
    # = 25 350.47 yr.
    assert float(diffusion_time_yr(20.0, 5e-10)) == pytest.approx(25350.47, rel=1e-6)
    assert float(diffusion_time_yr(0.0, 5e-10)) == 0.0
    with pytest.raises(ValueError):
        diffusion_time_yr(1.0, 0.0)


def test_peclet_number_of_one_layer_is_v_b_over_de():
    from aquitardmap.hydraulics.column import diffusion_time_yr, peclet_number
    # One layer: Pe = (B²/De) / (nₑ B / (K i)) = v B / De with seepage velocity v = K i / nₑ
    # (Bear 1972). B = 10 m, K = 5e-10, i = 1, nₑ = 0.4: v = 1.25e-9 m/s; De = 5e-10
    # -> Pe = 1.25e-9 · 10 / 5e-10 = 25.
    td = diffusion_time_yr(10.0, 5e-10)
    ta = advective_travel_time_yr(np.array([10.0]), np.array([5e-10]), np.array([0.4]), 1.0)
    assert float(peclet_number(td, ta)) == pytest.approx(25.0, rel=1e-12)
    assert float(peclet_number(td, np.inf)) == 0.0       # no downward advection
    assert np.isnan(peclet_number(0.0, 0.0))              # no clay: undefined


def test_gradient_from_heads():
    from aquitardmap.hydraulics.column import gradient_from_heads
    # Darcy: i = (h_top − h_bottom) / B. Water table 52 m, aquifer head 47 m, 20 m column
    # -> 0.25 downward; an upward case is negative; no column -> undefined.
    i = gradient_from_heads(np.array([52.0, 45.0, 50.0]), np.array([47.0, 47.0, 40.0]),
                            np.array([20.0, 10.0, 0.0]))
    assert i[0] == pytest.approx(0.25, rel=1e-12)
    assert i[1] == pytest.approx(-0.2, rel=1e-12)
    assert np.isnan(i[2])


def test_avi_legend_uses_the_published_class_names():
    from aquitardmap.hydraulics.column import avi_legend
    rows = avi_legend()
    # Van Stempvoort, Ewert & Wassenaar (1993), class names from memory.
    assert [r["vulnerability"] for r in rows] == [
        "extremely high vulnerability", "high vulnerability", "moderate vulnerability",
        "low vulnerability", "extremely low vulnerability"]
    assert [r["resistance_yr"] for r in rows] == [
        "< 10", "10 to < 100", "100 to < 1000", "1000 to < 10000", ">= 10000"]


def test_travel_time_is_infinite_where_the_gradient_is_not_downward():
    from aquitardmap.hydraulics.column import downward_travel_time_yr
    # Cells: the three-layer column at i = 0.5 (617.918 yr, hand computation above), the
    # same column at i = 0 and i = −0.2 (no downward advection: +inf), and an empty column
    # with an upward gradient (nothing to cross: 0).
    b = np.zeros((3, 4))
    b[:, :3] = B3[:, None]
    t = downward_travel_time_yr(b, K3, N3, np.array([0.5, 0.0, -0.2, -1.0]))
    assert t[0] == pytest.approx(617.91809, rel=1e-7)
    assert np.isposinf(t[1]) and np.isposinf(t[2]) and t[3] == 0.0


def test_series_flow_under_heads_by_hand():
    """The three-layer column (B3, K3, N3) with 8.5 m of head drop (i = 0.5 over 17 m).
    By hand: c = 2/1e-4 + 10/5e-10 + 5/1e-9 = 2.500002e10 s; q = 8.5 / c =
    3.3999973e-10 m/s; stored water Σ nb = 0.6 + 4.0 + 1.75 = 6.35 m; t = 6.35 / q =
    1.8676486e10 s = 591.822 yr (continuity of flux through layers in series; common
    practice). The uniform-gradient time of the same column is 617.918 yr: the two differ
    because the porosities differ between the layers."""
    from aquitardmap.hydraulics.column import crossing_time_yr, series_flux_m_s
    q = series_flux_m_s(B3, K3, 8.5)
    assert float(q) == pytest.approx(8.5 / 2.500002e10, rel=1e-12)
    assert float(crossing_time_yr(B3, N3, q)) == pytest.approx(591.8221, rel=1e-6)
    # Same porosity in every layer: the two formulas agree (Σ nb · c = n·B · Σ b/K).
    n_same = np.full(3, 0.4)
    assert float(crossing_time_yr(B3, n_same, q)) == pytest.approx(
        float(advective_travel_time_yr(B3, K3, n_same, 0.5)), rel=1e-12)
    # Upward or no flow: +inf; an empty column: 0; NaN thickness: NaN.
    b = np.zeros((3, 4))
    b[:, :2] = B3[:, None]
    b[:, 3] = np.nan
    t = crossing_time_yr(b, N3, series_flux_m_s(b, K3, np.array([-1.0, 0.0, 2.0, 2.0])))
    assert np.isposinf(t[0]) and np.isposinf(t[1]) and t[2] == 0.0 and np.isnan(t[3])


def test_series_flow_matches_a_finite_difference_solution():
    """Independent check: the steady 1-D head profile through the same column solved by
    finite differences (Darcy + continuity, harmonic-mean conductance between nodes, 0.01 m
    nodes; scipy's sparse solver), then water tracked down it cell by cell at the seepage
    velocity from the numerical head gradient. Flux and travel time agree with the closed
    forms to 1e-6 (the fluxes are averaged over the faces)."""
    from scipy.sparse import diags
    from scipy.sparse.linalg import spsolve

    from aquitardmap.hydraulics.column import crossing_time_yr, series_flux_m_s

    dz = 0.01
    tops = np.concatenate([[0.0], np.cumsum(B3)])
    z = np.arange(dz / 2, tops[-1], dz)  # cell centres, downward
    layer = np.searchsorted(tops, z, side="right") - 1
    k, n = K3[layer], N3[layer]
    h_top, h_bot = 60.0, 51.5  # 8.5 m drop
    # Conductance between neighbouring cells and to the two fixed heads (half cells).
    between = 1.0 / (dz / (2 * k[:-1]) + dz / (2 * k[1:]))
    c_top, c_bot = 2 * k[0] / dz, 2 * k[-1] / dz
    diag = np.zeros(z.size)
    diag[:-1] += between
    diag[1:] += between
    diag[0] += c_top
    diag[-1] += c_bot
    a = diags([-between, diag, -between], [-1, 0, 1], format="csc")
    rhs = np.zeros(z.size)
    rhs[0], rhs[-1] = c_top * h_top, c_bot * h_bot
    h = spsolve(a, rhs)
    q_cells = between * (h[:-1] - h[1:])            # flux across each inner face
    # Continuity holds to rounding: heads in the sand differ by ~1e-8 m from node to node,
    # so its face fluxes carry ~1e-6 relative round-off.
    assert np.ptp(q_cells) <= 1e-5 * q_cells.mean()
    q = float(series_flux_m_s(B3, K3, h_top - h_bot))
    assert q_cells.mean() == pytest.approx(q, rel=1e-6)
    t_numeric = np.sum(n * dz / q_cells.mean()) / SECONDS_PER_YEAR
    assert float(crossing_time_yr(B3, N3, q)) == pytest.approx(t_numeric, rel=1e-6)
