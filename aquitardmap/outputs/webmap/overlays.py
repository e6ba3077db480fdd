"""Grid overlays of the map: warped to Web Mercator, coloured, and their legends.

Overlays are warped to Web Mercator (EPSG:3857), the plane Leaflet draws in, so that an
image stretched between its corner coordinates sits where the cells are; the corner
coordinates handed to Leaflet are longitudes/latitudes (EPSG:4326). (An image warped to
EPSG:4326 instead would be stretched linearly in latitude on a Mercator screen: for a
40 km tall area at 55° N its middle would sit some 45 m off.)

Each overlay is sized to the screen, not to the grid: at most :data:`MAX_OVERLAY_SIDE_PX`
pixels on its long side (and at most the cell budget of
:func:`~aquitardmap.outputs.webmap.build.write_map`). Down-sampling takes the most frequent
class of a class grid (so every pixel shows a class that is there, in its exact colour) and
the average of a continuous grid (coloured after averaging); the GeoTIFFs keep every cell.
"""

from __future__ import annotations

import base64
import io
import math
from dataclasses import dataclass

import matplotlib
import numpy as np
from affine import Affine
from matplotlib.ticker import MaxNLocator
from pyproj import CRS, Transformer
from rasterio.enums import Resampling
from rasterio.warp import reproject, transform_bounds

from aquitardmap.outputs.presentation import GridStyle
from aquitardmap.outputs.webmap.markup import esc

LONLAT = CRS.from_epsg(4326)
WEB_MERCATOR = CRS.from_epsg(3857)

#: Long side (pixels) of a grid overlay or the relief at most: about the width of a large
#: screen, so a regional grid is not carried at full resolution in the page.
MAX_OVERLAY_SIDE_PX = 2048

#: Small grids are drawn with up to this many image pixels so cell edges stay crisp.
_OVERSAMPLE_PIXELS = 512 * 512
_OVERSAMPLE_MAX = 4

Bounds = tuple[float, float, float, float]


def mercator_target(transform: Affine, width: int, height: int, crs: CRS,
                    max_cells: int) -> tuple[Affine, int, int, Bounds]:
    """Web Mercator raster that covers a grid, and the grid's lon/lat bounds.

    The target has about as many cells as the source (oversampled up to 4x per side for
    small grids, so cell edges stay crisp), never more than ``max_cells`` and never more
    than :data:`MAX_OVERLAY_SIDE_PX` on its long side.
    Returns (transform, width, height, (west, south, east, north) in degrees).
    """
    xmin = transform.c
    ymax = transform.f
    xmax = xmin + transform.a * width
    ymin = ymax + transform.e * height
    west, south, east, north = transform_bounds(crs, LONLAT, xmin, ymin, xmax, ymax,
                                                densify_pts=21)
    to_merc = Transformer.from_crs(LONLAT, WEB_MERCATOR, always_xy=True)
    mx0, my0 = to_merc.transform(west, south)
    mx1, my1 = to_merc.transform(east, north)
    span_x, span_y = mx1 - mx0, my1 - my0
    res = math.sqrt(span_x * span_y / (width * height))
    w = max(1, round(span_x / res))
    h = max(1, round(span_y / res))
    if max(w, h) > MAX_OVERLAY_SIDE_PX:
        f = MAX_OVERLAY_SIDE_PX / max(w, h)
        w, h = max(1, min(MAX_OVERLAY_SIDE_PX, round(w * f))), \
            max(1, min(MAX_OVERLAY_SIDE_PX, round(h * f)))
    if w * h > max_cells:
        f = math.sqrt(max_cells / (w * h))
        w, h = max(1, math.floor(w * f)), max(1, math.floor(h * f))
        while w * h > max_cells:  # only when one side was clamped to 1
            w, h = (w - 1, h) if w >= h else (w, h - 1)
    else:
        k = int(math.sqrt(min(max_cells, _OVERSAMPLE_PIXELS) / (w * h)))
        k = min(_OVERSAMPLE_MAX, MAX_OVERLAY_SIDE_PX // max(w, h), max(1, k))
        k = max(1, k)
        w, h = w * k, h * k
    dst_transform = Affine(span_x / w, 0.0, mx0, 0.0, -span_y / h, my1)
    return dst_transform, w, h, (west, south, east, north)


def warp_for_display(values: np.ndarray, transform: Affine, crs: CRS, max_cells: int, *,
                     classes: bool = False) -> tuple[np.ndarray, Bounds]:
    """Grid values (NaN = no data) on a Web Mercator raster; returns (array, lon/lat bounds).

    Down-sampling averages continuous values and takes the most frequent class of a class
    grid; up-sampling takes the nearest cell.
    """
    height, width = values.shape
    dst_transform, w, h, bounds = mercator_target(transform, width, height, crs, max_cells)
    dst = np.full((h, w), np.nan)
    downsampling = w * h < width * height
    if downsampling:
        resampling = Resampling.mode if classes else Resampling.average
    else:
        resampling = Resampling.nearest
    reproject(source=values, destination=dst, src_transform=transform, src_crs=crs,
              src_nodata=np.nan, dst_transform=dst_transform, dst_crs=WEB_MERCATOR,
              dst_nodata=np.nan, resampling=resampling)
    return dst, bounds


@dataclass(frozen=True)
class Scale:
    """Colour scale of one layer: range in display units (log10 of them when ``log``) and
    its legend ticks."""

    vmin: float
    vmax: float
    log: bool
    ticks: list[tuple[float, str]]  # (position 0..1, label html)
    clipped_low: bool  # log scale: some values <= 0 drawn at the low end


def _power_of_ten(exponent: int) -> str:
    if -2 <= exponent <= 4:
        return f"{10.0 ** exponent:g}"
    return f"10<sup>{exponent}</sup>".replace("-", "−")


def colour_scale(values: np.ndarray, style: GridStyle) -> Scale | None:
    """Range and ticks for ``values`` (already in display units); None when the grid has
    no finite value."""
    finite = values[np.isfinite(values)]
    clipped_low = False
    if style.log:
        positive = finite[finite > 0]
        clipped_low = bool(np.any(finite <= 0))
        if positive.size == 0:
            return None
        vmin, vmax = float(np.log10(positive.min())), float(np.log10(positive.max()))
    elif style.fixed_range is not None:
        vmin, vmax = style.fixed_range
    else:
        if finite.size == 0:
            return None
        vmin, vmax = float(finite.min()), float(finite.max())
    if vmax - vmin < 1e-12:
        vmin, vmax = vmin - 0.5, vmax + 0.5
    ticks: list[tuple[float, str]] = []
    span = vmax - vmin
    decades = range(math.ceil(vmin - 1e-9), math.floor(vmax + 1e-9) + 1) if style.log else []
    if style.log and len(decades) >= 2:
        step = max(1, math.ceil(len(decades) / 6))
        ticks = [((e - vmin) / span, _power_of_ten(e)) for e in decades[::step]]
    else:
        for t in MaxNLocator(nbins=4).tick_values(vmin, vmax):
            if vmin - 1e-9 <= t <= vmax + 1e-9:
                label = f"{10.0 ** t:.2g}" if style.log else f"{round(float(t), 10):g}"
                ticks.append(((t - vmin) / span, label))
    return Scale(vmin, vmax, style.log, ticks, clipped_low)


def colourise(values: np.ndarray, scale: Scale, cmap_name: str) -> np.ndarray:
    """RGBA uint8 image of ``values``; NaN cells are fully transparent.

    Non-positive values on a log scale take the lowest colour, +inf the highest.
    """
    v = values.copy()
    nodata = np.isnan(v)
    if scale.log:
        with np.errstate(divide="ignore", invalid="ignore"):
            v = np.where(v > 0, np.log10(np.where(v > 0, v, 1.0)), -np.inf)
    frac = np.clip((v - scale.vmin) / (scale.vmax - scale.vmin), 0.0, 1.0)
    frac = np.where(nodata, 0.0, frac)
    lut = (matplotlib.colormaps[cmap_name](np.linspace(0, 1, 256)) * 255).round()
    rgba = lut.astype(np.uint8)[np.round(frac * 255).astype(int)]
    rgba[nodata, 3] = 0
    return rgba


def _hex_rgb(colour: str) -> tuple[int, int, int]:
    c = colour.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)


def colourise_classes(values: np.ndarray, style: GridStyle) -> np.ndarray:
    """RGBA uint8 image of a class grid; cells of no listed class are transparent."""
    rgba = np.zeros(values.shape + (4,), np.uint8)
    for cls in style.classes:
        m = values == cls.code
        rgba[m, :3] = _hex_rgb(cls.colour)
        rgba[m, 3] = 255
    return rgba


def png_bytes(rgba: np.ndarray) -> bytes:
    """PNG of an RGBA uint8 image, exactly its colours: a palette image (one byte a pixel,
    alpha in the ``tRNS`` chunk, as the PNG specification allows) when it has at most 256
    colours, as every coloured grid and the relief have; else full RGBA."""
    from PIL import Image

    rgba = np.ascontiguousarray(rgba, dtype=np.uint8)
    flat = rgba.reshape(-1, 4).view(np.uint32).ravel()
    colours, index = np.unique(flat, return_inverse=True)
    buf = io.BytesIO()
    if len(colours) <= 256:
        table = colours.view(np.uint8).reshape(-1, 4)
        img = Image.fromarray(index.reshape(rgba.shape[:2]).astype(np.uint8), mode="P")
        img.putpalette(table[:, :3].ravel().tolist(), rawmode="RGB")
        img.save(buf, format="PNG", optimize=True,
                 transparency=bytes(table[:, 3].tolist()))
    else:
        Image.fromarray(rgba, mode="RGBA").save(buf, format="PNG", optimize=True)
    return buf.getvalue()


def png_data_url(rgba: np.ndarray) -> str:
    """A ``data:`` URL of :func:`png_bytes`."""
    return "data:image/png;base64," + base64.b64encode(png_bytes(rgba)).decode("ascii")


def gradient_css(cmap_name: str, stops: int = 11) -> str:
    cmap = matplotlib.colormaps[cmap_name]
    parts = []
    for i in range(stops):
        r, g, b, _ = (np.array(cmap(i / (stops - 1))) * 255).round().astype(int)
        parts.append(f"rgb({r},{g},{b}) {100 * i / (stops - 1):.0f}%")
    return "linear-gradient(to right, " + ", ".join(parts) + ")"


def colour_legend(legend_id: str, style: GridStyle, scale: Scale | None) -> str:
    """Legend of a continuous grid: title with units, colour bar, ticks, note."""
    title = f'<div class="aqm-legend-title">{esc(style.label)}</div>'
    if scale is None:
        body = '<div class="aqm-note">No values inside the study area.</div>'
    else:
        ticks = "".join(f'<span style="left:{100 * pos:.1f}%">{label}</span>'
                        for pos, label in scale.ticks)
        notes = [esc(style.note)] if style.note else []
        if scale.clipped_low:
            notes.append("Values of zero are drawn in the lowest colour.")
        note = f'<div class="aqm-note">{" ".join(notes)}</div>' if notes else ""
        body = (f'<div class="aqm-bar" style="background:{gradient_css(style.cmap)}"></div>'
                f'<div class="aqm-ticks">{ticks}</div>{note}')
    return f'<div class="aqm-legend" id="{legend_id}" hidden>{title}{body}</div>'


def class_legend(legend_id: str, style: GridStyle, present: set[int]) -> str:
    """Legend of a class grid: one swatch and its words per class (absent classes greyed)."""
    rows = []
    for cls in style.classes:
        dim = "" if cls.code in present else " aqm-absent"
        rows.append(f'<div class="aqm-row{dim}"><span class="aqm-swatch" style="background:'
                    f'{cls.colour};border-color:#555"></span>{esc(cls.label)}</div>')
    note = f'<div class="aqm-note">{esc(style.note)}</div>' if style.note else ""
    return (f'<div class="aqm-legend" id="{legend_id}" hidden>'
            f'<div class="aqm-legend-title">{esc(style.label)}</div>{"".join(rows)}{note}</div>')


def swatch_legend(legend_id: str, rows: list[tuple[str, ...]], *,
                  round_swatch: bool) -> str:
    """Legend of a vector layer (its title is the layer's switch): rows of
    (fill, edge, label html) or (fill, edge, label html, extra swatch css)."""
    shape = "border-radius:50%;" if round_swatch else ""
    items = "".join(
        f'<div class="aqm-row"><span class="aqm-swatch" style="{shape}background:{row[0]};'
        f'border-color:{row[1]};{row[3] if len(row) > 3 else ""}"></span>{row[2]}</div>'
        for row in rows
    )
    return f'<div class="aqm-legend aqm-sub" id="{legend_id}">{items}</div>'
