"""``map.html``, the planners' interactive map, put together from the files of one run folder
(what the page shows: :mod:`aquitardmap.outputs.webmap`)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import folium
import numpy as np

from aquitardmap.files import write_text_atomically
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.presentation import HOLE_STYLES, PROTECTION, GridStyle, unit_colours
from aquitardmap.outputs.runfolder import (
    GridData,
    project_crs,
    read_grid,
    read_layer,
    read_summary,
    styles_in,
)
from aquitardmap.outputs.webmap.assets import (
    EXTERNAL_REF,
    find_web_assets,
    inline_css,
    inline_js,
)
from aquitardmap.outputs.webmap.features import (
    SUGGESTED_STYLE,
    boreholes_layer,
    outline_layer,
    study_area_outline,
    suggested_holes_layer,
    zones_layer,
)
from aquitardmap.outputs.webmap.markup import RawHtml, esc
from aquitardmap.outputs.webmap.overlays import (
    LONLAT,
    class_legend,
    colour_legend,
    colour_scale,
    colourise,
    colourise_classes,
    png_data_url,
    swatch_legend,
    warp_for_display,
)
from aquitardmap.outputs.webmap.page import (
    PageScript,
    caution_html,
    crs_label,
    header_html,
    js_config,
    library_missing_html,
    lonlat_to_xy_fit,
    panel_html,
    readout_config,
    static_text,
)
from aquitardmap.outputs.wording import zone_labels

GRID_PANE = "aqmGrids"
OVERLAY_OPACITY_PCT = 75
#: Values kept in the page for the click read-out (float32 each, ~5.3 bytes in base64).
MAX_READOUT_VALUES = 1_500_000


def _union_bounds(boxes: list[tuple[float, float, float, float]]
                  ) -> tuple[float, float, float, float] | None:
    if not boxes:
        return None
    arr = np.array(boxes, dtype=float)
    return (float(arr[:, 0].min()), float(arr[:, 1].min()), float(arr[:, 2].max()),
            float(arr[:, 3].max()))


def _build_map(run_dir: Path, summary: dict[str, Any], *, self_contained: bool,
               max_overlay_cells: int) -> str:
    crs = project_crs(run_dir, summary)
    assets = find_web_assets() if self_contained else None

    fmap = folium.Map(tiles=None, control_scale=False, prefer_canvas=True, zoom_start=2,
                      zoom_snap=0.25, zoom_delta=0.5)
    # Only Leaflet is needed: the page uses no Bootstrap, jQuery or icon fonts.
    if self_contained:
        fmap.default_js, fmap.default_css = [], []
    else:
        fmap.default_js = [("leaflet", dict(folium.Map.default_js)["leaflet"])]
        fmap.default_css = [("leaflet_css", dict(folium.Map.default_css)["leaflet_css"])]
    root = fmap.get_root()
    name = str((summary.get("project") or {}).get("name") or "").strip()
    root.title = esc(name or "Aquitard screening map")
    if assets is not None:
        root.header.add_child(RawHtml(f"<style>{inline_css(assets)}</style>"),
                              name="leaflet_css_inline")
        root.header.add_child(RawHtml(f"<script>{inline_js(assets)}</script>"),
                              name="leaflet_js_inline")
    root.header.add_child(RawHtml(f"<style>{static_text('page.css')}</style>"),
                          name="aqm_css")
    folium.map.CustomPane(GRID_PANE, z_index=350, pointer_events=False).add_to(fmap)

    layers: dict[str, tuple[str, str]] = {}
    toggles: list[tuple[str, str, bool, str]] = []
    if not self_contained:
        tiles = folium.TileLayer("OpenStreetMap", control=False)
        tiles.add_to(fmap)
        layers["basemap"] = (tiles.get_name(), "")
        toggles.append(("basemap", "Background map (OpenStreetMap)", True, ""))

    grid_entries: list[tuple[str, str]] = []
    panel_grids: list[tuple[GridStyle, str]] = []
    boxes: list[tuple[float, float, float, float]] = []
    readout: list[GridData] = []
    sd_grid: GridData | None = None
    outline_source: GridData | None = None
    for i, style in enumerate(styles_in(run_dir, summary)):
        data = read_grid(run_dir, style)
        grid_crs = data.crs or crs
        if grid_crs is None:
            continue
        data = GridData(style, data.values, data.transform, grid_crs)
        shown, bounds = warp_for_display(data.values, data.transform, grid_crs,
                                         max_overlay_cells, classes=bool(style.classes))
        legend_id = f"aqm-legend-{i}"
        if style.classes:
            rgba = colourise_classes(shown, style)
            present = {int(v) for v in np.unique(data.values[np.isfinite(data.values)])}
            legend = class_legend(legend_id, style, present)
        else:
            scaled = shown * style.factor
            scale = colour_scale(scaled, style)
            rgba = (colourise(scaled, scale, style.cmap) if scale is not None
                    else np.zeros(shown.shape + (4,), np.uint8))
            legend = colour_legend(legend_id, style, scale)
        west, south, east, north = bounds
        overlay = folium.raster_layers.ImageOverlay(
            image=png_data_url(rgba), bounds=[[south, west], [north, east]],
            name=esc(style.label), opacity=OVERLAY_OPACITY_PCT / 100, pixelated=True,
            show=False, control=False, interactive=False, pane=GRID_PANE)
        overlay.add_to(fmap)
        grid_entries.append((overlay.get_name(), legend_id))
        panel_grids.append((style, legend))
        boxes.append(bounds)
        if style.file == outputs.AQUITARD_THICKNESS_SD:
            sd_grid = data
        elif style.group == PROTECTION:
            readout.append(data)
        if outline_source is None and style.file == outputs.AQUITARD_THICKNESS:
            outline_source = data

    if outline_source is not None:
        outline = study_area_outline(outline_source.values, outline_source.transform,
                                     outline_source.crs)
        if outline is not None:
            layer = outline_layer(outline)
            layer.add_to(fmap)
            layers["outline"] = (layer.get_name(), "")
            toggles.append(("outline", "Study area outline", True, ""))

    zones = read_layer(run_dir / outputs.ZONES, outputs.ZONES_LAYER, crs, LONLAT)
    if zones is not None:
        layer, rows = zones_layer(zones, zone_labels(summary), summary)
        layer.add_to(fmap)
        layers["zones"] = (layer.get_name(), "aqm-legend-zones")
        toggles.append(("zones", "Flagged zones", True,
                        swatch_legend("aqm-legend-zones", rows, round_swatch=False)))
        if len(zones):
            boxes.append(tuple(zones.total_bounds))

    holes = read_layer(run_dir / outputs.BOREHOLES, outputs.BOREHOLES_LAYER, crs, LONLAT)
    if holes is not None:
        units = [u for u in (summary.get("units") or []) if isinstance(u, dict)]
        names = {str(u.get("code")): str(u.get("name") or u.get("code")) for u in units}
        layer, counts = boreholes_layer(holes, unit_colours(units), names)
        layer.add_to(fmap)
        rows = [(s.fill, s.edge, f"{esc(s.label)} ({counts[cat]})")
                for cat, s in HOLE_STYLES.items() if counts[cat]]
        if not rows:
            rows = [("transparent", "#999999", "No boreholes")]
        layers["holes"] = (layer.get_name(), "aqm-legend-holes")
        toggles.append(("holes", "Boreholes: what each one proves", True,
                        swatch_legend("aqm-legend-holes", rows, round_swatch=True)))
        if len(holes):
            boxes.append(tuple(holes.total_bounds))

    suggested = read_layer(run_dir / outputs.SUGGESTED_HOLES, outputs.SUGGESTED_HOLES_LAYER,
                           crs, LONLAT)
    if suggested is not None and len(suggested):  # written by ``aquitardmap suggest``
        layer = suggested_holes_layer(suggested)
        layer.add_to(fmap)
        layers["suggested"] = (layer.get_name(), "aqm-legend-suggested")
        toggles.append(("suggested", "Suggested new holes", True, swatch_legend(
            "aqm-legend-suggested", [(*SUGGESTED_STYLE, f"Where to drill next "
                                      f"({len(suggested)}, ranked)")], round_swatch=True)))

    extent = _union_bounds(boxes)
    if extent is not None:
        west, south, east, north = extent
        # Keep the right-hand side clear: the layer panel sits there.
        fmap.fit_bounds([[south, west], [north, east]], padding_top_left=(20, 20),
                        padding_bottom_right=(320, 20))
    fit = lonlat_to_xy_fit(crs, extent) if crs is not None and extent is not None else None
    shown_index = 0 if panel_grids else -1
    PageScript(js_config(
        grids=grid_entries, layers=layers, opacity_pct=OVERLAY_OPACITY_PCT, fit=fit,
        readout=readout_config(readout, sd_grid, MAX_READOUT_VALUES),
    )).add_to(fmap)

    root.html.add_child(RawHtml(header_html(summary, crs_label(crs))), name="aqm_header")
    root.html.add_child(RawHtml(panel_html(panel_grids, toggles,
                                           opacity_pct=OVERLAY_OPACITY_PCT,
                                           shown=shown_index)), name="aqm_panel")
    if not self_contained:
        root.html.add_child(RawHtml(library_missing_html()), name="aqm_nolib")
    root.html.add_child(RawHtml(caution_html(summary)), name="aqm_caution")

    page = root.render()
    if self_contained and EXTERNAL_REF.search(page):
        raise RuntimeError("self-contained map still references an external script or style")
    return page


def write_map(run_dir: str | Path, *, summary: dict[str, Any] | None = None,
              self_contained: bool = False, max_overlay_cells: int = 1_000_000) -> Path:
    """Write the interactive map ``run_dir / map.html`` from the files of a run folder.

    Reads the grids, zones and boreholes named in :mod:`aquitardmap.outputs.names` (any may
    be missing; what is there is shown). Each grid overlay is warped to Web Mercator and has
    at most ``max_overlay_cells`` cells.

    ``summary`` is the run's summary as ``summary.json`` holds it
    (:func:`aquitardmap.outputs.summary.json_ready`), given by the run that writes the
    folder; without it ``summary.json`` is read from ``run_dir`` (a folder written before).

    With ``self_contained=True`` the page needs no network: Leaflet is inlined from a local
    copy (see :func:`find_web_assets`) and no background map tiles are used. Otherwise
    Leaflet and the OpenStreetMap background are loaded from the web when the page opens.

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
    if summary is None:
        summary = read_summary(run_dir)
    page = _build_map(run_dir, summary, self_contained=self_contained,
                      max_overlay_cells=max_overlay_cells)
    return write_text_atomically(run_dir / outputs.MAP, page)


__all__ = ["write_map"]
