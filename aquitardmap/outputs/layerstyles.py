"""Default styles of the GeoPackage layers of a run (``zones.gpkg``, ``boreholes.gpkg``), so
that zones and boreholes open in a desktop GIS looking as they do on the map.

Each style is QGIS layer-style XML (``<qgis>`` → ``<renderer-v2 type="categorizedSymbol">``)
stored in the GeoPackage's ``layer_styles`` table, the table QGIS reads a layer's default
style from (``useAsDefault`` true) and writes when a user saves a style into the
GeoPackage. Its columns are the ones QGIS creates (``id``, ``f_table_catalog``,
``f_table_schema``, ``f_table_name``, ``f_geometry_column``, ``styleName``, ``styleQML``,
``styleSLD``, ``useAsDefault``, ``description``, ``owner``, ``ui``, ``update_time``). The
table is a GeoPackage *attributes* table: a row in ``gpkg_contents`` with ``data_type =
'attributes'`` (OGC GeoPackage Encoding Standard 12-128r18, clause 2.4 "Attributes"); it
needs no ``gpkg_extensions`` row, being no extension of the core.

Zones are categorised by kind and tier (the expression ``"kind" || ':' || "tier"``) with
:func:`aquitardmap.outputs.presentation.zone_style`'s colours, fill opacities, outline
weights and dashes; boreholes by their map category (the ``map_category`` column, from
:func:`aquitardmap.outputs.presentation.hole_category_of`) with
:data:`~aquitardmap.outputs.presentation.HOLE_STYLES`' fills, edges and words.
"""

from __future__ import annotations

import sqlite3
from datetime import UTC, datetime
from pathlib import Path
from typing import Any
from xml.sax.saxutils import quoteattr

from aquitardmap.outputs.presentation import HOLE_STYLES, ZONE_COLOURS, zone_style
from aquitardmap.outputs.wording import zone_labels, zone_tier_label

#: Name of the QGIS style table in a GeoPackage.
STYLE_TABLE = "layer_styles"
#: Expression the zone style is categorised on: kind and tier.
ZONE_CATEGORY_EXPRESSION = "\"kind\" || ':' || coalesce(\"tier\", '')"
#: Column of ``boreholes.gpkg`` holding each hole's map category (a key of HOLE_STYLES).
HOLE_CATEGORY_COLUMN = "map_category"
#: Borehole marker diameter on the map (px): twice the map's circle radius of 5.5 px.
HOLE_MARKER_PX = 11.0
#: Borehole marker outline on the map (px).
HOLE_EDGE_PX = 1.5

_TIERS = {"window": ("likely", "possible", ""), "thin": ("likely", "possible", "")}


def _rgba(colour: str, alpha: float = 1.0) -> str:
    """``"#rrggbb"`` and an opacity 0..1 as QGIS's ``"r,g,b,a"`` (0..255)."""
    c = colour.lstrip("#")
    return (f"{int(c[0:2], 16)},{int(c[2:4], 16)},{int(c[4:6], 16)},"
            f"{int(round(255 * alpha))}")


def _options(props: dict[str, str]) -> str:
    lines = "\n".join(f"            <Option type=\"QString\" name={quoteattr(k)} "
                      f"value={quoteattr(v)}/>" for k, v in props.items())
    return "          <Option type=\"Map\">\n" + lines + "\n          </Option>"


def _symbol(name: str, kind: str, layer_class: str, props: dict[str, str]) -> str:
    return (f"      <symbol type={quoteattr(kind)} name={quoteattr(name)} alpha=\"1\" "
            "clip_to_extent=\"1\" force_rhr=\"0\">\n"
            f"        <layer class={quoteattr(layer_class)} enabled=\"1\" locked=\"0\" "
            "pass=\"0\">\n" + _options(props) + "\n        </layer>\n      </symbol>")


def _document(attr: str, categories: list[tuple[str, str, str]], comment: str) -> str:
    """Categorised-renderer QML; ``categories`` are ``(value, label, symbol xml)``."""
    cats = "\n".join(f"      <category render=\"true\" symbol=\"{i}\" value={quoteattr(v)} "
                     f"label={quoteattr(label)}/>" for i, (v, label, _) in
                     enumerate(categories))
    symbols = "\n".join(sym for _, _, sym in categories)
    return ("<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>\n"
            "<qgis styleCategories=\"Symbology\">\n"
            f"  <!-- {comment.replace('--', '–')} -->\n"
            f"  <renderer-v2 type=\"categorizedSymbol\" attr={quoteattr(attr)} "
            "symbollevels=\"0\" enableorderby=\"0\" forceraster=\"0\">\n"
            "    <categories>\n" + cats + "\n    </categories>\n"
            "    <symbols>\n" + symbols + "\n    </symbols>\n"
            "  </renderer-v2>\n</qgis>\n")


def zone_categories(summary: dict[str, Any]) -> list[tuple[str, str, str, str, float, float]]:
    """``(value, label, outline "#rrggbb", dash, fill opacity, weight px)`` of each zone
    kind and tier, as the map draws them; ``value`` is ``kind:tier`` (the tier empty for
    untiered zones)."""
    labels = zone_labels(summary)
    out = []
    for kind in ZONE_COLOURS:
        for tier in _TIERS.get(kind, ("",)):
            st = zone_style(kind, tier)
            tier_words = zone_tier_label(summary, kind, tier)
            label = labels.get(kind, kind) + (f", {tier_words}" if tier_words else "")
            out.append((f"{kind}:{tier}", label, st.colour, st.dash, st.fill_opacity,
                        st.weight))
    return out


def zones_qml(summary: dict[str, Any]) -> str:
    """QGIS style XML of the zones layer (module docstring)."""
    cats = []
    for i, (value, label, colour, dash, fill, weight) in enumerate(zone_categories(summary)):
        props = {"color": _rgba(colour, fill), "style": "solid",
                 "outline_color": _rgba(colour), "outline_style": "solid",
                 "outline_width": f"{weight:g}", "outline_width_unit": "Pixel",
                 "joinstyle": "round"}
        if dash:
            props.update({"use_custom_dash": "1", "customdash": dash.replace(" ", ";"),
                          "customdash_unit": "Pixel"})
        cats.append((value, label, _symbol(str(i), "fill", "SimpleFill", props)))
    return _document(ZONE_CATEGORY_EXPRESSION, cats,
                     "zones by kind and tier: the colours of the aquitardmap map")


def holes_qml() -> str:
    """QGIS style XML of the boreholes layer (module docstring)."""
    cats = []
    for i, (key, st) in enumerate(HOLE_STYLES.items()):
        props = {"name": "circle", "color": _rgba(st.fill), "outline_color": _rgba(st.edge),
                 "outline_style": "solid", "outline_width": f"{HOLE_EDGE_PX:g}",
                 "outline_width_unit": "Pixel", "size": f"{HOLE_MARKER_PX:g}",
                 "size_unit": "Pixel"}
        cats.append((key, st.label, _symbol(str(i), "marker", "SimpleMarker", props)))
    return _document(HOLE_CATEGORY_COLUMN, cats,
                     "boreholes by what they prove: the colours of the aquitardmap map")


_CREATE = (f"CREATE TABLE IF NOT EXISTS {STYLE_TABLE} ("
           "id INTEGER PRIMARY KEY AUTOINCREMENT, f_table_catalog TEXT(256), "
           "f_table_schema TEXT(256), f_table_name TEXT(256), f_geometry_column TEXT(256), "
           "styleName TEXT(30), styleQML TEXT, styleSLD TEXT, useAsDefault BOOLEAN, "
           "description TEXT, owner TEXT(30), ui TEXT(30), update_time DATETIME "
           "DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ','now')))")


def write_layer_style(gpkg: str | Path, layer: str, qml: str, *, style_name: str,
                      description: str = "") -> None:
    """Store ``qml`` as the default style of ``layer`` in the GeoPackage ``gpkg``.

    One SQLite transaction creates the ``layer_styles`` table if needed, registers it in
    ``gpkg_contents`` as an attributes table, clears the layer's earlier default and adds
    the style: the file gets all of it or none. The geometry column is read from
    ``gpkg_geometry_columns``."""
    now = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z"
    con = sqlite3.connect(str(gpkg))
    try:
        with con:
            row = con.execute("SELECT column_name FROM gpkg_geometry_columns WHERE "
                              "table_name = ?", (layer,)).fetchone()
            if row is None:
                raise ValueError(f"{gpkg}: no feature layer {layer!r} to style")
            con.execute(_CREATE)
            con.execute("INSERT OR IGNORE INTO gpkg_contents (table_name, data_type, "
                        "identifier, description, last_change) VALUES (?, 'attributes', ?, "
                        "?, ?)", (STYLE_TABLE, STYLE_TABLE, "QGIS layer styles", now))
            con.execute(f"UPDATE {STYLE_TABLE} SET useAsDefault = 0 WHERE f_table_name = ?",
                        (layer,))
            con.execute(f"INSERT INTO {STYLE_TABLE} (f_table_catalog, f_table_schema, "
                        "f_table_name, f_geometry_column, styleName, styleQML, styleSLD, "
                        "useAsDefault, description, owner, ui, update_time) VALUES "
                        "('', '', ?, ?, ?, ?, '', 1, ?, '', NULL, ?)",
                        (layer, row[0], style_name, qml, description, now))
    finally:
        con.close()
