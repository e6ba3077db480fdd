"""Stage 4: the borehole table, the probabilities of thin clay and windows, and the flagged
zones."""

from __future__ import annotations

from dataclasses import replace

import geopandas as gpd
import numpy as np
import pandas as pd

from aquitardmap.geostat.context import DEFAULT_CONTEXT, KrigingContext
from aquitardmap.geostat.drift import choose_drift
from aquitardmap.geostat.indicator import (
    IndicatorSettings,
    cross_validate,
    thickness_probabilities_by_indicator,
)
from aquitardmap.geostat.probability import (
    ThicknessProbabilities,
    cv_variance_scale,
    thickness_probabilities,
)
from aquitardmap.geostat.surfaces import Surface
from aquitardmap.grid import resample_to_grid
from aquitardmap.hydraulics.piercing import piercing_mask
from aquitardmap.hydraulics.stage import Hydraulics, screened_thickness_m
from aquitardmap.inputs.hazards import (
    annotate_zones,
)
from aquitardmap.inputs.load import Inputs
from aquitardmap.screening.suspicious import suspicious_columns
from aquitardmap.screening.zones import (
    probability_below,
    window_proof_cells,
    zones_from_grids,
)


def thickness_probability_grids(inputs: Inputs, surfaces: dict[str, Surface],
                                hyd: Hydraulics, context: KrigingContext = DEFAULT_CONTEXT
                                ) -> ThicknessProbabilities:
    """Stage 4a: P(window) and P(thin) of the protective aquitard thickness on the grid
    (:func:`aquitard_probabilities`).

    Where hazards (or a non-protective weathered crust) cut the column, the protective
    thickness is max(0, T − c), with c the depth the hazard removes below the top of the
    clay (its removed depth less the kriged cover) plus the crust when it is not
    protective; so P(protective < t) = P(T < t + c).
    """
    th = inputs.project.screening
    cut = (hyd.protective_cut_m if hyd.protective_cut_m is not None
           else np.zeros(inputs.grid.mask.shape))
    return aquitard_probabilities(inputs, surfaces["aquitard"],
                                  {"window": th.window_thickness_m + cut,
                                   "thin": th.thin_thickness_m + cut}, context)


def proves_thinner_than(columns: pd.DataFrame, thickness_m: float) -> pd.Series:
    """Holes that passed through the aquitard and logged less than ``thickness_m`` of it
    (with the window thickness: holes that prove a window)."""
    return (columns["status_aquitard"] == "full") & (
        columns["aquitard_thickness_m"] < thickness_m)


def window_proof_grid(inputs: Inputs, hyd: Hydraulics | None = None) -> np.ndarray:
    """Where probability zones may draw a window (:func:`aquitardmap.screening.zones.zone_masks`):
    cells within ``[screening] window_proof_radius_m`` of a hole (not excluded) that proves a
    window, and, with ``hyd``, cells where a mapped hazard (pit, cutting, scar) removes clay
    of the aquitard."""
    th = inputs.project.screening
    used = inputs.columns[~inputs.columns["excluded"]]
    proven = used[proves_thinner_than(used, th.window_thickness_m)]
    cells = window_proof_cells(proven["x"].to_numpy(float), proven["y"].to_numpy(float),
                               inputs.grid, th.window_proof_radius_m)
    if hyd is not None and hyd.hazard_removed_aquitard_m is not None:
        cells |= np.nan_to_num(hyd.hazard_removed_aquitard_m) > 0
    return cells


def aquitard_probabilities(inputs: Inputs, total: Surface,
                           thresholds_m: dict[str, float | np.ndarray],
                           context: KrigingContext = DEFAULT_CONTEXT
                           ) -> ThicknessProbabilities:
    """P(total aquitard thickness < threshold) grids by the ``[screening]
    probability_method``.

    ``"indicator"`` (default): indicator kriging with continuity along chains of proving
    holes (:mod:`aquitardmap.geostat.indicator`; ``total`` is not used), its neighbourhood the
    kriging's ``max_neighbours`` up to 32, and the blocked cross-validation of the window
    and thin probabilities at the holes (:func:`aquitardmap.geostat.indicator.cross_validate`) in
    the record's ``cross_validation``.

    ``"latent_gaussian"``: :mod:`aquitardmap.geostat.probability`, with the ground elevation as an
    external drift when ``[kriging] external_drift`` and the cross-validation say so
    (:mod:`aquitardmap.geostat.drift`), otherwise with the total thickness's variogram; the
    variance level comes from the cross-validation of the model used.

    ``context``: where the kriging runs, and the kept variograms (the drift's residual)."""
    p = inputs.project
    th = p.screening
    used = inputs.columns[~inputs.columns["excluded"]]
    x, y = used["x"].to_numpy(float), used["y"].to_numpy(float)
    t, status = used["aquitard_thickness_m"].to_numpy(float), used["status_aquitard"].to_numpy()
    if th.probability_method == "indicator":
        settings = IndicatorSettings(continuity_ratio=th.continuity_ratio,
                                     chain_corridor_m=th.chain_corridor_m,
                                     location_sd_m=th.location_sd_m,
                                     max_neighbours=min(32, p.kriging.max_neighbours))
        probs = thickness_probabilities_by_indicator(x, y, t, status, inputs.grid,
                                                     thresholds_m, settings, context=context)
        cv = cross_validate(x, y, t, status, {"window": th.window_thickness_m,
                                              "thin": th.thin_thickness_m}, settings,
                            context=context)
        return replace(probs, other_method={
            **probs.other_method,
            "cross_validation": {name: c.as_dict() for name, c in cv.items()}})
    ground = used["dem_elev_m"].to_numpy(float)
    dem_path = p.file("dem")
    grid_ground = resample_to_grid(dem_path, inputs.grid) if dem_path is not None else None
    drift = choose_drift(x, y, t, status, ground, grid_ground, inputs.grid, p.kriging,
                         total.cv, context.variograms)
    model, cv = (drift.model, drift.cv_drift) if drift.used else (total.variogram, total.cv)
    probs = thickness_probabilities(
        x, y, t, status, model, inputs.grid, thresholds_m,
        max_neighbours=drift.max_neighbours if drift.used else p.kriging.max_neighbours,
        n_draws=th.probability_draws, seed=th.probability_seed,
        variance_scale=cv_variance_scale(cv) if th.probability_variance_from_cv else 1.0,
        drift=ground if drift.used else None,
        grid_drift=drift.grid_drift(grid_ground) if drift.used else None,
        window_floor_m=th.window_latent_floor_m)
    return replace(probs, drift=drift.as_dict(),
                   residual=drift.residual if drift.used else None)


def borehole_table(inputs: Inputs, surfaces: dict[str, Surface] | None = None
                   ) -> gpd.GeoDataFrame:
    """Every borehole with its derived values, as points in the project CRS.

    With ``surfaces`` the suspicious-log columns are added
    (:mod:`aquitardmap.screening.suspicious`):
    ``cv_error_m``, ``cv_standardised_error``, ``suspicious``, ``suspicious_reasons``.
    """
    c = inputs.columns.copy()
    if surfaces is not None and "aquitard" in surfaces:
        sus = suspicious_columns(c, surfaces["aquitard"].cv_table, inputs.project.qa,
                                 inputs.grid)
        for col in sus.columns:
            c[col] = sus[col]
    th = inputs.project.screening
    c["proves_window"] = proves_thinner_than(c, th.window_thickness_m)
    c["proves_thin"] = proves_thinner_than(c, th.thin_thickness_m)
    c["pierces_aquitard"] = piercing_mask(c)
    c = c.reset_index().rename(columns={"index": "borehole_id"})
    return gpd.GeoDataFrame(c, geometry=gpd.points_from_xy(c["x"], c["y"]),
                            crs=inputs.project.crs)


def screen(inputs: Inputs, surfaces: dict[str, Surface], hyd: Hydraulics,
           boreholes: gpd.GeoDataFrame, *,
           probabilities: ThicknessProbabilities | None = None
           ) -> tuple[np.ndarray, gpd.GeoDataFrame]:
    """Stage 4: approximate P(thin) grid and the window / thin / fast zones.

    With ``[screening] zone_basis = "probability"`` window and thin zones are drawn from
    ``probabilities`` (computed here by :func:`thickness_probability_grids` when not given)
    in a likely and a possible tier (:func:`aquitardmap.screening.zones.zone_tier_masks`);
    otherwise from the kriged thickness. Either way the cells holding a used hole that
    proves a window or thin clay (``proves_window`` / ``proves_thin`` of ``boreholes``,
    :func:`proves_thinner_than`) are flagged whatever the grids say.
    """
    total = surfaces["aquitard"]
    th = inputs.project.screening
    thickness = screened_thickness_m(total, hyd)
    p_thin = probability_below(th.thin_thickness_m, thickness, total.sd_m)
    used = boreholes[~boreholes["excluded"]]
    p_window = None
    if th.zone_basis == "probability":
        if probabilities is None:
            probabilities = thickness_probability_grids(inputs, surfaces, hyd)
        p_window = probabilities.p_below["window"]
        zones = zones_from_grids(thickness, total.sd_m, hyd.travel_time_yr,
                                 probabilities.p_below["thin"], inputs.grid, th, used,
                                 p_window=p_window,
                                 window_proven=window_proof_grid(inputs, hyd),
                                 piercing_density_per_km2=hyd.piercing_density_per_km2,
                                 gradient_source=hyd.gradient_source)
    else:
        zones = zones_from_grids(thickness, total.sd_m, hyd.travel_time_yr, p_thin,
                                 inputs.grid, th, used,
                                 piercing_density_per_km2=hyd.piercing_density_per_km2,
                                 gradient_source=hyd.gradient_source)
    if inputs.hazards is not None and len(inputs.hazards):
        zones = annotate_zones(zones, inputs.hazards)
    return p_thin, zones
