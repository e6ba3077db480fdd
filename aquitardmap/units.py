"""Unit conversions used by the hydraulics, as explicit constants with their source.

Every ``_yr`` value in the package is in Julian years. ``tests/test_units.py`` checks each
constant against the ``pint`` units library.
"""

from __future__ import annotations

#: Seconds in a day (SI Brochure, 9th ed. 2019, Table 8: 1 d = 86 400 s).
SECONDS_PER_DAY = 86_400.0

#: Seconds in a Julian year, 365.25 days (IAU: the light-year and Julian century use it).
SECONDS_PER_YEAR = 365.25 * SECONDS_PER_DAY

#: 1 cm/s in m/s (definition of the centimetre, SI prefix centi = 1e-2).
M_S_PER_CM_S = 1e-2

#: 1 m/day in m/s.
M_S_PER_M_DAY = 1.0 / SECONDS_PER_DAY

#: 1 mm in m (SI prefix milli = 1e-3).
M_PER_MM = 1e-3

#: 1 km² in m².
M2_PER_KM2 = 1e6


def m_s_to_m_day(k_m_s: float) -> float:
    """Conductivity in m/day from m/s (1 m/day = 1/86 400 m/s)."""
    return k_m_s / M_S_PER_M_DAY


def cm_s_to_m_s(k_cm_s: float) -> float:
    """Conductivity in m/s from cm/s (1 cm/s = 0.01 m/s)."""
    return k_cm_s * M_S_PER_CM_S


def seconds_to_years(t_s: float) -> float:
    """Time in Julian years from seconds."""
    return t_s / SECONDS_PER_YEAR
