"""The screening grid: its geometry, the study-area mask, and GeoTIFF reading and writing.

A grid is a north-up raster in the project CRS. Its outer edges are the study-area bounds
snapped outward to whole multiples of the cell size, so that grids of the same project line
up run after run (and with the demo truth grids).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from xml.sax.saxutils import escape

import numpy as np
import rasterio
from affine import Affine
from pyproj import CRS
from rasterio.enums import Resampling
from rasterio.features import geometry_mask
from rasterio.warp import reproject
from shapely.geometry.base import BaseGeometry

from aquitardmap.files import write_text_atomically

#: Nodata value of every float GeoTIFF the package writes.
NODATA = -9999.0


@dataclass(frozen=True)
class Grid:
    """A north-up grid in a projected CRS.

    Attributes:
        transform: affine transform from (col, row) to (x, y) of the upper-left corner.
        width, height: number of columns and rows.
        crs: the project CRS.
        mask: boolean array (height, width), True inside the study area.
    """

    transform: Affine
    width: int
    height: int
    crs: CRS
    mask: np.ndarray

    @property
    def cell_size_m(self) -> float:
        return float(self.transform.a)

    @property
    def cell_area_m2(self) -> float:
        return float(abs(self.transform.a * self.transform.e))

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) of the outer cell edges, metres."""
        xmin, ymax = self.transform.c, self.transform.f
        return (xmin, ymax + self.transform.e * self.height, xmin + self.transform.a *
                self.width, ymax)

    def cell_centres(self) -> tuple[np.ndarray, np.ndarray]:
        """1-D arrays of x (west to east) and y (north to south) of cell centres, metres."""
        xs = self.transform.c + self.transform.a * (np.arange(self.width) + 0.5)
        ys = self.transform.f + self.transform.e * (np.arange(self.height) + 0.5)
        return xs, ys

    def rowcol(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Row and column of the cells that hold points (x, y); -1 where outside."""
        col = np.floor((np.asarray(x, float) - self.transform.c) / self.transform.a).astype(int)
        row = np.floor((np.asarray(y, float) - self.transform.f) / self.transform.e).astype(int)
        outside = (col < 0) | (col >= self.width) | (row < 0) | (row >= self.height)
        return np.where(outside, -1, row), np.where(outside, -1, col)


def snapped_bounds(bounds: tuple[float, float, float, float], cell_size_m: float
                   ) -> tuple[float, float, float, float]:
    """Snap (xmin, ymin, xmax, ymax) outward to whole multiples of ``cell_size_m``."""
    xmin, ymin, xmax, ymax = bounds
    c = cell_size_m
    return (math.floor(xmin / c) * c, math.floor(ymin / c) * c,
            math.ceil(xmax / c) * c, math.ceil(ymax / c) * c)


def make_grid(area: BaseGeometry, cell_size_m: float, crs: CRS) -> Grid:
    """Grid covering the polygon ``area`` (project CRS), masked to its inside.

    A cell is inside when its centre lies inside the polygon.
    """
    xmin, ymin, xmax, ymax = snapped_bounds(area.bounds, cell_size_m)
    width = max(1, int(round((xmax - xmin) / cell_size_m)))
    height = max(1, int(round((ymax - ymin) / cell_size_m)))
    transform = Affine(cell_size_m, 0.0, xmin, 0.0, -cell_size_m, ymax)
    mask = geometry_mask([area], out_shape=(height, width), transform=transform, invert=True)
    return Grid(transform, width, height, crs, mask)


#: Tile size of the written GeoTIFFs (pixels); also the size below which no overview is
#: made (GDAL's COG driver).
COG_BLOCK_PX = 256


def write_raster(path: str | Path, values: np.ndarray, grid: Grid, *, dtype: str = "float32",
                 nodata: float | int = NODATA, description: str = "", units: str = "",
                 colours: dict[int, str] | None = None,
                 class_names: dict[int, str] | None = None) -> Path:
    """Write one band on ``grid`` as a Cloud-Optimized GeoTIFF; cells outside the mask get
    nodata.

    NaN inside the mask is also written as nodata. The file is tiled
    (:data:`COG_BLOCK_PX` square), deflate-compressed with a predictor (floating-point for
    float bands, horizontal differencing for integers), carries internal overviews
    (averaged for float bands, nearest for integer classes) and the band's
    ``description`` and ``units`` as metadata: GDAL's COG driver (GDAL ≥ 3.1; the layout
    of the COG specification, cogeo.org). ``colours`` (``{value: "#rrggbb"}``, integer
    bands only) is written as the band's colour table, so a GIS shows classes in the map's
    colours. ``class_names`` (``{value: words}``, integer bands only) are written as the
    band's category names in GDAL's auxiliary file ``name.tif.aux.xml`` (GDAL's PAM
    ``<CategoryNames>``, one ``<Category>`` per value from 0; a GeoTIFF has no tag for
    them), which GDAL and the GIS built on it read as the class labels; values without a
    name get an empty one.
    """
    path = Path(path)
    arr = np.asarray(values, dtype=float)
    arr = np.where(grid.mask & np.isfinite(arr) | np.isposinf(arr) & grid.mask, arr, nodata)
    is_float = np.dtype(dtype).kind == "f"
    profile = {
        "driver": "COG", "width": grid.width, "height": grid.height, "count": 1,
        "dtype": dtype, "crs": grid.crs, "transform": grid.transform, "nodata": nodata,
        "compress": "deflate", "predictor": 3 if is_float else 2,
        "blocksize": COG_BLOCK_PX,
        "overview_resampling": "average" if is_float else "nearest",
    }
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(arr.astype(dtype), 1)
        if description:
            dst.set_band_description(1, description)
        if units:
            dst.update_tags(1, units=units)
        if colours:
            dst.write_colormap(1, {int(k): _rgba(v) for k, v in colours.items()})
    if class_names:
        write_text_atomically(aux_xml_path(path), category_names_xml(class_names))
    return path


def aux_xml_path(path: str | Path) -> Path:
    """GDAL's auxiliary metadata file of a raster: ``name.tif`` -> ``name.tif.aux.xml``."""
    path = Path(path)
    return path.with_name(path.name + ".aux.xml")


def category_names_xml(class_names: dict[int, str]) -> str:
    """GDAL PAM XML giving band 1 the category names ``{value: words}`` (values 0 to the
    largest; a missing value gets an empty name, as GDAL lists categories by value)."""
    top = max(int(k) for k in class_names)
    cats = "\n".join(f"      <Category>{escape(class_names.get(v, ''))}</Category>"
                     for v in range(top + 1))
    return ("<PAMDataset>\n  <PAMRasterBand band=\"1\">\n    <CategoryNames>\n" + cats
            + "\n    </CategoryNames>\n  </PAMRasterBand>\n</PAMDataset>\n")


def _rgba(colour: str) -> tuple[int, int, int, int]:
    """``"#rrggbb"`` as an opaque (r, g, b, 255)."""
    c = colour.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16), 255


def read_raster(path: str | Path) -> tuple[np.ndarray, Affine, CRS, float | None]:
    """Read band 1 of a raster as float64 with nodata turned into NaN.

    Returns (values, transform, crs, nodata).
    """
    with rasterio.open(path) as src:
        arr = src.read(1).astype(float)
        nodata = src.nodata
        if nodata is not None:
            arr[arr == nodata] = np.nan
        crs = CRS.from_user_input(src.crs) if src.crs else None
        return arr, src.transform, crs, nodata


def resample_to_grid(path: str | Path, grid: Grid,
                     resampling: Resampling = Resampling.bilinear) -> np.ndarray:
    """Resample band 1 of a raster onto ``grid`` (reprojecting if its CRS differs).

    Returns float64 (height, width) with NaN where the source has no data.
    """
    with rasterio.open(path) as src:
        dest = np.full((grid.height, grid.width), np.nan)
        reproject(
            source=rasterio.band(src, 1), destination=dest, src_transform=src.transform,
            src_crs=src.crs, src_nodata=src.nodata, dst_transform=grid.transform,
            dst_crs=grid.crs, dst_nodata=np.nan, resampling=resampling,
        )
    return dest
