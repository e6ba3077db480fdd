"""The one place that knows the names of the output files of a run.

Every writer and reader (pipeline, map, report, tests) takes names from here.
"""

from __future__ import annotations

AQUITARD_THICKNESS = "aquitard_thickness_m.tif"
AQUITARD_THICKNESS_SD = "aquitard_thickness_sd_m.tif"
COVER_THICKNESS = "cover_thickness_m.tif"
KV = "kv_m_s.tif"
LEAKANCE = "leakance_per_s.tif"
RESISTANCE = "resistance_yr.tif"
TRAVEL_TIME = "travel_time_yr.tif"
P_THIN = "p_thin_approx.tif"
ZONES = "zones.gpkg"
ZONES_LAYER = "zones"
BOREHOLES = "boreholes.gpkg"
BOREHOLES_LAYER = "boreholes"
MAP = "map.html"
SUMMARY = "summary.json"
REPORT = "report.pdf"
#: Probability grids drawn from the censored-data model (aquitardmap.geostat.probability).
P_THIN_PROB = "p_thin.tif"
P_WINDOW_PROB = "p_window.tif"
#: Leave-one-out cross-validation residuals of every kriged surface, one row per hole.
CV_RESIDUALS = "cv_residuals.csv"
AVI_CLASS = "avi_class.tif"
DIFFUSION_TIME = "diffusion_time_yr.tif"
PECLET = "peclet_number.tif"
PIERCING_DENSITY = "piercing_density_per_km2.tif"
PIERCING_BOREHOLES = "piercing_boreholes.csv"
# Written only when the inputs call for them:
VERTICAL_GRADIENT = "vertical_gradient.tif"               # head inputs given
HAZARD_REMOVED = "hazard_removed_m.tif"                   # hazards.geojson given
AQUITARD_THICKNESS_EFFECTIVE = "aquitard_thickness_effective_m.tif"  # hazards or crust cut
#: Written by ``aquitardmap suggest`` (where to drill next).
SUGGESTED_HOLES = "suggested_holes.gpkg"
SUGGESTED_HOLES_LAYER = "suggested_holes"
SUGGESTED_HOLES_CSV = "suggested_holes.csv"


def variogram_figure(surface: str) -> str:
    """File name of the variogram plot of a kriged surface (``"aquitard"`` or a unit code):
    ``variogram_<surface>.png``."""
    return f"variogram_{surface}.png"


def unit_thickness(code: str) -> str:
    """File name of the thickness grid of unit ``code``: ``thickness_<code>_m.tif``."""
    return f"thickness_{code}_m.tif"


CAUTION = (
    "Screening-level estimate only. The grids are interpolated between boreholes and carry "
    "interpolation uncertainty that is largest far from holes; a window in the clay can hide "
    "between boreholes. This is not a substitute for site-specific investigation. Defer to "
    "local regulations, source-protection rules and licensed professionals (professional "
    "geoscientists or engineers)."
)
