"""Flagged zones: where the clay is absent (window), thin, or lets water through fast.

Zones are drawn from the grids cell by cell and vectorised to polygons (rasterio's
``features.shapes``); each polygon carries its area, the statistics of the grids inside it
and a plain-language reason. Window and thin zones do not overlap (a window is not also
listed as thin); fast-path zones are drawn independently and may overlap both.

The probability attached to a zone here, ``mean_p_thin``, is the kriging-based
approximation ``P(T < t) = Φ((t − T*)/σ)`` (a Gaussian error of the kriged thickness ``T*``
with kriging standard deviation σ; Isaaks & Srivastava 1989, ch. 20). It is an indicator of
confidence, not a calibrated probability.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
from rasterio.features import shapes
from scipy import ndimage
from scipy.stats import norm
from shapely.geometry import shape
from shapely.ops import unary_union

from aquitardmap.grid import Grid
from aquitardmap.project import ScreeningThresholds

ZONE_KINDS = ("window", "thin", "fast")


def probability_below(threshold_m: float, estimate_m: np.ndarray, sd_m: np.ndarray
                      ) -> np.ndarray:
    """Approximate P(thickness < threshold) from the kriged estimate and its SD (m).

    Where the SD is 0 (a cell on a borehole) the probability is 0 or 1.
    """
    est = np.asarray(estimate_m, float)
    sd = np.asarray(sd_m, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = (threshold_m - est) / sd
    p = np.where(sd > 0, norm.cdf(z), (est < threshold_m).astype(float))
    return np.where(np.isfinite(est), p, np.nan)


def zone_masks(total_thickness_m: np.ndarray, travel_time_yr: np.ndarray, grid: Grid,
               thresholds: ScreeningThresholds) -> dict[str, np.ndarray]:
    """Boolean grids of each zone kind inside the study area."""
    t = np.where(grid.mask, total_thickness_m, np.nan)
    tt = np.where(grid.mask, travel_time_yr, np.nan)
    with np.errstate(invalid="ignore"):
        window = t < thresholds.window_thickness_m
        thin = (t >= thresholds.window_thickness_m) & (t < thresholds.thin_thickness_m)
        fast = tt < thresholds.fast_travel_time_yr
    return {"window": window & grid.mask, "thin": thin & grid.mask, "fast": fast & grid.mask}


def _reason(kind: str, th: ScreeningThresholds, mean_t: float, min_t: float, sd: float,
            p: float, mean_tt: float, n_holes: int) -> str:
    holes = (f"{n_holes} borehole{'s' if n_holes != 1 else ''} inside" if n_holes
             else "no borehole inside: the zone is inferred from holes around it")
    if kind == "window":
        head = (f"Clay likely absent: kriged total aquitard thickness below "
                f"{th.window_thickness_m:g} m")
    elif kind == "thin":
        head = (f"Thin clay: kriged total aquitard thickness between "
                f"{th.window_thickness_m:g} and {th.thin_thickness_m:g} m")
    else:
        head = (f"Fast vertical path: advective travel time to the aquifer below "
                f"{th.fast_travel_time_yr:g} years (unit-gradient assumption)")
    return (f"{head}; mean {mean_t:.1f} m (min {min_t:.1f} m), kriging SD about {sd:.1f} m, "
            f"approx. P(thinner than {th.thin_thickness_m:g} m) {p:.2f}; mean travel time "
            f"{mean_tt:.3g} years; {holes}.")


def zones_from_grids(total_thickness_m: np.ndarray, sd_m: np.ndarray,
                     travel_time_yr: np.ndarray, p_thin: np.ndarray, grid: Grid,
                     thresholds: ScreeningThresholds,
                     boreholes: gpd.GeoDataFrame | None = None) -> gpd.GeoDataFrame:
    """Vectorise window, thin and fast zones into polygons with their statistics.

    Columns: ``kind``, ``area_m2``, ``reason``, ``mean_thickness_m``, ``min_thickness_m``,
    ``mean_sd_m``, ``mean_p_thin``, ``mean_travel_time_yr``, ``n_boreholes``, ``n_cells``.
    """
    rows = []
    structure = ndimage.generate_binary_structure(2, 1)  # 4-connected, as shapes() below
    for kind, m in zone_masks(total_thickness_m, travel_time_yr, grid, thresholds).items():
        labels, n = ndimage.label(m, structure=structure)
        if n == 0:
            continue
        idx = np.arange(1, n + 1)
        stats = {
            "mean_thickness_m": ndimage.mean(total_thickness_m, labels, idx),
            "min_thickness_m": ndimage.minimum(total_thickness_m, labels, idx),
            "mean_sd_m": ndimage.mean(sd_m, labels, idx),
            "mean_p_thin": ndimage.mean(p_thin, labels, idx),
            "mean_travel_time_yr": ndimage.mean(travel_time_yr, labels, idx),
            "n_cells": ndimage.sum(np.ones_like(labels), labels, idx),
        }
        geoms: dict[int, list] = {}
        for geom, value in shapes(labels.astype(np.int32), mask=labels > 0,
                                  transform=grid.transform, connectivity=4):
            geoms.setdefault(int(value), []).append(shape(geom))
        for i in idx:
            poly = unary_union(geoms[int(i)])
            rows.append({"kind": kind, "geometry": poly,
                         **{k: float(v[i - 1]) for k, v in stats.items()}})
    zones = gpd.GeoDataFrame(rows, geometry="geometry", crs=grid.crs) if rows else \
        gpd.GeoDataFrame({"kind": [], "geometry": []}, geometry="geometry", crs=grid.crs)
    zones["area_m2"] = zones["n_cells"] * grid.cell_area_m2 if len(zones) else []
    if boreholes is not None and len(zones) and len(boreholes):
        joined = gpd.sjoin(boreholes[["geometry"]], zones[["geometry"]], how="inner",
                           predicate="within")
        counts = joined.groupby("index_right").size()
        zones["n_boreholes"] = [int(counts.get(i, 0)) for i in zones.index]
    else:
        zones["n_boreholes"] = 0
    zones["reason"] = [
        _reason(r.kind, thresholds, r.mean_thickness_m, r.min_thickness_m, r.mean_sd_m,
                r.mean_p_thin, r.mean_travel_time_yr, r.n_boreholes)
        for r in zones.itertuples()
    ] if len(zones) else []
    cols = ["kind", "area_m2", "reason", "mean_thickness_m", "min_thickness_m", "mean_sd_m",
            "mean_p_thin", "mean_travel_time_yr", "n_boreholes", "n_cells", "geometry"]
    for c in cols:
        if c not in zones:
            zones[c] = []
    zones = zones[cols]
    if len(zones):
        zones["n_cells"] = zones["n_cells"].astype(int)
        zones = zones.sort_values(["kind", "area_m2"], ascending=[True, False]
                                  ).reset_index(drop=True)
    return zones


def zone_areas_m2(zones: gpd.GeoDataFrame) -> dict[str, float]:
    """Total flagged area by kind (m²), every kind listed."""
    return {k: float(zones.loc[zones["kind"] == k, "area_m2"].sum()) for k in ZONE_KINDS}
