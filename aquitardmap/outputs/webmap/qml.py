"""Style sidecars for the GeoTIFFs of a run folder, so that the grids open in a desktop GIS
looking as they do on the map.

Each ``name.tif`` gets ``name.qml`` beside it: the raster style file that QGIS reads from
the same folder and name when it opens a raster (its layer-definition XML, ``<qgis>`` →
``<pipe>`` → ``<rasterrenderer>``). Continuous grids get the map's colour ramp and range
(:func:`aquitardmap.outputs.webmap.overlays.colour_scale`: the style's fixed range or the grid's
range, in display units, log10 for log-scaled grids) as a single-band pseudocolour ramp
with interpolated stops; class grids (the AVI class) get the map's class colours and words
as a paletted renderer. The ramp's stop values are in the file's own units (the display
factor undone), as QGIS reads the band.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any
from xml.sax.saxutils import quoteattr

import matplotlib
import numpy as np

from aquitardmap.outputs.presentation import GridStyle, grid_styles
from aquitardmap.outputs.webmap.overlays import colour_scale

#: Stops of a continuous ramp.
RAMP_STOPS = 11


def _hex(rgba: tuple[float, float, float, float]) -> str:
    r, g, b = (int(round(255 * c)) for c in rgba[:3])
    return f"#{r:02x}{g:02x}{b:02x}"


def ramp_items(style: GridStyle, values: np.ndarray) -> list[tuple[float, str, str]]:
    """``(value in file units, "#rrggbb", label)`` per stop of a continuous grid's ramp, or
    of each class of a class grid; empty when the grid has no finite value."""
    if style.classes:
        return [(float(c.code), c.colour.lower(), c.label) for c in style.classes]
    scale = colour_scale(np.asarray(values, float) * style.factor, style)
    if scale is None:
        return []
    cmap = matplotlib.colormaps[style.cmap]
    items = []
    for i in range(RAMP_STOPS):
        f = i / (RAMP_STOPS - 1)
        shown = scale.vmin + f * (scale.vmax - scale.vmin)
        display = 10.0 ** shown if scale.log else shown
        label = f"{display:.3g}" + (f" {style.units}" if style.units else "")
        items.append((display / style.factor, _hex(cmap(f)), label))
    return items


def qml_text(style: GridStyle, values: np.ndarray) -> str:
    """The QGIS raster style XML of one grid (module docstring)."""
    items = ramp_items(style, values)
    if style.classes:
        entries = "\n".join(
            f"        <paletteEntry value={quoteattr(f'{v:g}')} color={quoteattr(c)} "
            f"alpha=\"255\" label={quoteattr(label)}/>" for v, c, label in items)
        renderer = ("    <rasterrenderer type=\"paletted\" band=\"1\" opacity=\"1\" "
                    "alphaBand=\"-1\">\n      <colorPalette>\n" + entries
                    + "\n      </colorPalette>\n    </rasterrenderer>")
    else:
        lo = items[0][0] if items else 0.0
        hi = items[-1][0] if items else 1.0
        stops = "\n".join(
            f"          <item value={quoteattr(repr(float(v)))} color={quoteattr(c)} "
            f"alpha=\"255\" label={quoteattr(label)}/>" for v, c, label in items)
        renderer = (
            f"    <rasterrenderer type=\"singlebandpseudocolor\" band=\"1\" opacity=\"1\" "
            f"alphaBand=\"-1\" classificationMin={quoteattr(repr(float(lo)))} "
            f"classificationMax={quoteattr(repr(float(hi)))}>\n"
            "      <rastershader>\n"
            "        <colorrampshader colorRampType=\"INTERPOLATED\" clip=\"0\">\n"
            + stops + "\n        </colorrampshader>\n      </rastershader>\n"
            "    </rasterrenderer>")
    return ("<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>\n"
            f"<qgis>\n  <!-- {_comment(style.label)}: the colours of the aquitardmap map -->\n"
            "  <pipe>\n" + renderer + "\n  </pipe>\n</qgis>\n")


def _comment(text: str) -> str:
    return text.replace("--", "–")


def sidecar_name(tif_name: str) -> str:
    """``name.tif`` → ``name.qml``."""
    return str(Path(tif_name).with_suffix(".qml"))


def write_qml_sidecars(run_dir: str | Path, values_of: dict[str, np.ndarray],
                       summary: dict[str, Any],
                       descriptions: dict[str, tuple[str, str]] | None = None) -> list[str]:
    """Write ``name.qml`` beside every grid of ``values_of`` (``{file name: values}``),
    styled as the map styles it (:func:`aquitardmap.outputs.presentation.grid_styles` with the
    run's ``summary``; a grid the map leaves out for a better one, such as
    ``p_thin_approx.tif`` beside ``p_thin.tif``, is styled as it would be on its own);
    returns the names written."""
    run_dir = Path(run_dir)
    styles = {s.file: s for s in grid_styles(set(values_of), summary, descriptions)}
    written = []
    for name, values in values_of.items():
        style = styles.get(name) or next(
            (s for s in grid_styles({name}, summary, descriptions) if s.file == name), None)
        if style is None:
            continue
        (run_dir / sidecar_name(name)).write_text(qml_text(style, values), encoding="utf-8")
        written.append(sidecar_name(name))
    return written
