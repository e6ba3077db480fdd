"""Hydraulic conductivity of each unit: lab values first, then grain size, then a default.

Every sample gets a conductivity from its lab test when there is one; otherwise from the
grain-size method chosen for its unit (Hazen, Kozeny–Carman, Slichter, Terzaghi or Beyer)
when the sample lies inside that method's range; otherwise none. A unit's conductivity is
the geometric mean of its usable samples, lab values preferred; a unit with none falls back
to its configured default.
Every value says where it came from.

Water properties use published correlations valid from 0 to 40 °C:

* density: Tanaka, Girard, Davis, Peuto & Bignell (2001), "Recommended table for the density
  of water between 0 °C and 40 °C based on recent experimental reports", Metrologia 38:301;
* viscosity: Kestin, Sokolov & Wakeham (1978), "Viscosity of liquid water in the range
  -8 °C to 150 °C", J. Phys. Chem. Ref. Data 7(3):941 (the form adopted in ISO/TR 3666).

Coefficients of both are *from memory*; ``tests/test_conductivity.py`` checks them against
IAPWS-95 and IAPWS 2008 (the ``iapws`` package).
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence

import numpy as np
import numpy.typing as npt
import pandas as pd

from aquitardmap.config.settings import HydraulicSettings, Unit
from aquitardmap.units import M_PER_MM

#: Standard acceleration of gravity (m/s²), the conventional value of the 3rd CGPM (1901).
STANDARD_GRAVITY_M_S2 = 9.80665

#: Temperature range (°C) over which the water correlations below are valid.
WATER_TEMP_RANGE_C = (0.0, 40.0)

#: Hazen's range: clean, uniform sands. D10 bounds (mm) and the largest uniformity
#: coefficient Cu = D60/D10 (exclusive). *From memory* (see Freeze & Cherry 1979).
HAZEN_D10_RANGE_MM = (0.1, 3.0)
HAZEN_MAX_CU = 5.0

#: Kozeny–Carman range for D10 as the representative grain size (mm). Carrier (2003) finds
#: the equation appropriate for silts and sands but not for clays. The lower bound is the
#: top of the fine-silt class of ISO 14688-1 (0.0063 mm, *from memory*): a D10 below it
#: means at least 10 % of the sample is clay or fine silt. The upper bound is the
#: sand/gravel limit (2 mm, ISO 14688-1, *from memory*): in gravel, flow at field gradients
#: may leave the laminar (Darcy) regime the equation assumes.
KOZENY_CARMAN_D10_RANGE_MM = (0.0063, 2.0)

#: Slichter's range (Vukovic & Soro 1992, *from memory*): 0.01 mm < D10 < 5 mm.
SLICHTER_D10_RANGE_MM = (0.01, 5.0)

#: Terzaghi's range: the form is given for sands (Vukovic & Soro 1992, *from memory*, no
#: numeric bounds there); we take a sand-sized D10, 0.063–2 mm (ISO 14688-1 class limits,
#: *from memory*). Porosity must exceed 0.13, where the porosity function vanishes.
TERZAGHI_D10_RANGE_MM = (0.063, 2.0)
TERZAGHI_MIN_POROSITY = 0.13

#: Beyer's range (Vukovic & Soro 1992, *from memory*): 0.06 mm < D10 < 0.6 mm and
#: 1 < Cu = D60/D10 < 20.
BEYER_D10_RANGE_MM = (0.06, 0.6)
BEYER_CU_RANGE = (1.0, 20.0)

#: Grain-size methods, in the order their columns appear in the per-sample table.
GRAIN_SIZE_METHODS = ("hazen", "kozeny_carman", "slichter", "terzaghi", "beyer")


SAMPLE_COLUMNS = ("borehole_id", "depth_m", "d10_mm", "d60_mm", "porosity", "k_lab_m_s",
                  "unit")

_METHOD_NAMES = {"hazen": "Hazen", "kozeny_carman": "Kozeny–Carman", "slichter": "Slichter",
                 "terzaghi": "Terzaghi", "beyer": "Beyer"}

FloatArray = npt.NDArray[np.float64]
ArrayLike = npt.ArrayLike
Reasons = npt.NDArray[np.object_]  # per sample: "" when in range, else why not


def _check_temperature(temp_c: FloatArray) -> None:
    lo, hi = WATER_TEMP_RANGE_C
    bad = ~((temp_c >= lo) & (temp_c <= hi))
    if np.any(bad):
        raise ValueError(
            f"water temperature must be between {lo:g} and {hi:g} °C (range of the "
            f"published correlations used), got {temp_c[bad].ravel()[0]!r}")


def water_density_kg_m3(temp_c: ArrayLike) -> FloatArray:
    """Density of air-free pure water at 101.325 kPa (kg/m³), 0–40 °C.

    Tanaka et al. (2001), Metrologia 38:301, equation for Standard Mean Ocean Water::

        rho = a5 * (1 - (t + a1)**2 * (t + a2) / (a3 * (t + a4)))

    with ``a1 = -3.983035 °C``, ``a2 = 301.797 °C``, ``a3 = 522528.9 °C²``,
    ``a4 = 69.34881 °C``, ``a5 = 999.974950 kg/m³`` (coefficients *from memory*, checked
    against IAPWS-95 in the tests).

    Args:
        temp_c: water temperature (°C), scalar or array, within 0–40 °C.

    Returns:
        Density (kg/m³), same shape as ``temp_c``.

    Raises:
        ValueError: a temperature is outside 0–40 °C or not a number.
    """
    t = np.asarray(temp_c, dtype=float)
    _check_temperature(t)
    a1, a2, a3, a4, a5 = -3.983035, 301.797, 522528.9, 69.34881, 999.974950
    return a5 * (1.0 - (t + a1) ** 2 * (t + a2) / (a3 * (t + a4)))


def water_viscosity_pa_s(temp_c: ArrayLike) -> FloatArray:
    """Dynamic viscosity of liquid water at atmospheric pressure (Pa·s), 0–40 °C.

    Kestin, Sokolov & Wakeham (1978), J. Phys. Chem. Ref. Data 7(3):941, relative to the
    viscosity at 20 °C (the form adopted in ISO/TR 3666)::

        log10(mu / mu20) = (20 - t) / (t + 96)
                           * (1.2378 - 1.303e-3 (20 - t) + 3.06e-6 (20 - t)**2
                              + 2.55e-8 (20 - t)**3)

    with ``mu20 = 1.0016 mPa·s`` (coefficients *from memory*, checked against the IAPWS
    2008 formulation in the tests: agreement within 0.1 % over 0–40 °C).

    Args:
        temp_c: water temperature (°C), scalar or array, within 0–40 °C.

    Returns:
        Viscosity (Pa·s), same shape as ``temp_c``.

    Raises:
        ValueError: a temperature is outside 0–40 °C or not a number.
    """
    t = np.asarray(temp_c, dtype=float)
    _check_temperature(t)
    x = 20.0 - t
    log_ratio = x / (t + 96.0) * (1.2378 - 1.303e-3 * x + 3.06e-6 * x**2 + 2.55e-8 * x**3)
    return 1.0016e-3 * 10.0**log_ratio


def hazen_k_m_s(d10_mm: ArrayLike, c: float = 100.0) -> FloatArray:
    """Hydraulic conductivity from Hazen's rule (m/s).

    Hazen (1892), in the form given by Freeze & Cherry (1979), *Groundwater*::

        K [cm/s] = C * D10[cm]**2

    ``C`` is an empirical coefficient, about 100 (range about 40–150, *from memory*), with
    the units of 1/(cm·s) that make the formula work. Hazen's basic form has no
    temperature term: the coefficient absorbs the properties of water near 10 °C, so
    ``settings.groundwater_temp_c`` does not enter here. The rule is meant for clean,
    uniform sands (see :func:`hazen_validity`); this function computes it for any
    positive D10 and leaves the range check to the caller.

    Args:
        d10_mm: grain size for which 10 % by mass is finer (mm), scalar or array.
        c: Hazen's coefficient C (1/(cm·s)).

    Returns:
        K (m/s); NaN where D10 is missing or not positive.
    """
    d10 = np.asarray(d10_mm, dtype=float)
    d10_cm = np.where(d10 > 0, d10, np.nan) / 10.0
    k_cm_s = c * d10_cm**2
    return k_cm_s / 100.0


def kozeny_carman_k_m_s(d_mm: ArrayLike, porosity: ArrayLike, temp_c: ArrayLike) -> FloatArray:
    """Hydraulic conductivity from the Kozeny–Carman equation (m/s).

    Carrier (2003), "Goodbye, Hazen; Hello, Kozeny-Carman", J. Geotech. Geoenviron. Eng.
    129(11):1054::

        K = (rho g / mu) * n**3 / (1 - n)**2 * d**2 / 180

    with water density ``rho`` (:func:`water_density_kg_m3`), viscosity ``mu``
    (:func:`water_viscosity_pa_s`) at ``temp_c``, and standard gravity ``g``.

    The representative grain size ``d`` is D10 in this package, because samples carry only
    D10 and D60 (Carrier's effective diameter needs the whole grading curve). For a
    uniform sand D10 lies below the effective diameter, so K here errs low (on the
    protective side for an aquifer); the range check is :func:`kozeny_carman_validity`.

    Args:
        d_mm: representative grain size (mm), here D10.
        porosity: total porosity n (-), 0 < n < 1.
        temp_c: water temperature (°C), 0–40.

    Returns:
        K (m/s); NaN where d or n is missing or outside its physical range.
    """
    d_m = np.asarray(d_mm, dtype=float) / 1000.0
    n = np.asarray(porosity, dtype=float)
    ok = (d_m > 0) & (n > 0) & (n < 1)
    d_m = np.where(ok, d_m, np.nan)
    n = np.where(ok, n, np.nan)
    rho = water_density_kg_m3(temp_c)
    mu = water_viscosity_pa_s(temp_c)
    return rho * STANDARD_GRAVITY_M_S2 / mu * n**3 / (1.0 - n) ** 2 * d_m**2 / 180.0


def kinematic_viscosity_m2_s(temp_c: ArrayLike) -> FloatArray:
    """Kinematic viscosity of water, ``nu = mu / rho`` (m²/s), 0–40 °C.

    From :func:`water_viscosity_pa_s` and :func:`water_density_kg_m3`.
    """
    return water_viscosity_pa_s(temp_c) / water_density_kg_m3(temp_c)


def general_form_k_m_s(beta: ArrayLike, d_mm: ArrayLike, temp_c: ArrayLike) -> FloatArray:
    """Conductivity from the general grain-size form ``K = (g / nu) * beta * d**2`` (m/s).

    The form in which Vukovic & Soro (1992), *Determination of Hydraulic Conductivity of
    Porous Media from Grain-Size Composition* (Water Resources Publications), and after them
    Odong (2007, J. American Science 3(3)) and Rosas et al. (2014, Groundwater 52(3):399),
    write the empirical grain-size formulas: ``g`` gravity, ``nu`` the kinematic viscosity
    of water at ``temp_c``, ``beta`` the method's dimensionless coefficient times its
    porosity function, ``d`` the representative grain size (m; here D10).

    Args:
        beta: dimensionless coefficient of the method (``C * phi(n)``), scalar or array.
        d_mm: representative grain size (mm).
        temp_c: water temperature (°C), 0–40.

    Returns:
        K (m/s); NaN where ``d`` is missing or not positive or ``beta`` is NaN.
    """
    d = np.asarray(d_mm, dtype=float)
    d_m = np.where(d > 0, d, np.nan) * M_PER_MM
    return STANDARD_GRAVITY_M_S2 / kinematic_viscosity_m2_s(temp_c) * np.asarray(
        beta, dtype=float) * d_m**2


def _porosity(porosity: ArrayLike) -> FloatArray:
    n = np.asarray(porosity, dtype=float)
    return np.where((n > 0) & (n < 1), n, np.nan)


def slichter_k_m_s(d10_mm: ArrayLike, porosity: ArrayLike, temp_c: ArrayLike) -> FloatArray:
    """Conductivity from Slichter's formula (m/s).

    Slichter (1899), in the general form of Vukovic & Soro (1992) (see
    :func:`general_form_k_m_s`): ``beta = 1e-2 * n**3.287`` with ``d = D10`` (coefficient
    and exponent *from memory*; the same in Odong 2007 and Rosas et al. 2014). Range:
    :func:`slichter_validity`.

    Args:
        d10_mm: D10 (mm).
        porosity: total porosity n (-), 0 < n < 1.
        temp_c: water temperature (°C), 0–40.

    Returns:
        K (m/s); NaN where D10 or n is missing or outside its physical range.
    """
    n = _porosity(porosity)
    return general_form_k_m_s(1e-2 * n**3.287, d10_mm, temp_c)


def terzaghi_k_m_s(d10_mm: ArrayLike, porosity: ArrayLike, temp_c: ArrayLike,
                   c: float = 10.7e-3) -> FloatArray:
    """Conductivity from Terzaghi's formula (m/s).

    Terzaghi (1925), in the general form of Vukovic & Soro (1992) (see
    :func:`general_form_k_m_s`): ``beta = C * ((n - 0.13) / (1 - n)**(1/3))**2`` with
    ``d = D10``, ``C`` = 10.7e-3 for smooth grains down to 6.1e-3 for coarse, irregular
    grains (values *from memory*; also in Odong 2007 and Rosas et al. 2014). Range:
    :func:`terzaghi_validity`.

    Args:
        d10_mm: D10 (mm).
        porosity: total porosity n (-), 0.13 < n < 1.
        temp_c: water temperature (°C), 0–40.
        c: Terzaghi's coefficient C (-).

    Returns:
        K (m/s); NaN where D10 or n is missing or n <= 0.13.
    """
    n = _porosity(porosity)
    n = np.where(n > TERZAGHI_MIN_POROSITY, n, np.nan)
    beta = c * ((n - TERZAGHI_MIN_POROSITY) / np.cbrt(1.0 - n)) ** 2
    return general_form_k_m_s(beta, d10_mm, temp_c)


def beyer_k_m_s(d10_mm: ArrayLike, d60_mm: ArrayLike, temp_c: ArrayLike) -> FloatArray:
    """Conductivity from Beyer's formula (m/s).

    Beyer (1964), in the general form of Vukovic & Soro (1992) (see
    :func:`general_form_k_m_s`): ``beta = 5.2e-4 * log10(500 / Cu)`` with the uniformity
    coefficient ``Cu = D60 / D10`` and ``d = D10``; no porosity term (coefficient *from
    memory*, as in Rosas et al. 2014). Range: :func:`beyer_validity`.

    Args:
        d10_mm: D10 (mm).
        d60_mm: D60 (mm).
        temp_c: water temperature (°C), 0–40.

    Returns:
        K (m/s); NaN where D10 or D60 is missing or not positive.
    """
    d10 = np.asarray(d10_mm, dtype=float)
    d60 = np.asarray(d60_mm, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        cu = np.where((d10 > 0) & (d60 > 0), d60 / d10, np.nan)
        beta = 5.2e-4 * np.log10(500.0 / cu)
    return general_form_k_m_s(beta, d10, temp_c)


def _reasons(shape: tuple[int, ...]) -> Reasons:
    return np.full(shape, "", dtype=object)


def _set(reasons: Reasons, mask: npt.NDArray[np.bool_], text: str) -> None:
    """Write ``text`` where ``mask`` holds and no earlier reason was written."""
    where = mask & (reasons == "")
    reasons[where] = text


def _porosity_reasons(r: Reasons, n: FloatArray, method: str) -> None:
    _set(r, ~np.isfinite(n), f"porosity missing: {method} not computable")
    _set(r, (n <= 0) | (n >= 1), f"porosity not between 0 and 1: {method} not computable")


def _d10_reasons(r: Reasons, d10: FloatArray, d60: FloatArray,
                 bounds: tuple[float, float], method: str) -> None:
    lo, hi = bounds
    _set(r, ~np.isfinite(d10), "D10 missing")
    _set(r, d10 <= 0, "D10 not positive")
    _set(r, d10 < lo, f"D10 below {lo:g} mm (too fine for {method})")
    _set(r, d10 > hi, f"D10 above {hi:g} mm (too coarse for {method})")
    _set(r, np.isfinite(d60) & (d60 < d10), "D60 smaller than D10 (grading inconsistent)")


def _arrays(d10_mm: ArrayLike, *others: ArrayLike) -> list[FloatArray]:
    d10 = np.asarray(d10_mm, dtype=float)
    return [d10, *(np.broadcast_to(np.asarray(o, dtype=float), d10.shape) for o in others)]


def _graded_reasons(d10_mm: ArrayLike, d60_mm: ArrayLike, bounds: tuple[float, float],
                    method: str, why_d60: str) -> tuple[Reasons, FloatArray]:
    """Reasons of a method that needs the uniformity: the D10 range and a known D60
    (``why_d60`` says why); and Cu = D60/D10 for the method's own bound."""
    d10, d60 = _arrays(d10_mm, d60_mm)
    r = _reasons(d10.shape)
    _d10_reasons(r, d10, d60, bounds, method)
    _set(r, ~np.isfinite(d60), f"D60 missing ({why_d60})")
    with np.errstate(invalid="ignore", divide="ignore"):
        cu = d60 / d10
    return r, cu


def hazen_validity(d10_mm: ArrayLike, d60_mm: ArrayLike) -> Reasons:
    """Whether each sample lies in Hazen's range; ``""`` when it does, else the reason.

    Range (*from memory*, see Freeze & Cherry 1979): clean uniform sand with
    ``0.1 mm <= D10 <= 3 mm`` and uniformity coefficient ``Cu = D60/D10 < 5``. A sample
    without D60 is refused because its uniformity cannot be checked.

    Args:
        d10_mm: D10 (mm), array.
        d60_mm: D60 (mm), array of the same shape.

    Returns:
        Array of ``str`` (object dtype), same shape: the first reason that applies.
    """
    r, cu = _graded_reasons(d10_mm, d60_mm, HAZEN_D10_RANGE_MM, "Hazen",
                            "uniformity cannot be checked")
    _set(r, cu >= HAZEN_MAX_CU, f"Cu = D60/D10 of {HAZEN_MAX_CU:g} or more (not uniform)")
    return r


def kozeny_carman_validity(d10_mm: ArrayLike, d60_mm: ArrayLike, porosity: ArrayLike) -> Reasons:
    """Whether each sample suits Kozeny–Carman with D10; ``""`` when it does, else why not.

    Refused: porosity missing or outside 0 < n < 1 (the equation cannot be computed);
    D10 missing; D10 below 0.0063 mm (clay or fine silt, where Carrier 2003 finds the
    equation inappropriate); D10 above 2 mm (gravel, flow may not be laminar); D60 smaller
    than D10 (inconsistent grading). D60 is otherwise not limited. Bounds in
    :data:`KOZENY_CARMAN_D10_RANGE_MM`.

    Args:
        d10_mm: D10 (mm), array.
        d60_mm: D60 (mm), array of the same shape (may be NaN).
        porosity: total porosity n (-), array of the same shape (may be NaN).

    Returns:
        Array of ``str`` (object dtype), same shape: the first reason that applies.
    """
    d10, d60, n = _arrays(d10_mm, d60_mm, porosity)
    lo, hi = KOZENY_CARMAN_D10_RANGE_MM
    r = _reasons(d10.shape)
    _porosity_reasons(r, n, "Kozeny–Carman")
    _set(r, ~np.isfinite(d10), "D10 missing")
    _set(r, d10 <= 0, "D10 not positive")
    _set(r, d10 < lo, f"D10 below {lo:g} mm: clay or fine silt")
    _set(r, d10 > hi, f"D10 above {hi:g} mm: gravel")
    _set(r, np.isfinite(d60) & (d60 < d10), "D60 smaller than D10 (grading inconsistent)")
    return r


def slichter_validity(d10_mm: ArrayLike, d60_mm: ArrayLike, porosity: ArrayLike) -> Reasons:
    """Whether each sample lies in Slichter's range; ``""`` when it does, else the reason.

    Range: :data:`SLICHTER_D10_RANGE_MM` (Vukovic & Soro 1992, *from memory*); porosity
    must be known (the formula needs it); D60 must not be smaller than D10.
    """
    d10, d60, n = _arrays(d10_mm, d60_mm, porosity)
    r = _reasons(d10.shape)
    _porosity_reasons(r, n, "Slichter")
    _d10_reasons(r, d10, d60, SLICHTER_D10_RANGE_MM, "Slichter")
    return r


def terzaghi_validity(d10_mm: ArrayLike, d60_mm: ArrayLike, porosity: ArrayLike) -> Reasons:
    """Whether each sample lies in Terzaghi's range; ``""`` when it does, else the reason.

    Range: sand-sized D10 (:data:`TERZAGHI_D10_RANGE_MM`) and porosity above 0.13, where the
    porosity function of the formula vanishes; D60 must not be smaller than D10.
    """
    d10, d60, n = _arrays(d10_mm, d60_mm, porosity)
    r = _reasons(d10.shape)
    _porosity_reasons(r, n, "Terzaghi")
    _set(r, n <= TERZAGHI_MIN_POROSITY,
         f"porosity not above {TERZAGHI_MIN_POROSITY:g}: Terzaghi not computable")
    _d10_reasons(r, d10, d60, TERZAGHI_D10_RANGE_MM, "Terzaghi")
    return r


def beyer_validity(d10_mm: ArrayLike, d60_mm: ArrayLike) -> Reasons:
    """Whether each sample lies in Beyer's range; ``""`` when it does, else the reason.

    Range (Vukovic & Soro 1992, *from memory*): 0.06 mm <= D10 <= 0.6 mm and
    1 <= Cu = D60/D10 <= 20; D60 is required (the formula uses Cu).
    """
    r, cu = _graded_reasons(d10_mm, d60_mm, BEYER_D10_RANGE_MM, "Beyer",
                            "Beyer needs the uniformity coefficient")
    hi = BEYER_CU_RANGE[1]
    _set(r, cu > hi, f"Cu = D60/D10 above {hi:g} (outside Beyer's range)")
    return r


def _method_values(df: pd.DataFrame, settings: HydraulicSettings
                   ) -> dict[str, tuple[FloatArray, Reasons]]:
    """K (m/s) and validity reason of every grain-size method for every sample."""
    d10 = df["d10_mm"].to_numpy()
    d60 = df["d60_mm"].to_numpy()
    por = df["porosity"].to_numpy()
    t = settings.groundwater_temp_c
    return {
        "hazen": (hazen_k_m_s(d10, settings.hazen_c), hazen_validity(d10, d60)),
        "kozeny_carman": (kozeny_carman_k_m_s(d10, por, t),
                          kozeny_carman_validity(d10, d60, por)),
        "slichter": (slichter_k_m_s(d10, por, t), slichter_validity(d10, d60, por)),
        "terzaghi": (terzaghi_k_m_s(d10, por, t, settings.terzaghi_c),
                     terzaghi_validity(d10, d60, por)),
        "beyer": (beyer_k_m_s(d10, d60, t), beyer_validity(d10, d60)),
    }


def _prepare_samples(samples: pd.DataFrame) -> pd.DataFrame:
    """Columns of ``samples`` as typed columns; an empty table may lack them all."""
    missing = [c for c in SAMPLE_COLUMNS if c not in samples.columns]
    if missing and len(samples):
        raise ValueError(f"samples table lacks column(s) {', '.join(missing)}; expected "
                         f"{', '.join(SAMPLE_COLUMNS)}")
    df = samples.reset_index(drop=True).reindex(
        columns=list(dict.fromkeys([*SAMPLE_COLUMNS, *samples.columns])))
    for col in ("depth_m", "d10_mm", "d60_mm", "porosity", "k_lab_m_s"):
        df[col] = pd.to_numeric(df[col], errors="raise").astype(float)
    df["unit"] = pd.Series([None if pd.isna(v) else str(v) for v in df["unit"]],
                           dtype=object)
    return df


def sample_conductivity(samples: pd.DataFrame, units: Sequence[Unit],
                        settings: HydraulicSettings) -> pd.DataFrame:
    """Conductivity of every sample and where it came from.

    Order of preference for ``k_m_s``: the lab value when present and positive
    (``k_source = "lab"``); else the grain-size method of the sample's unit
    (``Unit.k_method``) when the sample lies in that method's range (one of
    :data:`GRAIN_SIZE_METHODS`); else none (``k_m_s`` NaN, ``k_source = ""``, ``note`` says
    why). Every grain-size value is computed wherever it can be, in range or not, so a
    reader can compare them; only the valid value of the unit's own method is used.

    Args:
        samples: table with columns ``borehole_id, depth_m, d10_mm, d60_mm, porosity,
            k_lab_m_s, unit`` (``unit`` is the code of the unit the sample falls in, or
            None/NaN when unassigned). An empty table may have no columns.
        units: the stack (``Project.units``).
        settings: ``groundwater_temp_c`` (water properties), ``hazen_c`` and
            ``terzaghi_c``.

    Returns:
        One row per sample, in input order, with the input columns plus, for every method
        M of :data:`GRAIN_SIZE_METHODS`, ``k_M_m_s`` and ``M_reason`` (``""`` when the
        sample is in M's range), then ``k_m_s``, ``k_source`` and ``note``.
    """
    df = _prepare_samples(samples)
    by_code = {u.code: u for u in units}
    lab = df["k_lab_m_s"].to_numpy()

    for method, (k_method, reason) in _method_values(df, settings).items():
        df[f"k_{method}_m_s"] = k_method
        df[f"{method}_reason"] = pd.Series(reason, dtype=object)

    k = np.full(len(df), np.nan)
    source = np.full(len(df), "", dtype=object)
    note = np.full(len(df), "", dtype=object)
    for i in range(len(df)):
        if np.isfinite(lab[i]) and lab[i] > 0:
            k[i], source[i] = lab[i], "lab"
            continue
        bad_lab = ("lab K not positive; ignored. " if np.isfinite(lab[i]) else "")
        code = df.at[i, "unit"]
        unit = by_code.get(code) if code is not None else None
        if unit is None:
            where = "not in any unit" if code is None else f"unit {code!r} not in the stack"
            note[i] = f"{bad_lab}no lab K and {where}: no grain-size method applies"
            continue
        if unit.k_method == "none":
            note[i] = f"{bad_lab}no lab K and unit {code} uses no grain-size method"
            continue
        reason = df.at[i, f"{unit.k_method}_reason"]
        if reason:
            note[i] = f"{bad_lab}not usable for {_METHOD_NAMES[unit.k_method]}: {reason}"
            continue
        k[i] = df.at[i, f"k_{unit.k_method}_m_s"]
        source[i] = unit.k_method
        note[i] = bad_lab.strip()
    df["k_m_s"] = k
    df["k_source"] = pd.Series(source, dtype=object)
    df["note"] = pd.Series(note, dtype=object)
    return df


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def unit_conductivity(samples: pd.DataFrame, units: Sequence[Unit],
                      settings: HydraulicSettings) -> pd.DataFrame:
    """Conductivity of every unit of the stack, and where it came from.

    For each unit: if any of its samples has a lab K, ``k_m_s`` is the geometric mean of
    the lab values only (``k_source = "lab"``); else the geometric mean of the in-range
    grain-size values from the unit's ``k_method``; else the unit's ``k_default_m_s``
    (``"default"``). The geometric mean suits a quantity spread over orders of magnitude
    (common practice). Vertical conductivity is
    ``kv_m_s = k_m_s / anisotropy_kh_kv * secondary_k_factor``: the anisotropy of the
    intact material, then the multiplier for secondary permeability (fissures, burrows,
    root holes, silt partings) that samples do not capture.

    Args:
        samples: as for :func:`sample_conductivity`; may be empty (no samples file), in
            which case every unit gets its default.
        units: the stack (``Project.units``), top to bottom.
        settings: hydraulic settings of the project.

    Returns:
        Table indexed by unit code (every unit, stack order) with columns ``k_m_s``,
        ``kv_m_s`` (m/s), ``k_source``, ``n_samples`` (samples in the unit), ``n_used``,
        ``n_out_of_range`` (samples without lab K that the unit's grain-size method could
        not use), ``log10_k_sd`` (sample standard deviation of log10 K of the values used;
        NaN with fewer than two) and ``note`` (plain language); then
        ``k_geomean_m_s`` (geometric mean of the values used, NaN when the default is
        used), ``log10_k_min`` and ``log10_k_max`` (their range), ``anisotropy_kh_kv`` and
        ``secondary_k_factor`` (the unit's multipliers), and for every grain-size method M
        ``k_M_geomean_m_s`` and ``n_M_in_range``: the geometric mean of M over the unit's
        samples inside M's range, whichever method the unit uses, for comparison.
    """
    per_sample = sample_conductivity(samples, units, settings)
    rows = []
    for unit in units:
        s = per_sample[per_sample["unit"] == unit.code]
        lab = s[s["k_source"] == "lab"]
        rest = s[s["k_source"] != "lab"]
        method_name = _METHOD_NAMES.get(unit.k_method, "")
        if unit.k_method == "none":
            out_of_range = grain = rest.iloc[0:0]
        else:
            reasons = rest[f"{unit.k_method}_reason"]
            out_of_range = rest[reasons != ""]
            grain = rest[reasons == ""]

        if len(lab):
            used, source = lab["k_m_s"].to_numpy(), "lab"
            note = f"geometric mean of {_plural(len(lab), 'lab value')}"
            if len(rest):
                note += f"; {_plural(len(rest), 'other sample')} not used (lab values first)"
        elif len(grain):
            used, source = grain["k_m_s"].to_numpy(), unit.k_method
            note = f"geometric mean of {_plural(len(grain), f'{method_name} value')}"
            if len(out_of_range):
                note += (f"; {len(out_of_range)} of {len(rest)} grain-size samples not usable "
                         f"for {method_name} ({_top_reason(out_of_range, unit)})")
        else:
            used, source = np.array([]), "default"
            if not len(s):
                note = "no samples; default used"
            elif unit.k_method == "none":
                note = (f"{_plural(len(s), 'sample')} without lab K and the unit uses no "
                        "grain-size method; default used")
            else:
                note = (f"{len(out_of_range)} of {len(rest)} grain-size samples not usable "
                        f"for {method_name} ({_top_reason(out_of_range, unit)}); "
                        "default used")
        if len(used):
            logs = np.log10(used)
            k = float(10.0 ** logs.mean())
            sd = float(np.std(logs, ddof=1)) if len(used) >= 2 else np.nan
            geo, lo, hi = k, float(logs.min()), float(logs.max())
        else:
            k, sd = float(unit.k_default_m_s), np.nan
            geo = lo = hi = np.nan
        secondary = float(unit.secondary_k_factor)
        row = {
            "unit": unit.code,
            "k_m_s": k,
            "kv_m_s": k / unit.anisotropy_kh_kv * secondary,
            "k_source": source,
            "n_samples": int(len(s)),
            "n_used": int(len(used)),
            "n_out_of_range": int(len(out_of_range)),
            "log10_k_sd": sd,
            "note": note,
            "k_geomean_m_s": geo,
            "log10_k_min": lo,
            "log10_k_max": hi,
            "anisotropy_kh_kv": float(unit.anisotropy_kh_kv),
            "secondary_k_factor": secondary,
        }
        for method in GRAIN_SIZE_METHODS:
            ok = s[(s[f"{method}_reason"] == "") & np.isfinite(s[f"k_{method}_m_s"])]
            vals = ok[f"k_{method}_m_s"].to_numpy(float)
            row[f"k_{method}_geomean_m_s"] = (float(10.0 ** np.log10(vals).mean())
                                              if len(vals) else np.nan)
            row[f"n_{method}_in_range"] = int(len(vals))
        rows.append(row)
    columns = ["unit", "k_m_s", "kv_m_s", "k_source", "n_samples", "n_used",
               "n_out_of_range", "log10_k_sd", "note", "k_geomean_m_s", "log10_k_min",
               "log10_k_max", "anisotropy_kh_kv", "secondary_k_factor"]
    for method in GRAIN_SIZE_METHODS:
        columns += [f"k_{method}_geomean_m_s", f"n_{method}_in_range"]
    table = pd.DataFrame(rows, columns=columns)
    return table.set_index("unit")


def _top_reason(out_of_range: pd.DataFrame, unit: Unit) -> str:
    """The most frequent reason among ``out_of_range`` samples, with how many others."""
    counts = Counter(out_of_range[f"{unit.k_method}_reason"])
    reason, _ = counts.most_common(1)[0]
    others = len(counts) - 1
    return reason + (f"; and {_plural(others, 'other reason')}" if others else "")
