"""Flagged zones: where the clay is absent (window), thin, or lets water through fast.

Zones are drawn from the grids cell by cell and vectorised to polygons (rasterio's
``features.shapes``); each polygon carries its area, the statistics of the grids inside it
and a plain-language reason. Window and thin zones do not overlap (a window is not also
listed as thin); fast-path zones are drawn independently and may overlap both, and so are
pierced zones: cells where the density of boreholes reaching the aquifer through the clay
(:mod:`aquitardmap.hydraulics.piercing`) is at least ``piercing_flag_per_km2`` — each such hole is a
possible leak along its annulus unless it was sealed, which the logs do not say.

Two ways to draw window and thin zones (``[screening] zone_basis``):

- ``"probability"`` (default): window and thin zones come in two tiers
  (:data:`ZONE_TIERS`, :func:`zone_tier_masks`), from P(window) (P(total aquitard thinner
  than the window threshold)) and P(thin) (P(thinner than the thin threshold)), the
  probabilities of :mod:`aquitardmap.geostat.probability`:

  * **likely**: the probability reaches ``p_window_threshold`` / ``p_thin_threshold``;
    a likely window also needs a hole that proves a window within
    ``window_proof_radius_m`` (:func:`window_proof_cells`) or a mapped hazard that removes
    clay: farther away the probabilities rest on the drift and the variogram alone, and
    over 24 synthetic regions most such cells had some clay left (README, *Zones from
    probabilities*), so such a cell is a *possible* window, not a likely one.
  * **possible**: the probability reaches ``p_window_possible_threshold`` /
    ``p_thin_possible_threshold``, the risk tolerance: ground the holes cannot rule out.

  Hard data are honoured whatever the grids say: a cell that holds a hole proving a window
  (it passed through the aquitard and logged less than ``window_thickness_m``) is a likely
  window; one that holds a hole proving thin clay is at least likely thin. Each cell lies
  in at most one window or thin zone, by one rule: **the higher tier wins, and within a
  tier a window beats thin clay** (likely window, then likely thin, then possible window,
  then possible thin). So a cell that is likely thin and only possibly a window is likely
  thin; since P(thin) ≥ P(window) everywhere, an unproven likely window is also likely thin
  whenever ``p_thin_threshold <= p_window_threshold`` (the defaults), and its zone counts
  and names such cells. Each zone carries its tier, the mean and the maximum of the
  probability it was drawn from, and the proving holes in or near it.
- ``"kriged_thickness"``: where the kriged thickness is below the thickness threshold (the
  plain-kriging baseline), no tiers; the hard-data rule holds there too.

:func:`probability_below` is the Gaussian approximation ``P(T < t) = Φ((t − T*)/σ)`` from the
kriged thickness ``T*`` and its kriging SD σ (Isaaks & Srivastava 1989, ch. 20), kept for
``p_thin_approx.tif``; it ignores the censored data and the bound at zero.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
from rasterio.features import shapes
from scipy import ndimage
from scipy.spatial import cKDTree
from scipy.stats import norm
from shapely.geometry import shape
from shapely.ops import unary_union

from aquitardmap.config.settings import ScreeningThresholds
from aquitardmap.grid import Grid

ZONE_KINDS = ("window", "thin", "fast", "pierced")
#: Tiers of window and thin zones, the more severe first. Fast and pierced zones, and window
#: and thin zones drawn from the kriged thickness, have no tier (``""``).
ZONE_TIERS = ("likely", "possible")
#: Zone kinds drawn in tiers.
TIERED_KINDS = ("window", "thin")


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
    d, _ = cKDTree(np.column_stack([x, y])).query(np.column_stack([xx.ravel(), yy.ravel()]))
    return (d <= radius_m).reshape(grid.mask.shape)


def hole_cells(x_m: np.ndarray, y_m: np.ndarray, grid: Grid) -> np.ndarray:
    """Boolean grid: cells of the study area that hold at least one of the points (m)."""
    out = np.zeros(grid.mask.shape, dtype=bool)
    r, c = grid.rowcol(np.asarray(x_m, float).ravel(), np.asarray(y_m, float).ravel())
    ok = r >= 0
    out[r[ok], c[ok]] = True
    return out & grid.mask


def proving_hole_cells(boreholes: gpd.GeoDataFrame | None, grid: Grid
                       ) -> tuple[np.ndarray, np.ndarray]:
    """Cells holding a hole that proves a window and cells holding one that proves thin
    clay, from the ``proves_window`` / ``proves_thin`` columns of ``boreholes`` (as
    :func:`aquitardmap.screening.stage.borehole_table` writes them; pass the holes that are used).
    Empty grids without those columns."""
    out = []
    for col in ("proves_window", "proves_thin"):
        if boreholes is None or col not in boreholes or not len(boreholes):
            out.append(np.zeros(grid.mask.shape, dtype=bool))
            continue
        holes = boreholes[boreholes[col].fillna(False).astype(bool)]
        out.append(hole_cells(holes.geometry.x.to_numpy(), holes.geometry.y.to_numpy(), grid))
    return out[0], out[1]


def zone_tier_masks(p_window: np.ndarray, p_thin: np.ndarray, grid: Grid,
                    thresholds: ScreeningThresholds, *,
                    window_proven: np.ndarray | None = None,
                    window_holes: np.ndarray | None = None,
                    thin_holes: np.ndarray | None = None
                    ) -> dict[tuple[str, str], np.ndarray]:
    """Boolean grids of the window and thin zones by tier, ``{(kind, tier): cells}``.

    A cell is a likely window where P(window) ≥ ``p_window_threshold`` and
    ``window_proven`` (cells near a hole proving a window, :func:`window_proof_cells`;
    every cell when None) holds, or where ``window_holes`` (cells holding a hole that
    proves a window) holds; likely thin where P(thin) ≥ ``p_thin_threshold`` or
    ``thin_holes`` holds; a possible window where P(window) ≥
    ``p_window_possible_threshold``; possible thin where P(thin) ≥
    ``p_thin_possible_threshold``. Each cell takes the first of likely window, likely thin,
    possible window, possible thin that applies (higher tier first, then window before
    thin). NaN probabilities count as 0. Only cells of the study area.
    """
    pw, pt = np.nan_to_num(p_window), np.nan_to_num(p_thin)
    none = np.zeros(grid.mask.shape, dtype=bool)
    proven = np.ones(grid.mask.shape, dtype=bool) if window_proven is None else window_proven
    wh = none if window_holes is None else window_holes
    th_ = none if thin_holes is None else thin_holes
    th = thresholds
    window_likely = ((pw >= th.p_window_threshold) & proven) | wh
    thin_likely = ((pt >= th.p_thin_threshold) | th_) & ~window_likely
    taken = window_likely | thin_likely
    window_possible = (pw >= th.p_window_possible_threshold) & ~taken
    thin_possible = (pt >= th.p_thin_possible_threshold) & ~taken & ~window_possible
    return {("window", "likely"): window_likely & grid.mask,
            ("thin", "likely"): thin_likely & grid.mask,
            ("window", "possible"): window_possible & grid.mask,
            ("thin", "possible"): thin_possible & grid.mask}


def _kind_tier_masks(total_thickness_m: np.ndarray, travel_time_yr: np.ndarray, grid: Grid,
                     thresholds: ScreeningThresholds, p_window: np.ndarray | None,
                     p_thin: np.ndarray | None, window_proven: np.ndarray | None,
                     window_holes: np.ndarray | None, thin_holes: np.ndarray | None,
                     piercing_density_per_km2: np.ndarray | None
                     ) -> dict[tuple[str, str], np.ndarray]:
    """Every zone's cells by (kind, tier); tier ``""`` for the untiered ones."""
    t = np.where(grid.mask, total_thickness_m, np.nan)
    tt = np.where(grid.mask, travel_time_yr, np.nan)
    none = np.zeros(grid.mask.shape, dtype=bool)
    with np.errstate(invalid="ignore"):
        if uses_probability(thresholds, p_window, p_thin):
            out = zone_tier_masks(p_window, p_thin, grid, thresholds,
                                  window_proven=window_proven, window_holes=window_holes,
                                  thin_holes=thin_holes)
        else:
            wh = none if window_holes is None else window_holes
            th_ = none if thin_holes is None else thin_holes
            window = (t < thresholds.window_thickness_m) | wh
            thin = (((t >= thresholds.window_thickness_m) & (t < thresholds.thin_thickness_m))
                    | th_) & ~window
            out = {("window", ""): window & grid.mask, ("thin", ""): thin & grid.mask}
        out[("fast", "")] = (tt < thresholds.fast_travel_time_yr) & grid.mask
        out[("pierced", "")] = (none if piercing_density_per_km2 is None
                                else np.nan_to_num(piercing_density_per_km2, nan=-1.0)
                                >= thresholds.piercing_flag_per_km2) & grid.mask
    return out


def zone_masks(total_thickness_m: np.ndarray, travel_time_yr: np.ndarray, grid: Grid,
               thresholds: ScreeningThresholds, *, p_window: np.ndarray | None = None,
               p_thin: np.ndarray | None = None,
               window_proven: np.ndarray | None = None,
               window_holes: np.ndarray | None = None,
               thin_holes: np.ndarray | None = None,
               piercing_density_per_km2: np.ndarray | None = None,
               tiers: tuple[str, ...] = ZONE_TIERS) -> dict[str, np.ndarray]:
    """Boolean grids of each zone kind (:data:`ZONE_KINDS`) inside the study area.

    With both probability grids and ``thresholds.zone_basis == "probability"`` window and
    thin cells are those of :func:`zone_tier_masks` in ``tiers`` (both by default; pass
    ``("likely",)`` for the likely tier alone), else those of the kriged thickness below
    the window / thin thresholds; either way with the cells holding a proving hole
    (``window_holes``, ``thin_holes``). Fast where the travel time is below its threshold;
    pierced where ``piercing_density_per_km2`` (boreholes per km²; none pierced without it)
    is at least ``thresholds.piercing_flag_per_km2``.
    """
    masks = _kind_tier_masks(total_thickness_m, travel_time_yr, grid, thresholds, p_window,
                             p_thin, window_proven, window_holes, thin_holes,
                             piercing_density_per_km2)
    out = {k: np.zeros(grid.mask.shape, dtype=bool) for k in ZONE_KINDS}
    for (kind, tier), m in masks.items():
        if tier == "" or tier in tiers:
            out[kind] |= m
    return out


def uses_probability(thresholds: ScreeningThresholds, p_window: np.ndarray | None,
                     p_thin: np.ndarray | None) -> bool:
    """True when window and thin zones are drawn from probability grids."""
    return (thresholds.zone_basis == "probability" and p_window is not None
            and p_thin is not None)


def tier_threshold(thresholds: ScreeningThresholds, kind: str, tier: str) -> float:
    """The probability threshold of a tiered zone kind (``"window"``/``"thin"``) and tier."""
    return getattr(thresholds, f"p_{kind}_threshold" if tier == "likely"
                   else f"p_{kind}_possible_threshold")


def _holes_words(n_holes: int) -> str:
    return (f"{n_holes} borehole{'s' if n_holes != 1 else ''} inside" if n_holes
            else "no borehole inside: the zone is inferred from holes around it")


def _tier_head(kind: str, tier: str, th: ScreeningThresholds, prob: float,
               max_prob: float) -> str:
    """What a tiered zone is and what its tier means, in plain words."""
    thick = th.window_thickness_m if kind == "window" else th.thin_thickness_m
    p_tier = tier_threshold(th, kind, tier)
    if kind == "window":
        what = "Clay likely absent" if tier == "likely" else "Clay possibly absent"
        what += " (window zone"
    else:
        what = "Thin clay" + (" possible" if tier == "possible" else "") + " (thin zone"
    if tier == "likely":
        means = f"likely: the probability is at least {p_tier:.0%}"
        if kind == "window":
            means += (f" with a hole proving a window within {th.window_proof_radius_m:g} m "
                      "or a mapped hazard removing clay")
        means += f", or a hole in the cell proves {'a window' if kind == 'window' else 'it'}"
    else:
        means = (f"possible: cannot be ruled out, probability at least {p_tier:.0%}; "
                 "a hole here would tell")
    return (f"{what}, tier {means}): chance that the total aquitard is thinner than "
            f"{thick:g} m is {prob:.0%} on average over the zone, at most {max_prob:.0%}")


#: How the travel time was worked out, by ``Hydraulics.gradient_source``, in a zone's reason.
GRADIENT_WORDS = {"stated": "unit-gradient assumption",
                  "heads": "steady flux from the head inputs' head drop"}


def _reason(kind: str, tier: str, th: ScreeningThresholds, mean_t: float, min_t: float,
            sd: float, p: float, mean_tt: float, n_holes: int, prob: float | None = None,
            max_prob: float = float("nan"),
            piercing_per_km2: float = float("nan"), gradient_source: str = "stated") -> str:
    holes = _holes_words(n_holes)
    if kind == "pierced":
        return (f"Many boreholes pierce the clay: on average {piercing_per_km2:.0f} holes per "
                f"km² within {th.piercing_radius_m:g} m reach the aquifer through the "
                f"aquitard (flagged from {th.piercing_flag_per_km2:g} per km²); each is a "
                "possible leak along its casing unless it was sealed, which the logs do not "
                f"say; kriged clay thickness mean {mean_t:.1f} m; {holes}.")
    if prob is not None and kind in TIERED_KINDS and tier in ZONE_TIERS:
        head = _tier_head(kind, tier, th, prob, max_prob)
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
                f"{th.fast_travel_time_yr:g} years ({GRADIENT_WORDS[gradient_source]})")
    return (f"{head}; mean {mean_t:.1f} m (min {min_t:.1f} m), kriging SD about {sd:.1f} m, "
            f"approx. P(thinner than {th.thin_thickness_m:g} m) {p:.2f}; mean travel time "
            f"{mean_tt:.3g} years; {holes}.")


def _unproven_note(kind: str, n_cells: int, th: ScreeningThresholds) -> str:
    """What a zone says of its cells that are likely windows by probability but have no
    hole proving a window nearby."""
    if n_cells <= 0:
        return ""
    where = ("possible, not likely, windows" if kind == "window"
             else "possible windows at most, and likely thin, which outranks a possible window")
    return (f" {n_cells} of its cells are more likely than not windows (P(window) at least "
            f"{th.p_window_threshold:.0%}), but no hole proving a window lies within "
            f"{th.window_proof_radius_m:g} m, which the likely window tier needs: they are "
            f"{where}; a hole there would tell.")


def _hard_data_note(kind: str, tier: str, n_cells: int) -> str:
    """What a zone says of its cells flagged by a hole in them alone."""
    if n_cells <= 0:
        return ""
    proves = "a window" if kind == "window" else "thin clay"
    flagged = ("flagged likely whatever the probability there says" if tier == "likely"
               else "flagged whatever the kriged thickness there says")
    return f" {n_cells} of its cells hold a hole that proves {proves}: {flagged}."


def _supporting_holes(zones: gpd.GeoDataFrame, boreholes: gpd.GeoDataFrame | None,
                      radius_m: float) -> list[list[str]]:
    """Ids of the holes proving thin clay or a window (``proves_thin``, which includes the
    holes proving a window) inside each window or thin zone or within ``radius_m`` of it;
    none for the other kinds."""
    out: list[list[str]] = [[] for _ in range(len(zones))]
    if boreholes is None or not len(boreholes) or "proves_thin" not in boreholes:
        return out
    holes = boreholes[boreholes["proves_thin"].fillna(False).astype(bool)]
    if not len(holes) or not len(zones):
        return out
    ids = (holes["borehole_id"].astype(str).to_numpy() if "borehole_id" in holes
           else holes.index.astype(str).to_numpy())
    tiered = zones["kind"].isin(TIERED_KINDS).to_numpy()
    hole_i, zone_i = zones.sindex.query(holes.geometry, predicate="dwithin",
                                        distance=max(radius_m, 0.0))
    for h, z in zip(hole_i, zone_i, strict=True):
        if tiered[z]:
            out[z].append(ids[h])
    return [sorted(set(found)) for found in out]


def zones_from_grids(total_thickness_m: np.ndarray, sd_m: np.ndarray,
                     travel_time_yr: np.ndarray, p_thin: np.ndarray, grid: Grid,
                     thresholds: ScreeningThresholds,
                     boreholes: gpd.GeoDataFrame | None = None, *,
                     p_window: np.ndarray | None = None,
                     window_proven: np.ndarray | None = None,
                     piercing_density_per_km2: np.ndarray | None = None,
                     gradient_source: str = "stated") -> gpd.GeoDataFrame:
    """Vectorise window, thin, fast and pierced zones into polygons with their statistics.

    ``gradient_source`` (``"stated"`` or ``"heads"``, as the hydraulics stage worked out
    the travel time) words the reason of fast-path zones (:data:`GRADIENT_WORDS`).

    ``p_thin`` is P(thinner than the thin threshold); with ``p_window`` too and
    ``thresholds.zone_basis == "probability"`` the window and thin zones are drawn from them
    in tiers (module docstring, :func:`zone_tier_masks`), likely windows only where
    ``window_proven``. ``boreholes`` are the holes used (points in the grid's CRS): they
    are counted in each zone, and with ``proves_window`` / ``proves_thin`` columns (as
    :func:`aquitardmap.screening.stage.borehole_table` writes them) their cells are honoured as
    hard data (:func:`proving_hole_cells`) and they support the zones near them. Pierced
    zones come from ``piercing_density_per_km2`` (none without it).

    Columns: ``kind``, ``tier`` (``"likely"`` or ``"possible"`` for window and thin zones
    drawn from probabilities; ``""`` otherwise), ``area_m2``, ``reason``,
    ``mean_thickness_m``, ``min_thickness_m``, ``mean_sd_m``, ``mean_p_thin``,
    ``mean_p_window`` (NaN without ``p_window``), ``probability`` and ``max_probability``
    (mean and maximum over the zone of the probability it was drawn from; NaN for fast
    and pierced zones and thickness-based zones), ``p_threshold`` (its tier's threshold,
    NaN likewise), ``mean_travel_time_yr``, ``n_boreholes``, ``supporting_holes``
    (comma-separated ids of the holes proving a window or thin clay inside the zone or
    within ``window_proof_radius_m`` of it; window and thin zones only, ``""`` if none),
    ``n_supporting_holes``, ``n_cells``, ``n_cells_unproven_window`` (cells where P(window)
    reaches ``p_window_threshold`` but no hole proving a window lies within
    ``window_proof_radius_m``), ``n_cells_from_holes`` (cells in the zone's tier only
    because a hole in them proves a window or thin clay), ``mean_piercing_per_km2`` (mean
    density of piercing boreholes over the zone; NaN without the density grid).
    """
    rows = []
    structure = ndimage.generate_binary_structure(2, 1)  # 4-connected, as shapes() below
    by_probability = uses_probability(thresholds, p_window, p_thin)
    pw = p_window if p_window is not None else np.full(grid.mask.shape, np.nan)
    window_holes, thin_holes = proving_hole_cells(boreholes, grid)
    unproven = np.zeros(grid.mask.shape, dtype=bool)
    if by_probability and window_proven is not None:
        unproven = (np.nan_to_num(pw) >= thresholds.p_window_threshold) & ~window_proven
    dens = (piercing_density_per_km2 if piercing_density_per_km2 is not None
            else np.full(grid.mask.shape, np.nan))
    masks = _kind_tier_masks(total_thickness_m, travel_time_yr, grid, thresholds, p_window,
                             p_thin, window_proven, window_holes, thin_holes,
                             piercing_density_per_km2)
    for (kind, tier), m in masks.items():
        labels, n = ndimage.label(m, structure=structure)
        if n == 0:
            continue
        idx = np.arange(1, n + 1)
        own = {"window": pw, "thin": p_thin}.get(kind) if by_probability else None
        own_grid = own if own is not None else np.full(grid.mask.shape, np.nan)
        by_holes = np.zeros(grid.mask.shape, dtype=bool)
        if tier == "likely" and own is not None:
            holes = window_holes if kind == "window" else thin_holes
            by_holes = holes & (np.nan_to_num(own) < tier_threshold(thresholds, kind, tier))
        elif tier == "" and kind in TIERED_KINDS and not by_probability:
            holes = window_holes if kind == "window" else thin_holes
            t = np.nan_to_num(total_thickness_m, nan=np.inf)
            limit = thresholds.window_thickness_m if kind == "window" else \
                thresholds.thin_thickness_m
            by_holes = holes & (t >= limit)
        stats = {
            "mean_thickness_m": ndimage.mean(total_thickness_m, labels, idx),
            "min_thickness_m": ndimage.minimum(total_thickness_m, labels, idx),
            "mean_sd_m": ndimage.mean(sd_m, labels, idx),
            "mean_p_thin": ndimage.mean(p_thin, labels, idx),
            "mean_p_window": ndimage.mean(pw, labels, idx),
            "probability": ndimage.mean(own_grid, labels, idx),
            "max_probability": ndimage.maximum(own_grid, labels, idx),
            "mean_travel_time_yr": ndimage.mean(travel_time_yr, labels, idx),
            "mean_piercing_per_km2": ndimage.mean(dens, labels, idx),
            "n_cells": ndimage.sum(np.ones_like(labels), labels, idx),
            "n_cells_unproven_window": (ndimage.sum(unproven & m, labels, idx)
                                        if kind in TIERED_KINDS
                                        and (kind, tier) != ("window", "likely")
                                        else np.zeros(n)),
            "n_cells_from_holes": ndimage.sum(by_holes & m, labels, idx),
        }
        geoms: dict[int, list] = {}
        for geom, value in shapes(labels.astype(np.int32), mask=labels > 0,
                                  transform=grid.transform, connectivity=4):
            geoms.setdefault(int(value), []).append(shape(geom))
        p_threshold = (tier_threshold(thresholds, kind, tier) if own is not None
                       else np.nan)
        for i in idx:
            rows.append({"kind": kind, "tier": tier, "geometry": unary_union(geoms[int(i)]),
                         "p_threshold": p_threshold,
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
    support = _supporting_holes(zones, boreholes, thresholds.window_proof_radius_m)
    zones["supporting_holes"] = [",".join(ids) for ids in support]
    zones["n_supporting_holes"] = [len(ids) for ids in support]
    zones["reason"] = [
        _reason(r.kind, r.tier, thresholds, r.mean_thickness_m, r.min_thickness_m,
                r.mean_sd_m, r.mean_p_thin, r.mean_travel_time_yr, r.n_boreholes,
                r.probability if np.isfinite(r.probability) else None, r.max_probability,
                r.mean_piercing_per_km2, gradient_source)
        + _unproven_note(r.kind, int(r.n_cells_unproven_window), thresholds)
        + _hard_data_note(r.kind, r.tier, int(r.n_cells_from_holes))
        for r in zones.itertuples()
    ] if len(zones) else []
    cols = ["kind", "tier", "area_m2", "reason", "mean_thickness_m", "min_thickness_m",
            "mean_sd_m", "mean_p_thin", "mean_p_window", "probability", "max_probability",
            "p_threshold", "mean_travel_time_yr", "n_boreholes", "supporting_holes",
            "n_supporting_holes", "n_cells", "n_cells_unproven_window", "n_cells_from_holes",
            "mean_piercing_per_km2", "geometry"]
    for c in cols:
        if c not in zones:
            zones[c] = []
    zones = zones[cols]
    if len(zones):
        for c in ("n_cells", "n_cells_unproven_window", "n_cells_from_holes",
                  "n_supporting_holes"):
            zones[c] = zones[c].astype(int)
        zones = zones.sort_values(["kind", "tier", "area_m2"], ascending=[True, True, False]
                                  ).reset_index(drop=True)
    return zones


def zone_areas_m2(zones: gpd.GeoDataFrame) -> dict[str, float]:
    """Total flagged area by kind (m², every tier), every kind listed."""
    return {k: float(zones.loc[zones["kind"] == k, "area_m2"].sum()) for k in ZONE_KINDS}


def zone_tier_areas_m2(zones: gpd.GeoDataFrame) -> dict[str, dict[str, float]]:
    """Flagged area of the tiered kinds by kind and tier (m²), every tier listed:
    ``{"window": {"likely": ..., "possible": ...}, "thin": {...}}``."""
    tier = zones["tier"] if "tier" in zones else pd.Series([""] * len(zones), index=zones.index)
    return {k: {t: float(zones.loc[(zones["kind"] == k) & (tier == t), "area_m2"].sum())
                for t in ZONE_TIERS} for k in TIERED_KINDS}


def zone_tier_counts(zones: gpd.GeoDataFrame) -> dict[str, dict[str, int]]:
    """Number of zones of the tiered kinds by kind and tier, every tier listed."""
    tier = zones["tier"] if "tier" in zones else pd.Series([""] * len(zones), index=zones.index)
    return {k: {t: int(((zones["kind"] == k) & (tier == t)).sum()) for t in ZONE_TIERS}
            for k in TIERED_KINDS}
