"""GIS styles that match the map: the AVI grid's category names and the GeoPackages'
default layer styles.

Read back by independent means: the category names through GDAL itself (the C function
``GDALGetRasterCategoryNames`` of the GDAL library rasterio ships, GDAL API reference), the
``layer_styles`` rows with Python's ``sqlite3`` and ``xml.etree``, the layers with pyogrio.
The table's columns are the ones QGIS creates for it (QGIS source, ``layer_styles`` of the
OGR provider; listed in the QGIS user manual on saving styles to a database); an attributes
table is registered in ``gpkg_contents`` with ``data_type = 'attributes'`` (OGC GeoPackage
Encoding Standard 12-128r18, clause 2.4). Colours are compared with
:mod:`aquitardmap.outputs.presentation`, the map's own drawing decisions.
"""

from __future__ import annotations

import ctypes
import glob
import os
import shutil
import sqlite3
import subprocess
import xml.etree.ElementTree as ET

import pyogrio
import pytest
import rasterio

from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.layerstyles import (
    HOLE_CATEGORY_COLUMN,
    STYLE_TABLE,
    zone_categories,
)
from aquitardmap.outputs.presentation import (
    HOLE_STYLES,
    avi_classes,
    hole_category_of,
    zone_style,
)

QML_COLUMNS = ["id", "f_table_catalog", "f_table_schema", "f_table_name", "f_geometry_column",
               "styleName", "styleQML", "styleSLD", "useAsDefault", "description", "owner",
               "ui", "update_time"]


def _libgdal() -> ctypes.CDLL | None:
    libs = glob.glob(os.path.join(os.path.dirname(rasterio.__file__), "..", "rasterio.libs",
                                  "libgdal*.so*"))
    return ctypes.CDLL(libs[0]) if libs else None


def _gdal_category_names(path) -> list[str]:
    gdal = _libgdal()
    if gdal is None:
        pytest.skip("rasterio's GDAL library not found as a shared object")
    gdal.GDALAllRegister()
    gdal.GDALOpen.restype = ctypes.c_void_p
    gdal.GDALOpen.argtypes = [ctypes.c_char_p, ctypes.c_int]
    gdal.GDALGetRasterBand.restype = ctypes.c_void_p
    gdal.GDALGetRasterBand.argtypes = [ctypes.c_void_p, ctypes.c_int]
    gdal.GDALGetRasterCategoryNames.restype = ctypes.POINTER(ctypes.c_char_p)
    gdal.GDALGetRasterCategoryNames.argtypes = [ctypes.c_void_p]
    gdal.GDALClose.argtypes = [ctypes.c_void_p]
    gdal.GDALGetDescription.restype = ctypes.c_char_p
    gdal.GDALGetDescription.argtypes = [ctypes.c_void_p]
    ds = gdal.GDALOpen(str(path).encode(), 0)
    assert ds, path
    try:
        band = gdal.GDALGetRasterBand(ds, 1)
        # GDAL's GeoTIFF driver reads the .aux.xml lazily, on the first metadata request
        # (as any GIS makes on opening); ask for the band description first
        assert gdal.GDALGetDescription(band)
        names = gdal.GDALGetRasterCategoryNames(band)
        out = []
        i = 0
        while names and names[i] is not None:
            out.append(names[i].decode("utf-8"))
            i += 1
        return out
    finally:
        gdal.GDALClose(ds)


def test_avi_grid_has_the_map_class_words_as_gdal_category_names(demo_run):
    path = demo_run.out_dir / outputs.AVI_CLASS
    names = _gdal_category_names(path)
    classes = avi_classes()
    # GDAL lists categories by pixel value from 0 (0 is nodata here: no name)
    assert names[0] == ""
    assert {c.code: names[c.code] for c in classes} == {c.code: c.label for c in classes}
    assert "Moderate vulnerability (resistance 100–1000 years)" in names
    assert path.name + ".aux.xml" in demo_run.summary["outputs"]
    with rasterio.open(path) as src:  # the colour table is still there
        cmap = src.colormap(1)
    assert cmap[3][:3] == tuple(int(classes[2].colour[i:i + 2], 16) for i in (1, 3, 5))


def _style_row(gpkg, layer):
    con = sqlite3.connect(gpkg)
    try:
        cols = [r[1] for r in con.execute(f"PRAGMA table_info({STYLE_TABLE})")]
        rows = con.execute(f"SELECT * FROM {STYLE_TABLE} WHERE f_table_name = ? AND "
                           "useAsDefault", (layer,)).fetchall()
        contents = con.execute("SELECT data_type FROM gpkg_contents WHERE table_name = ?",
                               (STYLE_TABLE,)).fetchall()
        geom = con.execute("SELECT column_name FROM gpkg_geometry_columns WHERE "
                           "table_name = ?", (layer,)).fetchone()[0]
    finally:
        con.close()
    assert cols == QML_COLUMNS
    assert contents == [("attributes",)]
    assert len(rows) == 1
    row = dict(zip(cols, rows[0], strict=True))
    assert row["f_geometry_column"] == geom
    assert row["update_time"].endswith("Z")
    return row


def _categories(qml: str) -> dict[str, tuple[str, dict[str, str]]]:
    root = ET.fromstring(qml)
    r = root.find("renderer-v2")
    assert r.get("type") == "categorizedSymbol"
    symbols = {s.get("name"): {o.get("name"): o.get("value") for o in s.iter("Option")
                               if o.get("type") == "QString"} for s in r.iter("symbol")}
    return {c.get("value"): (c.get("label"), symbols[c.get("symbol")])
            for c in r.iter("category")}


def _qgis_rgba(hex_colour: str, alpha: float = 1.0) -> str:
    h = hex_colour.lstrip("#")
    return ",".join(str(int(h[i:i + 2], 16)) for i in (0, 2, 4)) + f",{round(255 * alpha)}"


def test_zones_gpkg_default_style_colours_kinds_and_tiers_as_the_map(demo_run):
    gpkg = demo_run.out_dir / outputs.ZONES
    row = _style_row(gpkg, outputs.ZONES_LAYER)
    cats = _categories(row["styleQML"])
    assert ET.fromstring(row["styleQML"]).find("renderer-v2").get("attr").count('"tier"')
    expected = {f"{k}:{t}" for k, t in [("window", "likely"), ("window", "possible"),
                                         ("window", ""), ("thin", "likely"),
                                         ("thin", "possible"), ("thin", ""), ("fast", ""),
                                         ("pierced", "")]}
    assert set(cats) == expected
    for value, (_label, props) in cats.items():
        kind, tier = value.split(":")
        st = zone_style(kind, tier)
        assert props["outline_color"] == _qgis_rgba(st.colour)
        assert props["color"] == _qgis_rgba(st.colour, st.fill_opacity)
        assert float(props["outline_width"]) == st.weight
        assert props.get("customdash", "") == st.dash.replace(" ", ";")
    assert "possible" in cats["window:possible"][0]
    # every zone of the run falls in a category
    zones = pyogrio.read_dataframe(gpkg, layer=outputs.ZONES_LAYER)
    assert len(zones)
    assert {f"{k}:{t or ''}" for k, t in zip(zones["kind"], zones["tier"], strict=True)} <= expected
    assert [c[0] for c in zone_categories(demo_run.summary)] == list(cats)


def test_boreholes_gpkg_default_style_draws_the_map_categories(demo_run):
    gpkg = demo_run.out_dir / outputs.BOREHOLES
    row = _style_row(gpkg, outputs.BOREHOLES_LAYER)
    cats = _categories(row["styleQML"])
    assert ET.fromstring(row["styleQML"]).find("renderer-v2").get("attr") == \
        HOLE_CATEGORY_COLUMN
    assert list(cats) == list(HOLE_STYLES)
    for key, (label, props) in cats.items():
        assert label == HOLE_STYLES[key].label
        assert props["color"] == _qgis_rgba(HOLE_STYLES[key].fill)
        assert props["outline_color"] == _qgis_rgba(HOLE_STYLES[key].edge)
    holes = pyogrio.read_dataframe(gpkg, layer=outputs.BOREHOLES_LAYER)
    assert len(holes) and set(holes[HOLE_CATEGORY_COLUMN]) <= set(HOLE_STYLES)
    # the column says what the map draws for each hole
    records = holes.drop(columns=["geometry", HOLE_CATEGORY_COLUMN]).to_dict("records")
    assert list(holes[HOLE_CATEGORY_COLUMN]) == [hole_category_of(r) for r in records]
    # the style table does not hide the feature layer from GDAL
    layers = [name for name, _ in pyogrio.list_layers(gpkg)]
    assert outputs.BOREHOLES_LAYER in layers


@pytest.mark.skipif(shutil.which("qgis_process") is None, reason="QGIS not installed")
def test_qgis_loads_the_zones_layer_with_its_default_style(demo_run, tmp_path):
    # qgis_process runs an algorithm on the layer; "native:savefeatures" only needs it to
    # load; a style QGIS cannot parse would be reported on stderr
    gpkg = demo_run.out_dir / outputs.ZONES
    out = subprocess.run(["qgis_process", "run", "native:savefeatures", "--",
                          f"INPUT={gpkg}|layername={outputs.ZONES_LAYER}",
                          f"OUTPUT={tmp_path / 'copy.gpkg'}"],
                         capture_output=True, text=True, timeout=300,
                         env={**os.environ, "QT_QPA_PLATFORM": "offscreen"})
    assert out.returncode == 0, out.stderr
    assert "style" not in out.stderr.lower()
