"""Vector layers of the map: flagged zones, boreholes (with strip-log popups), suggested
new holes (written by ``aquitardmap suggest``), the study area outline. Every property
handed to the page is escaped HTML built here."""

from __future__ import annotations

import json
from typing import Any

import folium
import geopandas as gpd
import numpy as np
import shapely
from affine import Affine
from pyproj import CRS
from rasterio.features import shapes
from shapely.geometry import shape
from shapely.ops import unary_union

from aquitardmap.outputs.formatting import (
    finite_float,
    fmt_area,
    fmt_m,
    fmt_percent,
    fmt_years,
    truthy,
)
from aquitardmap.outputs.presentation import (
    HOLE_STYLES,
    ZONE_COLOURS,
    ZONE_OTHER_COLOUR,
    hole_category_of,
    zone_style,
)
from aquitardmap.outputs.webmap.markup import esc
from aquitardmap.outputs.webmap.overlays import LONLAT
from aquitardmap.outputs.webmap.striplog import parse_log, strip_log_svg
from aquitardmap.outputs.wording import zone_tier_label
from aquitardmap.screening.zones import TIERED_KINDS, ZONE_TIERS


def _missing(value: Any) -> bool:
    if value is None:
        return True
    try:
        return bool(np.isnan(value))
    except (TypeError, ValueError):
        return False


def _text(value: Any) -> str:
    """A column value as plain (unescaped) text; missing is ''."""
    return "" if _missing(value) else str(value).strip()


def _column(gdf: gpd.GeoDataFrame, name: str) -> list[Any]:
    return list(gdf[name]) if name in gdf.columns else [None] * len(gdf)


def feature_collection(gdf: gpd.GeoDataFrame, properties: list[dict[str, Any]]
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


# --------------------------------------------------------------------------- zones


def _zone_tier(row: dict[str, Any]) -> str:
    tier = _text(row.get("tier")).lower()
    return tier if tier in ZONE_TIERS else ""


def zone_tooltip(row: dict[str, Any], labels: dict[str, str],
                 summary: dict[str, Any] | None = None) -> str:
    """Tooltip HTML of one zone: kind, tier, area, probability, thickness, supporting
    holes, reason."""
    kind = _text(row.get("kind")).lower()
    tier = _zone_tier(row)
    label = esc(labels.get(kind, f"Zone ({_text(row.get('kind')) or 'unspecified'})"))
    lines = [f"<b>{label}</b>"]
    if tier:
        lines.append(f"Tier: <b>{esc(zone_tier_label(summary or {}, kind, tier))}</b>"
                     + (" — a hole here would tell" if tier == "possible" else ""))
    lines.append(f"Area: {fmt_area(finite_float(row.get('area_m2')))}")
    p_max = finite_float(row.get("max_probability"))
    p_thin = finite_float(row.get("mean_p_thin"))
    if p_thin is not None:
        most = f", highest {fmt_percent(p_max)}" if kind == "thin" and p_max is not None else ""
        lines.append(f"Chance the clay is thin (mean over the zone): {fmt_percent(p_thin)}"
                     + most)
    p_window = finite_float(row.get("mean_p_window"))
    if p_window is not None:
        most = (f", highest {fmt_percent(p_max)}" if kind == "window" and p_max is not None
                else "")
        lines.append(f"Chance the clay is absent (mean over the zone): "
                     f"{fmt_percent(p_window)}{most}")
    lines.append(f"Clay thickness: mean {fmt_m(finite_float(row.get('mean_thickness_m')))}, least "
                 f"{fmt_m(finite_float(row.get('min_thickness_m')))}, uncertainty ± "
                 f"{fmt_m(finite_float(row.get('mean_sd_m')))}")
    piercing = finite_float(row.get("mean_piercing_per_km2"))
    if kind == "pierced" and piercing is not None:
        lines.append(f"Boreholes through the clay (mean density): {piercing:.0f} per km²")
    travel = finite_float(row.get("mean_travel_time_yr"))
    if travel is not None:
        lines.append(f"Travel time to the aquifer (mean): {fmt_years(travel)}")
    n = finite_float(row.get("n_boreholes"))
    lines.append(f"Boreholes inside: {'n/a' if n is None else int(n)}")
    if kind in TIERED_KINDS and "supporting_holes" in row:
        ids = [i for i in _text(row.get("supporting_holes")).split(",") if i]
        lines.append("Holes proving a window or thin clay in or near the zone: "
                     + (esc(", ".join(ids)) if ids
                        else "none (the zone rests on the interpolation)"))
    reason = _text(row.get("reason"))
    if reason:
        lines.append(f"<i>Why: {esc(reason)}</i>")
    return "<br>".join(lines)


def _tiered(rows: list[dict[str, Any]], summary: dict[str, Any]) -> bool:
    """Whether window and thin zones are shown by tier: some carry a tier, or (none drawn)
    the summary says the run drew them in tiers."""
    window_thin = [r for r in rows if _text(r.get("kind")).lower() in TIERED_KINDS]
    if window_thin:
        return any(_zone_tier(r) for r in window_thin)
    zones = summary.get("zones") if isinstance(summary.get("zones"), dict) else {}
    return bool(zones.get("tiers"))


def zones_layer(gdf: gpd.GeoDataFrame, labels: dict[str, str],
                summary: dict[str, Any] | None = None
                ) -> tuple[folium.GeoJson, list[tuple[str, ...]]]:
    """Zones (lon/lat) as a GeoJson layer with tooltips, and its legend rows
    (fill, edge, label html, swatch css) with the count and area of each kind and tier."""
    summary = summary or {}
    # Drawn in this order: possible tiers, thin, window, then fast paths and pierced zones on
    # top (their outlines are open).
    order = {("thin", "possible"): 0, ("window", "possible"): 1, ("thin", ""): 2,
             ("thin", "likely"): 2, ("window", ""): 3, ("window", "likely"): 3,
             ("fast", ""): 4, ("pierced", ""): 5}
    rows = gdf.drop(columns="geometry").to_dict("records")
    keys = [(_text(r.get("kind")).lower(), _zone_tier(r)) for r in rows]
    pos = sorted(range(len(gdf)), key=lambda i: order.get(keys[i], -1))
    gdf, rows, keys = gdf.iloc[pos], [rows[i] for i in pos], [keys[i] for i in pos]
    props = [{"kind": k, "tier": t, "tooltip_html": zone_tooltip(r, labels, summary)}
             for (k, t), r in zip(keys, rows, strict=True)]
    data = feature_collection(gdf, props)

    def style(feature: dict[str, Any]) -> dict[str, Any]:
        st = zone_style(feature["properties"]["kind"], feature["properties"]["tier"])
        out = {"color": st.colour, "weight": st.weight, "fillColor": st.colour,
               "fillOpacity": st.fill_opacity}
        if st.dash:
            out["dashArray"] = st.dash
        return out

    def highlight(feature: dict[str, Any]) -> dict[str, Any]:
        return {"weight": 4, "fillOpacity": 0.4}

    has = bool(data["features"])
    layer = folium.GeoJson(
        data, name="Flagged zones", style_function=style,
        highlight_function=highlight if has else None,
        tooltip=(folium.GeoJsonTooltip(fields=["tooltip_html"], labels=False,
                                       class_name="aqm-tip", sticky=True) if has else None),
        control=False,
    )
    legend: list[tuple[str, ...]] = []
    areas = [finite_float(r.get("area_m2")) or 0.0 for r in rows]
    tiered = _tiered(rows, summary)
    for k, colour in ZONE_COLOURS.items():
        for tier in (ZONE_TIERS if tiered and k in TIERED_KINDS else ("",)):
            picked = [a for key, a in zip(keys, areas, strict=True)
                      if key[0] == k and (key[1] == tier or not tiered)]
            n = len(picked)
            extra = f" — {n} zone{'s' if n != 1 else ''}, {fmt_area(sum(picked))}" if n \
                else " — none"
            words = esc(labels.get(k, k))
            if tier:
                words += f", <b>{esc(zone_tier_label(summary, k, tier))}</b>"
            # The possible tier: a light fill and a broken outline, as on the map.
            fill = f"{colour}33" if tier == "possible" else colour
            css = "border-style:dashed;" if tier == "possible" else ""
            legend.append((fill, colour, words + extra, css))
    if {k for k, _ in keys} - set(ZONE_COLOURS):
        legend.append((ZONE_OTHER_COLOUR, ZONE_OTHER_COLOUR, "Other zone"))
    if not has:
        legend = [("transparent", "#999999", "No zones were flagged in this run")]
    return layer, legend


# --------------------------------------------------------------------------- boreholes


def _thickness_text(status: str, thickness_m: float | None, category: str) -> str:
    if category == "window" and (thickness_m is None or thickness_m == 0):
        return "none (the hole reached the aquifer without passing through clay)"
    if thickness_m is None:
        return "not known"
    if status == "lower_bound":
        return f"≥ {thickness_m:.1f} m (hole stopped in clay)"
    if status == "unknown":
        return f"{thickness_m:.1f} m (not confirmed: the hole stopped above the clay)"
    return f"{thickness_m:.1f} m"


def _interval_table(log_text: str, names: dict[str, str]) -> str:
    ivs = parse_log(log_text)
    if not ivs:
        return (f'<div class="aqm-log">{esc(log_text)}</div>' if log_text else "")
    rows = "".join(
        f"<tr><td>{iv.top_m:g}–{iv.bottom_m:g} m</td><td>{esc(names.get(iv.unit, iv.unit))}"
        f" [{esc(iv.unit)}]</td><td>{iv.bottom_m - iv.top_m:.1f} m</td></tr>" for iv in ivs)
    return ('<table class="aqm-ivs"><tr><th>Depth</th><th>Unit</th><th>Thickness</th></tr>'
            f"{rows}</table>")


def borehole_popup(row: dict[str, Any], category: str, colours: dict[str, str],
                   names: dict[str, str]) -> str:
    """Popup HTML of one borehole: what it proves, its values, its log as a strip."""
    hole_id = _text(row.get("borehole_id")) or "(no id)"
    status = _text(row.get("status_aquitard")).lower()
    reached = truthy(row.get("reached_aquifer"))
    what = HOLE_STYLES[category].label
    if category == "suspicious":
        what = ("Excluded from the estimates" if truthy(row.get("excluded"))
                else "Suspicious: QA-flagged")
    facts = [
        f"Clay (aquitard) thickness: <b>{_thickness_text(status, finite_float(row.get('aquitard_thickness_m')), category)}</b>",  # noqa: E501
    ]
    depth_aq = finite_float(row.get("depth_to_aquifer_m"))
    facts.append("Reached the aquifer: " + (
        f"yes, at {depth_aq:.1f} m" if reached and depth_aq is not None
        else "yes" if reached else "no"))
    facts.append(f"Ground elevation: {fmt_m(finite_float(row.get('ground_elev_m')))}")
    facts.append(f"Drilled depth: {fmt_m(finite_float(row.get('total_depth_m')))}")
    misfit = finite_float(row.get("dem_misfit_m"))
    if misfit is not None:
        facts.append(f"Collar minus DEM: {misfit:+.1f} m")
    if truthy(row.get("pierces_aquitard")):
        facts.append('<span class="aqm-flag">Pierces the clay into the aquifer: a possible '
                     "vertical conduit unless sealed.</span>")
    flags = _text(row.get("qa_flags"))
    if flags:
        facts.append(f'<span class="aqm-flag">QA: {esc(flags)}</span>')
    if truthy(row.get("excluded")):
        facts.append('<span class="aqm-flag">Not used in the estimates.</span>')
    log_text = _text(row.get("log"))
    svg = strip_log_svg(parse_log(log_text), colours,
                        total_depth_m=finite_float(row.get("total_depth_m")),
                        reached_aquifer=reached, title=f"Log of borehole {hole_id}")
    return (f'<div class="aqm-popup"><div class="aqm-popup-title">{esc(hole_id)}</div>'
            f'<div class="aqm-popup-what">{esc(what)}</div>'
            f'<div class="aqm-popup-body">{svg}<div class="aqm-facts">{"<br>".join(facts)}'
            f"</div></div>{_interval_table(log_text, names)}</div>")


def boreholes_layer(gdf: gpd.GeoDataFrame, colours: dict[str, str], names: dict[str, str]
                    ) -> tuple[folium.GeoJson, dict[str, int]]:
    """Boreholes (lon/lat) as circle markers with popups, and the count per category."""
    props = []
    counts = dict.fromkeys(HOLE_STYLES, 0)
    for row in gdf.drop(columns="geometry").to_dict("records"):
        category = hole_category_of(row)
        counts[category] += 1
        hole_id = esc(_text(row.get("borehole_id")) or "(no id)")
        label = HOLE_STYLES[category].label
        props.append({"category": category,
                      "popup_html": borehole_popup(row, category, colours, names),
                      "tooltip_html": f"<b>{hole_id}</b>: {esc(label)}"})
    data = feature_collection(gdf, props)

    def style(feature: dict[str, Any]) -> dict[str, Any]:
        s = HOLE_STYLES[feature["properties"]["category"]]
        return {"fillColor": s.fill, "color": s.edge}

    marker = folium.CircleMarker(radius=5.5, weight=1.5, fill=True, fill_opacity=0.95,
                                 bubbling_mouse_events=False)
    has = bool(data["features"])
    layer = folium.GeoJson(
        data, name="Boreholes", marker=marker, style_function=style if has else None,
        popup=(folium.GeoJsonPopup(fields=["popup_html"], labels=False, class_name="aqm-pop",
                                   style="",
                                   max_width=380) if has else None),
        tooltip=(folium.GeoJsonTooltip(fields=["tooltip_html"], labels=False,
                                       class_name="aqm-tip") if has else None),
        control=False,
    )
    return layer, counts


# ------------------------------------------------------------------ suggested holes

#: Fill and edge of a suggested new hole (purple, distinct from every borehole style).
SUGGESTED_STYLE = ("#ba68c8", "#4a148c")


def suggested_holes_layer(gdf: gpd.GeoDataFrame) -> folium.GeoJson:
    """Suggested new holes (lon/lat) as large purple circles: tooltip with rank and expected
    reduction of the uncertain area, popup with the reason."""
    props = []
    for row in gdf.drop(columns="geometry").to_dict("records"):
        rank = esc(_text(row.get("rank")))
        red = finite_float(row.get("expected_reduction_m2"))
        gain = f": expected to settle {esc(fmt_area(red))}" if red is not None else ""
        props.append({"tooltip_html": f"<b>Suggested hole {rank}</b>{gain}",
                      "popup_html": f"<b>Suggested hole {rank}</b><br>"
                                    f"{esc(_text(row.get('reason')))}"})
    data = feature_collection(gdf, props)
    has = bool(data["features"])
    fill, edge = SUGGESTED_STYLE
    return folium.GeoJson(
        data, name="Suggested holes",
        marker=folium.CircleMarker(radius=8, weight=3, fill=True, fill_opacity=0.9,
                                   bubbling_mouse_events=False),
        style_function=(lambda _f: {"fillColor": fill, "color": edge}) if has else None,
        popup=(folium.GeoJsonPopup(fields=["popup_html"], labels=False, class_name="aqm-pop",
                                   style="", max_width=380) if has else None),
        tooltip=(folium.GeoJsonTooltip(fields=["tooltip_html"], labels=False,
                                       class_name="aqm-tip") if has else None),
        control=False,
    )


# --------------------------------------------------------------------------- outline


def study_area_outline(values: np.ndarray, transform: Affine, crs: CRS
                       ) -> gpd.GeoDataFrame | None:
    """The outline of the cells with data (the study area), in lon/lat."""
    mask = np.isfinite(values)
    if not mask.any():
        return None
    polys = [shape(geom) for geom, val in shapes(mask.astype(np.uint8), mask=mask,
                                                 transform=transform) if val == 1]
    area = unary_union(polys)
    return gpd.GeoDataFrame(geometry=[area.boundary], crs=crs).to_crs(LONLAT)


def outline_layer(outline: gpd.GeoDataFrame) -> folium.GeoJson:
    data = feature_collection(outline, [{}] * len(outline))
    return folium.GeoJson(
        data, name="Study area", control=False, interactive=False,
        style_function=lambda f: {"color": "#333333", "weight": 1.5, "dashArray": "6 4",
                                  "fill": False},
    )
