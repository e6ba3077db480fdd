"""Unit thickness surfaces from borehole columns, honouring holes that stop in the clay.

What is kriged, and why: the thickness of each unit above the aquifer and the total
aquitard thickness, each directly. Thickness is the screening quantity itself, it is zero
where a unit is absent (zero is data), and kriging it directly gives the kriging variance of
the very quantity the thin/window thresholds are applied to. Kriging contact elevations and
differencing would need every hole's collar elevation to be right, which water-well records
are not. The unit thicknesses are then scaled so that they add up to the kriged total.

Censored (partial-penetration) holes: a hole that stops inside a unit proves only that the
unit is at least as thick as what the hole went through. Such a lower bound is never kriged
as a thickness. Following the inequality-constrained kriging idea of Dubrule & Kostov (1986,
Math. Geol. 18(1):33–51) in its simplest active-set form, the surface is first kriged from the
full-penetration holes alone; every lower bound that the estimate violates at its hole is then
added as an equality datum at the bound, and the kriging is repeated until no bound is
violated. Bounds the estimate already honours add nothing, so a hole that stopped early
can raise a surface but can never pull it down into a false thin zone.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from aquitardmap.grid import Grid
from aquitardmap.kriging import krige_grid, krige_points, merge_coincident
from aquitardmap.project import KrigingSettings
from aquitardmap.variogram import (
    ExperimentalVariogram,
    VariogramModel,
    default_lags,
    experimental_variogram,
    fit_variogram,
)

#: Full-penetration holes needed to fit a variogram; with fewer the surface is the mean.
MIN_HOLES_FOR_VARIOGRAM = 8
#: Rounds of the active-set loop for lower bounds.
MAX_BOUND_ROUNDS = 25


@dataclass(frozen=True)
class Surface:
    """A kriged thickness surface.

    Attributes:
        name: what was kriged (e.g. ``"aquitard"`` or a unit code).
        thickness_m: estimate on the grid, clipped at 0, NaN outside the mask (m).
        sd_m: kriging standard deviation (m), NaN outside the mask.
        variogram: the fitted model.
        experimental: the experimental variogram it was fitted to.
        n_full: holes that gave the full thickness.
        n_lower_bounds: holes that gave a lower bound.
        n_bounds_active: lower bounds the unconstrained estimate violated, added as data.
        cv: leave-one-out cross-validation statistics on the full holes (see
            :func:`cross_validate`).
        data_x_m, data_y_m: locations of the data the final kriging used (full holes and
            active lower bounds, coincident ones merged), m; empty when not recorded.
    """

    name: str
    thickness_m: np.ndarray
    sd_m: np.ndarray
    variogram: VariogramModel
    experimental: ExperimentalVariogram
    n_full: int
    n_lower_bounds: int
    n_bounds_active: int
    cv: dict[str, float]
    data_x_m: np.ndarray = field(default_factory=lambda: np.empty(0))
    data_y_m: np.ndarray = field(default_factory=lambda: np.empty(0))


def cross_validate(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                   model: VariogramModel, max_neighbours: int) -> dict[str, float]:
    """Leave-one-out cross-validation: mean error, RMSE, and mean and variance of the
    standardised errors (which should be near 0 and 1; Isaaks & Srivastava 1989, ch. 15)."""
    n = len(values)
    if n < 3:
        return {"n": float(n), "mean_error": np.nan, "rmse": np.nan,
                "mean_standardised_error": np.nan, "variance_standardised_error": np.nan}
    err = np.empty(n)
    sd = np.empty(n)
    idx = np.arange(n)
    for i in range(n):
        keep = idx != i
        r = krige_points(x_m[keep], y_m[keep], values[keep], model, x_m[i:i + 1],
                         y_m[i:i + 1], max_neighbours=max_neighbours)
        err[i] = r.estimate[0] - values[i]
        sd[i] = np.sqrt(r.variance[0])
    z = err / np.where(sd > 0, sd, np.nan)
    return {"n": float(n), "mean_error": float(err.mean()),
            "rmse": float(np.sqrt(np.mean(err**2))),
            "mean_standardised_error": float(np.nanmean(z)),
            "variance_standardised_error": float(np.nanvar(z))}


def krige_thickness(name: str, x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                    status: np.ndarray, grid: Grid, settings: KrigingSettings, *,
                    with_cv: bool = True, model: VariogramModel | None = None) -> Surface:
    """Krige one thickness from borehole values whose ``status`` is ``"full"`` or
    ``"lower_bound"`` (others are ignored), honouring lower bounds as described in the
    module docstring.

    Args:
        name: label of the surface.
        x_m, y_m: borehole coordinates (m).
        thickness_m: thickness (full) or minimum thickness (lower bound) at each hole (m).
        status: ``"full"``, ``"lower_bound"`` or ``"unknown"`` per hole.
        grid: the target grid.
        settings: variogram model and neighbourhood.
        model: a variogram to use as given instead of fitting one.

    Raises:
        ValueError: when no hole gives a full thickness.
    """
    x, y, t = (np.asarray(a, dtype=float) for a in (x_m, y_m, thickness_m))
    status = np.asarray(status)
    full = status == "full"
    lower = status == "lower_bound"
    if not full.any():
        raise ValueError(f"no borehole gives the full thickness of {name}")
    fx, fy, ft = merge_coincident(x[full], y[full], t[full])
    bx, by, bt = x[lower], y[lower], t[lower]

    variance = float(np.var(ft))
    if model is not None:
        exp = ExperimentalVariogram(np.array([]), np.array([]), np.array([], dtype=int))
    elif fx.size >= MIN_HOLES_FOR_VARIOGRAM:
        n_lags, max_lag = default_lags(fx, fy, max_lag_fraction=settings.max_lag_fraction)
        exp = experimental_variogram(fx, fy, ft, n_lags=settings.n_lags or n_lags,
                                     max_lag_m=max_lag)
        model = fit_variogram(exp, settings.variogram_model, sample_variance=variance)
    else:
        exp = ExperimentalVariogram(np.array([]), np.array([]), np.array([], dtype=int))
        model = VariogramModel(settings.variogram_model, nugget=max(variance, 1e-6),
                               psill=1e-9, range_m=grid.cell_size_m)

    # Active set of lower bounds that must be added as equality data.
    active = np.zeros(bx.size, dtype=bool)
    for _ in range(MAX_BOUND_ROUNDS):
        if bx.size == 0:
            break
        dx = np.concatenate([fx, bx[active]])
        dy = np.concatenate([fy, by[active]])
        dt = np.concatenate([ft, bt[active]])
        dx, dy, dt = merge_coincident(dx, dy, dt)
        est = krige_points(dx, dy, dt, model, bx, by,
                           max_neighbours=settings.max_neighbours).estimate
        violated = (~active) & (est < bt - 1e-6)
        if not violated.any():
            break
        active |= violated
    dx = np.concatenate([fx, bx[active]])
    dy = np.concatenate([fy, by[active]])
    dt = np.concatenate([ft, bt[active]])
    dx, dy, dt = merge_coincident(dx, dy, dt)
    res = krige_grid(dx, dy, dt, model, grid, max_neighbours=settings.max_neighbours)
    cv = (cross_validate(fx, fy, ft, model, settings.max_neighbours) if with_cv
          else {"n": float(fx.size)})
    return Surface(
        name=name, thickness_m=np.where(grid.mask, np.maximum(res.estimate, 0.0), np.nan),
        sd_m=np.sqrt(res.variance), variogram=model, experimental=exp,
        n_full=int(full.sum()), n_lower_bounds=int(lower.sum()),
        n_bounds_active=int(active.sum()), cv=cv, data_x_m=dx, data_y_m=dy,
    )


def scale_units_to_total(unit_thickness_m: dict[str, np.ndarray], total_m: np.ndarray
                         ) -> dict[str, np.ndarray]:
    """Scale unit thicknesses so that at every cell they add up to ``total_m``.

    Each unit keeps its share of the sum of the separately kriged unit thicknesses; where
    that sum is 0 but the total is not, the total is shared equally.
    """
    codes = list(unit_thickness_m)
    stack = np.stack([np.maximum(unit_thickness_m[c], 0.0) for c in codes])
    s = stack.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(s > 0, stack / np.where(s > 0, s, 1.0), 1.0 / len(codes))
    return {c: share[i] * total_m for i, c in enumerate(codes)}


def krige_column(columns: pd.DataFrame, unit_codes: list[str], aquitard_codes: list[str],
                 grid: Grid, settings: KrigingSettings) -> dict[str, Surface]:
    """Krige the total aquitard and every column unit from a borehole column table.

    ``columns`` is :func:`aquitardmap.logs.column_table` output (excluded holes already
    removed). Returns surfaces keyed ``"aquitard"`` and each unit code; the aquitard unit
    surfaces are scaled to add up to the total.
    """
    x = columns["x"].to_numpy(float)
    y = columns["y"].to_numpy(float)
    out = {"aquitard": krige_thickness(
        "aquitard", x, y, columns["aquitard_thickness_m"].to_numpy(float),
        columns["status_aquitard"].to_numpy(), grid, settings)}
    for code in unit_codes:
        out[code] = krige_thickness(
            code, x, y, columns[f"thickness_{code}_m"].to_numpy(float),
            columns[f"status_{code}"].to_numpy(), grid, settings, with_cv=False)
    scaled = scale_units_to_total({c: out[c].thickness_m for c in aquitard_codes},
                                  out["aquitard"].thickness_m)
    for c, arr in scaled.items():
        s = out[c]
        out[c] = Surface(s.name, arr, s.sd_m, s.variogram, s.experimental, s.n_full,
                         s.n_lower_bounds, s.n_bounds_active, s.cv, s.data_x_m, s.data_y_m)
    return out
