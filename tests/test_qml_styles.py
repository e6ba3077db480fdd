"""Style sidecars (``name.qml`` beside ``name.tif``) carry the map's colours.

Read back as XML (Python's ``xml.etree``) and compared with what the map draws: the class
colours and words of :func:`aquitardmap.outputs.presentation.avi_classes`, and for continuous grids
the colour ramp of the style (matplotlib's colormap of that name) over the range the map's
legend shows (:func:`aquitardmap.outputs.webmap.overlays.colour_scale`).
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import matplotlib
import numpy as np

from aquitardmap.grid import read_raster
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.presentation import avi_classes, grid_styles
from aquitardmap.outputs.webmap.overlays import colour_scale
from aquitardmap.outputs.webmap.qml import RAMP_STOPS


def _hex(rgba) -> str:
    return "#" + "".join(f"{int(round(255 * c)):02x}" for c in rgba[:3])


def test_every_geotiff_of_the_demo_run_has_a_style_sidecar(demo_run):
    folder = demo_run.out_dir
    for tif in folder.glob("*.tif"):
        qml = tif.with_suffix(".qml")
        assert qml.is_file(), tif.name
        assert qml.name in demo_run.summary["outputs"]
        root = ET.parse(qml).getroot()
        assert root.tag == "qgis" and root.find("pipe/rasterrenderer") is not None


def test_avi_class_sidecar_has_the_map_class_colours_and_words(demo_run):
    root = ET.parse(demo_run.out_dir / "avi_class.qml").getroot()
    r = root.find("pipe/rasterrenderer")
    assert r.get("type") == "paletted"
    entries = {int(e.get("value")): (e.get("color"), e.get("label"))
               for e in r.iter("paletteEntry")}
    assert entries == {c.code: (c.colour.lower(), c.label) for c in avi_classes()}


def test_continuous_sidecars_follow_the_map_ramp_and_range(demo_run):
    folder = demo_run.out_dir
    styles = {s.file: s for s in grid_styles({p.name for p in folder.iterdir()},
                                             demo_run.summary)}
    checked = 0
    for name in (outputs.AQUITARD_THICKNESS, outputs.TRAVEL_TIME, outputs.P_THIN_PROB):
        style = styles[name]
        values, *_ = read_raster(folder / name)
        scale = colour_scale(values * style.factor, style)
        items = list(ET.parse(folder / name.replace(".tif", ".qml")).getroot()
                     .iter("item"))
        assert len(items) == RAMP_STOPS
        cmap = matplotlib.colormaps[style.cmap]
        for i, item in enumerate(items):
            f = i / (RAMP_STOPS - 1)
            shown = scale.vmin + f * (scale.vmax - scale.vmin)
            expect = (10.0 ** shown if scale.log else shown) / style.factor
            assert np.isclose(float(item.get("value")), expect, rtol=1e-9)
            assert item.get("color") == _hex(cmap(f))
        checked += 1
    assert checked == 3
