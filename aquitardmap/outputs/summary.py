"""The run summary (``summary.json``): what went in, what was assumed, what came out.

Everything a reviewer needs to reproduce or question a run: input file hashes, the package
version, every parameter, the fitted variograms and their cross-validation, borehole
counts, flagged areas by kind and the caution.
"""

from __future__ import annotations

import json
import math
import platform
import time
from datetime import datetime
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd

from aquitardmap._version import __version__
from aquitardmap.config.settings import ScreeningThresholds
from aquitardmap.files import file_sha256
from aquitardmap.geostat.probability import (
    ThicknessProbabilities,
)
from aquitardmap.geostat.surfaces import Surface, surface_summary
from aquitardmap.grid import Grid
from aquitardmap.hydraulics.column import (
    AVI_CLASSES,
    avi_legend,
)
from aquitardmap.hydraulics.stage import Hydraulics
from aquitardmap.inputs.load import Inputs
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.figures import figure_surfaces
from aquitardmap.screening.suspicious import suspicious_list
from aquitardmap.screening.zones import (
    ZONE_KINDS,
    ZONE_TIERS,
    zone_areas_m2,
    zone_tier_areas_m2,
    zone_tier_counts,
)


def json_ready(value: Any) -> Any:
    """A JSON-safe copy of ``value``, as ``summary.json`` holds it: keys as text, tuples as
    lists, numpy scalars as Python numbers, non-finite floats as None, paths as text."""
    if isinstance(value, dict):
        return {str(k): json_ready(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [json_ready(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, Path):
        return str(value)
    return value


def write_summary(path: str | Path, summary: dict[str, Any]) -> Path:
    """Write ``summary`` as indented UTF-8 JSON (non-finite numbers become null)."""
    path = Path(path)
    path.write_text(json.dumps(json_ready(summary), indent=2, ensure_ascii=False) + "\n",
                    encoding="utf-8")
    return path


def build_summary(inputs: Inputs, surfaces: dict[str, Surface], hyd: Hydraulics,
             zones: gpd.GeoDataFrame, boreholes: gpd.GeoDataFrame, started: datetime,
             t0: float, probabilities: ThicknessProbabilities | None = None) -> dict:
    p = inputs.project
    g = inputs.grid
    used = boreholes[~boreholes["excluded"]]
    inputs_hash = {"project.toml": {"sha256": p.config_sha256}}
    for key in p.files:
        f = p.file(key)
        if f is not None:
            inputs_hash[f.name] = {"sha256": file_sha256(f)}
    units = []
    for u in p.units:
        row = {"code": u.code, "name": u.name, "role": u.role,
               "effective_porosity": u.effective_porosity, "k_default_m_s": u.k_default_m_s,
               "k_method": u.k_method, "anisotropy_kh_kv": u.anisotropy_kh_kv,
               "secondary_k_factor": u.secondary_k_factor}
        if u.code in hyd.unit_k.index:
            row.update({k: v for k, v in hyd.unit_k.loc[u.code].items()})
        units.append(row)
    inside = g.mask
    total = surfaces["aquitard"].thickness_m
    return {
        "caution": outputs.CAUTION,
        "project": {"name": p.name, "crs": p.crs.to_string(), "folder": str(p.root)},
        "run": {"started_utc": started.isoformat(timespec="seconds"),
                "run_time_s": round(time.perf_counter() - t0, 2),
                "package_version": __version__, "python": platform.python_version()},
        "inputs": inputs_hash,
        "grid": {"cell_size_m": g.cell_size_m, "width": g.width, "height": g.height,
                 "bounds_m": list(g.bounds), "cells_in_study_area": int(inside.sum()),
                 # nothing above the aquifer: travel time and resistance 0, leakance +inf,
                 # equivalent Kv undefined (nodata)
                 "cells_without_column": int((np.isinf(hyd.leakance_per_s) & inside).sum()),
                 "study_area_km2": float(inside.sum() * g.cell_area_m2 / 1e6)},
        "counts": {
            "boreholes": int(len(boreholes)),
            "excluded": int(boreholes["excluded"].sum()),
            "reached_aquifer": int(used["reached_aquifer"].sum()),
            "aquitard_lower_bound_holes": int((used["status_aquitard"] == "lower_bound").sum()),
            "proves_window": int(used["proves_window"].sum()),
            "qa_flagged": int((used["qa_flags"] != "").sum()),
            "samples": int(len(inputs.boreholes.samples)),
        },
        "units": units,
        "thresholds": {"window_thickness_m": p.screening.window_thickness_m,
                       "thin_thickness_m": p.screening.thin_thickness_m,
                       "fast_travel_time_yr": p.screening.fast_travel_time_yr,
                       "piercing_flag_per_km2": p.screening.piercing_flag_per_km2,
                       **_tier_thresholds(p.screening)},
        "hydraulics": _hydraulics_summary(inputs, hyd),
        "avi": _avi_summary(hyd, g),
        "hazards": hyd.hazards,
        "piercing": _piercing_summary(inputs, hyd),
        "kriging": {"variogram_model": p.kriging.variogram_model,
                    "n_lags": p.kriging.n_lags, "max_neighbours": p.kriging.max_neighbours,
                    "nested_model": p.kriging.nested_model,
                    "lag_width_m": p.kriging.lag_width_m,
                    "max_lag_fraction": p.kriging.max_lag_fraction,
                    "anisotropy": p.kriging.anisotropy,
                    "n_directions": p.kriging.n_directions,
                    "direction_tolerance_deg": p.kriging.direction_tolerance_deg,
                    "manual_variograms": sorted(p.kriging.variograms),
                    "reuse_variogram_within": p.kriging.reuse_variogram_within,
                    "reuse_variogram_angle_deg": p.kriging.reuse_variogram_angle_deg},
        "surfaces": {
            name: {**surface_summary(s),
                   "figure": outputs.variogram_figure(name)}
            for name, s in surfaces.items()
        },
        "cross_validation_file": outputs.CV_RESIDUALS,
        "figures": {"variograms": {name: outputs.variogram_figure(name)
                                   for name in figure_surfaces(surfaces, probabilities)}},
        "probability": _probability_summary(inputs, probabilities),
        "suspicious_boreholes": (suspicious_list(boreholes) if "suspicious" in boreholes
                                 else []),
        "aquitard_thickness_m": {"min": float(np.nanmin(total)), "mean": float(np.nanmean(total)),
                                 "max": float(np.nanmax(total))},
        "zones": _zones_summary(inputs, zones, probabilities),
        "warnings": [str(w) for w in inputs.warnings],
    }


def _tier_thresholds(th: ScreeningThresholds) -> dict[str, float]:
    """The probability thresholds of the likely and possible zone tiers."""
    return {"p_window_threshold": th.p_window_threshold,
            "p_thin_threshold": th.p_thin_threshold,
            "p_window_possible_threshold": th.p_window_possible_threshold,
            "p_thin_possible_threshold": th.p_thin_possible_threshold}


def _zones_summary(inputs: Inputs, zones: gpd.GeoDataFrame,
                   probabilities: ThicknessProbabilities | None) -> dict:
    """Areas and counts of the zones: by kind (all tiers together), and for window and thin
    zones by kind and tier (empty tiers with ``zone_basis = "kriged_thickness"``), with the
    thresholds that drew them."""
    th = inputs.project.screening
    tiered = probabilities is not None
    return {"area_m2_by_kind": zone_areas_m2(zones),
            "count_by_kind": {k: int((zones["kind"] == k).sum()) for k in ZONE_KINDS},
            "area_m2_by_kind_and_tier": zone_tier_areas_m2(zones) if tiered else {},
            "count_by_kind_and_tier": zone_tier_counts(zones) if tiered else {},
            "tiers": list(ZONE_TIERS) if tiered else [],
            "basis": th.zone_basis if tiered else "kriged_thickness",
            **_tier_thresholds(th),
            "window_proof_radius_m": th.window_proof_radius_m,
            "cells_likely_window_without_proof": (
                int(zones["n_cells_unproven_window"].sum()) if len(zones) else 0),
            "cells_flagged_by_proving_holes_alone": (
                int(zones["n_cells_from_holes"].sum()) if len(zones) else 0)}


def _probability_summary(inputs: Inputs, probabilities: ThicknessProbabilities | None
                         ) -> dict:
    """How ``p_thin.tif`` and ``p_window.tif`` were made (empty when they were not)."""
    if probabilities is None:
        return {}
    th = inputs.project.screening
    mask = inputs.grid.mask
    out = probabilities.as_dict()
    out.update({"p_window_file": outputs.P_WINDOW_PROB, "p_thin_file": outputs.P_THIN_PROB,
                "window_thickness_m": th.window_thickness_m,
                "thin_thickness_m": th.thin_thickness_m,
                "mean_p_window": float(np.nanmean(probabilities.p_below["window"][mask])),
                "mean_p_thin": float(np.nanmean(probabilities.p_below["thin"][mask]))})
    return out


def _stats(values: np.ndarray) -> dict[str, float | None]:
    """min / median / max of the finite values (None when there are none)."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if not v.size:
        return {"min": None, "median": None, "max": None}
    return {"min": float(v.min()), "median": float(np.median(v)), "max": float(v.max())}


def _hydraulics_summary(inputs: Inputs, hyd: Hydraulics) -> dict:
    h = inputs.project.hydraulics
    inside = inputs.grid.mask
    if hyd.gradient_source == "heads":
        assumption = ("head drop from the head inputs (water table - aquifer head) driving "
                      "one steady flux through the units in series (q = head drop / "
                      "resistance; the gradient is steepest across the tightest unit); "
                      "the vertical_gradient grid is the column average, head drop / "
                      f"column thickness; the stated {h.vertical_gradient:g} in every unit "
                      "where a head is missing")
    else:
        assumption = ("uniform vertical gradient across the column"
                      + (" (unit gradient)" if h.vertical_gradient == 1.0 else ""))
    grad = hyd.vertical_gradient if hyd.vertical_gradient is not None else np.array([])
    with np.errstate(invalid="ignore"):
        upward = int((inside & (grad <= 0)).sum()) if grad.size else 0
    pe = hyd.peclet_number if hyd.peclet_number is not None else np.full(inside.shape, np.nan)
    with np.errstate(invalid="ignore"):
        diffusion_governs = int((inside & (pe < 1)).sum())
        advection_governs = int((inside & (pe >= 1)).sum())
    return {
        "groundwater_temp_c": h.groundwater_temp_c,
        "vertical_gradient": h.vertical_gradient,
        "gradient_assumption": assumption,
        "gradient_source": hyd.gradient_source,
        "gradient": _stats(grad[inside]) if grad.size else None,
        "cells_without_downward_gradient": upward,
        "heads": {k: v.as_dict() for k, v in hyd.heads.items()},
        "hazen_c": h.hazen_c,
        "terzaghi_c": h.terzaghi_c,
        "weathered_crust": {
            "depth_m": h.crust_depth_m, "k_factor": h.crust_k_factor,
            "treatment": h.crust_treatment,
            "meaning": ("the top crust_depth_m of the clay counts with its vertical K "
                        "multiplied by k_factor" if h.crust_treatment == "raise_k" else
                        "the top crust_depth_m of the clay is left out of the column and of "
                        "the thickness screened for thin zones"),
            "mean_crust_thickness_m": float(np.nanmean(hyd.crust_m[inside]))
            if hyd.crust_m is not None else None,
        },
        "effective_diffusion_m2_s": h.effective_diffusion_m2_s,
        "diffusion_time_yr": _stats(hyd.diffusion_time_yr[inside])
        if hyd.diffusion_time_yr is not None else None,
        "peclet_number": {
            **_stats(pe[inside]),
            "cells_diffusion_governs": diffusion_governs,
            "cells_advection_governs": advection_governs,
            "meaning": "Pe = (B^2/De) / advective time through the intact clay; Pe < 1: "
                       "diffusion governs, Pe > 1: advection governs; undefined (nodata) "
                       "where no intact clay is left",
        },
        "travel_time_yr": _stats(hyd.travel_time_yr[inside]),
    }


def _avi_summary(hyd: Hydraulics, g: Grid) -> dict:
    """AVI legend with the area of each class."""
    legend = avi_legend()
    cls = hyd.avi_class if hyd.avi_class is not None else np.zeros(g.mask.shape, np.int8)
    for row in legend:
        n = int((g.mask & (cls == row["class"])).sum())
        row["cells"] = n
        row["area_km2"] = n * g.cell_area_m2 / 1e6
    return {"source": "Van Stempvoort, Ewert & Wassenaar (1993), Canadian Water Resources "
                      "Journal 18(1): classes of log10 of the hydraulic resistance c in years "
                      "(bounds from memory)",
            "file": outputs.AVI_CLASS, "classes": legend, "n_classes": len(AVI_CLASSES)}


def _piercing_summary(inputs: Inputs, hyd: Hydraulics) -> dict:
    sc = inputs.project.screening
    g = inputs.grid
    dens = hyd.piercing_density_per_km2
    table = hyd.piercing if hyd.piercing is not None else pd.DataFrame()
    flagged = int((g.mask & (np.nan_to_num(dens, nan=-1.0) >= sc.piercing_flag_per_km2)
                   ).sum()) if dens is not None else 0
    return {
        "definition": "holes whose log reaches the aquifer through some clay "
                      "(status_aquitard full, aquitard thickness > 0), excluded holes not "
                      "counted",
        "radius_m": sc.piercing_radius_m, "flag_per_km2": sc.piercing_flag_per_km2,
        "count": int(len(table)),
        "max_density_per_km2": float(np.nanmax(dens)) if dens is not None else None,
        "flagged_cells": flagged, "flagged_area_km2": flagged * g.cell_area_m2 / 1e6,
        "holes_in_flagged_cells": int(table["in_flagged_cell"].sum()) if len(table) else 0,
        "borehole_ids": list(table["borehole_id"]) if len(table) else [],
    }
