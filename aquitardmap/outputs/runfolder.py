"""Reading back the files of a finished run folder (for the map and the report).

The map and the report are built from the run folder alone, by the names in
:mod:`aquitardmap.outputs.names`, so they can be rebuilt later from what was delivered. Any file
may be missing; readers return ``None`` or empty values and the writers show what exists.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
import rasterio
from affine import Affine
from pyproj import CRS
from pyproj.exceptions import CRSError

from aquitardmap.grid import read_raster
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.formatting import section
from aquitardmap.outputs.presentation import GridStyle, grid_styles


def read_summary(run_dir: Path) -> dict[str, Any]:
    """``summary.json`` as a dict; a missing or unreadable file gives ``{}``."""
    try:
        data = json.loads((Path(run_dir) / outputs.SUMMARY).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def project_crs(run_dir: Path, summary: dict[str, Any]) -> CRS | None:
    """The project CRS: from the summary, else from the total-thickness grid."""
    text = str(section(summary, "project").get("crs") or "").strip()
    if text:
        try:
            return CRS.from_user_input(text)
        except CRSError:  # an unreadable CRS text only loses a fallback: use the grids'
            pass
    for name in (outputs.AQUITARD_THICKNESS, outputs.AQUITARD_THICKNESS_SD):
        if (Path(run_dir) / name).is_file():
            return read_raster(Path(run_dir) / name)[2]
    return None


def tif_descriptions(run_dir: Path) -> dict[str, tuple[str, str]]:
    """``{file: (band description, units tag)}`` of every GeoTIFF in the run folder."""
    out = {}
    for path in sorted(Path(run_dir).glob("*.tif")):
        try:
            with rasterio.open(path) as src:
                out[path.name] = (src.descriptions[0] or "", src.tags(1).get("units", ""))
        except rasterio.errors.RasterioIOError:
            continue
    return out


def styles_in(run_dir: Path, summary: dict[str, Any]) -> list[GridStyle]:
    """The grids present in ``run_dir``, styled and ordered for display."""
    files = {p.name for p in Path(run_dir).iterdir() if p.is_file()}
    return grid_styles(files, summary, tif_descriptions(run_dir))


@dataclass(frozen=True)
class GridData:
    """One grid read for display: values (NaN = no data) on the run's grid."""

    style: GridStyle
    values: np.ndarray
    transform: Affine
    crs: CRS | None


def read_grid(run_dir: Path, style: GridStyle) -> GridData:
    """Read a styled grid as the run wrote it; cells of a class grid that hold no class of
    the style are no data."""
    values, transform, crs, _ = read_raster(Path(run_dir) / style.file)
    if style.classes:
        values = np.where(np.isin(values, [c.code for c in style.classes]), values, np.nan)
    return GridData(style, values, transform, crs)


def read_layer(path: Path, layer: str, fallback_crs: CRS | None,
               to_crs: CRS | None = None) -> gpd.GeoDataFrame | None:
    """A GeoPackage layer (rows with geometry only), optionally reprojected; None when the
    file is absent or has no CRS and no fallback is given."""
    if not Path(path).is_file():
        return None
    gdf = gpd.read_file(path, layer=layer)
    if gdf.crs is None:
        if fallback_crs is None:
            return None
        gdf = gdf.set_crs(fallback_crs)
    gdf = gdf[gdf.geometry.notna() & ~gdf.geometry.is_empty]
    return gdf.to_crs(to_crs) if to_crs is not None else gdf


__all__ = ["GridData", "project_crs", "read_grid", "read_layer", "read_summary",
           "styles_in", "tif_descriptions"]
