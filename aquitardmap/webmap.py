"""The interactive map planners open: ``map.html`` built from the files of one run folder.

The map is a folium (Leaflet) page. It reads only what the run folder holds, by the names in
:mod:`aquitardmap.outputs`, and shows what is there:

* every grid as a toggleable, semi-transparent image layer with its own legend (physical
  units; log10 colour scale for conductivity, leakance, resistance and travel time);
* the flagged zones (window / thin / fast), with a plain-language tooltip;
* the boreholes, coloured by what they prove, with a popup giving the log and the clay
  thickness (a lower bound where the hole stopped in the clay);
* a title block, the caution text, a scale bar and the coordinates of any clicked point.

Everything a user typed (borehole ids, unit names, logs, reasons, the project name) is
HTML-escaped before it reaches the page, and curly braces are written as character
references because folium re-reads rendered layer code as a Jinja template.

Grid overlays are warped to Web Mercator (EPSG:3857), the plane Leaflet draws in, so that
the image stretched between its corner coordinates sits where the cells are; the corner
coordinates handed to Leaflet are longitudes/latitudes (EPSG:4326). (An image warped to
EPSG:4326 instead would be stretched linearly in latitude on a Mercator screen: for a
40 km tall area at 55° N its middle would sit some 45 m off.)
"""

from __future__ import annotations

import base64
import html
import io
import json
import math
import os
import re
import uuid
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import folium
import geopandas as gpd
import matplotlib
import matplotlib.image
import numpy as np
import shapely
from affine import Affine
from branca.element import Element, MacroElement
from folium.template import Template
from matplotlib.ticker import MaxNLocator
from pyproj import CRS, Transformer
from pyproj.exceptions import CRSError
from rasterio.enums import Resampling
from rasterio.warp import reproject, transform_bounds

from aquitardmap import outputs
from aquitardmap.grid import read_raster

__all__ = ["WebAssets", "WebAssetsNotFound", "find_web_assets", "write_map"]

#: Environment variable naming a folder that holds ``leaflet.js`` (or ``leaflet.min.js``),
#: ``leaflet.css`` and Leaflet's ``images/`` for self-contained maps.
ASSETS_ENV = "AQUITARDMAP_WEB_ASSETS"

#: Where a system-wide copy of Leaflet is looked for when no folder is given:
#: Debian's ``libjs-leaflet`` package, then a global npm install of ``leaflet``.
SYSTEM_ASSET_DIRS: tuple[Path, ...] = (
    Path("/usr/share/javascript/leaflet"),
    Path("/usr/lib/node_modules/leaflet/dist"),
    Path("/usr/local/lib/node_modules/leaflet/dist"),
)

#: Small grids are drawn with up to this many image pixels so cell edges stay crisp.
_OVERSAMPLE_PIXELS = 512 * 512
_OVERSAMPLE_MAX = 4
_OVERLAY_OPACITY = 0.75
_LONLAT = CRS.from_epsg(4326)
_WEB_MERCATOR = CRS.from_epsg(3857)

# Our own palette for zones and boreholes (chosen to stand out on viridis/magma overlays).
_ZONE_COLOURS = {"window": "#e4002b", "thin": "#ff9f1c", "fast": "#00a6ed"}
_ZONE_OTHER_COLOUR = "#6d6d6d"
_HOLE_STYLES = {
    # category: (fill colour, outline colour, legend text)
    "window": ("#e4002b", "#222222", "Reached the aquifer through no clay (proves a window)"),
    "full": ("#2c7bb6", "#222222", "Reached the aquifer: full clay thickness"),
    "lower_bound": ("#ffffff", "#222222", "Stopped in clay: thickness is a lower bound"),
    "unknown": ("#9e9e9e", "#222222", "Clay thickness not known from this hole"),
    "flagged": ("#000000", "#ffffff", "QA-flagged or excluded from the estimates"),
}


# --------------------------------------------------------------------------- text helpers


def _esc(value: Any) -> str:
    """HTML-escape user text; braces become character references (folium re-templates)."""
    text = html.escape("" if value is None else str(value), quote=True)
    return text.replace("{", "&#123;").replace("}", "&#125;")


def _is_missing(value: Any) -> bool:
    if value is None:
        return True
    try:
        return bool(np.isnan(value))
    except (TypeError, ValueError):
        return False


def _truthy(value: Any) -> bool:
    """Booleans as GeoPackages deliver them: bool, 0/1, 'true'/'yes'; missing is False."""
    if _is_missing(value):
        return False
    if isinstance(value, str):
        return value.strip().lower() in {"1", "true", "yes", "y", "t"}
    return bool(value)


def _text(value: Any) -> str:
    """A column value as plain (unescaped) text; missing is ''."""
    return "" if _is_missing(value) else str(value).strip()


def _float(value: Any) -> float | None:
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if math.isfinite(out) else None


def _fmt(value: float | None, digits: int = 3) -> str:
    """A number with ``digits`` significant figures, no exponent for everyday magnitudes."""
    if value is None:
        return "n/a"
    if value == 0:
        return "0"
    if 1e-3 <= abs(value) < 1e6:
        decimals = max(0, digits - 1 - int(math.floor(math.log10(abs(value)))))
        return f"{value:.{decimals}f}"
    return f"{value:.{digits - 1}e}"


def _fmt_threshold(value: float) -> str:
    """A threshold as the user wrote it: 5 -> '5', 0.5 -> '0.5'."""
    return f"{value:g}"


def _fmt_m(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.1f} m"


def _fmt_area(area_m2: float | None) -> str:
    if area_m2 is None:
        return "n/a"
    if area_m2 < 1e6:
        return f"{area_m2 / 1e4:.1f} ha"
    return f"{area_m2 / 1e6:.2f} km²"


def _fmt_power_of_ten(exponent: int) -> str:
    if -2 <= exponent <= 4:
        return f"{10.0 ** exponent:g}"
    return f"10<sup>{exponent}</sup>".replace("-", "−")


# --------------------------------------------------------------------------- run summary


def _read_summary(run_dir: Path) -> dict[str, Any]:
    """summary.json as a dict; a missing or unreadable file gives an empty dict."""
    try:
        data = json.loads((run_dir / outputs.SUMMARY).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def _section(summary: dict[str, Any], key: str) -> dict[str, Any]:
    value = summary.get(key)
    return value if isinstance(value, dict) else {}


def _units(summary: dict[str, Any]) -> list[tuple[str, str]]:
    """(code, name) of the units listed in the summary, in order."""
    units = summary.get("units")
    out: list[tuple[str, str]] = []
    if not isinstance(units, list):
        return out
    for unit in units:
        if not isinstance(unit, dict):
            continue
        code = _text(unit.get("code"))
        if code:
            out.append((code, _text(unit.get("name")) or code))
    return out


# --------------------------------------------------------------------------- grid layers


@dataclass(frozen=True)
class _GridSpec:
    """How one grid file is drawn."""

    file: str
    title: str  # already HTML-escaped
    cmap: str
    log: bool = False
    fixed_range: tuple[float, float] | None = None
    note: str = ""  # already HTML-escaped


def _grid_specs(run_dir: Path, summary: dict[str, Any]) -> list[_GridSpec]:
    """The grids to draw, in layer-control order; only files that exist are listed."""
    thresholds = _section(summary, "thresholds")
    thin_m = _float(thresholds.get("thin_thickness_m"))
    darker = "Darker = less protection."
    p_title = "Probability the clay is thin (approximate, 0–1)"
    if thin_m is not None:
        p_title = (f"Probability the clay is thinner than {_fmt_threshold(thin_m)} m "
                   "(approximate, 0–1)")
    specs = [
        _GridSpec(outputs.AQUITARD_THICKNESS, "Total aquitard thickness (m)", "viridis",
                  note=darker),
        _GridSpec(outputs.AQUITARD_THICKNESS_SD,
                  "Aquitard thickness uncertainty, one standard deviation (m)", "cividis"),
        _GridSpec(outputs.P_THIN, p_title, "magma_r", fixed_range=(0.0, 1.0), note=darker),
    ]
    listed = set()
    for code, name in _units(summary):
        if "/" in code or "\\" in code or code in listed:
            continue
        listed.add(code)
        specs.append(_GridSpec(outputs.unit_thickness(code),
                               f"Thickness of {_esc(name)} [{_esc(code)}] (m)", "viridis"))
    for path in sorted(run_dir.glob(outputs.unit_thickness("*"))):
        code = path.name[len("thickness_"):-len("_m.tif")]
        if code and code not in listed:
            listed.add(code)
            specs.append(_GridSpec(path.name, f"Thickness of unit {_esc(code)} (m)", "viridis"))
    specs += [
        _GridSpec(outputs.COVER_THICKNESS, "Cover above the aquitard, thickness (m)",
                  "cividis"),
        _GridSpec(outputs.KV, "Vertical hydraulic conductivity of the aquitard, Kv "
                  "(m/s, log scale)", "magma_r", log=True, note=darker),
        _GridSpec(outputs.LEAKANCE, "Leakance (1/s, log scale)", "magma_r", log=True,
                  note=darker),
        _GridSpec(outputs.RESISTANCE, "Hydraulic resistance of the aquitard (years, log scale)",
                  "viridis", log=True, note=darker),
        _GridSpec(outputs.TRAVEL_TIME, "Travel time, advective, unit gradient "
                  "(years, log scale)", "viridis", log=True, note=darker),
    ]
    return [s for s in specs if (run_dir / s.file).is_file()]


def _mercator_target(transform: Affine, width: int, height: int, crs: CRS,
                     max_cells: int) -> tuple[Affine, int, int, tuple[float, float, float, float]]:
    """Web Mercator raster that covers a grid, and the grid's lon/lat bounds.

    The target has about as many cells as the source (oversampled up to 4x per side for
    small grids, so cell edges stay crisp) and never more than ``max_cells``.
    Returns (transform, width, height, (west, south, east, north) in degrees).
    """
    xmin = transform.c
    ymax = transform.f
    xmax = xmin + transform.a * width
    ymin = ymax + transform.e * height
    west, south, east, north = transform_bounds(crs, _LONLAT, xmin, ymin, xmax, ymax,
                                                densify_pts=21)
    to_merc = Transformer.from_crs(_LONLAT, _WEB_MERCATOR, always_xy=True)
    mx0, my0 = to_merc.transform(west, south)
    mx1, my1 = to_merc.transform(east, north)
    span_x, span_y = mx1 - mx0, my1 - my0
    res = math.sqrt(span_x * span_y / (width * height))
    w = max(1, round(span_x / res))
    h = max(1, round(span_y / res))
    if w * h > max_cells:
        f = math.sqrt(max_cells / (w * h))
        w, h = max(1, math.floor(w * f)), max(1, math.floor(h * f))
        while w * h > max_cells:  # only when one side was clamped to 1
            w, h = (w - 1, h) if w >= h else (w, h - 1)
    else:
        k = int(math.sqrt(min(max_cells, _OVERSAMPLE_PIXELS) / (w * h)))
        k = min(_OVERSAMPLE_MAX, max(1, k))
        w, h = w * k, h * k
    dst_transform = Affine(span_x / w, 0.0, mx0, 0.0, -span_y / h, my1)
    return dst_transform, w, h, (west, south, east, north)


def _warp_for_display(values: np.ndarray, transform: Affine, crs: CRS, max_cells: int
                      ) -> tuple[np.ndarray, tuple[float, float, float, float]]:
    """Grid values (NaN = no data) on a Web Mercator raster; returns (array, lon/lat bounds)."""
    height, width = values.shape
    dst_transform, w, h, bounds = _mercator_target(transform, width, height, crs, max_cells)
    dst = np.full((h, w), np.nan)
    downsampling = w * h < width * height
    reproject(
        source=values, destination=dst, src_transform=transform, src_crs=crs,
        src_nodata=np.nan, dst_transform=dst_transform, dst_crs=_WEB_MERCATOR,
        dst_nodata=np.nan,
        resampling=Resampling.average if downsampling else Resampling.nearest,
    )
    return dst, bounds


@dataclass(frozen=True)
class _Scale:
    """Colour scale of one layer: range (log10 units when ``log``) and its legend ticks."""

    vmin: float
    vmax: float
    log: bool
    ticks: list[tuple[float, str]]  # (position 0..1, label html)
    clipped_low: bool  # log scale: some values <= 0 drawn at the low end


def _colour_scale(values: np.ndarray, spec: _GridSpec) -> _Scale | None:
    """Range and ticks for ``values``; None when the grid has no finite value."""
    finite = values[np.isfinite(values)]
    clipped_low = False
    if spec.log:
        positive = finite[finite > 0]
        clipped_low = bool(np.any(finite <= 0))
        if positive.size == 0:
            return None
        vmin, vmax = float(np.log10(positive.min())), float(np.log10(positive.max()))
    elif spec.fixed_range is not None:
        vmin, vmax = spec.fixed_range
    else:
        if finite.size == 0:
            return None
        vmin, vmax = float(finite.min()), float(finite.max())
    if vmax - vmin < 1e-12:
        vmin, vmax = vmin - 0.5, vmax + 0.5
    ticks: list[tuple[float, str]] = []
    span = vmax - vmin
    decades = range(math.ceil(vmin - 1e-9), math.floor(vmax + 1e-9) + 1) if spec.log else []
    if spec.log and len(decades) >= 2:
        step = max(1, math.ceil(len(decades) / 6))
        ticks = [((e - vmin) / span, _fmt_power_of_ten(e)) for e in decades[::step]]
    else:
        for t in MaxNLocator(nbins=4).tick_values(vmin, vmax):
            if vmin - 1e-9 <= t <= vmax + 1e-9:
                label = f"{10.0 ** t:.2g}" if spec.log else f"{round(float(t), 10):g}"
                ticks.append(((t - vmin) / span, label))
    return _Scale(vmin, vmax, spec.log, ticks, clipped_low)


def _colourise(values: np.ndarray, scale: _Scale, cmap_name: str) -> np.ndarray:
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


def _png_data_url(rgba: np.ndarray) -> str:
    buf = io.BytesIO()
    matplotlib.image.imsave(buf, rgba, format="png")
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def _gradient_css(cmap_name: str, stops: int = 11) -> str:
    cmap = matplotlib.colormaps[cmap_name]
    parts = []
    for i in range(stops):
        r, g, b, _ = (np.array(cmap(i / (stops - 1))) * 255).round().astype(int)
        parts.append(f"rgb({r},{g},{b}) {100 * i / (stops - 1):.0f}%")
    return "linear-gradient(to right, " + ", ".join(parts) + ")"


def _colour_legend(legend_id: str, spec: _GridSpec, scale: _Scale | None) -> str:
    if scale is None:
        body = '<div class="aqm-note">No values inside the study area.</div>'
    else:
        ticks = "".join(
            f'<span style="left:{100 * pos:.1f}%">{label}</span>' for pos, label in scale.ticks
        )
        notes = [spec.note] if spec.note else []
        if scale.clipped_low:
            notes.append("Values of zero are drawn in the lowest colour.")
        note = f'<div class="aqm-note">{" ".join(notes)}</div>' if notes else ""
        body = (f'<div class="aqm-bar" style="background:{_gradient_css(spec.cmap)}"></div>'
                f'<div class="aqm-ticks">{ticks}</div>{note}')
    return (f'<div class="aqm-legend" id="{legend_id}">'
            f'<div class="aqm-legend-title">{spec.title}</div>{body}</div>')


def _swatch_legend(legend_id: str, title: str, rows: Iterable[tuple[str, str, str]],
                   *, round_swatch: bool) -> str:
    shape = "border-radius:50%;" if round_swatch else ""
    items = "".join(
        f'<div class="aqm-row"><span class="aqm-swatch" style="{shape}background:{fill};'
        f'border-color:{edge}"></span>{label}</div>' for fill, edge, label in rows
    )
    return (f'<div class="aqm-legend" id="{legend_id}">'
            f'<div class="aqm-legend-title">{title}</div>{items}</div>')


# --------------------------------------------------------------------------- vector layers


def _read_layer(path: Path, layer: str, fallback_crs: CRS | None) -> gpd.GeoDataFrame | None:
    """A GeoPackage layer in lon/lat, or None when the file is absent."""
    if not path.is_file():
        return None
    gdf = gpd.read_file(path, layer=layer)
    if gdf.crs is None:
        if fallback_crs is None:
            return None
        gdf = gdf.set_crs(fallback_crs)
    gdf = gdf[gdf.geometry.notna() & ~gdf.geometry.is_empty]
    return gdf.to_crs(_LONLAT)


def _feature_collection(gdf: gpd.GeoDataFrame, properties: list[dict[str, Any]]
                        ) -> dict[str, Any]:
    """GeoJSON with our own (already escaped) properties; coordinates rounded to ~1 cm."""
    geoms = shapely.transform(gdf.geometry.values, lambda xy: np.round(xy, 7))
    return {
        "type": "FeatureCollection",
        "features": [
            {"type": "Feature", "id": str(i), "properties": props,
             "geometry": json.loads(shapely.to_geojson(geom))}
            for i, (geom, props) in enumerate(zip(geoms, properties, strict=True))
        ],
    }


def _column(gdf: gpd.GeoDataFrame, name: str) -> list[Any]:
    return list(gdf[name]) if name in gdf.columns else [None] * len(gdf)


def _zone_labels(summary: dict[str, Any]) -> dict[str, str]:
    """Plain-language name of each zone kind, with its threshold when the summary has it."""
    t = _section(summary, "thresholds")
    window_m = _float(t.get("window_thickness_m"))
    thin_m = _float(t.get("thin_thickness_m"))
    fast_yr = _float(t.get("fast_travel_time_yr"))
    labels = {"window": "Window: clay absent", "thin": "Thin clay", "fast": "Fast path"}
    if window_m is not None:
        labels["window"] += f" (under {_fmt_threshold(window_m)} m)"
    if thin_m is not None:
        labels["thin"] += f" (under {_fmt_threshold(thin_m)} m)"
    if fast_yr is not None:
        labels["fast"] += f": travel time under {_fmt_threshold(fast_yr)} years"
    return labels


def _zones_layer(gdf: gpd.GeoDataFrame, labels: dict[str, str]
                 ) -> tuple[folium.GeoJson, list[tuple[str, str, str]]]:
    """Zones as a GeoJson layer with tooltips, and its legend rows (fill, edge, html)."""
    props = []
    for kind, area, reason, mean_t, min_t, sd, p_thin, n in zip(
        _column(gdf, "kind"), _column(gdf, "area_m2"), _column(gdf, "reason"),
        _column(gdf, "mean_thickness_m"), _column(gdf, "min_thickness_m"),
        _column(gdf, "mean_sd_m"), _column(gdf, "mean_p_thin"), _column(gdf, "n_boreholes"),
        strict=True,
    ):
        kind = _text(kind).lower()
        label = _esc(labels.get(kind, f"Zone ({_text(kind) or 'unspecified'})"))
        n_holes = _float(n)
        lines = [
            f"<b>{label}</b>",
            f"Area: {_fmt_area(_float(area))}",
            f"Clay thickness: mean {_fmt_m(_float(mean_t))}, least {_fmt_m(_float(min_t))}, "
            f"uncertainty ± {_fmt_m(_float(sd))}",
            f"Mean P(thin) (approx.): {_fmt(_float(p_thin), 2)}",
            f"Boreholes inside: {'n/a' if n_holes is None else int(n_holes)}",
        ]
        if _text(reason):
            lines.append(f"<i>{_esc(_text(reason))}</i>")
        props.append({"kind": kind, "tooltip_html": "<br>".join(lines)})
    data = _feature_collection(gdf, props)

    def style(feature: dict[str, Any]) -> dict[str, Any]:
        colour = _ZONE_COLOURS.get(feature["properties"]["kind"], _ZONE_OTHER_COLOUR)
        return {"color": colour, "weight": 2, "fillColor": colour, "fillOpacity": 0.25}

    def highlight(feature: dict[str, Any]) -> dict[str, Any]:
        return {"weight": 4, "fillOpacity": 0.4}

    layer = folium.GeoJson(
        data, name="Flagged zones (window, thin, fast)", style_function=style,
        highlight_function=highlight if data["features"] else None,
        tooltip=(folium.GeoJsonTooltip(fields=["tooltip_html"], labels=False,
                                       class_name="aqm-tip")
                 if data["features"] else None),
        show=True,
    )
    kinds = {p["kind"] for p in props}
    rows = [(_ZONE_COLOURS[k], _ZONE_COLOURS[k], _esc(labels[k])) for k in _ZONE_COLOURS]
    if kinds - set(_ZONE_COLOURS):
        rows.append((_ZONE_OTHER_COLOUR, _ZONE_OTHER_COLOUR, "Other zone"))
    if not data["features"]:
        rows = [("transparent", "#999999", "No zones were flagged in this run")]
    return layer, rows


def _hole_category(reached: bool, status: str, proves_window: bool, flagged: bool) -> str:
    if flagged:
        return "flagged"
    if proves_window:
        return "window"
    if status == "full" or (reached and status not in {"lower_bound", "unknown"}):
        return "full"
    if status == "lower_bound":
        return "lower_bound"
    return "unknown"


def _thickness_text(status: str, thickness_m: float | None, category: str) -> str:
    if category == "window" and (thickness_m is None or thickness_m == 0):
        return "none (the hole reached the aquifer without passing through clay)"
    if thickness_m is None:
        return "not known"
    if status == "lower_bound":
        return f"≥ {thickness_m:.1f} m (hole stopped in clay)"
    if status == "unknown":
        return f"{thickness_m:.1f} m (not confirmed)"
    return f"{thickness_m:.1f} m"


def _log_html(log_text: str) -> str:
    parts = [p.strip() for p in log_text.split(";") if p.strip()]
    if not parts:
        return ""
    return ('<div class="aqm-log">' + "<br>".join(_esc(p) for p in parts) + "</div>")


def _boreholes_layer(gdf: gpd.GeoDataFrame) -> tuple[folium.GeoJson, dict[str, int]]:
    """Boreholes as circle markers with popups, and the count of holes per category."""
    props = []
    counts = dict.fromkeys(_HOLE_STYLES, 0)
    columns = ["borehole_id", "ground_elev_m", "total_depth_m", "reached_aquifer",
               "bottom_unit", "aquitard_thickness_m", "status_aquitard", "proves_window",
               "qa_flags", "excluded", "log", "dem_misfit_m"]
    for (hole_id, elev, depth, reached, bottom, thick, status, window, flags, excluded, log,
         misfit) in zip(*(_column(gdf, c) for c in columns), strict=True):
        status = _text(status).lower()
        flags_text = _text(flags)
        category = _hole_category(_truthy(reached), status, _truthy(window),
                                  bool(flags_text) or _truthy(excluded))
        counts[category] += 1
        hole_id_html = _esc(_text(hole_id) or "(no id)")
        fill, edge, what = _HOLE_STYLES[category]
        if category == "flagged":
            what = "Excluded from the estimates" if _truthy(excluded) else "QA-flagged"
        lines = [
            f'<div class="aqm-popup-title">{hole_id_html}</div>',
            f"<i>{what}</i>",
            f"Clay (aquitard) thickness: {_thickness_text(status, _float(thick), category)}",
            "Reached the aquifer: " + ("yes" if _truthy(reached) else "no"),
            f"Ground elevation: {_fmt_m(_float(elev))}; total depth: {_fmt_m(_float(depth))}",
        ]
        if _text(bottom):
            lines.append(f"Bottom unit: {_esc(_text(bottom))}")
        if _float(misfit) is not None:
            lines.append(f"Collar vs DEM misfit: {_fmt_m(_float(misfit))}")
        if flags_text:
            lines.append(f"QA flags: {_esc(flags_text)}")
        if _truthy(excluded):
            lines.append("Not used in the estimates.")
        body = lines[0] + "<br>".join(lines[1:]) + _log_html(_text(log))
        props.append({"category": category, "popup_html": body,
                      "tooltip_html": f"{hole_id_html}: {what}"})
    data = _feature_collection(gdf, props)

    def style(feature: dict[str, Any]) -> dict[str, Any]:
        fill, edge, _ = _HOLE_STYLES[feature["properties"]["category"]]
        return {"fillColor": fill, "color": edge}

    marker = folium.CircleMarker(radius=6, weight=1.5, fill=True, fill_opacity=0.95,
                                 bubbling_mouse_events=False)
    has = bool(data["features"])
    layer = folium.GeoJson(
        data, name="Boreholes", marker=marker, style_function=style if has else None,
        popup=(folium.GeoJsonPopup(fields=["popup_html"], labels=False, class_name="aqm-tip")
               if has else None),
        tooltip=(folium.GeoJsonTooltip(fields=["tooltip_html"], labels=False,
                                       class_name="aqm-tip") if has else None),
        show=True,
    )
    return layer, counts


# --------------------------------------------------------------------------- page furniture


class _RawHtml(Element):
    """Markup placed in the page as-is (never parsed as a template)."""

    def __init__(self, markup: str) -> None:
        super().__init__()
        self._markup = markup

    def render(self, **kwargs: Any) -> str:
        return self._markup


class _LegendSwitch(MacroElement):
    """Shows each legend only while its layer is on the map."""

    _template = Template("""
        {% macro script(this, kwargs) %}
        (function() {
            var map = {{ this._parent.get_name() }};
            var pairs = [{% for layer, legend in this.pairs %}[{{ layer }}, {{ legend|tojson }}],
                         {% endfor %}];
            function sync() {
                pairs.forEach(function(p) {
                    var el = document.getElementById(p[1]);
                    if (el) { el.style.display = map.hasLayer(p[0]) ? "" : "none"; }
                });
            }
            map.on("overlayadd overlayremove layeradd layerremove", sync);
            sync();
        })();
        {% endmacro %}
    """)

    def __init__(self, pairs: list[tuple[str, str]]) -> None:
        super().__init__()
        self._name = "LegendSwitch"
        self.pairs = pairs


class _ClickCoordinates(MacroElement):
    """A click on the map pops up its longitude/latitude and, where a fit is given, the
    project coordinates from a polynomial fitted to PROJ (see :func:`_lonlat_to_xy_fit`)."""

    _template = Template("""
        {% macro script(this, kwargs) %}
        (function() {
            var map = {{ this._parent.get_name() }};
            var fit = {{ this.fit|tojson }};
            function hemi(v, pos, neg) {
                return Math.abs(v).toFixed(5) + "° " + (v < 0 ? neg : pos);
            }
            function poly(c, u, v) {
                return c[0] + c[1]*u + c[2]*v + c[3]*u*u + c[4]*u*v + c[5]*v*v
                     + c[6]*u*u*u + c[7]*u*u*v + c[8]*u*v*v + c[9]*v*v*v;
            }
            map.on("click", function(e) {
                var lat = e.latlng.lat, lon = e.latlng.lng;
                var text = hemi(lat, "N", "S") + ", " + hemi(lon, "E", "W") + " (WGS 84)";
                if (fit) {
                    var u = (lon - fit.lon0) / fit.su, v = (lat - fit.lat0) / fit.sv;
                    text += "<br>x " + poly(fit.cx, u, v).toFixed(1) + " m, y "
                          + poly(fit.cy, u, v).toFixed(1) + " m (" + fit.crs + ")";
                }
                L.popup().setLatLng(e.latlng).setContent(text).openOn(map);
            });
        })();
        {% endmacro %}
    """)

    def __init__(self, fit: dict[str, Any] | None) -> None:
        super().__init__()
        self._name = "ClickCoordinates"
        self.fit = fit


def _poly_terms(u: np.ndarray, v: np.ndarray) -> np.ndarray:
    return np.stack([np.ones_like(u), u, v, u * u, u * v, v * v,
                     u ** 3, u * u * v, u * v * v, v ** 3], axis=-1)


def _lonlat_to_xy_fit(crs: CRS, bounds: tuple[float, float, float, float],
                      tolerance_m: float = 0.5) -> dict[str, Any] | None:
    """Cubic polynomial from lon/lat to project x/y over ``bounds`` (west, south, east, north).

    Fitted by least squares to PROJ on a 15 x 15 lattice and checked on the 14 x 14 lattice
    of midpoints; None when the project CRS is geographic or the check misses by more than
    ``tolerance_m``. The browser has no PROJ, so this is how it shows project coordinates.
    """
    if crs.is_geographic:
        return None
    west, south, east, north = bounds
    lon0, lat0 = (west + east) / 2, (south + north) / 2
    su, sv = max((east - west) / 2, 1e-9), max((north - south) / 2, 1e-9)
    to_xy = Transformer.from_crs(_LONLAT, crs, always_xy=True)

    def lattice(n: int, inset: float) -> tuple[np.ndarray, np.ndarray]:
        t = np.linspace(-1 + inset, 1 - inset, n)
        u, v = np.meshgrid(t, t)
        return u.ravel(), v.ravel()

    u, v = lattice(15, 0.0)
    x, y = to_xy.transform(lon0 + u * su, lat0 + v * sv)
    terms = _poly_terms(u, v)
    cx = np.linalg.lstsq(terms, x, rcond=None)[0]
    cy = np.linalg.lstsq(terms, y, rcond=None)[0]
    uc, vc = lattice(14, 1 / 14)
    xc, yc = to_xy.transform(lon0 + uc * su, lat0 + vc * sv)
    tc = _poly_terms(uc, vc)
    miss = float(np.max(np.hypot(tc @ cx - xc, tc @ cy - yc)))
    if not math.isfinite(miss) or miss > tolerance_m:
        return None
    label = crs.to_string() if crs.to_epsg() is None else f"EPSG:{crs.to_epsg()}"
    return {"lon0": lon0, "lat0": lat0, "su": su, "sv": sv, "cx": cx.tolist(),
            "cy": cy.tolist(), "crs": _esc(label), "max_miss_m": miss}


def _run_date(started_utc: str) -> str:
    """An ISO 8601 time as 'YYYY-MM-DD HH:MM UTC'; text that is not ISO 8601 is kept."""
    try:
        when = datetime.fromisoformat(started_utc.replace("Z", "+00:00"))
    except ValueError:
        return started_utc
    if when.tzinfo is not None:
        when = when.astimezone(UTC)
    return when.strftime("%Y-%m-%d %H:%M UTC")


def _title_html(summary: dict[str, Any], crs_label: str) -> str:
    project = _section(summary, "project")
    run = _section(summary, "run")
    name = _text(project.get("name")) or "Aquitard screening map"
    details = []
    started = _text(run.get("started_utc"))
    if started:
        details.append(f"Run {_esc(_run_date(started))}")
    version = _text(run.get("package_version"))
    if version:
        details.append(f"aquitardmap {_esc(version)}")
    if crs_label:
        details.append(f"CRS {_esc(crs_label)}")
    return (f'<div id="aqm-title"><div class="aqm-name">{_esc(name)}</div>'
            f'<div class="aqm-details">{" · ".join(details)}</div></div>')


def _caution_html(summary: dict[str, Any]) -> str:
    text = _text(summary.get("caution")) or outputs.CAUTION
    if text != outputs.CAUTION and outputs.CAUTION not in text:
        text = f"{text} {outputs.CAUTION}"
    return f'<div id="aqm-caution"><b>Caution.</b> {_esc(text)}</div>'


_CSS = """
<style>
  #aqm-title, #aqm-caution, #aqm-legends {
    position: fixed; z-index: 1000; background: rgba(255,255,255,0.93);
    font: 12px/1.35 "Helvetica Neue", Arial, Helvetica, sans-serif; color: #222;
    border-radius: 4px; box-shadow: 0 1px 5px rgba(0,0,0,0.35);
  }
  #aqm-title { top: 10px; left: 54px; padding: 6px 10px; max-width: 45%; }
  #aqm-title .aqm-name { font-size: 16px; font-weight: bold; }
  #aqm-title .aqm-details { color: #555; }
  #aqm-caution { bottom: 48px; left: 10px; padding: 6px 10px; max-width: 380px;
                 border-left: 4px solid #e0a800; }
  #aqm-legends { bottom: 24px; right: 10px; padding: 4px 10px; max-height: 60vh;
                 overflow-y: auto; width: 260px; }
  .aqm-legend { margin: 6px 0; }
  .aqm-legend-title { font-weight: bold; margin-bottom: 3px; }
  .aqm-bar { height: 12px; border: 1px solid #777; }
  .aqm-ticks { position: relative; height: 15px; margin: 0 8px 0 4px; }
  .aqm-ticks span { position: absolute; transform: translateX(-50%); top: 1px;
                    white-space: nowrap; }
  .aqm-note { color: #555; font-size: 11px; }
  .aqm-row { margin: 2px 0; }
  .aqm-swatch { display: inline-block; width: 11px; height: 11px; margin-right: 6px;
                vertical-align: -1px; border: 1.5px solid; }
  .aqm-popup-title { font-weight: bold; font-size: 13px; }
  .aqm-log { margin-top: 4px; padding-top: 3px; border-top: 1px solid #ccc;
             font-family: monospace; font-size: 11px; }
  .leaflet-tooltip.aqm-tip { white-space: normal; width: 280px; }
  .leaflet-popup-content td, .leaflet-tooltip td { font-size: 12px; line-height: 1.4; }
</style>
"""


# --------------------------------------------------------------------------- self-contained


class WebAssetsNotFound(FileNotFoundError):
    """No local copy of Leaflet was found, so a self-contained map cannot be written."""


@dataclass(frozen=True)
class WebAssets:
    """Local Leaflet files to inline into a self-contained map."""

    leaflet_js: Path
    leaflet_css: Path


def find_web_assets(search_dirs: Sequence[str | Path] | None = None) -> WebAssets:
    """Find a local Leaflet (JavaScript + CSS); nothing is downloaded.

    Looks in ``search_dirs`` when given, otherwise in the folder named by the environment
    variable ``AQUITARDMAP_WEB_ASSETS`` (and its ``leaflet/`` subfolder), then in
    :data:`SYSTEM_ASSET_DIRS` (Debian's ``libjs-leaflet``, a global npm ``leaflet``).
    Raises :class:`WebAssetsNotFound` listing where it looked.
    """
    if search_dirs is None:
        dirs: list[Path] = []
        env = os.environ.get(ASSETS_ENV)
        if env:
            dirs += [Path(env), Path(env) / "leaflet"]
        dirs += list(SYSTEM_ASSET_DIRS)
    else:
        dirs = [Path(d) for d in search_dirs]
    for d in dirs:
        css = d / "leaflet.css"
        for js_name in ("leaflet.min.js", "leaflet.js"):
            if (d / js_name).is_file() and css.is_file():
                return WebAssets(d / js_name, css)
    looked = ", ".join(str(d) for d in dirs) or "(nowhere)"
    raise WebAssetsNotFound(
        "A self-contained map needs a local copy of Leaflet 1.x (leaflet.js or leaflet.min.js "
        f"plus leaflet.css); none was found. Looked in: {looked}. Install Debian's "
        f"libjs-leaflet package, or set {ASSETS_ENV} to a folder that holds the files."
    )


_SOURCE_MAP = re.compile(r"/[*/]#\s*sourceMappingURL=[^\n]*")
_CSS_URL = re.compile(r"url\(\s*['\"]?([^'\")]+)['\"]?\s*\)")


def _inline_css(assets: WebAssets) -> str:
    """Leaflet's CSS with its images turned into data URLs."""
    css = _SOURCE_MAP.sub("", assets.leaflet_css.read_text(encoding="utf-8"))

    def to_data_url(match: re.Match[str]) -> str:
        ref = match.group(1)
        if ref.startswith(("data:", "#")):
            return match.group(0)
        image = assets.leaflet_css.parent / ref
        if not image.is_file() or image.suffix.lower() not in {".png", ".svg", ".gif"}:
            return "none"
        mime = {".png": "image/png", ".svg": "image/svg+xml", ".gif": "image/gif"}
        payload = base64.b64encode(image.read_bytes()).decode("ascii")
        return f'url("data:{mime[image.suffix.lower()]};base64,{payload}")'

    return _CSS_URL.sub(to_data_url, css).replace("</style", "<\\/style")


def _inline_js(assets: WebAssets) -> str:
    js = _SOURCE_MAP.sub("", assets.leaflet_js.read_text(encoding="utf-8"))
    return js.replace("</script", "<\\/script")


_EXTERNAL_REF = re.compile(r"<(?:script|link)\b[^>]*\b(?:src|href)\s*=", re.IGNORECASE)


# --------------------------------------------------------------------------- the map


def _main_crs(run_dir: Path, summary: dict[str, Any]) -> CRS | None:
    text = _text(_section(summary, "project").get("crs"))
    if text:
        try:
            return CRS.from_user_input(text)
        except CRSError:  # an unreadable CRS text only loses a fallback: use the grids'
            pass
    for name in (outputs.AQUITARD_THICKNESS, outputs.AQUITARD_THICKNESS_SD):
        if (run_dir / name).is_file():
            return read_raster(run_dir / name)[2]
    return None


def _union_bounds(boxes: list[tuple[float, float, float, float]]
                  ) -> tuple[float, float, float, float] | None:
    if not boxes:
        return None
    arr = np.array(boxes, dtype=float)
    return (float(arr[:, 0].min()), float(arr[:, 1].min()), float(arr[:, 2].max()),
            float(arr[:, 3].max()))


def _build_map(run_dir: Path, *, self_contained: bool, max_overlay_cells: int) -> str:
    summary = _read_summary(run_dir)
    project_crs = _main_crs(run_dir, summary)
    assets = find_web_assets() if self_contained else None

    fmap = folium.Map(tiles=None if self_contained else "OpenStreetMap",
                      control_scale=True, prefer_canvas=True, zoom_start=2)
    # Only Leaflet is needed: the page uses no Bootstrap, jQuery or icon fonts.
    if self_contained:
        fmap.default_js, fmap.default_css = [], []
    else:
        fmap.default_js = [("leaflet", dict(folium.Map.default_js)["leaflet"])]
        fmap.default_css = [("leaflet_css", dict(folium.Map.default_css)["leaflet_css"])]
    root = fmap.get_root()
    project_name = _text(_section(summary, "project").get("name"))
    root.title = _esc(project_name or "Aquitard screening map")
    if assets is not None:
        root.header.add_child(_RawHtml(f"<style>{_inline_css(assets)}</style>"),
                              name="leaflet_css_inline")
        root.header.add_child(_RawHtml(f"<script>{_inline_js(assets)}</script>"),
                              name="leaflet_js_inline")
    root.header.add_child(_RawHtml(_CSS), name="aqm_css")

    legends: list[str] = []
    switches: list[tuple[str, str]] = []
    boxes: list[tuple[float, float, float, float]] = []

    for i, spec in enumerate(_grid_specs(run_dir, summary)):
        values, transform, crs, _ = read_raster(run_dir / spec.file)
        crs = crs or project_crs
        if crs is None:
            continue
        shown, bounds = _warp_for_display(values, transform, crs, max_overlay_cells)
        scale = _colour_scale(shown, spec)
        rgba = (_colourise(shown, scale, spec.cmap) if scale is not None
                else np.zeros(shown.shape + (4,), np.uint8))
        west, south, east, north = bounds
        overlay = folium.raster_layers.ImageOverlay(
            image=_png_data_url(rgba), bounds=[[south, west], [north, east]],
            name=spec.title, opacity=_OVERLAY_OPACITY, pixelated=True, show=(i == 0),
            interactive=False,
        )
        overlay.add_to(fmap)
        legend_id = f"aqm-legend-{i}"
        legends.append(_colour_legend(legend_id, spec, scale))
        switches.append((overlay.get_name(), legend_id))
        boxes.append(bounds)

    zones = _read_layer(run_dir / outputs.ZONES, outputs.ZONES_LAYER, project_crs)
    if zones is not None:
        layer, rows = _zones_layer(zones, _zone_labels(summary))
        layer.add_to(fmap)
        legends.append(_swatch_legend("aqm-legend-zones", "Flagged zones", rows,
                                      round_swatch=False))
        switches.append((layer.get_name(), "aqm-legend-zones"))
        if len(zones):
            boxes.append(tuple(zones.total_bounds))

    holes = _read_layer(run_dir / outputs.BOREHOLES, outputs.BOREHOLES_LAYER, project_crs)
    if holes is not None:
        layer, counts = _boreholes_layer(holes)
        layer.add_to(fmap)
        rows = [(fill, edge, f"{label} ({counts[cat]})")
                for cat, (fill, edge, label) in _HOLE_STYLES.items() if counts[cat]]
        if not rows:
            rows = [("transparent", "#999999", "No boreholes")]
        legends.append(_swatch_legend("aqm-legend-holes", "Boreholes (what each one proves)",
                                      rows, round_swatch=True))
        switches.append((layer.get_name(), "aqm-legend-holes"))
        if len(holes):
            boxes.append(tuple(holes.total_bounds))

    folium.LayerControl(collapsed=False).add_to(fmap)
    _LegendSwitch(switches).add_to(fmap)

    extent = _union_bounds(boxes)
    if extent is not None:
        west, south, east, north = extent
        fmap.fit_bounds([[south, west], [north, east]], padding=(20, 20))
    fit = (_lonlat_to_xy_fit(project_crs, extent)
           if project_crs is not None and extent is not None else None)
    _ClickCoordinates(fit).add_to(fmap)

    crs_label = ""
    if project_crs is not None:
        epsg = project_crs.to_epsg()
        crs_label = f"EPSG:{epsg}" if epsg else project_crs.name
    root.html.add_child(_RawHtml(_title_html(summary, crs_label)), name="aqm_title")
    root.html.add_child(_RawHtml(_caution_html(summary)), name="aqm_caution")
    if legends:
        root.html.add_child(_RawHtml(f'<div id="aqm-legends">{"".join(legends)}</div>'),
                            name="aqm_legends")

    page = root.render()
    if self_contained and _EXTERNAL_REF.search(page):
        raise RuntimeError("self-contained map still references an external script or style")
    return page


def write_map(run_dir: str | Path, *, self_contained: bool = False,
              max_overlay_cells: int = 1_000_000) -> Path:
    """Write the interactive map ``run_dir / map.html`` from the files of a run folder.

    Reads the grids, zones, boreholes and ``summary.json`` named in
    :mod:`aquitardmap.outputs` (any may be missing; what is there is shown). Each grid
    overlay is warped to Web Mercator and has at most ``max_overlay_cells`` cells.

    With ``self_contained=True`` the page needs no network: Leaflet is inlined from a local
    copy (see :func:`find_web_assets`) and no basemap tiles are used. Otherwise Leaflet and
    the OpenStreetMap basemap are loaded from the web when the page opens.

    The file is written to a temporary name in ``run_dir`` and moved into place, so a
    reader never sees half a map. Returns the path of ``map.html``.

    Raises:
        NotADirectoryError: ``run_dir`` is not a folder.
        ValueError: ``max_overlay_cells`` is less than 1.
        WebAssetsNotFound: ``self_contained`` and no local Leaflet was found.
    """
    run_dir = Path(run_dir)
    if not run_dir.is_dir():
        raise NotADirectoryError(f"run folder not found: {run_dir}")
    if max_overlay_cells < 1:
        raise ValueError(f"max_overlay_cells must be at least 1, got {max_overlay_cells}")
    page = _build_map(run_dir, self_contained=self_contained,
                      max_overlay_cells=max_overlay_cells)
    target = run_dir / outputs.MAP
    tmp = run_dir / f".{outputs.MAP}.{os.getpid()}.{uuid.uuid4().hex}.tmp"
    try:
        with open(tmp, "x", encoding="utf-8") as fh:  # "x": never clobber; umask applies
            fh.write(page)
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return target
