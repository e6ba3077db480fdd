"""A shaded relief of the project's DEM: the map's background when no tiles are fetched.

The slope of each cell is taken with Horn's 3 x 3 weighted differences (B. K. P. Horn,
"Hill shading and the reflectance map", Proceedings of the IEEE 69(1), 14-47, 1981), and
the shade is Lambert's cosine of the angle between the surface normal and the direction of
the sun (the hillshade of P. A. Burrough and R. A. McDonnell, *Principles of Geographical
Information Systems*, Oxford University Press, 1998, with the sun by default in the
north-west, 45 degrees above the horizon, as is usual for relief maps).

The DEM is read down-sampled (average) so that the image never has more than
:data:`aquitardmap.outputs.webmap.overlays.MAX_OVERLAY_SIDE_PX` pixels on its long side.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import rasterio
from affine import Affine
from pyproj import CRS
from rasterio.enums import Resampling

from aquitardmap.outputs.webmap.overlays import (
    MAX_OVERLAY_SIDE_PX,
    Bounds,
    warp_for_display,
)

#: Sun direction of the relief: azimuth clockwise from north and height above the
#: horizon (degrees).
SUN_AZIMUTH_DEG = 315.0
SUN_ALTITUDE_DEG = 45.0
#: Grey of a cell facing away from the sun and of one facing it (0..255): a light relief
#: the grids stay readable on.
RELIEF_GREY_RANGE = (110, 250)


def hillshade_horn(z: np.ndarray, cell_x_m: float, cell_y_m: float, *,
                   azimuth_deg: float = SUN_AZIMUTH_DEG,
                   altitude_deg: float = SUN_ALTITUDE_DEG) -> np.ndarray:
    """Shade 0..1 of each cell of a north-up elevation grid (row 0 is the north edge).

    Horn's (1981) weighted differences over the 3 x 3 neighbourhood give the slope; the
    shade is ``max(0, n . s)`` with ``n`` the unit normal of the surface and ``s`` the unit
    vector towards the sun. Cells on the edge of the grid or beside a missing (NaN) value
    are NaN.

    Args:
        z: elevations (m), NaN where missing.
        cell_x_m, cell_y_m: cell width and height (m, positive).
        azimuth_deg: direction of the sun, clockwise from north (degrees).
        altitude_deg: height of the sun above the horizon (degrees).
    """
    z = np.asarray(z, dtype=float)
    out = np.full(z.shape, np.nan)
    if z.shape[0] < 3 or z.shape[1] < 3:
        return out
    a, b, c = z[:-2, :-2], z[:-2, 1:-1], z[:-2, 2:]
    d, f = z[1:-1, :-2], z[1:-1, 2:]
    g, h, i = z[2:, :-2], z[2:, 1:-1], z[2:, 2:]
    dz_east = ((c + 2 * f + i) - (a + 2 * d + g)) / (8 * cell_x_m)
    dz_north = ((a + 2 * b + c) - (g + 2 * h + i)) / (8 * cell_y_m)  # row 0 is north
    az, alt = math.radians(azimuth_deg), math.radians(altitude_deg)
    sun = (math.sin(az) * math.cos(alt), math.cos(az) * math.cos(alt), math.sin(alt))
    norm = np.sqrt(dz_east ** 2 + dz_north ** 2 + 1.0)
    shade = (-dz_east * sun[0] - dz_north * sun[1] + sun[2]) / norm
    out[1:-1, 1:-1] = np.clip(shade, 0.0, 1.0)
    return out


def _cell_size_m(transform: Affine, crs: CRS, rows: int) -> tuple[float, float]:
    """Cell width and height in metres (a geographic DEM: at its middle latitude, on a
    sphere of the WGS 84 semi-major axis)."""
    dx, dy = abs(transform.a), abs(transform.e)
    if not crs.is_geographic:
        factor = crs.axis_info[0].unit_conversion_factor if crs.axis_info else 1.0
        return dx * factor, dy * factor
    lat = math.radians(transform.f + transform.e * rows / 2)
    metres_per_degree = math.pi * 6_378_137.0 / 180.0
    return dx * metres_per_degree * math.cos(lat), dy * metres_per_degree


def relief_image(dem_path: str | Path, fallback_crs: CRS | None, max_cells: int
                 ) -> tuple[np.ndarray, Bounds] | None:
    """The shaded relief of a DEM as an RGBA image on Web Mercator and its lon/lat bounds
    (west, south, east, north); None when the file has no CRS (and none is given) or is
    too small to shade."""
    with rasterio.open(dem_path) as src:
        crs = CRS.from_user_input(src.crs) if src.crs else fallback_crs
        if crs is None:
            return None
        k = max(1, math.ceil(max(src.width, src.height) / MAX_OVERLAY_SIDE_PX))
        height, width = max(1, src.height // k), max(1, src.width // k)
        band = src.read(1, out_shape=(height, width), masked=True,
                        resampling=Resampling.average if k > 1 else Resampling.nearest)
        z = np.ma.filled(band.astype(float), np.nan)
        transform = src.transform @ Affine.scale(src.width / width, src.height / height)
    if transform.b != 0 or transform.d != 0:
        return None
    shade = hillshade_horn(z, *_cell_size_m(transform, crs, height))
    if not np.isfinite(shade).any():
        return None
    shown, bounds = warp_for_display(shade, transform, crs, max_cells)
    low, high = RELIEF_GREY_RANGE
    grey = np.round(low + (high - low) * np.nan_to_num(shown)).astype(np.uint8)
    rgba = np.zeros(shown.shape + (4,), np.uint8)
    rgba[..., 0] = rgba[..., 1] = rgba[..., 2] = grey
    rgba[..., 3] = np.where(np.isfinite(shown), 255, 0)
    return rgba, bounds
