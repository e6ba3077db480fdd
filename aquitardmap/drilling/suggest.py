"""The "where to drill next" stage: from a project folder to ranked new borehole sites.

Reads the project, kriges the total aquitard thickness as :func:`aquitardmap.run` does
(and, when hazards cut the column or the crust is not protective, screens the same
protective thickness the run screens), ranks candidate sites (every grid cell, or the
user's candidate file) with :func:`aquitardmap.drilling.design.plan_holes`, and writes
``suggested_holes.gpkg`` and ``suggested_holes.csv`` (each to a temporary name first, then
moved into place, so a reader never sees half a file). When the output folder holds a
run's ``map.html``, the map is redrawn so it shows the suggestions.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import rasterio
from rasterio.enums import Resampling
from scipy.spatial import cKDTree

from aquitardmap.config.settings import DrillingSettings
from aquitardmap.drilling.candidates import CandidateSites, grid_sites, read_candidates
from aquitardmap.drilling.design import DrillingPlan, plan_holes
from aquitardmap.errors import ProblemList
from aquitardmap.files import replace_atomically
from aquitardmap.geostat.cache.folders import kept_variograms
from aquitardmap.geostat.context import DEFAULT_CONTEXT, KrigingContext
from aquitardmap.geostat.stage import build_surfaces
from aquitardmap.geostat.surfaces import Surface, krige_thickness
from aquitardmap.grid import resample_to_grid
from aquitardmap.hydraulics.stage import compute_hydraulics
from aquitardmap.inputs.load import Inputs, load_inputs
from aquitardmap.outputs import names as outputs
from aquitardmap.screening.zones import probability_below

#: Columns of ``suggested_holes.csv`` (and of the GeoPackage layer, plus its geometry).
COLUMNS = ("rank", "x", "y", "expected_reduction_m2", "expected_uncertain_after_m2",
           "thickness_m", "sd_m", "p_thin", "nearest_borehole_m", "nearest_full_hole_m",
           "candidate_feature", "candidate_label", "reason")


@dataclass(frozen=True)
class Suggestions:
    """Ranked new holes and what they are expected to settle.

    Attributes:
        holes: one row per suggested hole, columns :data:`COLUMNS`, points in the project
            CRS.
        plan: the greedy design behind them.
        uncertain_now_m2: (weighted) area uncertain today (m²).
        thresholds_m: thickness thresholds whose probability defines "uncertain".
        settings: the drilling settings used.
        n_candidates: candidate sites considered.
        weighted: whether a priority grid weighted the cells.
    """

    holes: gpd.GeoDataFrame
    plan: DrillingPlan
    uncertain_now_m2: float
    thresholds_m: tuple[float, ...]
    settings: DrillingSettings
    n_candidates: int
    weighted: bool


def total_thickness_surface(inputs: Inputs, context: KrigingContext = DEFAULT_CONTEXT
                            ) -> Surface:
    """Krige the total aquitard thickness exactly as the run does (lower bounds honoured),
    without the cross-validation the run adds for its summary (``context``: the run's
    kept variograms, where the kriging runs)."""
    used = inputs.columns[~inputs.columns["excluded"]]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return krige_thickness("aquitard", used["x"].to_numpy(float), used["y"].to_numpy(float),
                               used["aquitard_thickness_m"].to_numpy(float),
                               used["status_aquitard"].to_numpy(), inputs.grid,
                               inputs.project.kriging, with_cv=False, context=context)


def read_priority(path: str | Path, inputs: Inputs) -> np.ndarray:
    """Priority weight of every cell from a GeoTIFF (nearest-cell resampling onto the grid,
    reprojected if its CRS differs). Cells the raster does not cover, or covers with nodata,
    weigh 0. Negative values are refused.

    Raises:
        InputError: unreadable file, no CRS, negative values, or no weight in the study area.
    """
    path = Path(path)
    problems = ProblemList()
    try:
        with rasterio.open(path) as src:
            if src.crs is None:
                problems.add(path, 0, 0, "the priority grid has no CRS; write it in the "
                             f"project CRS {inputs.project.crs.to_string()}")
    except rasterio.errors.RasterioIOError as exc:
        problems.add(path, 0, 0, f"cannot read the priority grid (GeoTIFF expected): {exc}")
    problems.raise_if_any()
    w = resample_to_grid(path, inputs.grid, Resampling.nearest)
    inside = inputs.grid.mask
    if np.any(w[inside] < 0):
        problems.add(path, 0, 0, f"the priority grid has negative values (min "
                     f"{np.nanmin(w[inside]):g}); weights must be 0 or more")
    w = np.where(np.isfinite(w) & inside, w, 0.0)
    if not np.any(w[inside] > 0):
        problems.add(path, 0, 0, "the priority grid gives no weight to any cell of the study "
                     "area (no positive value inside it)")
    problems.raise_if_any()
    return w


def _thresholds(inputs: Inputs, target: str) -> tuple[tuple[float, ...], str]:
    s = inputs.project.screening
    if target == "window":
        return (s.window_thickness_m,), f"thinner than {s.window_thickness_m:g} m"
    if target == "both":
        return ((s.window_thickness_m, s.thin_thickness_m),
                f"thinner than {s.window_thickness_m:g} m or than {s.thin_thickness_m:g} m")
    return (s.thin_thickness_m,), f"thinner than {s.thin_thickness_m:g} m"


def _ha(m2: float) -> str:
    return f"{m2 / 1e4:.1f} ha"


def suggest_holes(inputs: Inputs, surface: Surface, n_holes: int | None = None, *,
                  candidates: CandidateSites | None = None,
                  priority: np.ndarray | None = None,
                  settings: DrillingSettings | None = None,
                  protective_m: np.ndarray | None = None) -> Suggestions:
    """Rank candidate sites for new holes and choose ``n_holes`` of them greedily.

    Args:
        inputs: the loaded project (:func:`aquitardmap.load_inputs`).
        surface: kriged total aquitard thickness with its data locations
            (:func:`total_thickness_surface`).
        n_holes: holes to suggest (default ``[drilling] holes``).
        candidates: candidate sites (default: every cell of the study area).
        priority: per-cell weight on the grid (default 1 everywhere).
        settings: drilling settings (default the project's ``[drilling]``).
        protective_m: thickness counted as protective when it differs from the kriged
            total (hazards cut it, or the crust is not protective), as the run screens it;
            a new hole is assumed to shift it as much as the total.
    """
    st = settings or inputs.project.drilling
    n = int(st.holes if n_holes is None else n_holes)
    g = inputs.grid
    sites = candidates if candidates is not None else grid_sites(g)
    thresholds, what = _thresholds(inputs, st.target)
    xs, ys = g.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    inside = g.mask
    weight = g.cell_area_m2 * (np.ones(g.mask.shape) if priority is None else priority)
    sd = surface.sd_m
    est = surface.thickness_m if protective_m is None else np.where(
        np.isfinite(surface.thickness_m), protective_m, np.nan)
    label = "kriged total aquitard" if protective_m is None else "protective aquitard"
    plan = plan_holes(surface.variogram, surface.data_x_m, surface.data_y_m, xx[inside],
                      yy[inside], est[inside], sd[inside], weight[inside], sites.x_m,
                      sites.y_m, n, thresholds_m=thresholds, p_low=st.p_low, p_high=st.p_high,
                      min_spacing_m=st.min_spacing_m,
                      max_neighbours=inputs.project.kriging.max_neighbours)

    used = inputs.columns[~inputs.columns["excluded"]]
    all_tree = cKDTree(used[["x", "y"]].to_numpy(float))
    full = used[used["status_aquitard"] == "full"]
    full_tree = cKDTree(full[["x", "y"]].to_numpy(float))
    thin_t = inputs.project.screening.thin_thickness_m
    p_thin = probability_below(thin_t, est, sd)
    rows = []
    unc_now = plan.uncertain_now_m2
    for k, i in enumerate(plan.chosen):
        x, y = float(sites.x_m[i]), float(sites.y_m[i])
        r, c = g.rowcol(np.array([x]), np.array([y]))
        cell_ok = r[0] >= 0 and g.mask[r[0], c[0]]
        t = float(est[r[0], c[0]]) if cell_ok else math.nan
        s = float(sd[r[0], c[0]]) if cell_ok else math.nan
        p = float(p_thin[r[0], c[0]]) if cell_ok else math.nan
        d_all = float(all_tree.query([x, y])[0])
        d_full = float(full_tree.query([x, y])[0])
        red = float(plan.expected_reduction_m2[k])
        parts = []
        if math.isfinite(t):
            probs = ", ".join(f"P(thinner than {th:g} m) about "
                              f"{float(probability_below(th, t, s)):.2f}" for th in thresholds)
            parts.append(f"{label} {t:.1f} m, kriging SD {s:.1f} m, {probs}")
        parts.append(f"nearest borehole {d_all:.0f} m away, nearest one reaching the aquifer "
                     f"{d_full:.0f} m")
        after = " after the holes ranked above" if k else ""
        weighted = " (area weighted by the priority grid)" if priority is not None else ""
        parts.append(f"a full-penetration hole here is expected to settle {_ha(red)} of the "
                     f"{_ha(unc_now)} where the chance of clay {what} is now between "
                     f"{st.p_low:g} and {st.p_high:g}{after}{weighted}")
        if sites.feature[i]:
            lab = f" '{sites.label[i]}'" if sites.label[i] else ""
            parts.append(f"on candidate feature {int(sites.feature[i])}{lab} of "
                         f"{sites.source}")
        reason = "; ".join(parts)
        rows.append({"rank": k + 1, "x": round(x, 2), "y": round(y, 2),
                     "expected_reduction_m2": round(red, 1),
                     "expected_uncertain_after_m2": round(float(
                         plan.expected_uncertain_after_m2[k]), 1),
                     "thickness_m": round(t, 2), "sd_m": round(s, 2),
                     "p_thin": round(p, 4), "nearest_borehole_m": round(d_all, 1),
                     "nearest_full_hole_m": round(d_full, 1),
                     "candidate_feature": int(sites.feature[i]),
                     "candidate_label": str(sites.label[i]),
                     "reason": reason[0].upper() + reason[1:] + "."})
    df = pd.DataFrame(rows, columns=list(COLUMNS))
    holes = gpd.GeoDataFrame(df, geometry=gpd.points_from_xy(df["x"], df["y"]),
                             crs=inputs.project.crs)
    return Suggestions(holes, plan, unc_now, thresholds, st, len(sites), priority is not None)


def write_suggestions(folder: str | Path, suggestions: Suggestions) -> list[Path]:
    """Write ``suggested_holes.gpkg`` (layer ``suggested_holes``) and
    ``suggested_holes.csv`` into ``folder`` (created if needed); each file is written to a
    temporary name and moved into place. Returns the two paths."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    gpkg = folder / outputs.SUGGESTED_HOLES
    csv = folder / outputs.SUGGESTED_HOLES_CSV
    holes = suggestions.holes
    replace_atomically(gpkg, lambda p: holes.to_file(
        p, layer=outputs.SUGGESTED_HOLES_LAYER, driver="GPKG",
        layer_metadata={"DESCRIPTION": outputs.CAUTION}))
    replace_atomically(csv, lambda p: pd.DataFrame(holes.drop(columns="geometry")).to_csv(
        p, index=False, lineterminator="\n", encoding="utf-8"))
    return [gpkg, csv]


def suggest(project_dir: str | Path, out_dir: str | Path, n_holes: int | None = None, *,
            candidates_path: str | Path | None = None,
            priority_path: str | Path | None = None) -> tuple[Suggestions, list[Path]]:
    """Run the whole "where to drill next" stage on a project folder and write its outputs.

    ``priority_path`` overrides ``[drilling] priority_grid``. When ``out_dir`` holds a run's
    ``map.html``, the map is redrawn with the suggestions.

    Raises:
        InputError: bad project inputs, candidate file or priority grid (nothing written).
    """
    inputs = load_inputs(project_dir)
    sites = None
    if candidates_path is not None:
        sites = read_candidates(candidates_path, inputs.project.crs, inputs.area, inputs.grid)
    priority_file = priority_path or inputs.project.drilling.priority_grid
    priority = read_priority(priority_file, inputs) if priority_file else None
    p = inputs.project
    # the models the last run used, when it kept them
    context = KrigingContext(variograms=kept_variograms(p))
    if (inputs.hazards is not None and len(inputs.hazards)) or \
            p.hydraulics.crust_treatment == "not_protective":
        # the run screens the thickness cut by hazards / without the crust: do the same
        surfaces = build_surfaces(inputs, context)
        surface = surfaces["aquitard"]
        protective = compute_hydraulics(inputs, surfaces).protective_thickness_m
    else:
        surface, protective = total_thickness_surface(inputs, context), None
    result = suggest_holes(inputs, surface, n_holes, candidates=sites, priority=priority,
                           protective_m=protective)
    written = write_suggestions(out_dir, result)
    old_map = Path(out_dir) / outputs.MAP
    if old_map.exists():
        from aquitardmap.outputs.webmap.assets import EXTERNAL_REF
        from aquitardmap.outputs.webmap.build import write_map

        # the same kind of map as the run wrote: self-contained when it fetched nothing
        offline = not EXTERNAL_REF.search(old_map.read_text(encoding="utf-8"))
        write_map(out_dir, self_contained=offline, background=p.map.background,
                  dem_path=p.file("dem"))
    return result, written
