"""Vertical flow through the column of units above the aquifer, cell by cell.

The units of a column act as layers in series (any hydrogeology text; see e.g. Freeze &
Cherry 1979, *Groundwater*): the hydraulic resistance ``c = Σ bᵢ / Kᵥ,ᵢ`` adds up, the
equivalent vertical conductivity is ``Kᵥ = Σ bᵢ / c`` and the leakance, as used in Hantush's
leaky-aquifer theory, is ``L = Kᵥ / Σ bᵢ = 1 / c``. The resistance in years ranks cells by
the Aquifer Vulnerability Index of Van Stempvoort, Ewert & Wassenaar (1993).

Shapes: ``thickness_m`` is ``(n_units, ...)``, the units of the column top to bottom and
any grid shape after them (``(n_units, ny, nx)`` for a raster); ``kv_m_s`` and
``effective_porosity`` are 1-D ``(n_units,)``. Results have the grid shape ``(...)``.
NaN thickness (cells outside the mapped area) gives NaN results.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

#: Seconds in a Julian year (365.25 days of 86 400 s), the year used for every ``_yr``.
SECONDS_PER_YEAR = 365.25 * 86_400.0

#: Aquifer Vulnerability Index classes: ``(code, lower, upper, label)`` where ``lower`` and
#: ``upper`` bound log10 of the hydraulic resistance in years (lower bound inclusive) and
#: the label is the vulnerability of the aquifer below. Van Stempvoort, Ewert & Wassenaar
#: (1993), Canadian Water Resources Journal 18(1); bounds *from memory*.
AVI_CLASSES: tuple[tuple[int, float, float, str], ...] = (
    (1, -np.inf, 1.0, "extremely high"),
    (2, 1.0, 2.0, "high"),
    (3, 2.0, 3.0, "moderate"),
    (4, 3.0, 4.0, "low"),
    (5, 4.0, np.inf, "extremely low"),
)

#: Class returned where the resistance is NaN (no data).
AVI_NO_DATA = 0

FloatArray = npt.NDArray[np.float64]


def _column(thickness_m: npt.ArrayLike, per_unit: npt.ArrayLike,
            name: str) -> tuple[FloatArray, FloatArray]:
    """Thickness as float array and ``per_unit`` shaped to broadcast against it."""
    b = np.asarray(thickness_m, dtype=float)
    v = np.asarray(per_unit, dtype=float)
    if b.ndim < 1:
        raise ValueError("thickness_m must have shape (n_units, ...)")
    if v.ndim != 1 or v.shape[0] != b.shape[0]:
        raise ValueError(f"{name} must have shape ({b.shape[0]},) to match thickness_m "
                         f"{b.shape}, got {v.shape}")
    if np.any(b < 0):
        raise ValueError("thickness_m must be >= 0 (NaN marks no data)")
    return b, v.reshape((-1,) + (1,) * (b.ndim - 1))


def _kv(thickness_m: npt.ArrayLike, kv_m_s: npt.ArrayLike) -> tuple[FloatArray, FloatArray]:
    b, k = _column(thickness_m, kv_m_s, "kv_m_s")
    if not np.all(k > 0):
        raise ValueError("every kv_m_s must be > 0")
    return b, k


def series_resistance_s(thickness_m: npt.ArrayLike, kv_m_s: npt.ArrayLike) -> FloatArray:
    """Hydraulic resistance of the column, ``c = Σ bᵢ / Kᵥ,ᵢ`` (s).

    Layers in series (any hydrogeology text). A unit of zero thickness adds nothing; a
    column with no units has ``c = 0``.

    Args:
        thickness_m: unit thicknesses (m), shape ``(n_units, ...)``, >= 0 or NaN.
        kv_m_s: vertical conductivity of each unit (m/s), shape ``(n_units,)``, > 0.

    Returns:
        Resistance (s), shape ``(...)``.
    """
    b, k = _kv(thickness_m, kv_m_s)
    return np.sum(b / k, axis=0)


def equivalent_kv_m_s(thickness_m: npt.ArrayLike, kv_m_s: npt.ArrayLike) -> FloatArray:
    """Equivalent vertical conductivity of the column, ``Kᵥ = Σ bᵢ / Σ (bᵢ / Kᵥ,ᵢ)`` (m/s).

    Layers in series (any hydrogeology text): the thickness-weighted harmonic mean.
    Undefined, and returned as NaN, where the column has no thickness (``Σ bᵢ = 0``).

    Args:
        thickness_m: unit thicknesses (m), shape ``(n_units, ...)``.
        kv_m_s: vertical conductivity of each unit (m/s), shape ``(n_units,)``.

    Returns:
        Kᵥ (m/s), shape ``(...)``.
    """
    b, k = _kv(thickness_m, kv_m_s)
    total = np.sum(b, axis=0)
    c = np.sum(b / k, axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(total > 0, total / np.where(c > 0, c, np.nan), np.nan)


def leakance_per_s(thickness_m: npt.ArrayLike, kv_m_s: npt.ArrayLike) -> FloatArray:
    """Leakance of the column, ``L = Kᵥ / Σ bᵢ = 1 / c`` (1/s).

    As in Hantush's leaky-aquifer theory. Where there is no column (``c = 0``) nothing
    separates the surface from the aquifer and ``L`` is ``+inf``.

    Args:
        thickness_m: unit thicknesses (m), shape ``(n_units, ...)``.
        kv_m_s: vertical conductivity of each unit (m/s), shape ``(n_units,)``.

    Returns:
        Leakance (1/s), shape ``(...)``.
    """
    c = series_resistance_s(thickness_m, kv_m_s)
    with np.errstate(divide="ignore"):
        return 1.0 / c  # IEEE division: 1/0 = +inf, 1/NaN = NaN


def advective_travel_time_yr(thickness_m: npt.ArrayLike, kv_m_s: npt.ArrayLike,
                             effective_porosity: npt.ArrayLike,
                             gradient: npt.ArrayLike) -> FloatArray:
    """Advective travel time down through the column, ``t = Σ nₑ,ᵢ bᵢ / (Kᵥ,ᵢ · i)`` (years).

    Each unit is crossed at the Darcy seepage velocity ``v = K i / nₑ`` (Freeze & Cherry
    1979), and the times add up (layers in series, any hydrogeology text). The vertical
    gradient ``i`` is taken as uniform through the column: a screening assumption (in a
    real column the gradient is steeper across the tighter units). Diffusion, which
    dominates in thick intact clay, is not included here. Zero where the column has no
    thickness.

    Args:
        thickness_m: unit thicknesses (m), shape ``(n_units, ...)``.
        kv_m_s: vertical conductivity of each unit (m/s), shape ``(n_units,)``.
        effective_porosity: effective porosity of each unit (-), shape ``(n_units,)``.
        gradient: downward vertical hydraulic gradient (-), > 0; a scalar or an array
            broadcastable to the grid shape ``(...)``.

    Returns:
        Travel time (years of :data:`SECONDS_PER_YEAR`), shape ``(...)``.
    """
    b, k = _kv(thickness_m, kv_m_s)
    _, n = _column(b, effective_porosity, "effective_porosity")
    if not np.all((n > 0) & (n <= 1)):
        raise ValueError("every effective_porosity must be in (0, 1]")
    i = np.asarray(gradient, dtype=float)
    if not np.all(i > 0):
        raise ValueError("gradient must be > 0 (a downward gradient)")
    seconds = np.sum(n * b / k, axis=0) / i
    return seconds / SECONDS_PER_YEAR


def avi_class(resistance_yr: npt.ArrayLike) -> npt.NDArray[np.int8]:
    """Aquifer Vulnerability Index class of each cell, 1 to 5 (see :data:`AVI_CLASSES`).

    Van Stempvoort, Ewert & Wassenaar (1993): classes of ``log10(c)`` with ``c`` the
    hydraulic resistance in years: < 1 extremely high (1), 1–2 high (2), 2–3 moderate (3),
    3–4 low (4), >= 4 extremely low (5) vulnerability (bounds *from memory*). A value on a
    bound belongs to the class above it (10 years is class 2). ``c = 0`` (no column) is
    class 1; NaN is :data:`AVI_NO_DATA` (0).

    Args:
        resistance_yr: hydraulic resistance (years), >= 0 or NaN, any shape.

    Returns:
        Class codes (int8), same shape.
    """
    c = np.asarray(resistance_yr, dtype=float)
    if np.any(c < 0):
        raise ValueError("resistance_yr must be >= 0 (NaN marks no data)")
    bounds = np.array([lower for _, lower, _, _ in AVI_CLASSES[1:]])
    with np.errstate(divide="ignore"):
        log_c = np.log10(np.where(np.isnan(c), 1.0, c))
    cls = (np.searchsorted(bounds, log_c, side="right") + 1).astype(np.int8)
    return np.where(np.isnan(c), np.int8(AVI_NO_DATA), cls).astype(np.int8)
