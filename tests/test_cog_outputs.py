"""The GeoTIFFs a run writes are Cloud-Optimized GeoTIFFs that open in a GIS as they look
on the map.

Reference: rio-cogeo's ``cog_validate`` (PyPI), an independent validator of the COG layout
(tiles, overviews after the main image, the header's order of IFDs; cogeo.org); the
colour table of ``avi_class.tif`` is read back with rasterio and compared with the map's
AVI colours (:func:`aquitardmap.outputs.presentation.avi_classes`).
"""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from pyproj import CRS
from rio_cogeo.cogeo import cog_validate
from shapely.geometry import box

from aquitardmap.grid import COG_BLOCK_PX, make_grid, read_raster, write_raster
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.presentation import avi_classes


def _hex(rgba: tuple[int, int, int, int]) -> str:
    return "#{:02x}{:02x}{:02x}".format(*rgba[:3])


@pytest.mark.parametrize("dtype", ["float32", "uint8"])
def test_written_raster_is_a_valid_cog_with_overviews_and_metadata(tmp_path, dtype):
    # 30 km × 20 km at 50 m (600 × 400 cells): larger than one tile, so overviews are made.
    g = make_grid(box(0, 0, 30_000, 20_000), 50.0, CRS.from_epsg(32632))
    rng = np.random.default_rng(0)
    values = rng.uniform(1, 5, (g.height, g.width)).round() if dtype == "uint8" else \
        rng.uniform(0, 40, (g.height, g.width))
    values[0, 0] = np.nan
    path = write_raster(tmp_path / "grid.tif", values, g, dtype=dtype,
                        nodata=0 if dtype == "uint8" else -9999.0,
                        description="total clay thickness", units="m")
    valid, errors, _warnings = cog_validate(str(path))
    assert valid, errors
    with rasterio.open(path) as src:
        assert src.profile["tiled"] and src.block_shapes[0] == (COG_BLOCK_PX, COG_BLOCK_PX)
        assert src.overviews(1)  # internal overviews
        assert src.compression.value.lower() == "deflate"
        assert src.descriptions == ("total clay thickness",)
        assert src.tags(1)["units"] == "m"
        assert src.nodata is not None
    back, *_ = read_raster(path)
    assert np.isnan(back[0, 0])
    ok = np.isfinite(values)
    assert np.allclose(back[ok], values[ok].astype(dtype), atol=1e-4)


def test_demo_run_geotiffs_are_cogs_and_avi_classes_carry_the_map_colours(demo_run):
    folder = demo_run.out_dir
    tifs = sorted(folder.glob("*.tif"))
    assert len(tifs) >= 10
    for path in tifs:
        valid, errors, _ = cog_validate(str(path))
        assert valid, (path.name, errors)
    with rasterio.open(folder / outputs.AVI_CLASS) as src:
        cmap = src.colormap(1)
    for c in avi_classes():
        assert _hex(cmap[c.code]) == c.colour.lower(), c
