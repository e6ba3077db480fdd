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
    markercluster_css,
    markercluster_js,
)
from aquitardmap.outputs.webmap.features import (
    SUGGESTED_STYLE,
    hole_records,
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
from aquitardmap.outputs.webmap.relief import relief_image
from aquitardmap.outputs.wording import zone_labels

GRID_PANE = "aqmGrids"
RELIEF_PANE = "aqmRelief"
#: What ``[map] background`` may be (:class:`aquitardmap.config.settings.MapSettings`).
BACKGROUNDS = ("tiles", "none", "relief")
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


def resolve_background(background: str | None, self_contained: bool) -> str:
    """The background a map gets: the one asked for, by default tiles (a map that fetches
    its library) or the DEM relief (a self-contained map); a self-contained map never
    fetches tiles, so it shows the relief in their place."""
    if background is None or (self_contained and background == "tiles"):
        return "relief" if self_contained else "tiles"
    return background


def _build_map(run_dir: Path, summary: dict[str, Any], *, self_contained: bool,
               max_overlay_cells: int, background: str, dem_path: Path | None) -> str:
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
    root.header.add_child(RawHtml(f"<style>{markercluster_css()}</style>"),
                          name="markercluster_css")
    root.header.add_child(RawHtml(f"<style>{static_text('page.css')}</style>"),
                          name="aqm_css")
    # After Leaflet (which a fetching map loads in the head); inert when Leaflet is missing.
    root.html.add_child(RawHtml("<script>if (typeof L !== 'undefined') {\n"
                                f"{markercluster_js()}\n}}</script>"),
                        name="markercluster_js")
    folium.map.CustomPane(RELIEF_PANE, z_index=250, pointer_events=False).add_to(fmap)
    folium.map.CustomPane(GRID_PANE, z_index=350, pointer_events=False).add_to(fmap)

    layers: dict[str, tuple[str, str]] = {}
    toggles: list[tuple[str, str, bool, str]] = []
    if background == "tiles" and not self_contained:
        tiles = folium.TileLayer("OpenStreetMap", control=False)
        tiles.add_to(fmap)
        layers["basemap"] = (tiles.get_name(), "")
        toggles.append(("basemap", "Background map (OpenStreetMap)", True, ""))
    relief = (relief_image(dem_path, crs, max_overlay_cells)
              if background == "relief" and dem_path is not None and dem_path.is_file()
              else None)
    if relief is not None:
        rgba, (west, south, east, north) = relief
        overlay = folium.raster_layers.ImageOverlay(
            image=png_data_url(rgba), bounds=[[south, west], [north, east]],
            name="Shaded relief", opacity=1.0, show=False, control=False, interactive=False,
            pane=RELIEF_PANE)
        overlay.add_to(fmap)
        layers["relief"] = (overlay.get_name(), "")
        toggles.append(("relief", "Background: shaded relief of the DEM", True, ""))

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
    hole_data = None
    if holes is not None:
        units = [u for u in (summary.get("units") or []) if isinstance(u, dict)]
        names = {str(u.get("code")): str(u.get("name") or u.get("code")) for u in units}
        hole_data = hole_records(holes, unit_colours(units), names)
        counts = hole_data.counts
        rows = [(s.fill, s.edge, f"{esc(s.label)} ({counts[cat]})")
                for cat, s in HOLE_STYLES.items() if counts[cat]]
        if not rows:
            rows = [("transparent", "#999999", "No boreholes")]
        else:
            rows.append(("#dfe7ee", "#46627a", "Numbered circle: holes grouped at this zoom "
                         "(click or zoom in); holes proving a window or thin clay are "
                         "never grouped"))
        layers["holes"] = ("null", "aqm-legend-holes")  # drawn by holes.js
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
    fit = lonlat_to_xy_fit(crs, extent) if crs is not None and extent is not None else None
    shown_index = 0 if panel_grids else -1
    # The page fits the opening view to ``extent`` beside the layer panel (page.js).
    PageScript(js_config(
        grids=grid_entries, layers=layers, opacity_pct=OVERLAY_OPACITY_PCT, fit=fit,
        readout=readout_config(readout, sd_grid, MAX_READOUT_VALUES),
        extent=None if extent is None else [[extent[1], extent[0]], [extent[3], extent[2]]],
        holes=None if hole_data is None else hole_data.as_config(),
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
              self_contained: bool = False, max_overlay_cells: int = 1_000_000,
              background: str | None = None, dem_path: str | Path | None = None) -> Path:
    """Write the interactive map ``run_dir / map.html`` from the files of a run folder.

    Reads the grids, zones and boreholes named in :mod:`aquitardmap.outputs.names` (any may
    be missing; what is there is shown). Each grid overlay is warped to Web Mercator and has
    at most ``max_overlay_cells`` cells and
    :data:`~aquitardmap.outputs.webmap.overlays.MAX_OVERLAY_SIDE_PX` pixels on its long
    side. The boreholes are carried once as compact data; the page draws them (clustered
    by zoom, holes proving a window or thin clay never clustered) and builds a hole's
    popup when it opens.

    ``background``: ``"tiles"`` (OpenStreetMap, fetched when the page opens), ``"none"``,
    or ``"relief"`` (a shaded relief of the DEM at ``dem_path``, kept in the page); None:
    see :func:`resolve_background`.

    ``summary`` is the run's summary as ``summary.json`` holds it
    (:func:`aquitardmap.outputs.summary.json_ready`), given by the run that writes the
    folder; without it ``summary.json`` is read from ``run_dir`` (a folder written before).

    With ``self_contained=True`` the page needs no network: Leaflet is inlined from a local
    copy (the package's own, see :func:`find_web_assets`) and no background map tiles are
    used. Otherwise Leaflet (and the OpenStreetMap background, if chosen) are loaded from
    the web when the page opens; the marker-cluster plugin is always inlined.

    The file is written to a temporary name in ``run_dir`` and moved into place, so a
    reader never sees half a map. Returns the path of ``map.html``.

    Raises:
        NotADirectoryError: ``run_dir`` is not a folder.
        ValueError: ``max_overlay_cells`` is less than 1, or an unknown ``background``.
        WebAssetsNotFound: ``self_contained`` and no local Leaflet was found.
    """
    run_dir = Path(run_dir)
    if not run_dir.is_dir():
        raise NotADirectoryError(f"run folder not found: {run_dir}")
    if max_overlay_cells < 1:
        raise ValueError(f"max_overlay_cells must be at least 1, got {max_overlay_cells}")
    if background is not None and background not in BACKGROUNDS:
        raise ValueError(f"background must be one of {', '.join(BACKGROUNDS)}, "
                         f"got {background!r}")
    if summary is None:
        summary = read_summary(run_dir)
    page = _build_map(run_dir, summary, self_contained=self_contained,
                      max_overlay_cells=max_overlay_cells,
                      background=resolve_background(background, self_contained),
                      dem_path=None if dem_path is None else Path(dem_path))
    return write_text_atomically(run_dir / outputs.MAP, page)


__all__ = ["BACKGROUNDS", "resolve_background", "write_map"]
