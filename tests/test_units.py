"""Unit conversions against the pint units library (an outside reference)."""

from __future__ import annotations

import pint
import pytest

from aquitardmap import units
from aquitardmap.hydraulics import column as hydraulics
from aquitardmap.hydraulics.conductivity import STANDARD_GRAVITY_M_S2

U = pint.UnitRegistry()


def test_year_is_the_julian_year_of_pint():
    # pint defines year = 365.25 day (the Julian year).
    assert units.SECONDS_PER_YEAR == U.Quantity(1, "year").to("s").magnitude
    assert units.SECONDS_PER_YEAR == U.Quantity(1, "julian_year").to("s").magnitude
    assert hydraulics.SECONDS_PER_YEAR == units.SECONDS_PER_YEAR


def test_day_cm_s_m_day_mm_km2_against_pint():
    assert units.SECONDS_PER_DAY == U.Quantity(1, "day").to("s").magnitude
    assert units.M_S_PER_CM_S == pytest.approx(U.Quantity(1, "cm/s").to("m/s").magnitude,
                                               rel=1e-15)
    assert units.M_S_PER_M_DAY == pytest.approx(U.Quantity(1, "m/day").to("m/s").magnitude,
                                                rel=1e-15)
    assert units.M_PER_MM == pytest.approx(U.Quantity(1, "mm").to("m").magnitude, rel=1e-15)
    assert units.M2_PER_KM2 == pytest.approx(U.Quantity(1, "km**2").to("m**2").magnitude,
                                             rel=1e-15)


def test_conversion_functions_against_pint():
    assert units.cm_s_to_m_s(3.5e-7) == pytest.approx(
        U.Quantity(3.5e-7, "cm/s").to("m/s").magnitude, rel=1e-14)
    assert units.m_s_to_m_day(1e-9) == pytest.approx(
        U.Quantity(1e-9, "m/s").to("m/day").magnitude, rel=1e-14)
    assert units.seconds_to_years(1e10) == pytest.approx(
        U.Quantity(1e10, "s").to("year").magnitude, rel=1e-14)


def test_standard_gravity_against_pint():
    assert STANDARD_GRAVITY_M_S2 == U.Quantity(1, "standard_gravity").to("m/s**2").magnitude
