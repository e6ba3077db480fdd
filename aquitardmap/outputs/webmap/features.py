"""Vector layers of the map: flagged zones, boreholes (with strip-log popups), suggested
new holes (written by ``aquitardmap suggest``), the study area outline. Every property
handed to the page is escaped HTML built here."""

from __future__ import annotations

import html
import json
from dataclasses import dataclass
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
    unit_colour,
    zone_style,
)
from aquitardmap.outputs.webmap.markup import esc
from aquitardmap.outputs.webmap.overlays import LONLAT
from aquitardmap.outputs.webmap.striplog import Interval, f1, g6, parse_log, strip_log_svg
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


#: Aquitard status of a hole as the popup data code it: 0 other, 1 lower bound, 2 unknown.
_STATUS_CODES = {"lower_bound": 1, "unknown": 2}
#: Order of the fields of one hole in the page data (:func:`hole_records`).
HOLE_FIELDS = ("lat", "lon", "category", "id_html", "status", "thickness_m", "reached",
               "depth_to_aquifer_m", "ground_elev_m", "total_depth_m", "dem_misfit_m",
               "pierces", "qa_html", "excluded", "log")


def _round1(value: Any) -> float | None:
    """A length for the page, rounded to 0.1 (what the popup shows); None when missing."""
    v = finite_float(value)
    return None if v is None else round(v, 1)


def _thickness_text(status: int, thickness_m: float | None, category: str) -> str:
    if category == "window" and (thickness_m is None or thickness_m == 0):
        return "none (the hole reached the aquifer without passing through clay)"
    if thickness_m is None:
        return "not known"
    if status == 1:
        return f"≥ {thickness_m:.1f} m (hole stopped in clay)"
    if status == 2:
        return f"{thickness_m:.1f} m (not confirmed: the hole stopped above the clay)"
    return f"{thickness_m:.1f} m"


@dataclass(frozen=True)
class HoleData:
    """The boreholes as the page carries them: one compact record per hole (fields in the
    order of :data:`HOLE_FIELDS`; text already escaped; lengths rounded to 0.1 m; the log
    as flat (top m, bottom m, unit index) triples, or its escaped text when it does not
    parse), the categories ``[key, fill, edge, label html]`` and the units
    ``[code html, name html, colour]`` the logs use."""

    records: list[list[Any]]
    categories: list[list[str]]
    units: list[list[str]]
    counts: dict[str, int]

    def as_config(self) -> dict[str, Any]:
        return {"rows": self.records, "cats": self.categories, "units": self.units}


def hole_records(gdf: gpd.GeoDataFrame, colours: dict[str, str], names: dict[str, str]
                 ) -> HoleData:
    """Compact page data of the boreholes (lon/lat) from which the page draws the markers
    and builds each popup when it opens (:func:`hole_popup_html` is the same popup in
    Python)."""
    cats = list(HOLE_STYLES)
    counts = dict.fromkeys(HOLE_STYLES, 0)
    unit_index: dict[str, int] = {}
    records: list[list[Any]] = []
    xy = np.round(shapely.get_coordinates(gdf.geometry.values), 6) if len(gdf) else []
    for (lon, lat), row in zip(xy, gdf.drop(columns="geometry").to_dict("records"),
                               strict=True):
        category = hole_category_of(row)
        counts[category] += 1
        log_text = _text(row.get("log"))
        ivs = parse_log(log_text)
        log: list[Any] | str = []
        for iv in ivs:
            k = unit_index.setdefault(iv.unit, len(unit_index))
            log += [iv.top_m, iv.bottom_m, k]
        if not ivs:
            log = esc(log_text)
        records.append([
            float(lat), float(lon), cats.index(category),
            esc(_text(row.get("borehole_id")) or "(no id)"),
            _STATUS_CODES.get(_text(row.get("status_aquitard")).lower(), 0),
            _round1(row.get("aquitard_thickness_m")), int(truthy(row.get("reached_aquifer"))),
            _round1(row.get("depth_to_aquifer_m")), _round1(row.get("ground_elev_m")),
            _round1(row.get("total_depth_m")), _round1(row.get("dem_misfit_m")),
            int(truthy(row.get("pierces_aquitard"))), esc(_text(row.get("qa_flags"))),
            int(truthy(row.get("excluded"))), log])
    categories = [[k, s.fill, s.edge, esc(s.label)] for k, s in HOLE_STYLES.items()]
    units = [[esc(u), esc(names.get(u, u)), unit_colour(colours, u)] for u in unit_index]
    return HoleData(records, categories, units, counts)


def hole_popup_html(record: list[Any], data: HoleData) -> str:
    """Popup HTML of one hole record: what it proves, its values, its log as a strip
    (``holes.js``'s ``aqmHolePopup`` builds the same text in the browser)."""
    r = dict(zip(HOLE_FIELDS, record, strict=True))
    category = data.categories[r["category"]][0]
    what = HOLE_STYLES[category].label
    if category == "suspicious":
        what = "Excluded from the estimates" if r["excluded"] else "Suspicious: QA-flagged"
    thickness = _thickness_text(r["status"], r["thickness_m"], category)
    facts = [f"Clay (aquitard) thickness: <b>{thickness}</b>"]
    depth_aq = r["depth_to_aquifer_m"]
    facts.append("Reached the aquifer: " + (
        f"yes, at {depth_aq:.1f} m" if r["reached"] and depth_aq is not None
        else "yes" if r["reached"] else "no"))
    facts.append(f"Ground elevation: {fmt_m(r['ground_elev_m'])}")
    facts.append(f"Drilled depth: {fmt_m(r['total_depth_m'])}")
    if r["dem_misfit_m"] is not None:
        facts.append(f"Collar minus DEM: {r['dem_misfit_m']:+.1f} m")
    if r["pierces"]:
        facts.append('<span class="aqm-flag">Pierces the clay into the aquifer: a possible '
                     "vertical conduit unless sealed.</span>")
    if r["qa_html"]:
        facts.append(f'<span class="aqm-flag">QA: {r["qa_html"]}</span>')
    if r["excluded"]:
        facts.append('<span class="aqm-flag">Not used in the estimates.</span>')
    log = r["log"]
    svg, table = "", f'<div class="aqm-log">{log}</div>' if isinstance(log, str) and log else ""
    if isinstance(log, list) and log:
        units = data.units
        ivs = [Interval(log[i], log[i + 1], html.unescape(units[log[i + 2]][0]))
               for i in range(0, len(log), 3)]
        colours = {html.unescape(u[0]): u[2] for u in units}
        svg = strip_log_svg(ivs, colours, total_depth_m=r["total_depth_m"],
                            reached_aquifer=bool(r["reached"]),
                            title=f"Log of borehole {html.unescape(r['id_html'])}")
        rows = "".join(
            f"<tr><td>{g6(log[i])}–{g6(log[i + 1])} m</td><td>{units[log[i + 2]][1]}"
            f" [{units[log[i + 2]][0]}]</td><td>{f1(log[i + 1] - log[i])} m</td></tr>"
            for i in range(0, len(log), 3))
        table = ('<table class="aqm-ivs"><tr><th>Depth</th><th>Unit</th><th>Thickness</th>'
                 f"</tr>{rows}</table>")
    return (f'<div class="aqm-popup"><div class="aqm-popup-title">{r["id_html"]}</div>'
            f'<div class="aqm-popup-what">{esc(what)}</div>'
            f'<div class="aqm-popup-body">{svg}<div class="aqm-facts">{"<br>".join(facts)}'
            f"</div></div>{table}</div>")


def hole_tooltip_html(record: list[Any], data: HoleData) -> str:
    """Tooltip of one hole record: its id and what it proves."""
    r = dict(zip(HOLE_FIELDS, record, strict=True))
    return f"<b>{r['id_html']}</b>: {data.categories[r['category']][3]}"


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
