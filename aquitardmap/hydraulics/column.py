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

from aquitardmap.units import SECONDS_PER_YEAR

__all__ = ["SECONDS_PER_YEAR", "AVI_CLASSES", "AVI_NO_DATA", "avi_class", "avi_legend",
           "series_resistance_s", "equivalent_kv_m_s", "leakance_per_s",
           "advective_travel_time_yr", "remove_from_top_m", "crust_thickness_m",
           "diffusion_time_yr", "peclet_number", "gradient_from_heads",
           "downward_travel_time_yr", "series_flux_m_s", "crossing_time_yr"]

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
    gradient ``i`` is taken as uniform through the column: a screening assumption for a
    stated gradient (under a known head drop, use :func:`series_flux_m_s` and
    :func:`crossing_time_yr`: the gradient is then steepest across the tighter units).
    Diffusion, which dominates in thick intact clay, is not included here. Zero where the
    column has no thickness.

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


def series_flux_m_s(thickness_m: npt.ArrayLike, kv_m_s: npt.ArrayLike,
                    head_drop_m: npt.ArrayLike) -> FloatArray:
    """Steady vertical Darcy flux through the column under a head drop across it (m/s,
    positive downward): ``q = Δh / Σ bᵢ / Kᵥ,ᵢ``.

    In steady flow through layers in series the same flux crosses every layer (continuity),
    so the head drop splits between the layers in proportion to their resistances and the
    gradient is steepest across the tightest unit (Freeze & Cherry 1979, layered systems).
    NaN where the column has no thickness.

    Args:
        thickness_m: unit thicknesses (m), shape ``(n_units, ...)``.
        kv_m_s: vertical conductivity of each unit (m/s), shape ``(n_units,)``.
        head_drop_m: head at the top of the column minus head below it (m), broadcastable
            to ``(...)``.

    Returns:
        Flux (m/s), shape ``(...)``.
    """
    c = series_resistance_s(thickness_m, kv_m_s)
    dh = np.asarray(head_drop_m, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(c > 0, dh / np.where(c > 0, c, np.nan), np.nan)


def crossing_time_yr(thickness_m: npt.ArrayLike, effective_porosity: npt.ArrayLike,
                     flux_m_s: npt.ArrayLike) -> FloatArray:
    """Time for water to cross layers carried by a downward Darcy flux ``q`` (years):
    each layer at the seepage velocity ``q / nₑ,ᵢ``, so ``t = Σ nₑ,ᵢ bᵢ / q``.

    ``+inf`` where ``q`` is zero or upward and the layers have thickness, 0 where they have
    none (whatever the flux), NaN where the thickness is NaN or the flux is NaN across
    layers that have thickness.

    Args:
        thickness_m: layer thicknesses (m), shape ``(n_layers, ...)``.
        effective_porosity: effective porosity of each layer (-), shape ``(n_layers,)``.
        flux_m_s: Darcy flux (m/s), positive downward, broadcastable to ``(...)``.

    Returns:
        Time (years of :data:`SECONDS_PER_YEAR`), shape ``(...)``.
    """
    b, n = _column(thickness_m, effective_porosity, "effective_porosity")
    if not np.all((n > 0) & (n <= 1)):
        raise ValueError("every effective_porosity must be in (0, 1]")
    stored = np.sum(n * b, axis=0)
    q = np.broadcast_to(np.asarray(flux_m_s, dtype=float), stored.shape)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(q > 0, stored / np.where(q > 0, q, 1.0), np.inf) / SECONDS_PER_YEAR
    t = np.where(np.isnan(q), np.nan, t)
    return np.where(stored == 0, 0.0, t)  # NaN thickness stays NaN: NaN == 0 is False


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


def avi_legend() -> list[dict[str, object]]:
    """The AVI classes as legend rows: ``class``, ``log10_resistance_yr`` (text of the
    range), ``resistance_yr`` (text), ``vulnerability`` (the published class name).

    Van Stempvoort, Ewert & Wassenaar (1993); bounds *from memory* (see :data:`AVI_CLASSES`).
    """
    rows = []
    for code, lo, hi, label in AVI_CLASSES:
        if not np.isfinite(lo):
            rng, yrs = f"< {hi:g}", f"< {10 ** hi:g}"
        elif not np.isfinite(hi):
            rng, yrs = f">= {lo:g}", f">= {10 ** lo:g}"
        else:
            rng, yrs = f"{lo:g} to < {hi:g}", f"{10 ** lo:g} to < {10 ** hi:g}"
        rows.append({"class": code, "log10_resistance_yr": rng, "resistance_yr": yrs,
                     "vulnerability": f"{label} vulnerability"})
    return rows


def remove_from_top_m(thickness_m: npt.ArrayLike, removed_m: npt.ArrayLike) -> FloatArray:
    """Unit thicknesses after removing ``removed_m`` of material from the top of the column.

    An excavation, pit or landslide scar takes the upper units first: the top unit loses
    up to its whole thickness, then the next, and so on down (unit order of the column).

    Args:
        thickness_m: unit thicknesses (m), shape ``(n_units, ...)``, top to bottom.
        removed_m: depth removed from the top of the column (m), >= 0, broadcastable to the
            grid shape ``(...)``.

    Returns:
        Thinned thicknesses (m), same shape as ``thickness_m``.
    """
    b = np.asarray(thickness_m, dtype=float)
    r = np.asarray(removed_m, dtype=float)
    if np.any(r < 0):
        raise ValueError("removed_m must be >= 0")
    above = np.cumsum(b, axis=0) - b          # thickness above the top of each unit
    taken = np.clip(r - above, 0.0, None)     # depth of the cut below each unit's top
    return np.where(np.isnan(b), np.nan, np.clip(b - taken, 0.0, None))


def crust_thickness_m(thickness_m: npt.ArrayLike, is_aquitard: npt.ArrayLike,
                      crust_depth_m: float) -> FloatArray:
    """Part of each unit that lies in the weathered crust at the top of the clay (m).

    The crust is the top ``crust_depth_m`` of the aquitard units, counted down from the top
    of the uppermost aquitard unit present at the cell (cover units do not count towards
    its depth; common practice). A clay thinner than the crust is all crust.

    Args:
        thickness_m: unit thicknesses (m), shape ``(n_units, ...)``, top to bottom.
        is_aquitard: whether each unit is an aquitard, shape ``(n_units,)``.
        crust_depth_m: crust thickness (m), >= 0.

    Returns:
        Crust thickness in each unit (m), same shape as ``thickness_m``; 0 for cover units.
    """
    b, flag = _column(thickness_m, is_aquitard, "is_aquitard")
    if crust_depth_m < 0:
        raise ValueError("crust_depth_m must be >= 0")
    clay = np.where(flag > 0, b, 0.0)
    above = np.cumsum(clay, axis=0) - clay
    part = np.clip(crust_depth_m - above, 0.0, None)
    return np.where(np.isnan(b), np.nan, np.minimum(part, clay))


def diffusion_time_yr(thickness_m: npt.ArrayLike, effective_diffusion_m2_s: float
                      ) -> FloatArray:
    """Diffusive time scale across a layer, ``t = B² / De`` (years).

    The characteristic time for a solute to diffuse across a thickness ``B`` with effective
    diffusion coefficient ``De`` (e.g. Crank 1975, *The Mathematics of Diffusion*). An
    order-of-magnitude scale, not an arrival time.

    Args:
        thickness_m: thickness B (m), any shape, >= 0 or NaN.
        effective_diffusion_m2_s: De (m²/s), > 0.

    Returns:
        Time scale (years), same shape.
    """
    if not effective_diffusion_m2_s > 0:
        raise ValueError("effective_diffusion_m2_s must be > 0")
    b = np.asarray(thickness_m, dtype=float)
    if np.any(b < 0):
        raise ValueError("thickness_m must be >= 0 (NaN marks no data)")
    return b**2 / effective_diffusion_m2_s / SECONDS_PER_YEAR


def peclet_number(diffusion_time_yr: npt.ArrayLike, advective_time_yr: npt.ArrayLike
                  ) -> FloatArray:
    """Péclet number of a layer, the ratio of its diffusive to its advective time scale.

    For one layer of thickness B crossed at seepage velocity v this is
    ``(B²/De) / (B/v) = v B / De``, the usual Péclet number (Bear 1972, *Dynamics of Fluids
    in Porous Media*). Pe > 1: advection governs; Pe < 1: diffusion governs. Where the
    layer has no thickness the number is undefined (NaN); where there is no downward
    advection (infinite advective time) it is 0.

    Args:
        diffusion_time_yr: B²/De of the layer (years).
        advective_time_yr: advective travel time across the same layer (years).

    Returns:
        Pe (-), broadcast shape of the inputs.
    """
    td = np.asarray(diffusion_time_yr, dtype=float)
    ta = np.asarray(advective_time_yr, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        pe = td / ta
    return np.where((td > 0) & (ta > 0), pe, np.nan)


def gradient_from_heads(top_head_m: npt.ArrayLike, bottom_head_m: npt.ArrayLike,
                        column_thickness_m: npt.ArrayLike) -> FloatArray:
    """Downward vertical hydraulic gradient across the column, ``i = (h_top − h_bot) / B``.

    Darcy's law in one dimension (Freeze & Cherry 1979): the head of the water table above
    the column minus the head in the aquifer below it, over the column thickness. Positive
    downward; zero or negative means no downward flow (advective travel time infinite).
    Undefined (NaN) where the column has no thickness.

    Args:
        top_head_m: water-table elevation (m).
        bottom_head_m: hydraulic head in the aquifer (potentiometric surface) (m).
        column_thickness_m: thickness of the column between them (m).

    Returns:
        Gradient (-), broadcast shape.
    """
    dh = np.asarray(top_head_m, dtype=float) - np.asarray(bottom_head_m, dtype=float)
    b = np.asarray(column_thickness_m, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(b > 0, dh / b, np.nan)


def downward_travel_time_yr(thickness_m: npt.ArrayLike, kv_m_s: npt.ArrayLike,
                            effective_porosity: npt.ArrayLike,
                            gradient: npt.ArrayLike) -> FloatArray:
    """Advective travel time down the column for a gradient of any sign (years).

    As :func:`advective_travel_time_yr` where the gradient is downward (> 0); ``+inf``
    where it is zero or upward (no downward advection), except where the column has no
    thickness (0 years: nothing to cross). NaN thickness stays NaN.

    Args:
        thickness_m: unit thicknesses (m), shape ``(n_units, ...)``.
        kv_m_s: vertical conductivity of each unit (m/s), shape ``(n_units,)``.
        effective_porosity: effective porosity of each unit (-), shape ``(n_units,)``.
        gradient: vertical gradient (-), positive downward, broadcastable to ``(...)``.

    Returns:
        Travel time (years), shape ``(...)``.
    """
    i = np.asarray(gradient, dtype=float)
    downward = i > 0
    t = advective_travel_time_yr(thickness_m, kv_m_s, effective_porosity,
                                 np.where(downward, i, 1.0))
    return np.where(downward | (t == 0) | np.isnan(t), t, np.inf)
