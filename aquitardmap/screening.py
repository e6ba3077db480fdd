"""Flagged zones: where the clay is absent (window), thin, or lets water through fast.

Zones are drawn from the grids cell by cell and vectorised to polygons (rasterio's
``features.shapes``); each polygon carries its area, the statistics of the grids inside it
and a plain-language reason. Window and thin zones do not overlap (a window is not also
listed as thin); fast-path zones are drawn independently and may overlap both, and so are
pierced zones: cells where the density of boreholes reaching the aquifer through the clay
(:mod:`aquitardmap.piercing`) is at least ``piercing_flag_per_km2`` — each such hole is a
possible leak along its annulus unless it was sealed, which the logs do not say.

Two ways to draw window and thin zones (``[screening] zone_basis``):

- ``"probability"`` (default): a cell is a window where P(total aquitard thinner than the
  window threshold) is at least ``p_window_threshold``, thin where P(thinner than the thin
  threshold) is at least ``p_thin_threshold`` — probabilities from
  :mod:`aquitardmap.probability`, which honours holes that prove a window and holes that
  stopped in the clay. Each zone carries the probability it was drawn from
  (``probability``: its mean over the zone; ``p_threshold``: the threshold). A window
  zone is drawn only within ``window_proof_radius_m`` of a hole that proves a window
  (:func:`window_proof_cells`) or where a mapped hazard removes clay; a cell that is
  likely a window farther from any such hole is flagged thin, and its zone says so: the
  probabilities there rest on the drift and the variogram alone, and over 24 synthetic
  regions most such cells had some clay left (README, *Zones from probabilities*).
- ``"kriged_thickness"``: where the kriged thickness is below the thickness threshold (the
  plain-kriging baseline).

:func:`probability_below` is the Gaussian approximation ``P(T < t) = Φ((t − T*)/σ)`` from the
kriged thickness ``T*`` and its kriging SD σ (Isaaks & Srivastava 1989, ch. 20), kept for
``p_thin_approx.tif``; it ignores the censored data and the bound at zero.
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

ZONE_KINDS = ("window", "thin", "fast", "pierced")


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


def window_proof_cells(x_m: np.ndarray, y_m: np.ndarray, grid: Grid,
                       radius_m: float) -> np.ndarray:
    """Boolean grid: cells whose centre lies within ``radius_m`` of a hole that proves a
    window (at ``x_m``, ``y_m``)."""
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    x, y = np.asarray(x_m, float).ravel(), np.asarray(y_m, float).ravel()
    if x.size == 0:
        return np.zeros(grid.mask.shape, dtype=bool)
    from scipy.spatial import cKDTree

    d, _ = cKDTree(np.column_stack([x, y])).query(np.column_stack([xx.ravel(), yy.ravel()]))
    return (d <= radius_m).reshape(grid.mask.shape)


def likely_window(p_window: np.ndarray, thresholds: ScreeningThresholds) -> np.ndarray:
    """Cells where P(window) reaches ``p_window_threshold`` (NaN counts as 0)."""
    return np.nan_to_num(p_window) >= thresholds.p_window_threshold


def zone_masks(total_thickness_m: np.ndarray, travel_time_yr: np.ndarray, grid: Grid,
               thresholds: ScreeningThresholds, *, p_window: np.ndarray | None = None,
               p_thin: np.ndarray | None = None,
               window_proven: np.ndarray | None = None,
               piercing_density_per_km2: np.ndarray | None = None) -> dict[str, np.ndarray]:
    """Boolean grids of each zone kind (:data:`ZONE_KINDS`) inside the study area.

    With both probability grids and ``thresholds.zone_basis == "probability"`` window and
    thin cells come from the probabilities, else from the kriged thickness. Then a cell
    is a window where P(window) reaches its threshold and ``window_proven`` (cells near a
    hole proving a window, :func:`window_proof_cells`; every cell when None) holds; thin
    where P(thin) reaches its threshold, or P(window) does without proof nearby. Pierced
    where ``piercing_density_per_km2`` (boreholes per km²; none pierced without it) is at
    least ``thresholds.piercing_flag_per_km2``.
    """
    t = np.where(grid.mask, total_thickness_m, np.nan)
    tt = np.where(grid.mask, travel_time_yr, np.nan)
    with np.errstate(invalid="ignore"):
        if uses_probability(thresholds, p_window, p_thin):
            likely = likely_window(p_window, thresholds)
            window = likely if window_proven is None else likely & window_proven
            thin = ((np.nan_to_num(p_thin) >= thresholds.p_thin_threshold) | likely) & ~window
        else:
            window = t < thresholds.window_thickness_m
            thin = (t >= thresholds.window_thickness_m) & (t < thresholds.thin_thickness_m)
        fast = tt < thresholds.fast_travel_time_yr
        pierced = (np.zeros(grid.mask.shape, dtype=bool) if piercing_density_per_km2 is None
                   else np.nan_to_num(piercing_density_per_km2, nan=-1.0)
                   >= thresholds.piercing_flag_per_km2)
    return {"window": window & grid.mask, "thin": thin & grid.mask, "fast": fast & grid.mask,
            "pierced": pierced & grid.mask}


def uses_probability(thresholds: ScreeningThresholds, p_window: np.ndarray | None,
                     p_thin: np.ndarray | None) -> bool:
    """True when window and thin zones are drawn from probability grids."""
    return (thresholds.zone_basis == "probability" and p_window is not None
            and p_thin is not None)


def _reason(kind: str, th: ScreeningThresholds, mean_t: float, min_t: float, sd: float,
            p: float, mean_tt: float, n_holes: int, prob: float | None = None,
            piercing_per_km2: float = float("nan")) -> str:
    holes = (f"{n_holes} borehole{'s' if n_holes != 1 else ''} inside" if n_holes
             else "no borehole inside: the zone is inferred from holes around it")
    if kind == "pierced":
        return (f"Many boreholes pierce the clay: on average {piercing_per_km2:.0f} holes per "
                f"km² within {th.piercing_radius_m:g} m reach the aquifer through the "
                f"aquitard (flagged from {th.piercing_flag_per_km2:g} per km²); each is a "
                "possible leak along its casing unless it was sealed, which the logs do not "
                f"say; kriged clay thickness mean {mean_t:.1f} m; {holes}.")
    if prob is not None and kind in ("window", "thin"):
        if kind == "window":
            head = (f"Clay likely absent: chance that the total aquitard is thinner than "
                    f"{th.window_thickness_m:g} m is at least {th.p_window_threshold:.0%} in "
                    f"every cell ({prob:.0%} on average)")
        else:
            head = (f"Thin clay: chance that the total aquitard is thinner than "
                    f"{th.thin_thickness_m:g} m is at least {th.p_thin_threshold:.0%} in "
                    f"every cell ({prob:.0%} on average)")
        return (f"{head}; kriged thickness mean {mean_t:.1f} m (min {min_t:.1f} m), kriging "
                f"SD about {sd:.1f} m; mean travel time {mean_tt:.3g} years; {holes}.")
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


def _unproven_note(n_cells: int, th: ScreeningThresholds) -> str:
    """What a thin zone says of its cells that are likely windows without proof nearby."""
    if n_cells <= 0:
        return ""
    return (f" {n_cells} of its cells are more likely than not windows (P(window) at least "
            f"{th.p_window_threshold:.0%}), but no hole proving a window lies within "
            f"{th.window_proof_radius_m:g} m: flagged thin, not window; a hole there would "
            "tell.")


def zones_from_grids(total_thickness_m: np.ndarray, sd_m: np.ndarray,
                     travel_time_yr: np.ndarray, p_thin: np.ndarray, grid: Grid,
                     thresholds: ScreeningThresholds,
                     boreholes: gpd.GeoDataFrame | None = None, *,
                     p_window: np.ndarray | None = None,
                     window_proven: np.ndarray | None = None,
                     piercing_density_per_km2: np.ndarray | None = None) -> gpd.GeoDataFrame:
    """Vectorise window, thin, fast and pierced zones into polygons with their statistics.

    ``p_thin`` is P(thinner than the thin threshold); with ``p_window`` too and
    ``thresholds.zone_basis == "probability"`` the window and thin zones are drawn from them
    (module docstring), windows only where ``window_proven``. Pierced zones come from
    ``piercing_density_per_km2`` (none without it).

    Columns: ``kind``, ``area_m2``, ``reason``, ``mean_thickness_m``, ``min_thickness_m``,
    ``mean_sd_m``, ``mean_p_thin``, ``mean_p_window`` (NaN without ``p_window``),
    ``probability`` (mean of the probability the zone was drawn from; NaN for fast zones
    and thickness-based zones), ``p_threshold`` (its threshold, NaN likewise),
    ``mean_travel_time_yr``, ``n_boreholes``, ``n_cells``, ``n_cells_unproven_window``
    (cells of a thin zone where P(window) reaches its threshold but no hole proving a
    window lies within ``window_proof_radius_m``), ``mean_piercing_per_km2`` (mean density
    of piercing boreholes over the zone; NaN without the density grid).
    """
    rows = []
    structure = ndimage.generate_binary_structure(2, 1)  # 4-connected, as shapes() below
    by_probability = uses_probability(thresholds, p_window, p_thin)
    pw = p_window if p_window is not None else np.full(grid.mask.shape, np.nan)
    unproven = np.zeros(grid.mask.shape, dtype=bool)
    if by_probability and window_proven is not None:
        unproven = likely_window(pw, thresholds) & ~window_proven
    dens = (piercing_density_per_km2 if piercing_density_per_km2 is not None
            else np.full(grid.mask.shape, np.nan))
    for kind, m in zone_masks(total_thickness_m, travel_time_yr, grid, thresholds,
                              p_window=p_window, p_thin=p_thin, window_proven=window_proven,
                              piercing_density_per_km2=piercing_density_per_km2).items():
        labels, n = ndimage.label(m, structure=structure)
        if n == 0:
            continue
        idx = np.arange(1, n + 1)
        stats = {
            "mean_thickness_m": ndimage.mean(total_thickness_m, labels, idx),
            "min_thickness_m": ndimage.minimum(total_thickness_m, labels, idx),
            "mean_sd_m": ndimage.mean(sd_m, labels, idx),
            "mean_p_thin": ndimage.mean(p_thin, labels, idx),
            "mean_p_window": ndimage.mean(pw, labels, idx),
            "mean_travel_time_yr": ndimage.mean(travel_time_yr, labels, idx),
            "mean_piercing_per_km2": ndimage.mean(dens, labels, idx),
            "n_cells": ndimage.sum(np.ones_like(labels), labels, idx),
            "n_cells_unproven_window": (ndimage.sum(unproven & m, labels, idx) if kind == "thin"
                                        else np.zeros(n)),
        }
        geoms: dict[int, list] = {}
        for geom, value in shapes(labels.astype(np.int32), mask=labels > 0,
                                  transform=grid.transform, connectivity=4):
            geoms.setdefault(int(value), []).append(shape(geom))
        own = {"window": ("mean_p_window", thresholds.p_window_threshold),
               "thin": ("mean_p_thin", thresholds.p_thin_threshold)}.get(kind)
        for i in idx:
            poly = unary_union(geoms[int(i)])
            row = {"kind": kind, "geometry": poly,
                   **{k: float(v[i - 1]) for k, v in stats.items()}}
            if by_probability and own is not None:
                row["probability"], row["p_threshold"] = row[own[0]], own[1]
            else:
                row["probability"], row["p_threshold"] = np.nan, np.nan
            rows.append(row)
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
                r.mean_p_thin, r.mean_travel_time_yr, r.n_boreholes,
                r.probability if np.isfinite(r.probability) else None,
                r.mean_piercing_per_km2)
        + _unproven_note(int(r.n_cells_unproven_window), thresholds)
        for r in zones.itertuples()
    ] if len(zones) else []
    cols = ["kind", "area_m2", "reason", "mean_thickness_m", "min_thickness_m", "mean_sd_m",
            "mean_p_thin", "mean_p_window", "probability", "p_threshold",
            "mean_travel_time_yr", "n_boreholes", "n_cells", "n_cells_unproven_window",
            "mean_piercing_per_km2", "geometry"]
    for c in cols:
        if c not in zones:
            zones[c] = []
    zones = zones[cols]
    if len(zones):
        zones["n_cells"] = zones["n_cells"].astype(int)
        zones["n_cells_unproven_window"] = zones["n_cells_unproven_window"].astype(int)
        zones = zones.sort_values(["kind", "area_m2"], ascending=[True, False]
                                  ).reset_index(drop=True)
    return zones


def zone_areas_m2(zones: gpd.GeoDataFrame) -> dict[str, float]:
    """Total flagged area by kind (m²), every kind listed."""
    return {k: float(zones.loc[zones["kind"] == k, "area_m2"].sum()) for k in ZONE_KINDS}
