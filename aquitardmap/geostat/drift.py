"""Ground elevation as an external drift of the total aquitard thickness.

Why: in a valley filled with post-glacial clay the clay is thickest under the valley floor
and thins up the valley sides, and channels cut into it often leave lows in today's ground.
The DEM is known on every cell, the boreholes only at points, so the ground can carry the
local mean of the thickness where holes are sparse (common practice). Kriging with an
external drift (KED) lets the local mean be ``a + b·ground`` with ``a`` and ``b``
re-estimated in every moving neighbourhood, so a relation that changes across the region
(valley sides, channels, a regional slope along the valley) is followed locally
(:func:`aquitardmap.geostat.kriging.kriging_weights`; Wackernagel 2003, *Multivariate
Geostatistics*; Hengl et al. 2007, Computers & Geosciences 33:1301–1315).

The drift is not extrapolated: where the DEM on the grid lies above the highest or below the
lowest ground of the holes that enter the estimate, it is held at that highest or lowest
value (:meth:`DriftChoice.grid_drift`). A regression fitted on one range of a covariate says
nothing beyond it (common practice); a valley-side crest above every hole would otherwise
have its thickness extrapolated down the local slope, to zero if the slope is steep.

The variogram of KED is that of the residual from the drift. It is fitted, like every other
variogram of the project, to the residuals of an ordinary least-squares fit of the full
holes' thickness on the ground (the usual working approximation; Hengl et al. 2007), or
given as ``[variograms.aquitard_residual]`` in ``project.toml``.

When it is used (``[kriging] external_drift``): ``"none"`` never; ``"ground"`` whenever a
DEM covers every hole and cell; ``"auto"`` (default) when, in addition, leave-one-out
cross-validation of the full holes gives a root-mean-square error at least
:data:`MIN_RMSE_GAIN` lower with the drift than with ordinary kriging — the data decide,
and the summary records both figures. The drift enters the probability maps and the zones
drawn from them; the thickness grids stay ordinary kriging (the baseline they are compared
with in the summary).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from aquitardmap.config.settings import KrigingSettings
from aquitardmap.geostat.cache.variograms import VariogramBook
from aquitardmap.geostat.kriging import KrigingResult, cross_validation_statistics, kriging_weights
from aquitardmap.geostat.surfaces import Surface, choose_variogram, group_coincident
from aquitardmap.geostat.variogram import ExperimentalVariogram, VariogramModel
from aquitardmap.grid import Grid

#: Relative RMSE gain the drift must bring in cross-validation for ``"auto"`` to use it.
MIN_RMSE_GAIN = 0.02
#: Full holes needed before a drift is considered.
MIN_HOLES_FOR_DRIFT = 20
#: Name of the residual surface (key of its manual variogram).
RESIDUAL_NAME = "aquitard_residual"


@dataclass(frozen=True)
class DriftChoice:
    """Whether the ground elevation is used as an external drift, and why.

    Attributes:
        used: the drift is used.
        setting: ``[kriging] external_drift`` as given.
        model: variogram of the residual from the drift (None when not computed).
        intercept_m, slope: least-squares fit ``thickness ≈ intercept + slope·ground``.
        cv_ordinary, cv_drift: leave-one-out statistics of the full holes (RMSE in m and
            the variance of the standardised errors) without and with the drift.
        reason: the decision in plain words.
        max_neighbours: neighbourhood of the drift, the one of
            :func:`drift_neighbourhoods` with the lowest cross-validation RMSE.
        residual: the residual "surface" for the record (its experimental variogram,
            model and cross-validation; no grid), drawn like every variogram of the run.
        ground_range_m: lowest and highest ground elevation of the holes that enter the
            estimate; the drift on the grid is held inside it.
        share_cells_held: share of the study-area cells whose DEM lies outside
            ``ground_range_m``.
    """

    used: bool
    setting: str
    model: VariogramModel | None = None
    intercept_m: float = float("nan")
    slope: float = float("nan")
    cv_ordinary: dict[str, float] = field(default_factory=dict)
    cv_drift: dict[str, float] = field(default_factory=dict)
    reason: str = ""
    max_neighbours: int = 0
    residual: Surface | None = None
    ground_range_m: tuple[float, float] = (float("nan"), float("nan"))
    share_cells_held: float = 0.0

    def grid_drift(self, grid_ground_m: np.ndarray) -> np.ndarray:
        """The drift on the grid: the DEM held inside :attr:`ground_range_m` (module
        docstring), NaN kept where the DEM has none."""
        lo, hi = self.ground_range_m
        return np.clip(np.asarray(grid_ground_m, float), lo, hi)

    def as_dict(self) -> dict[str, object]:
        """What ``summary.json`` records."""
        return {"used": self.used, "setting": self.setting,
                "residual_variogram": self.model.as_dict() if self.model else None,
                "least_squares_intercept_m": self.intercept_m,
                "least_squares_slope": self.slope,
                "cross_validation_ordinary": dict(self.cv_ordinary),
                "cross_validation_with_drift": dict(self.cv_drift),
                "max_neighbours": self.max_neighbours, "reason": self.reason,
                "ground_range_of_holes_m": list(self.ground_range_m),
                "share_of_cells_outside_that_range": self.share_cells_held}


def loo_with_drift(x_m: np.ndarray, y_m: np.ndarray, values: np.ndarray,
                   ground_m: np.ndarray, model: VariogramModel, max_neighbours: int
                   ) -> KrigingResult:
    """Leave-one-out kriging with an external drift at the data points: each datum from its
    ``max_neighbours`` nearest others."""
    w = kriging_weights(x_m, y_m, model, x_m, y_m, max_neighbours=max_neighbours,
                        exclude_coincident=True, drift=ground_m, target_drift=ground_m)
    return KrigingResult(w.apply(np.asarray(values, float)), w.variance)


def choose_drift(x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                 status: np.ndarray, ground_m: np.ndarray, grid_ground_m: np.ndarray | None,
                 grid: Grid, settings: KrigingSettings, ordinary_cv: dict[str, float],
                 book: VariogramBook | None = None) -> DriftChoice:
    """Decide whether the ground elevation serves as the external drift of the total
    aquitard thickness (module docstring).

    Args:
        x_m, y_m, thickness_m, status: the holes' total aquitard thickness and its status
            (``"full"``, ``"lower_bound"``, ``"unknown"``).
        ground_m: DEM elevation at each hole (m; NaN where the DEM has none).
        grid_ground_m: DEM on the grid (m), None when the project has no DEM.
        grid: the target grid.
        settings: kriging settings (``external_drift``, neighbourhood, variogram choices).
        ordinary_cv: leave-one-out statistics of ordinary kriging on the same full holes
            (the total thickness surface's ``cv``), the figures the drift must beat.
        book: the run's kept variograms, for the residual's model
            (:mod:`aquitardmap.geostat.cache.variograms`); None uses the fresh fit.
    """
    setting = settings.external_drift
    if setting == "none":
        return DriftChoice(False, setting, reason="external drift switched off")
    if grid_ground_m is None:
        return DriftChoice(False, setting, reason="the project has no DEM")
    status = np.asarray(status)
    g = np.asarray(ground_m, float)
    used = status != "unknown"
    if not np.all(np.isfinite(g[used])):
        return DriftChoice(False, setting, reason=f"{int((~np.isfinite(g[used])).sum())} "
                           "hole(s) lie off the DEM or on its nodata cells")
    if not np.all(np.isfinite(grid_ground_m[grid.mask])):
        return DriftChoice(False, setting, reason="the DEM does not cover every cell of the "
                           "study area")
    ground_range = (float(g[used].min()), float(g[used].max())) if used.any() else (
        float("nan"), float("nan"))
    cells = grid_ground_m[grid.mask]
    held = float(np.mean((cells < ground_range[0]) | (cells > ground_range[1]))) if (
        cells.size) else 0.0
    extent = {"ground_range_m": ground_range, "share_cells_held": held}
    full = status == "full"
    x, y, t, gf = (np.asarray(a, float)[full] for a in (x_m, y_m, thickness_m, g))
    first, inv = group_coincident(x, y)
    n = np.bincount(inv).astype(float)
    x, y = x[first], y[first]
    t, gf = np.bincount(inv, t) / n, np.bincount(inv, gf) / n
    if t.size < MIN_HOLES_FOR_DRIFT:
        return DriftChoice(False, setting, reason=f"only {t.size} holes give the full "
                           f"thickness (a drift needs {MIN_HOLES_FOR_DRIFT})")
    if np.ptp(gf) <= 0:
        return DriftChoice(False, setting, reason="the ground is flat at the holes")
    a = np.column_stack([np.ones_like(gf), gf])
    (b0, b1), *_ = np.linalg.lstsq(a, t, rcond=None)
    resid = t - (b0 + b1 * gf)
    model, exp, _, source, _ = choose_variogram(RESIDUAL_NAME, x, y, resid, settings, grid,
                                            book)
    cv_ok = dict(ordinary_cv)
    trials = {k: cross_validation_statistics(t, loo_with_drift(x, y, t, gf, model, k))
              for k in drift_neighbourhoods(settings.max_neighbours)}
    k = min(trials, key=lambda kk: trials[kk]["rmse"])
    cv_d = trials[k]
    gain = 1.0 - cv_d["rmse"] / cv_ok["rmse"] if cv_ok["rmse"] > 0 else 0.0
    residual = residual_record(model, exp, source, cv_d, t.size)
    figures = (f"leave-one-out RMSE {cv_d['rmse']:.2f} m with the ground as drift "
               f"({k} neighbours), {cv_ok['rmse']:.2f} m without ({100 * gain:+.1f} %)")
    if setting == "auto" and gain < MIN_RMSE_GAIN:
        return DriftChoice(False, setting, model, float(b0), float(b1), cv_ok, cv_d,
                           f"not used: {figures}; the drift must gain at least "
                           f"{100 * MIN_RMSE_GAIN:.0f} %", k, residual, **extent)
    if held > 0:
        figures += (f"; the DEM of {100 * held:.1f} % of the cells lies outside the holes' "
                    f"ground range {ground_range[0]:.1f}–{ground_range[1]:.1f} m and is held "
                    "at its ends there")
    return DriftChoice(True, setting, model, float(b0), float(b1), cv_ok, cv_d,
                       f"used: {figures}", k, residual, **extent)


def residual_record(model: VariogramModel, experimental: ExperimentalVariogram, source: str,
                    cv: dict[str, float], n_full: int) -> Surface:
    """The residual from the drift as a :class:`Surface` without a grid, so that its
    variogram is drawn and summarised like every other one."""
    empty = np.empty((0, 0))
    return Surface(name=RESIDUAL_NAME, thickness_m=empty, sd_m=empty, variogram=model,
                   experimental=experimental, n_full=n_full, n_lower_bounds=0,
                   n_bounds_active=0, cv=dict(cv), variogram_source=source)


def drift_neighbourhoods(max_neighbours: int) -> list[int]:
    """Neighbourhood sizes tried for the drift: the drift is a local relation, so smaller
    neighbourhoods than ordinary kriging's may follow it better."""
    return sorted({k for k in (12, 16, 24, 32, 48) if k < max_neighbours} | {max_neighbours})
