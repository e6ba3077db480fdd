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

The variogram of each surface is, in order of precedence: the one given for that surface in
``[variograms.<name>]`` of ``project.toml``; one fitted to the experimental variogram of its
full-penetration holes (nested when ``[kriging] nested_model`` is set, with geometric
anisotropy from directional variograms when ``[kriging] anisotropy = "auto"``); or, with too
few holes to fit one, a documented default. Every fallback is written to the surface's
``notes`` (and from there to the run's warnings) — a surface is never silently constant.
Each surface is cross-validated (leave one full hole out) and the residuals kept per hole.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from aquitardmap.config.settings import KrigingSettings
from aquitardmap.geostat.cache.variograms import VariogramBook, settle_variogram
from aquitardmap.geostat.context import DEFAULT_CONTEXT, KrigingContext
from aquitardmap.geostat.kriging import krige_grid, krige_points, loo_cross_validation
from aquitardmap.geostat.variogram import (
    DirectionalFit,
    ExperimentalVariogram,
    VariogramModel,
    default_lags,
    experimental_variogram,
    fit_anisotropy,
    fit_variogram,
    with_anisotropy,
)
from aquitardmap.grid import Grid

#: Full-penetration holes needed to fit a variogram; with fewer a default model is used.
MIN_HOLES_FOR_VARIOGRAM = 8
#: Full holes needed before directional variograms are computed.
MIN_HOLES_FOR_DIRECTIONS = 30
#: Rounds of the active-set loop for lower bounds.
MAX_BOUND_ROUNDS = 25
#: Data closer than this are one location (m).
COINCIDENT_M = 0.01
#: Columns of the per-hole cross-validation table.
CV_COLUMNS = ("surface", "borehole_id", "x", "y", "value_m", "estimate_m", "error_m",
              "kriging_sd_m", "standardised_error")

_EMPTY_EXP = ExperimentalVariogram(np.array([]), np.array([]), np.array([], dtype=int))


@dataclass(frozen=True)
class Surface:
    """A kriged thickness surface.

    Attributes:
        name: what was kriged (e.g. ``"aquitard"`` or a unit code).
        thickness_m: estimate on the grid, clipped at 0, NaN outside the mask (m).
        sd_m: kriging standard deviation (m), NaN outside the mask.
        variogram: the model used.
        experimental: the experimental variogram it was fitted to (empty if not fitted).
        n_full: holes that gave the full thickness.
        n_lower_bounds: holes that gave a lower bound.
        n_bounds_active: lower bounds the unconstrained estimate violated, added as data.
        cv: leave-one-out cross-validation statistics on the full holes (see
            :func:`cross_validate`).
        data_x_m, data_y_m: locations of the data the final kriging used (full holes and
            active lower bounds, coincident ones merged), m; empty when not recorded.
        variogram_source: ``"fitted"``, ``"manual"`` (from ``project.toml``), ``"default"``
            (too few holes to fit), ``"constant"`` (all holes equal), ``"given"`` (passed
            in by the caller) or ``"reused"`` (kept from the previous run while this run's
            fit agrees with it; :mod:`aquitardmap.geostat.cache.variograms`).
        directional: directional variograms and the anisotropy they suggest (None with
            fewer than :data:`MIN_HOLES_FOR_DIRECTIONS` full holes).
        cv_table: per-hole leave-one-out residuals (:data:`CV_COLUMNS`).
        notes: plain-language notes on fallbacks and merged data.
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
    variogram_source: str = "fitted"
    directional: DirectionalFit | None = None
    cv_table: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(
        columns=list(CV_COLUMNS)))
    notes: tuple[str, ...] = ()


def group_coincident(x_m: np.ndarray, y_m: np.ndarray, tolerance_m: float = COINCIDENT_M
                     ) -> tuple[np.ndarray, np.ndarray]:
    """Group points that share a location (within ``tolerance_m``).

    Returns (first, inverse): ``first[g]`` is the index of the first point of group g (in
    input order) and ``inverse[i]`` the group of point i; groups are in order of first
    appearance.
    """
    x, y = np.asarray(x_m, float), np.asarray(y_m, float)
    if x.size == 0:
        return np.empty(0, dtype=int), np.empty(0, dtype=int)
    keys = np.column_stack([np.round(x / tolerance_m), np.round(y / tolerance_m)])
    _, first, inverse = np.unique(keys, axis=0, return_index=True, return_inverse=True)
    inverse = inverse.ravel()
    order = np.argsort(first)
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    return first[order], rank[inverse]


def _merge(x: np.ndarray, y: np.ndarray, v: np.ndarray, ids: np.ndarray
           ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, float]:
    """Average values at shared locations; ids of a group joined by '+'. Returns the merged
    (x, y, v, ids) and the largest spread of values within a group (m)."""
    first, inv = group_coincident(x, y)
    n = np.bincount(inv, minlength=first.size).astype(float)
    mv = np.bincount(inv, v, minlength=first.size) / n
    spread = 0.0
    mids = ids[first].astype(object)
    for g in np.flatnonzero(n > 1):
        members = inv == g
        spread = max(spread, float(np.ptp(v[members])))
        mids[g] = "+".join(str(i) for i in ids[members])
    return x[first], y[first], mv, mids, spread


def cross_validation_table(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                           model: VariogramModel, max_neighbours: int, *,
                           ids: np.ndarray | None = None, surface: str = "") -> pd.DataFrame:
    """Leave-one-out cross-validation: each datum kriged from the others (same model and
    neighbourhood size), one row per datum with its error (estimate − value), kriging SD and
    standardised error (error / SD) (Isaaks & Srivastava 1989, ch. 15)."""
    x, y, v = (np.asarray(a, dtype=float) for a in (x_m, y_m, values))
    n = v.size
    ids = np.asarray(ids if ids is not None else np.arange(n).astype(str), dtype=object)
    if n < 3:
        return pd.DataFrame(columns=list(CV_COLUMNS))
    loo = loo_cross_validation(x, y, v, model, max_neighbours)
    est = loo.estimate
    sd = np.sqrt(loo.variance)
    err = est - v
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.where(sd > 0, err / sd, np.nan)
    return pd.DataFrame({"surface": surface, "borehole_id": ids, "x": x, "y": y,
                         "value_m": v, "estimate_m": est, "error_m": err, "kriging_sd_m": sd,
                         "standardised_error": z})


def cv_statistics(table: pd.DataFrame) -> dict[str, float]:
    """Mean error, RMSE, and mean and variance of the standardised errors (which should be
    near 0 and 1; Isaaks & Srivastava 1989, ch. 15) of a cross-validation table."""
    n = len(table)
    if n < 3:
        return {"n": float(n), "mean_error": np.nan, "rmse": np.nan,
                "mean_standardised_error": np.nan, "variance_standardised_error": np.nan}
    err = table["error_m"].to_numpy(float)
    z = table["standardised_error"].to_numpy(float)
    return {"n": float(n), "mean_error": float(err.mean()),
            "rmse": float(np.sqrt(np.mean(err**2))),
            "mean_standardised_error": float(np.nanmean(z)),
            "variance_standardised_error": float(np.nanvar(z))}


def cross_validate(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                   model: VariogramModel, max_neighbours: int) -> dict[str, float]:
    """Leave-one-out cross-validation statistics (see :func:`cross_validation_table` and
    :func:`cv_statistics`)."""
    return cv_statistics(cross_validation_table(x_m, y_m, values, model, max_neighbours))


def lag_classes(x_m: np.ndarray, y_m: np.ndarray, settings: KrigingSettings
                ) -> tuple[int, float]:
    """Number of lag classes and largest lag (m) for a surface: ``[kriging] lag_width_m``
    or ``n_lags`` when set, else the width from the hole spacing (:func:`default_lags`)."""
    n_lags, max_lag = default_lags(x_m, y_m, max_lag_fraction=settings.max_lag_fraction)
    if settings.lag_width_m > 0:
        n_lags = int(np.clip(np.ceil(max_lag / settings.lag_width_m), 1, 100))
    elif settings.n_lags:
        n_lags = settings.n_lags
    return n_lags, max_lag


def choose_variogram(name: str, x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                     settings: KrigingSettings, grid: Grid,
                     book: VariogramBook | None = None
                     ) -> tuple[VariogramModel, ExperimentalVariogram, DirectionalFit | None,
                                str, list[str]]:
    """The variogram of surface ``name`` from its full-hole values (module docstring).

    With the ``book`` of a run with a project cache, a fitted model gives way to the one
    kept from the previous run while the two agree
    (:mod:`aquitardmap.geostat.cache.variograms`; source ``"reused"``).

    Returns (model, experimental variogram, directional fit or None, source, notes).
    """
    model, exp, directional, source, notes = _choose_variogram(name, x_m, y_m, values,
                                                               settings, grid)
    model, source = settle_variogram(name, model, source, book)
    return model, exp, directional, source, notes


def _choose_variogram(name: str, x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                      settings: KrigingSettings, grid: Grid
                      ) -> tuple[VariogramModel, ExperimentalVariogram, DirectionalFit | None,
                                 str, list[str]]:
    """:func:`choose_variogram` before the kept model is considered."""
    x, y, v = (np.asarray(a, dtype=float) for a in (x_m, y_m, values))
    notes: list[str] = []
    variance = float(np.var(v)) if v.size else 0.0
    exp, directional = _EMPTY_EXP, None
    n_lags, max_lag = lag_classes(x, y, settings)
    if v.size >= MIN_HOLES_FOR_VARIOGRAM:
        exp = experimental_variogram(x, y, v, n_lags=n_lags, max_lag_m=max_lag)
    manual = settings.variograms.get(name)
    if manual is not None:
        return manual, exp, None, "manual", notes
    if v.size and np.ptp(v) == 0:
        notes.append(f"{name}: all {v.size} holes that give its full thickness give "
                     f"{v[0]:g} m; the surface is {v[0]:g} m everywhere and its kriging SD "
                     "is 0 (no variation to model). Give a variogram in "
                     f"[variograms.{name}] to map its uncertainty.")
        # Any model gives the constant back (weights sum to 1); the SD is set to 0 below.
        return (VariogramModel(settings.variogram_model, nugget=0.0, psill=1.0,
                               range_m=max(float(np.ptp(x) + np.ptp(y)), grid.cell_size_m)),
                exp, None, "constant", notes)
    if v.size < 3:
        notes.append(f"{name}: only {v.size} hole(s) give its full thickness; no variogram "
                     f"can be fitted and the surface is their mean, {np.mean(v):.2f} m, "
                     f"everywhere. Give a variogram in [variograms.{name}] or add holes.")
        return (VariogramModel(settings.variogram_model, nugget=max(variance, 1e-6),
                               psill=1e-9, range_m=grid.cell_size_m), exp, None, "default",
                notes)
    if v.size < MIN_HOLES_FOR_VARIOGRAM:
        span = float(np.max(np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])))
        model = VariogramModel(settings.variogram_model, nugget=0.0, psill=variance,
                               range_m=max(0.5 * span, grid.cell_size_m))
        notes.append(f"{name}: only {v.size} holes give its full thickness (a variogram "
                     f"needs {MIN_HOLES_FOR_VARIOGRAM}); a default {model.model} variogram "
                     f"was used: no nugget, sill = their variance ({variance:.3g} m²), range "
                     f"= half the largest distance between them ({model.range_m:.0f} m). "
                     f"Give one in [variograms.{name}] to choose it.")
        return model, exp, None, "default", notes
    model = fit_variogram(exp, settings.variogram_model, sample_variance=variance,
                          model2=settings.nested_model)
    if v.size >= MIN_HOLES_FOR_DIRECTIONS:
        directional = fit_anisotropy(x, y, v, model, n_lags=n_lags, max_lag_m=max_lag,
                                     n_directions=settings.n_directions,
                                     tolerance_deg=settings.direction_tolerance_deg)
        if settings.anisotropy == "auto":
            model = with_anisotropy(model, directional.ratio, directional.angle_deg,
                                    directional.major_range_m)
    return model, exp, directional, "fitted", notes


def krige_thickness(name: str, x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                    status: np.ndarray, grid: Grid, settings: KrigingSettings, *,
                    with_cv: bool = True, model: VariogramModel | None = None,
                    ids: np.ndarray | None = None,
                    context: KrigingContext = DEFAULT_CONTEXT) -> Surface:
    """Krige one thickness from borehole values whose ``status`` is ``"full"`` or
    ``"lower_bound"`` (others are ignored), honouring lower bounds as described in the
    module docstring.

    Args:
        name: label of the surface (``"aquitard"`` or a unit code; also the key of its
            manual variogram in ``settings.variograms``).
        x_m, y_m: borehole coordinates (m).
        thickness_m: thickness (full) or minimum thickness (lower bound) at each hole (m).
        status: ``"full"``, ``"lower_bound"`` or ``"unknown"`` per hole.
        grid: the target grid.
        settings: variogram choices and neighbourhood.
        model: a variogram to use as given instead of choosing one.
        ids: borehole ids (for the cross-validation table); positions when omitted.
        context: where the kriging runs, the tile cache and the kept variograms of a run
            (:class:`~aquitardmap.geostat.context.KrigingContext`; none by default).

    Raises:
        ValueError: when no hole gives the full thickness.
    """
    x, y, t = (np.asarray(a, dtype=float) for a in (x_m, y_m, thickness_m))
    status = np.asarray(status)
    ids = np.asarray(ids if ids is not None else np.arange(x.size).astype(str), dtype=object)
    full = status == "full"
    lower = status == "lower_bound"
    if not full.any():
        raise ValueError(f"no borehole gives the full thickness of {name}")
    fx, fy, ft, fids, spread = _merge(x[full], y[full], t[full], ids[full])
    notes: list[str] = []
    if fx.size < int(full.sum()):
        notes.append(f"{name}: {int(full.sum()) - fx.size} hole(s) share a location with "
                     f"another; their thicknesses were averaged (largest disagreement "
                     f"{spread:.2f} m)")
    bx, by, bt = x[lower], y[lower], t[lower]

    if model is not None:
        exp, directional, source = _EMPTY_EXP, None, "given"
    else:
        model, exp, directional, source, more = choose_variogram(name, fx, fy, ft, settings,
                                                                 grid, context.variograms)
        notes.extend(more)

    def krige_data(active: np.ndarray):
        dx = np.concatenate([fx, bx[active]])
        dy = np.concatenate([fy, by[active]])
        dt = np.concatenate([ft, bt[active]])
        first, inv = group_coincident(dx, dy)
        n = np.bincount(inv).astype(float)
        return dx[first], dy[first], np.bincount(inv, dt) / n

    # Active set of lower bounds that must be added as equality data.
    active = np.zeros(bx.size, dtype=bool)
    for _ in range(MAX_BOUND_ROUNDS):
        if bx.size == 0:
            break
        dx, dy, dt = krige_data(active)
        est = krige_points(dx, dy, dt, model, bx, by, max_neighbours=settings.max_neighbours,
                           context=context).estimate
        violated = (~active) & (est < bt - 1e-6)
        if not violated.any():
            break
        active |= violated
    dx, dy, dt = krige_data(active)
    res = krige_grid(dx, dy, dt, model, grid, max_neighbours=settings.max_neighbours,
                     context=context)
    if with_cv:
        table = cross_validation_table(fx, fy, ft, model, settings.max_neighbours, ids=fids,
                                       surface=name)
        cv = cv_statistics(table)
    else:
        table = pd.DataFrame(columns=list(CV_COLUMNS))
        cv = {"n": float(fx.size)}
    sd = np.sqrt(res.variance)
    if source == "constant" and not active.any():
        sd = np.where(grid.mask, 0.0, np.nan)
    return Surface(
        name=name, thickness_m=np.where(grid.mask, np.maximum(res.estimate, 0.0), np.nan),
        sd_m=sd, variogram=model, experimental=exp,
        n_full=int(full.sum()), n_lower_bounds=int(lower.sum()),
        n_bounds_active=int(active.sum()), cv=cv, data_x_m=dx, data_y_m=dy,
        variogram_source=source, directional=directional, cv_table=table,
        notes=tuple(notes),
    )


def surface_summary(surface: Surface) -> dict[str, object]:
    """What ``summary.json`` records of a surface: variogram and its source, the
    experimental variogram, directional fit, data counts, cross-validation, notes."""
    e = surface.experimental
    return {
        "variogram": surface.variogram.as_dict(),
        "variogram_source": surface.variogram_source,
        "experimental_variogram": {"lag_m": [float(v) for v in e.lag_m],
                                   "semivariance": [float(v) for v in e.gamma],
                                   "n_pairs": [int(v) for v in e.n_pairs]},
        "directional": surface.directional.as_dict() if surface.directional else None,
        "n_full": surface.n_full, "n_lower_bounds": surface.n_lower_bounds,
        "n_bounds_active": surface.n_bounds_active,
        "cross_validation": surface.cv,
        "notes": list(surface.notes),
    }


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
                 grid: Grid, settings: KrigingSettings, *,
                 context: KrigingContext = DEFAULT_CONTEXT) -> dict[str, Surface]:
    """Krige the total aquitard and every column unit from a borehole column table
    (``context``: see :func:`krige_thickness`).

    ``columns`` is :func:`aquitardmap.inputs.columns.column_table` output (excluded holes already
    removed; its index holds the borehole ids). Returns surfaces keyed ``"aquitard"`` and
    each unit code, each cross-validated; the aquitard unit surfaces are scaled to add up to
    the total.

    Raises:
        ValueError: when no hole gives the full thickness of the total or of a unit.
    """
    x = columns["x"].to_numpy(float)
    y = columns["y"].to_numpy(float)
    ids = columns.index.to_numpy().astype(str)
    out = {"aquitard": krige_thickness(
        "aquitard", x, y, columns["aquitard_thickness_m"].to_numpy(float),
        columns["status_aquitard"].to_numpy(), grid, settings, ids=ids, context=context)}
    for code in unit_codes:
        out[code] = krige_thickness(
            code, x, y, columns[f"thickness_{code}_m"].to_numpy(float),
            columns[f"status_{code}"].to_numpy(), grid, settings, ids=ids, context=context)
    scaled = scale_units_to_total({c: out[c].thickness_m for c in aquitard_codes},
                                  out["aquitard"].thickness_m)
    for c, arr in scaled.items():
        out[c] = replace(out[c], thickness_m=arr)
    return out
