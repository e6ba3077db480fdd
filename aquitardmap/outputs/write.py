"""Stage 5: every output file of a run (grids, zones, boreholes, figures, summary, map,
report) written into one folder."""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

from aquitardmap.config.project import Project
from aquitardmap.geostat.drift import RESIDUAL_NAME
from aquitardmap.geostat.probability import (
    ThicknessProbabilities,
)
from aquitardmap.geostat.surfaces import CV_COLUMNS, Surface
from aquitardmap.grid import aux_xml_path, write_raster
from aquitardmap.hydraulics.stage import Hydraulics
from aquitardmap.inputs.load import Inputs
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.figures import figure_surfaces, variogram_figure
from aquitardmap.outputs.layerstyles import (
    HOLE_CATEGORY_COLUMN,
    holes_qml,
    write_layer_style,
    zones_qml,
)
from aquitardmap.outputs.presentation import avi_classes, hole_category_of
from aquitardmap.outputs.report import write_report
from aquitardmap.outputs.summary import json_ready, write_summary
from aquitardmap.outputs.webmap.build import write_map
from aquitardmap.outputs.webmap.qml import write_qml_sidecars


def _surface_title(project: Project, name: str) -> str:
    if name == "aquitard":
        return "Variogram of the total aquitard thickness"
    if name == RESIDUAL_NAME:
        return "Variogram of the total thickness less its drift on the ground"
    try:
        return f"Variogram of the thickness of {project.unit(name).name} ({name})"
    except KeyError:
        return f"Variogram of {name}"


def output_grids(inputs: Inputs, surfaces: dict[str, Surface], hyd: Hydraulics,
                 p_thin: np.ndarray, probabilities: ThicknessProbabilities | None = None
                 ) -> dict[str, tuple[np.ndarray, str, str]]:
    """The float GeoTIFFs a run writes: file name -> (grid, description, units). (The AVI
    class grid, written as integers, comes from ``hyd.avi_class``.)"""
    p = inputs.project
    total = surfaces["aquitard"]
    grids = {
        outputs.AQUITARD_THICKNESS: (total.thickness_m, "total aquitard thickness", "m"),
        outputs.AQUITARD_THICKNESS_SD: (total.sd_m, "kriging SD of total aquitard thickness",
                                        "m"),
        outputs.COVER_THICKNESS: (sum(surfaces[u.code].thickness_m for u in p.column_units
                                      if u.role == "cover") + 0.0 * total.thickness_m,
                                  "cover thickness above the aquitard", "m"),
        outputs.KV: (hyd.kv_m_s, "equivalent vertical K of the column", "m/s"),
        outputs.LEAKANCE: (hyd.leakance_per_s, "leakance of the column", "1/s"),
        outputs.RESISTANCE: (hyd.resistance_yr, "vertical hydraulic resistance", "years"),
        outputs.TRAVEL_TIME: (hyd.travel_time_yr, "advective vertical travel time", "years"),
        outputs.P_THIN: (p_thin, "approx. probability total aquitard is thin", "1"),
    }
    for u in p.aquitard_units:
        grids[outputs.unit_thickness(u.code)] = (surfaces[u.code].thickness_m,
                                                 f"thickness of {u.name}", "m")
    optional = {
        outputs.DIFFUSION_TIME: (hyd.diffusion_time_yr, "diffusion time scale B^2/De of the "
                                 "intact clay", "years"),
        outputs.PECLET: (hyd.peclet_number, "Peclet number of the intact clay (diffusive / "
                         "advective time)", "1"),
        outputs.PIERCING_DENSITY: (hyd.piercing_density_per_km2, "density of boreholes "
                                   "piercing the aquitard", "holes/km2"),
    }
    if hyd.gradient_source == "heads":
        optional[outputs.VERTICAL_GRADIENT] = (hyd.vertical_gradient, "downward vertical "
                                               "hydraulic gradient from heads", "1")
    if hyd.hazard_removed_m is not None:
        optional[outputs.HAZARD_REMOVED] = (hyd.hazard_removed_m, "depth removed by "
                                            "excavations, pits and scars", "m")
    if hyd.hazard_removed_m is not None or (p.hydraulics.crust_treatment == "not_protective"
                                            and p.hydraulics.crust_depth_m > 0):
        optional[outputs.AQUITARD_THICKNESS_EFFECTIVE] = (
            hyd.protective_thickness_m, "aquitard thickness counted as protective", "m")
    grids.update({k: v for k, v in optional.items() if v[0] is not None})
    if probabilities is not None:
        th = p.screening
        grids[outputs.P_THIN_PROB] = (probabilities.p_below["thin"], "probability that the "
                                      f"protective aquitard is thinner than "
                                      f"{th.thin_thickness_m:g} m", "1")
        grids[outputs.P_WINDOW_PROB] = (probabilities.p_below["window"], "probability that "
                                        "the protective aquitard is thinner than "
                                        f"{th.window_thickness_m:g} m (absent)", "1")
    return grids


def write_outputs(folder: Path, inputs: Inputs, surfaces: dict[str, Surface],
                  hyd: Hydraulics, p_thin: np.ndarray, zones: gpd.GeoDataFrame,
                  boreholes: gpd.GeoDataFrame, summary: dict, *,
                  self_contained_map: bool = False,
                  probabilities: ThicknessProbabilities | None = None) -> list[str]:
    """Stage 5: write every output file into ``folder``; returns the file names.

    ``self_contained_map`` writes a map that needs no network (see
    :func:`aquitardmap.outputs.webmap.build.write_map`)."""
    g = inputs.grid
    p = inputs.project
    grids = output_grids(inputs, surfaces, hyd, p_thin, probabilities)
    extra: list[str] = []
    cv = pd.concat([s.cv_table for s in surfaces.values() if len(s.cv_table)],
                   ignore_index=True) if any(len(s.cv_table) for s in surfaces.values()) \
        else pd.DataFrame(columns=list(CV_COLUMNS))
    cv.to_csv(folder / outputs.CV_RESIDUALS, index=False, float_format="%.10g")
    extra.append(outputs.CV_RESIDUALS)
    for name, s in figure_surfaces(surfaces, probabilities).items():
        variogram_figure(s, folder / outputs.variogram_figure(name),
                         title=_surface_title(p, name))
        extra.append(outputs.variogram_figure(name))
    for name, (arr, desc, units) in grids.items():
        write_raster(folder / name, arr, g, description=desc, units=units)
    if hyd.avi_class is not None:
        cls = np.where(hyd.avi_class > 0, hyd.avi_class, np.nan).astype(float)
        write_raster(folder / outputs.AVI_CLASS, cls, g, dtype="uint8", nodata=0,
                     description="Aquifer Vulnerability Index class (1 extremely high to 5 "
                     "extremely low vulnerability)", units="class",
                     colours={c.code: c.colour for c in avi_classes()},
                     class_names={c.code: c.label for c in avi_classes()})
        extra.extend([outputs.AVI_CLASS, aux_xml_path(outputs.AVI_CLASS).name])
    # style sidecars: each GeoTIFF opens in a desktop GIS with the map's colours (ranges
    # from the values as written, float32)
    values_of = {name: np.where(g.mask, np.asarray(arr, np.float32), np.nan)
                 for name, (arr, _, _) in grids.items()}
    if hyd.avi_class is not None:
        values_of[outputs.AVI_CLASS] = cls
    extra.extend(write_qml_sidecars(
        folder, values_of, summary,
        {name: (desc, units) for name, (_, desc, units) in grids.items()}))
    if hyd.piercing is not None:
        hyd.piercing.to_csv(folder / outputs.PIERCING_BOREHOLES, index=False,
                            float_format="%.6g")
        extra.append(outputs.PIERCING_BOREHOLES)
    # each GeoPackage layer carries its default style (the map's colours); the folder is
    # staged, so a failed write leaves no half run
    zones.to_file(folder / outputs.ZONES, layer=outputs.ZONES_LAYER, driver="GPKG")
    write_layer_style(folder / outputs.ZONES, outputs.ZONES_LAYER,
                      zones_qml(json_ready(summary)), style_name="aquitardmap zones",
                      description="zones by kind and tier, as on the map")
    bh = boreholes.copy()
    bh[HOLE_CATEGORY_COLUMN] = [hole_category_of(r) for r in
                                bh.drop(columns="geometry").to_dict("records")]
    for col in bh.columns:
        if bh[col].dtype == object and col != "geometry":
            bh[col] = bh[col].astype(str)
    bh.to_file(folder / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER, driver="GPKG")
    write_layer_style(folder / outputs.BOREHOLES, outputs.BOREHOLES_LAYER, holes_qml(),
                      style_name="aquitardmap boreholes",
                      description="boreholes by what they prove, as on the map")
    names = sorted([*grids, *extra, outputs.ZONES, outputs.BOREHOLES, outputs.SUMMARY, outputs.MAP,
                    outputs.REPORT])
    summary["outputs"] = names
    write_summary(folder / outputs.SUMMARY, summary)
    as_written = json_ready(summary)
    write_map(folder, summary=as_written, self_contained=self_contained_map,
              background=p.map.background, dem_path=p.file("dem"))
    write_report(folder, summary=as_written)
    return names
