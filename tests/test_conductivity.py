"""Tests of aquitardmap.hydraulics.conductivity against
published formulas, worked examples and iapws."""

from __future__ import annotations

import math
import statistics

import numpy as np
import pandas as pd
import pytest
from iapws import IAPWS95
from scipy.stats import gmean

from aquitardmap.config.settings import HydraulicSettings, Unit
from aquitardmap.hydraulics.conductivity import (
    SAMPLE_COLUMNS,
    STANDARD_GRAVITY_M_S2,
    hazen_k_m_s,
    hazen_validity,
    kozeny_carman_k_m_s,
    kozeny_carman_validity,
    sample_conductivity,
    unit_conductivity,
    water_density_kg_m3,
    water_viscosity_pa_s,
)

TEMPS_C = [0.0, 5.0, 10.0, 15.0, 20.0, 25.0, 30.0]


def _iapws_water(temp_c: float) -> tuple[float, float]:
    """(density kg/m³, viscosity Pa·s) at 0.101325 MPa from the iapws package: IAPWS-95
    for the state, whose ``mu`` is the IAPWS 2008 viscosity formulation."""
    w = IAPWS95(T=273.15 + temp_c, P=0.101325)
    return w.rho, w.mu


# --- water properties -------------------------------------------------------------------

@pytest.mark.parametrize("temp_c", TEMPS_C)
def test_viscosity_matches_iapws_2008(temp_c):
    # Reference: IAPWS 2008 viscosity formulation via the iapws package. Tolerance 0.2 %:
    # the Kestin et al. (1978) correlation is stated to reproduce the data to about 0.1 %
    # near ambient (from memory) and the IAPWS 2008 uncertainty there is of the same order;
    # K from grain size is uncertain by far more.
    _, mu_ref = _iapws_water(temp_c)
    assert water_viscosity_pa_s(temp_c) == pytest.approx(mu_ref, rel=2e-3)


@pytest.mark.parametrize("temp_c", TEMPS_C)
def test_density_matches_iapws_95(temp_c):
    # Reference: IAPWS-95 via the iapws package. Tolerance 5 ppm: the Tanaka et al. (2001)
    # table agrees with IAPWS-95 to about 1 ppm between 0 and 40 °C (from memory); 5 ppm is
    # still 100 times tighter than the 0.05 % that would matter for K.
    rho_ref, _ = _iapws_water(temp_c)
    assert water_density_kg_m3(temp_c) == pytest.approx(rho_ref, rel=5e-6)


def test_water_properties_are_vectorised_and_match_handbook_values():
    mu = water_viscosity_pa_s(np.array([10.0, 20.0]))
    assert mu.shape == (2,)
    # Handbook values (from memory): about 1.31e-3 Pa·s at 10 °C and 1.00e-3 at 20 °C.
    assert mu[0] == pytest.approx(1.31e-3, abs=0.005e-3)
    assert mu[1] == pytest.approx(1.00e-3, abs=0.005e-3)
    # Pure water is densest near 3.98 °C (handbook value, from memory).
    t = np.linspace(0.0, 10.0, 1001)
    assert t[np.argmax(water_density_kg_m3(t))] == pytest.approx(3.98, abs=0.02)


@pytest.mark.parametrize("temp_c", [-1.0, 40.5, float("nan")])
def test_water_properties_refuse_temperatures_outside_their_range(temp_c):
    with pytest.raises(ValueError, match="between 0 and 40"):
        water_viscosity_pa_s(temp_c)
    with pytest.raises(ValueError, match="between 0 and 40"):
        water_density_kg_m3(temp_c)


# --- Hazen ------------------------------------------------------------------------------

def test_hazen_matches_freeze_and_cherry_form():
    # Freeze & Cherry (1979) form K[cm/s] = C·D10[cm]²: D10 = 0.1 mm = 0.01 cm, C = 100
    # -> 100 · 1e-4 = 1e-2 cm/s = 1e-4 m/s.
    assert hazen_k_m_s(0.1, c=100.0) == pytest.approx(1e-4, rel=1e-12)


def test_hazen_hand_derived_value():
    # Hand-derived from the same formula: D10 = 0.25 mm = 0.025 cm, C = 120
    # -> 120 · 6.25e-4 = 0.075 cm/s = 7.5e-4 m/s.
    assert hazen_k_m_s(0.25, c=120.0) == pytest.approx(7.5e-4, rel=1e-12)
    # K scales with D10²: doubling D10 quadruples K (Hazen 1892).
    k = hazen_k_m_s(np.array([0.2, 0.4]))
    assert k[1] / k[0] == pytest.approx(4.0, rel=1e-12)


def test_hazen_is_nan_where_d10_missing_or_not_positive():
    k = hazen_k_m_s(np.array([np.nan, 0.0, -0.1]))
    assert np.all(np.isnan(k))


def test_hazen_validity_bounds():
    # Range from memory (Freeze & Cherry 1979): 0.1 <= D10 <= 3 mm, Cu < 5.
    d10 = np.array([0.1, 0.09, 3.0, 3.1, 0.2, 0.2, 0.2, 0.2, np.nan])
    d60 = np.array([0.3, 0.3, 6.0, 6.0, 0.98, 1.0, np.nan, 0.1, 0.5])
    r = hazen_validity(d10, d60)
    assert list(r[[0, 2, 4]]) == ["", "", ""]
    assert "below 0.1 mm" in r[1]
    assert "above 3 mm" in r[3]
    assert "Cu" in r[5]                      # Cu = 5.0 exactly is not uniform enough
    assert "D60 missing" in r[6]
    assert "D60 smaller than D10" in r[7]
    assert r[8] == "D10 missing"


# --- Kozeny–Carman ----------------------------------------------------------------------

def test_kozeny_carman_matches_worked_example():
    # Worked example (from memory, a common calculator example): n = 0.30,
    # d = 0.1 mm, water at 10 °C -> K ≈ 2.3e-5 m/s. Quoted to two significant figures, so
    # the rounding interval is ±0.05e-5 (±2.2 %).
    k = float(kozeny_carman_k_m_s(0.1, 0.30, 10.0))
    assert k == pytest.approx(2.3e-5, abs=0.05e-5)
    # The same example evaluated exactly with IAPWS water properties (Carrier 2003 formula):
    # K = (ρg/μ) · n³/(1−n)² · d²/180 = (999.70 · 9.80665 / 1.3059e-3) · (0.027/0.49)
    #     · (1e-8/180) = 2.298e-5 m/s.
    rho, mu = _iapws_water(10.0)
    k_ref = rho * 9.80665 / mu * 0.3**3 / 0.7**2 * (0.1e-3) ** 2 / 180.0
    assert k_ref == pytest.approx(2.298e-5, rel=1e-3)
    assert k == pytest.approx(k_ref, rel=2e-3)   # water properties within 0.2 % (see above)


def test_kozeny_carman_hand_derived_value():
    # Carrier (2003) formula by hand: n = 0.40, d = 0.2 mm, 20 °C with IAPWS water
    # (ρ = 998.21 kg/m³, μ = 1.0016e-3 Pa·s): ρg/μ = 9.774e6 1/(m·s);
    # n³/(1−n)² = 0.064/0.36 = 0.17778; d²/180 = 4e-8/180 = 2.2222e-10 m²
    # -> K = 9.774e6 · 0.17778 · 2.2222e-10 = 3.861e-4 m/s.
    assert float(kozeny_carman_k_m_s(0.2, 0.40, 20.0)) == pytest.approx(3.861e-4, rel=2e-3)
    assert STANDARD_GRAVITY_M_S2 == 9.80665  # conventional value, 3rd CGPM (1901)


def test_kozeny_carman_depends_on_temperature_through_viscosity():
    # K ∝ ρ/μ (Carrier 2003): the ratio K(20 °C)/K(10 °C) is the ratio of ρ/μ from iapws.
    k10, k20 = kozeny_carman_k_m_s(0.1, 0.3, np.array([10.0, 20.0]))
    (r10, m10), (r20, m20) = _iapws_water(10.0), _iapws_water(20.0)
    assert k20 / k10 == pytest.approx((r20 / m20) / (r10 / m10), rel=2e-3)


def test_kozeny_carman_not_computable_without_porosity():
    assert np.isnan(kozeny_carman_k_m_s(0.1, np.nan, 10.0))
    r = kozeny_carman_validity(np.array([0.1]), np.array([0.3]), np.array([np.nan]))
    assert "porosity missing" in r[0] and "not computable" in r[0]


def test_kozeny_carman_validity_bounds():
    # Bounds chosen in conductivity.py: D10 from 0.0063 mm (top of fine silt, ISO 14688-1,
    # from memory; Carrier 2003: not for clays) to 2 mm (sand/gravel limit, from memory).
    d10 = np.array([0.0063, 0.006, 0.002, 2.0, 2.5, 0.05, 0.05])
    d60 = np.array([0.05, 0.05, 0.02, 4.0, 4.0, np.nan, 0.01])
    n = np.array([0.45, 0.45, 0.55, 0.30, 0.30, 0.35, 0.35])
    r = kozeny_carman_validity(d10, d60, n)
    assert list(r[[0, 3, 5]]) == ["", "", ""]   # D60 missing does not block Kozeny–Carman
    assert "clay or fine silt" in r[1] and "clay or fine silt" in r[2]
    assert "gravel" in r[4]
    assert "D60 smaller than D10" in r[6]
    assert "between 0 and 1" in kozeny_carman_validity([0.1], [0.2], [1.0])[0]


# --- per sample and per unit ------------------------------------------------------------

STACK = (
    Unit("SAND", "Surficial sand", "cover", 0.30, 1e-4, "hazen", 1.0),
    Unit("CLAY", "Marine clay", "aquitard", 0.05, 1e-9, "kozeny_carman", 4.0),
    Unit("SILT", "Silty layer", "aquitard", 0.10, 1e-7, "kozeny_carman", 1.0),
    Unit("TILL", "Till", "aquitard", 0.10, 1e-8, "none", 1.0),
    Unit("GRAV", "Esker gravel", "aquifer", 0.25, 1e-3, "hazen", 1.0),
)
SETTINGS = HydraulicSettings(groundwater_temp_c=10.0, vertical_gradient=1.0, hazen_c=100.0)


def _samples(rows: list[tuple]) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=list(SAMPLE_COLUMNS))


def test_sample_conductivity_order_of_preference():
    s = _samples([
        ("BH1", 1.0, 0.2, 0.5, 0.35, 3e-4, "SAND"),       # lab wins
        ("BH1", 2.0, 0.2, 0.5, 0.35, np.nan, "SAND"),     # Hazen in range
        ("BH1", 3.0, 0.05, 0.5, 0.35, np.nan, "SAND"),    # Hazen out of range
        ("BH2", 6.0, 0.002, 0.01, 0.55, np.nan, "CLAY"),  # clay: K-C out of range
        ("BH2", 8.0, 0.02, 0.06, 0.40, np.nan, "SILT"),   # K-C in range
        ("BH2", 9.0, 0.02, 0.06, np.nan, np.nan, "SILT"),  # no porosity
        ("BH3", 4.0, 0.2, 0.5, 0.35, np.nan, "TILL"),     # unit uses no method
        ("BH3", 5.0, 0.2, 0.5, 0.35, 2e-9, None),         # lab, unassigned
        ("BH3", 7.0, 0.2, 0.5, 0.35, np.nan, np.nan),     # nothing, unassigned
    ])
    out = sample_conductivity(s, STACK, SETTINGS)
    assert len(out) == len(s)
    assert list(out["k_source"]) == ["lab", "hazen", "", "", "kozeny_carman", "", "", "lab", ""]
    assert out["k_m_s"][0] == 3e-4
    assert out["k_m_s"][1] == pytest.approx(hazen_k_m_s(0.2))
    assert out["k_m_s"][4] == pytest.approx(float(kozeny_carman_k_m_s(0.02, 0.40, 10.0)))
    assert np.isnan(out["k_m_s"][[2, 3, 5, 6, 8]]).all()
    assert "below 0.1 mm" in out["note"][2]
    assert "clay or fine silt" in out["note"][3]
    assert "porosity missing" in out["note"][5]
    assert "no grain-size method" in out["note"][6]
    assert "not in any unit" in out["note"][8]
    # Both grain-size values are reported where computable, in range or not.
    assert np.isfinite(out["k_hazen_m_s"][3]) and np.isfinite(out["k_kozeny_carman_m_s"][3])
    assert out["hazen_reason"][1] == "" and out["kozeny_carman_reason"][4] == ""


def test_hazen_ignores_groundwater_temperature():
    s = _samples([("BH1", 2.0, 0.2, 0.5, 0.35, np.nan, "SAND")])
    cold = sample_conductivity(s, STACK, HydraulicSettings(groundwater_temp_c=2.0))
    warm = sample_conductivity(s, STACK, HydraulicSettings(groundwater_temp_c=25.0))
    assert cold["k_hazen_m_s"][0] == warm["k_hazen_m_s"][0]
    assert cold["k_kozeny_carman_m_s"][0] < warm["k_kozeny_carman_m_s"][0]


def test_unit_conductivity_prefers_lab_values():
    s = _samples([
        ("BH1", 6.0, 0.02, 0.06, 0.45, 1e-10, "CLAY"),
        ("BH2", 6.0, 0.02, 0.06, 0.45, 4e-10, "CLAY"),
        ("BH3", 6.0, 0.02, 0.06, 0.45, np.nan, "CLAY"),   # in K-C range, but lab exists
    ])
    t = unit_conductivity(s, STACK, SETTINGS)
    row = t.loc["CLAY"]
    # Geometric mean of the lab values: sqrt(1e-10 · 4e-10) = 2e-10 (checked with scipy).
    assert row["k_m_s"] == pytest.approx(gmean([1e-10, 4e-10]), rel=1e-12)
    assert row["k_m_s"] == pytest.approx(2e-10, rel=1e-12)
    assert row["kv_m_s"] == pytest.approx(2e-10 / 4.0, rel=1e-12)   # anisotropy 4
    assert row["k_source"] == "lab"
    assert (row["n_samples"], row["n_used"], row["n_out_of_range"]) == (3, 2, 0)
    # log10 values -10 and -9.398: sample standard deviation (statistics.stdev, ddof=1).
    assert row["log10_k_sd"] == pytest.approx(
        statistics.stdev([math.log10(1e-10), math.log10(4e-10)]), rel=1e-12)
    assert "2 lab values" in row["note"]


def test_unit_conductivity_out_of_range_falls_back_to_default_with_note():
    s = _samples([
        ("BH1", 6.0, 0.001, 0.004, 0.55, np.nan, "CLAY"),
        ("BH2", 6.0, 0.002, 0.005, 0.52, np.nan, "CLAY"),
        ("BH3", 6.0, 0.0015, 0.004, 0.50, np.nan, "CLAY"),
        ("BH4", 6.0, 0.02, 0.05, np.nan, np.nan, "CLAY"),  # silt, but no porosity
    ])
    row = unit_conductivity(s, STACK, SETTINGS).loc["CLAY"]
    assert row["k_source"] == "default"
    assert row["k_m_s"] == 1e-9 and row["kv_m_s"] == 1e-9 / 4.0
    assert (row["n_samples"], row["n_used"], row["n_out_of_range"]) == (4, 0, 4)
    assert np.isnan(row["log10_k_sd"])
    assert row["note"].startswith("4 of 4 grain-size samples not usable for Kozeny–Carman "
                                  "(D10 below 0.0063 mm: clay or fine silt; and 1 other")
    assert row["note"].endswith("default used")


def test_unit_conductivity_uses_valid_grain_size_values_and_counts_the_rest():
    d10s = [0.12, 0.2, 0.35, 0.5]
    s = _samples([(f"BH{i}", 1.0, d, 2 * d, 0.35, np.nan, "SAND")
                  for i, d in enumerate(d10s)]
                 + [("BH9", 1.0, 0.05, 0.1, 0.35, np.nan, "SAND")])   # below Hazen range
    row = unit_conductivity(s, STACK, SETTINGS).loc["SAND"]
    ks = [100.0 * (d / 10) ** 2 / 100 for d in d10s]   # Hazen by hand, cm/s -> m/s
    assert row["k_m_s"] == pytest.approx(gmean(ks), rel=1e-12)   # scipy reference
    assert row["log10_k_sd"] == pytest.approx(statistics.stdev(np.log10(ks)), rel=1e-9)
    assert row["k_source"] == "hazen"
    assert (row["n_samples"], row["n_used"], row["n_out_of_range"]) == (5, 4, 1)
    assert "1 of 5 grain-size samples not usable for Hazen" in row["note"]


def test_unit_conductivity_single_value_has_no_spread():
    s = _samples([("BH1", 8.0, 0.02, 0.06, 0.40, np.nan, "SILT")])
    row = unit_conductivity(s, STACK, SETTINGS).loc["SILT"]
    assert row["k_source"] == "kozeny_carman" and row["n_used"] == 1
    assert np.isnan(row["log10_k_sd"])


def test_unit_without_method_uses_default_even_with_samples():
    s = _samples([("BH1", 4.0, 0.2, 0.5, 0.35, np.nan, "TILL")])
    row = unit_conductivity(s, STACK, SETTINGS).loc["TILL"]
    assert (row["k_source"], row["k_m_s"], row["n_samples"], row["n_out_of_range"]) == \
        ("default", 1e-8, 1, 0)
    assert "no grain-size method" in row["note"]


@pytest.mark.parametrize("empty", [pd.DataFrame(), pd.DataFrame(columns=list(SAMPLE_COLUMNS))])
def test_no_samples_gives_every_unit_its_default(empty):
    t = unit_conductivity(empty, STACK, SETTINGS)
    assert list(t.index) == [u.code for u in STACK]
    assert list(t["k_m_s"]) == [u.k_default_m_s for u in STACK]
    assert list(t["kv_m_s"]) == [u.k_default_m_s / u.anisotropy_kh_kv for u in STACK]
    assert set(t["k_source"]) == {"default"}
    assert set(t["n_samples"]) == {0} and set(t["n_used"]) == {0}
    assert set(t["note"]) == {"no samples; default used"}
    assert sample_conductivity(empty, STACK, SETTINGS).empty


def test_samples_table_missing_columns_is_refused():
    with pytest.raises(ValueError, match="k_lab_m_s"):
        sample_conductivity(pd.DataFrame({"borehole_id": ["A"], "depth_m": [1.0],
                                          "d10_mm": [0.1], "d60_mm": [0.2],
                                          "porosity": [0.3], "unit": ["SAND"]}),
                            STACK, SETTINGS)


# --- Slichter, Terzaghi, Beyer (general form of Vukovic & Soro 1992) --------------------
# K = (g/ν) · β · D10², ν = μ/ρ of water. Reference sample: D10 = 0.2 mm, D60 = 0.5 mm
# (Cu = 2.5), n = 0.35, 10 °C. IAPWS water (iapws package): ν = 1.30629e-6 m²/s, so
# g/ν = 9.80665 / 1.30629e-6 = 7.50726e6 1/(m·s); D10² = 4e-8 m².

def _g_over_nu(temp_c: float) -> float:
    rho, mu = _iapws_water(temp_c)
    return 9.80665 / (mu / rho)


def test_kinematic_viscosity_matches_iapws():
    from aquitardmap.hydraulics.conductivity import kinematic_viscosity_m2_s
    for t in (5.0, 10.0, 20.0):
        rho, mu = _iapws_water(t)
        assert kinematic_viscosity_m2_s(t) == pytest.approx(mu / rho, rel=2e-3)


def test_slichter_matches_hand_computation():
    from aquitardmap.hydraulics.conductivity import slichter_k_m_s
    # Slichter (1899) in Vukovic & Soro (1992), coefficients from memory:
    # β = 1e-2 · n^3.287 = 1e-2 · 0.35^3.287 = 3.1721e-4 -> K = 7.50726e6 · 3.1721e-4 · 4e-8
    # = 9.5256e-5 m/s.
    assert 1e-2 * 0.35**3.287 == pytest.approx(3.1721e-4, rel=1e-4)
    k = float(slichter_k_m_s(0.2, 0.35, 10.0))
    assert k == pytest.approx(9.5256e-5, rel=2e-3)
    assert k == pytest.approx(_g_over_nu(10.0) * 1e-2 * 0.35**3.287 * 4e-8, rel=2e-3)


def test_terzaghi_matches_hand_computation():
    from aquitardmap.hydraulics.conductivity import terzaghi_k_m_s
    # Terzaghi (1925) in Vukovic & Soro (1992), coefficients from memory: smooth grains
    # C = 10.7e-3, φ(n) = ((n − 0.13)/(1 − n)^(1/3))² = (0.22/0.86624)² = 0.064501
    # -> K = 7.50726e6 · 10.7e-3 · 0.064501 · 4e-8 = 2.0725e-4 m/s; coarse grains
    # (C = 6.1e-3) scale it by 6.1/10.7.
    assert ((0.35 - 0.13) / 0.65 ** (1 / 3)) ** 2 == pytest.approx(0.064501, rel=1e-4)
    assert float(terzaghi_k_m_s(0.2, 0.35, 10.0)) == pytest.approx(2.0725e-4, rel=2e-3)
    assert float(terzaghi_k_m_s(0.2, 0.35, 10.0, c=6.1e-3)) == pytest.approx(
        2.0725e-4 * 6.1 / 10.7, rel=2e-3)
    # φ(n) vanishes at n = 0.13: no value below it.
    assert np.isnan(terzaghi_k_m_s(0.2, 0.12, 10.0))


def test_beyer_matches_hand_computation_and_hazen_for_uniform_sand():
    from aquitardmap.hydraulics.conductivity import beyer_k_m_s
    # Beyer (1964) in Vukovic & Soro (1992) / Rosas et al. (2014), coefficient from memory:
    # β = 5.2e-4 · log10(500/Cu) = 5.2e-4 · log10(200) = 1.19654e-3
    # -> K = 7.50726e6 · 1.19654e-3 · 4e-8 = 3.5931e-4 m/s.
    k = float(beyer_k_m_s(0.2, 0.5, 10.0))
    assert k == pytest.approx(3.5931e-4, rel=2e-3)
    # For a uniform sand Beyer and Hazen (C = 100: 4e-4 m/s) agree within a factor of 1.5
    # (common practice: both are read against the same sands).
    assert 1 / 1.5 < k / float(hazen_k_m_s(0.2)) < 1.5
    # A wider grading (larger Cu) lowers Beyer's K.
    assert float(beyer_k_m_s(0.2, 2.0, 10.0)) < k


def test_grain_size_methods_scale_with_d10_squared():
    from aquitardmap.hydraulics.conductivity import beyer_k_m_s, slichter_k_m_s, terzaghi_k_m_s
    # General form K ∝ D10² at fixed n and Cu (Vukovic & Soro 1992).
    for f in (lambda d: slichter_k_m_s(d, 0.35, 10.0), lambda d: terzaghi_k_m_s(d, 0.35, 10.0),
              lambda d: beyer_k_m_s(d, 2.5 * d, 10.0)):
        assert float(f(0.4)) / float(f(0.2)) == pytest.approx(4.0, rel=1e-12)


def test_validity_ranges_of_slichter_terzaghi_beyer():
    from aquitardmap.hydraulics.conductivity import (
        beyer_validity,
        slichter_validity,
        terzaghi_validity,
    )
    # Slichter 0.01–5 mm (from memory); porosity needed.
    r = slichter_validity([0.01, 0.009, 5.0, 5.1, 0.2], [0.05, 0.05, 6.0, 6.0, 0.5],
                          [0.3, 0.3, 0.3, 0.3, np.nan])
    assert list(r[[0, 2]]) == ["", ""]
    assert "below 0.01 mm" in r[1] and "above 5 mm" in r[3] and "porosity missing" in r[4]
    # Terzaghi: sand-sized D10 0.063–2 mm, n > 0.13.
    r = terzaghi_validity([0.063, 0.05, 2.0, 2.5, 0.2], [0.2, 0.2, 4.0, 4.0, 0.5],
                          [0.3, 0.3, 0.3, 0.3, 0.13])
    assert list(r[[0, 2]]) == ["", ""]
    assert "below 0.063 mm" in r[1] and "above 2 mm" in r[3] and "0.13" in r[4]
    # Beyer: 0.06–0.6 mm, Cu up to 20, D60 required.
    r = beyer_validity([0.06, 0.05, 0.6, 0.7, 0.1, 0.1, 0.1], [0.1, 0.1, 1.0, 1.0, 2.0, 2.1,
                                                             np.nan])
    assert list(r[[0, 2, 4]]) == ["", "", ""]                 # Cu = 20 exactly is inside
    assert "below 0.06 mm" in r[1] and "above 0.6 mm" in r[3]
    assert "above 20" in r[5] and "D60 missing" in r[6]


def test_unit_using_beyer_and_per_method_comparison_columns():
    stack = (Unit("SAND", "Sand", "cover", 0.30, 1e-4, "beyer", 1.0),
             Unit("CLAY", "Clay", "aquitard", 0.40, 1e-9, "none", 2.0, 10.0),
             Unit("GRAV", "Gravel", "aquifer", 0.25, 1e-3, "hazen", 1.0))
    s = _samples([("A", 1.0, 0.2, 0.5, 0.35, np.nan, "SAND"),
                  ("B", 1.0, 0.3, 0.6, 0.35, np.nan, "SAND"),
                  ("C", 1.0, 0.03, 0.6, 0.35, np.nan, "SAND")])   # below Beyer's range
    t = unit_conductivity(s, stack, SETTINGS)
    row = t.loc["SAND"]
    from aquitardmap.hydraulics.conductivity import beyer_k_m_s
    ks = [float(beyer_k_m_s(0.2, 0.5, 10.0)), float(beyer_k_m_s(0.3, 0.6, 10.0))]
    assert row["k_source"] == "beyer" and row["n_used"] == 2 and row["n_out_of_range"] == 1
    assert row["k_m_s"] == pytest.approx(gmean(ks), rel=1e-12)        # scipy reference
    assert row["k_geomean_m_s"] == row["k_m_s"]
    assert row["log10_k_min"] == pytest.approx(math.log10(min(ks)), rel=1e-12)
    assert row["log10_k_max"] == pytest.approx(math.log10(max(ks)), rel=1e-12)
    # Comparison columns: Hazen over the same unit's samples in Hazen's range (A and B).
    assert row["n_hazen_in_range"] == 2
    assert row["k_hazen_geomean_m_s"] == pytest.approx(
        gmean([float(hazen_k_m_s(0.2)), float(hazen_k_m_s(0.3))]), rel=1e-12)
    # Anisotropy and secondary permeability multiply vertical K: 1e-9 / 2 · 10 = 5e-9.
    clay = t.loc["CLAY"]
    assert clay["k_source"] == "default" and np.isnan(clay["k_geomean_m_s"])
    assert clay["kv_m_s"] == pytest.approx(5e-9, rel=1e-12)
    assert clay["secondary_k_factor"] == 10.0 and clay["anisotropy_kh_kv"] == 2.0


def test_lab_k_that_looks_like_cm_s_in_an_aquitard_gets_a_hint_and_is_used_as_given():
    from aquitardmap.inputs.samples import lab_k_magnitude_warnings
    s = _samples([("A", 5.0, np.nan, np.nan, np.nan, 3e-7, "CLAY"),    # 3e-9 m/s in cm/s
                  ("B", 5.0, np.nan, np.nan, np.nan, 3e-9, "CLAY"),
                  ("C", 1.0, np.nan, np.nan, np.nan, 3e-4, "SAND")])   # cover: plausible
    s["line"] = [2, 3, 4]
    w = lab_k_magnitude_warnings(s, STACK, "samples.csv", column=6)
    assert len(w) == 1
    assert (w[0].file, w[0].line, w[0].column) == ("samples.csv", 2, 6)
    assert "cm/s" in w[0].message and "3e-09" in w[0].message
    # Nothing is rescaled: the unit K is the value given.
    row = unit_conductivity(s.iloc[[0]], STACK, SETTINGS).loc["CLAY"]
    assert row["k_m_s"] == pytest.approx(3e-7, rel=1e-12)
