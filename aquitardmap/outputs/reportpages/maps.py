"""The map pages of the report: total clay thickness, the chances of thin clay and of a
window, travel time and the vulnerability class, two a page, each with the flagged zones
and the boreholes coloured by what they prove, a scale bar and a common legend.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
from matplotlib.colors import BoundaryNorm, ListedColormap, LogNorm, Normalize
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import FuncFormatter

from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.formatting import section
from aquitardmap.outputs.presentation import (
    HOLE_STYLES,
    ZONE_COLOURS,
    ZONE_DASHES,
    ZONE_OTHER_COLOUR,
    GridStyle,
    hole_category_of,
    zone_style,
)
from aquitardmap.outputs.reportpages.frame import Pages, plain_text, wrap_text
from aquitardmap.outputs.runfolder import GridData, project_crs, read_grid, read_layer, styles_in
from aquitardmap.outputs.wording import zone_labels, zone_tier_label
from aquitardmap.screening.zones import TIERED_KINDS, ZONE_TIERS

#: Cells drawn per map at most (larger grids are thinned by striding).
MAX_MAP_CELLS = 1_500_000
#: The maps, in order: (file of the grid, or a list of alternatives).
MAP_FILES: tuple[tuple[str, ...], ...] = (
    (outputs.AQUITARD_THICKNESS,),
    (outputs.P_THIN_PROB, outputs.P_THIN),
    (outputs.TRAVEL_TIME,),
    (outputs.AVI_CLASS,),
)


def _km(x: float, _pos: Any = None) -> str:
    return f"{x / 1000:g}"


def _scale_bar(ax, extent: tuple[float, float, float, float]) -> None:
    x0, x1, y0, y1 = extent
    span = x1 - x0
    target = span / 5
    length = 10 ** math.floor(math.log10(target))
    for m in (5, 2, 1):
        if m * length <= target:
            length *= m
            break
    bx, by = x0 + 0.04 * span, y0 + 0.05 * (y1 - y0)
    ax.plot([bx, bx + length], [by, by], color="black", lw=3, solid_capstyle="butt")
    label = f"{length / 1000:g} km" if length >= 1000 else f"{length:g} m"
    ax.text(bx + length / 2, by + 0.03 * (y1 - y0), label, ha="center", va="bottom",
            fontsize=7, bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.7,
                              "pad": 1})


def _draw_grid(ax, fig: Figure, data: GridData) -> None:
    style = data.style
    values = data.values
    step = max(1, math.ceil(math.sqrt(values.size / MAX_MAP_CELLS)))
    shown = values[::step, ::step]
    t = data.transform
    h, w = values.shape
    extent = (t.c, t.c + t.a * w, t.f + t.e * h, t.f)
    if style.classes:
        codes = [c.code for c in style.classes]
        cmap = ListedColormap([c.colour for c in style.classes])
        norm = BoundaryNorm([c - 0.5 for c in codes] + [codes[-1] + 0.5], cmap.N)
        ax.imshow(np.ma.masked_invalid(shown), extent=extent, cmap=cmap, norm=norm,
                  interpolation="nearest", origin="upper")
        present = set(np.unique(values[np.isfinite(values)]).astype(int).tolist())
        handles = [Patch(facecolor=c.colour, edgecolor="#555555",
                         label=wrap_text(c.label + ("" if c.code in present else " (none here)"),
                                     24)) for c in style.classes]
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=6.3,
                  frameon=False, title="Class", title_fontsize=7, labelspacing=0.8)
        return
    v = np.ma.masked_invalid(shown * style.factor)
    if style.log:
        positive = v[v > 0]
        vmin = float(positive.min()) if positive.count() else 1.0
        vmax = float(positive.max()) if positive.count() else 10.0
        if vmax <= vmin:
            vmax = vmin * 10
        norm = LogNorm(vmin=vmin, vmax=vmax, clip=True)
        v = np.ma.where(v > 0, v, vmin)
    elif style.fixed_range is not None:
        norm = Normalize(*style.fixed_range)
    else:
        lo = float(v.min()) if v.count() else 0.0
        hi = float(v.max()) if v.count() else 1.0
        norm = Normalize(lo, hi if hi > lo else lo + 1.0)
    im = ax.imshow(v, extent=extent, cmap=style.cmap, norm=norm, interpolation="nearest",
                   origin="upper")
    cb = fig.colorbar(im, ax=ax, fraction=0.035, pad=0.02)
    cb.set_label(style.label, fontsize=7)
    cb.ax.tick_params(labelsize=7)


def _zone_linestyle(kind: str, tier: str = "") -> str:
    """Matplotlib line style of a zone outline (:func:`zone_style`): solid, dash-dot for
    the possible tier, broken for the kinds the map draws as open outlines on top
    (:data:`ZONE_DASHES`), dotted for pierced zones."""
    if kind not in ZONE_DASHES:
        return "-." if zone_style(kind, tier).dash else "-"
    return ":" if kind == "pierced" else "--"


def _zone_tiers(zones: gpd.GeoDataFrame) -> list[str]:
    """Each zone's tier, ``""`` where it has none (or the layer has no tier column)."""
    if "tier" not in zones:
        return [""] * len(zones)
    return [t if t in ZONE_TIERS else "" for t in zones["tier"].fillna("").astype(str)]


def _draw_zones_and_holes(ax, zones: gpd.GeoDataFrame | None,
                          holes: gpd.GeoDataFrame | None) -> None:
    if zones is not None and len(zones):
        keys = list(zip(zones["kind"].astype(str).str.lower(), _zone_tiers(zones),
                        strict=True))
        for kind, tier in sorted(set(keys)):
            part = zones[[k == (kind, tier) for k in keys]]
            colour = ZONE_COLOURS.get(kind, ZONE_OTHER_COLOUR)
            part.boundary.plot(ax=ax, color=colour,
                               linewidth=1.3 if kind in ZONE_DASHES else
                               (0.9 if tier == "possible" else 1.1),
                               linestyle=_zone_linestyle(kind, tier))
    if holes is not None and len(holes):
        cats = [hole_category_of(r) for r in holes.drop(columns="geometry").to_dict("records")]
        xs, ys = holes.geometry.x.to_numpy(), holes.geometry.y.to_numpy()
        for cat, style in HOLE_STYLES.items():
            m = np.array([c == cat for c in cats])
            if m.any():
                ax.scatter(xs[m], ys[m], s=9, c=style.fill, edgecolors=style.edge,
                           linewidths=0.5, zorder=5)


def _common_legend(fig: Figure, y: float, zones_label: dict[str, str],
                   summary: dict[str, Any] | None = None) -> None:
    tiered = bool(section(summary or {}, "zones").get("tiers"))
    handles = []
    for k, c in ZONE_COLOURS.items():
        for tier in (ZONE_TIERS if tiered and k in TIERED_KINDS else ("",)):
            words = zones_label.get(k, k)
            if tier:
                words += f", {zone_tier_label(summary or {}, k, tier)}"
            handles.append(Line2D([], [], color=c, lw=1.3, ls=_zone_linestyle(k, tier),
                                  label=words))
    handles += [Line2D([], [], marker="o", ls="", markerfacecolor=s.fill,
                       markeredgecolor=s.edge, markersize=5, label=s.label)
                for s in HOLE_STYLES.values()]
    fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.06, y), ncol=2,
               fontsize=6.6, frameon=False, title="Zones and boreholes", title_fontsize=7.5,
               alignment="left")


def map_pages(pages: Pages, run_dir: Path) -> None:
    """The map pages, two maps a page, of the grids of :data:`MAP_FILES` (and the chance of
    a window) present in ``run_dir``."""
    s = pages.summary
    styles = {st.file: st for st in styles_in(run_dir, s)}
    chosen: list[GridStyle] = []
    for alternatives in MAP_FILES:
        for f in alternatives:
            if f in styles:
                chosen.append(styles[f])
                break
    if outputs.P_WINDOW_PROB in styles:
        chosen.insert(2, styles[outputs.P_WINDOW_PROB])
    crs = project_crs(run_dir, s)
    zones = read_layer(run_dir / outputs.ZONES, outputs.ZONES_LAYER, crs, crs)
    holes = read_layer(run_dir / outputs.BOREHOLES, outputs.BOREHOLES_LAYER, crs, crs)
    labels = zone_labels(s)
    for k in range(0, len(chosen), 2):
        fig = pages.new("Maps" if k == 0 else "Maps (continued)")
        for j, style in enumerate(chosen[k:k + 2]):
            ax = fig.add_axes((0.08, 0.575 - 0.38 * j, 0.70, 0.31))
            ax.set_anchor("N")
            data = read_grid(run_dir, style)
            _draw_grid(ax, fig, data)
            _draw_zones_and_holes(ax, zones, holes)
            t = data.transform
            h, w = data.values.shape
            extent = (t.c, t.c + t.a * w, t.f + t.e * h, t.f)
            ax.set_xlim(extent[0], extent[1])
            ax.set_ylim(extent[2], extent[3])
            ax.set_aspect("equal")
            ax.xaxis.set_major_formatter(FuncFormatter(_km))
            ax.yaxis.set_major_formatter(FuncFormatter(_km))
            ax.tick_params(labelsize=7)
            ax.set_xlabel("Easting (km)", fontsize=7)
            ax.set_ylabel("Northing (km)", fontsize=7)
            ax.set_title(plain_text(style.title), fontsize=9.5, loc="left")
            if style.note:
                ax.text(0.0, -0.135, plain_text(style.note), transform=ax.transAxes, fontsize=6.8,
                        color="#444444", va="top")
            _scale_bar(ax, extent)
        _common_legend(fig, 0.142, labels, s)


__all__ = ["MAP_FILES", "MAX_MAP_CELLS", "map_pages"]
