"""Coordinate sanity: every way the inputs' CRSs can disagree, and what the tool does.

Transformations are checked against pyproj (a reference library), the study area against
shapely; the data are a small invented project.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import numpy as np
import projectgen as pg
import pytest
import rasterio
from affine import Affine
from pyproj import Transformer
from shapely.geometry import box, shape

import aquitardmap
from aquitardmap.errors import InputError
from aquitardmap.inputs.load import load_inputs

CRS = "EPSG:32632"
X0, Y0 = 500_000.0, 6_700_000.0


def _spec(**kw) -> pg.Spec:
    units = [pg.UnitSpec("CLAY", "aquitard", 0.4, 1e-9, "none", 1.0),
             pg.UnitSpec("GRAV", "aquifer", 0.25, 1e-3, "none", 1.0)]
    holes = []
    for i, (fx, fy, t) in enumerate([(0.1, 0.1, 8.0), (0.9, 0.2, 3.0), (0.5, 0.9, 12.0),
                                     (0.2, 0.7, 0.0), (0.8, 0.8, 6.0), (0.5, 0.4, 9.0)]):
        ivs = ([(0.0, t, "CLAY")] if t else []) + [(t, t + 4.0, "GRAV")]
        holes.append(pg.HoleSpec(f"C-{i}", X0 + fx * 1000, Y0 + fy * 1000, 40.0, t + 4.0,
                                 ivs))
    base = dict(crs=CRS, origin=(X0, Y0), extent_m=1000.0, cell_size_m=100.0, buffer_m=200.0,
                units=units, holes=holes, settings={}, with_samples=False)
    base.update(kw)
    return pg.Spec(**base)


def _load(spec: pg.Spec, tmp_path: Path, **files: bytes):
    r = pg.render(spec)
    r.binary.update(files)
    root = r.write(tmp_path / "p")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_inputs(root)


def _refused(spec: pg.Spec, tmp_path: Path, **files: bytes) -> list[str]:
    with pytest.raises(InputError) as exc:
        _load(spec, tmp_path, **files)
    return [str(p) for p in exc.value.problems]


def _notes(inputs) -> str:
    return "\n".join(str(w) for w in inputs.warnings)


def _dem(crs: str, bounds: tuple[float, float, float, float], value: float = 40.0,
         with_crs: bool = True) -> bytes:
    from rasterio.io import MemoryFile

    west, south, east, north = bounds
    n = 16
    profile = {"driver": "GTiff", "width": n, "height": n, "count": 1, "dtype": "float32",
               "nodata": -9999.0,
               "transform": Affine((east - west) / n, 0, west, 0, -(north - south) / n, north)}
    if with_crs:
        profile["crs"] = rasterio.crs.CRS.from_user_input(crs)
    with MemoryFile() as mem:
        with mem.open(**profile) as dst:
            dst.write(np.full((n, n), value, dtype="float32"), 1)
        return mem.read()


def _geojson(coords: list[tuple[float, float]], crs: str | None) -> bytes:
    doc: dict = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {},
         "geometry": {"type": "Polygon", "coordinates": [coords + coords[:1]]}}]}
    if crs is not None:
        doc["crs"] = {"type": "name", "properties": {"name": crs}}
    return json.dumps(doc).encode()


def _ring(x0, y0, x1, y1, n=10):
    """Densified rectangle ring (so that it survives reprojection as a near-rectangle)."""
    f = np.linspace(0, 1, n, endpoint=False)
    return ([(x0 + (x1 - x0) * t, y0) for t in f] + [(x1, y0 + (y1 - y0) * t) for t in f]
            + [(x1 - (x1 - x0) * t, y1) for t in f] + [(x0, y1 - (y1 - y0) * t) for t in f])


LONLAT = Transformer.from_crs(CRS, "EPSG:4326", always_xy=True)


# ------------------------------------------------------------------------------ collars


def test_coordinates_that_look_like_degrees_in_a_metre_crs_are_refused_at_their_cell(
        tmp_path):
    spec = _spec()
    spec.holes[2].x, spec.holes[2].y = 9.7, 60.4
    probs = _refused(spec, tmp_path)
    assert any(p.startswith("collars.csv, line 4, column 2:") and "degrees" in p
               for p in probs), probs


def test_swapped_x_and_y_are_refused_as_outside_the_crs_area(tmp_path):
    spec = _spec()
    h = spec.holes[1]
    h.x, h.y = h.y, h.x
    probs = _refused(spec, tmp_path)
    assert any(p.startswith("collars.csv, line 3, column 2:") and "swapped" in p
               for p in probs), probs


def test_a_mistyped_coordinate_that_makes_a_huge_grid_is_refused_before_allocating(
        tmp_path):
    spec = _spec()
    spec.holes[4].x += 400_000  # one digit wrong: still inside the CRS's area
    probs = _refused(spec, tmp_path)
    msg = next(p for p in probs if "max_cells" in p)
    assert msg.startswith("project.toml, line 6, column 1:") and "C-4" in msg


# ----------------------------------------------------------------------------------- DEM


def test_dem_in_another_crs_is_read_at_the_transformed_collars_with_a_note(tmp_path):
    # The DEM in lon/lat covers the holes; the collar elevations (40 m) match it, so a
    # correct transformation gives a misfit of 0 at every collar.
    west, south = LONLAT.transform(X0 - 500, Y0 - 500)
    east, north = LONLAT.transform(X0 + 1500, Y0 + 1500)
    inputs = _load(_spec(), tmp_path, **{"dem.tif": _dem("EPSG:4326",
                                                         (west, south, east, north))})
    assert "DEM is in EPSG:4326; collars were transformed" in _notes(inputs)
    np.testing.assert_allclose(inputs.columns["dem_misfit_m"], 0.0, atol=1e-4)


def test_dem_without_crs_is_taken_in_the_project_crs_with_a_note(tmp_path):
    dem = _dem(CRS, (X0 - 500, Y0 - 500, X0 + 1500, Y0 + 1500), value=43.0, with_crs=False)
    inputs = _load(_spec(), tmp_path, **{"dem.tif": dem})
    assert "DEM has no CRS; taken as the project CRS" in _notes(inputs)
    np.testing.assert_allclose(inputs.columns["dem_misfit_m"], -3.0, atol=1e-4)


def test_some_collars_outside_the_dem_are_named_in_a_note_and_left_unchecked(tmp_path):
    dem = _dem(CRS, (X0 - 500, Y0 - 500, X0 + 600, Y0 + 1500))  # the western holes only
    inputs = _load(_spec(), tmp_path, **{"dem.tif": dem})
    out = inputs.columns["dem_misfit_m"].isna()
    assert sorted(inputs.columns.index[out]) == ["C-1", "C-4"]
    assert "2 collar(s) fall outside the DEM" in _notes(inputs)
    assert "C-1, C-4" in _notes(inputs)


def test_a_dem_that_covers_no_collar_is_refused_with_a_crs_hint(tmp_path):
    # A DEM declared in the project CRS but written with another's coordinates (here:
    # 100 km off), the classic symptom of a wrong or missing CRS.
    dem = _dem(CRS, (X0 + 1e5, Y0, X0 + 1e5 + 2000, Y0 + 2000))
    probs = _refused(_spec(), tmp_path, **{"dem.tif": dem})
    assert any(p.startswith("dem.tif: none of the 6 collars falls on the DEM")
               and "CRS" in p for p in probs), probs


def test_a_file_that_is_not_a_raster_is_refused_as_the_dem(tmp_path):
    probs = _refused(_spec(), tmp_path, **{"dem.tif": b"not a GeoTIFF at all"})
    assert any(p.startswith("dem.tif: cannot read the DEM") for p in probs), probs


# ------------------------------------------------------------------------------ boundary


def test_boundary_in_lonlat_is_reprojected_to_the_same_area(tmp_path):
    ring = _ring(X0 - 100, Y0 - 100, X0 + 1100, Y0 + 1100)
    lonlat = [LONLAT.transform(x, y) for x, y in ring]
    inputs = _load(_spec(), tmp_path, **{"boundary.geojson": _geojson(lonlat, None)})
    assert "boundary reprojected from EPSG:4326 to the project CRS EPSG:32632" in \
        _notes(inputs)
    want = box(X0 - 100, Y0 - 100, X0 + 1100, Y0 + 1100)
    assert abs(inputs.area.area - want.area) / want.area < 1e-3  # shapely reference
    assert inputs.area.symmetric_difference(want).area / want.area < 1e-3


def test_boundary_in_metres_without_a_crs_member_is_taken_in_the_project_crs(tmp_path):
    # GeoJSON without "crs" means lon/lat (RFC 7946), but these numbers cannot be degrees.
    ring = _ring(X0 - 100, Y0 - 100, X0 + 1100, Y0 + 1100)
    inputs = _load(_spec(), tmp_path, **{"boundary.geojson": _geojson(ring, None)})
    assert "cannot be degrees" in _notes(inputs)
    assert inputs.area.equals(shape({"type": "Polygon", "coordinates": [ring + ring[:1]]}))


def test_boreholes_outside_the_boundary_are_named_in_a_note(tmp_path):
    ring = _ring(X0 - 100, Y0 - 100, X0 + 700, Y0 + 1100)  # the eastern holes are out
    inputs = _load(_spec(), tmp_path, **{"boundary.geojson": _geojson(
        ring, "urn:ogc:def:crs:EPSG::32632")})
    assert "2 borehole(s) lie outside the study area" in _notes(inputs)
    assert "C-1, C-4" in _notes(inputs)


def test_a_boundary_that_holds_no_borehole_is_refused_with_a_crs_hint(tmp_path):
    # The boundary of the right size, declared in another metre CRS (UTM 33N): once
    # reprojected it lies some 600 km away from every hole.
    ring = _ring(X0 - 100, Y0 - 100, X0 + 1100, Y0 + 1100)
    probs = _refused(_spec(), tmp_path, **{"boundary.geojson": _geojson(
        ring, "urn:ogc:def:crs:EPSG::32633")})
    assert any(p.startswith("boundary.geojson: none of the 6 boreholes lies inside the "
                            "study area") and "same CRS" in p for p in probs), probs


def test_a_boundary_that_cannot_be_read_is_refused(tmp_path):
    probs = _refused(_spec(), tmp_path, **{"boundary.geojson": b"{not json"})
    assert any(p.startswith("boundary.geojson: cannot read the boundary") for p in probs)


def test_a_run_with_a_lonlat_boundary_and_dem_passes_the_sanity_contract(tmp_path):
    ring = _ring(X0 - 100, Y0 - 100, X0 + 1100, Y0 + 1100)
    west, south = LONLAT.transform(X0 - 500, Y0 - 500)
    east, north = LONLAT.transform(X0 + 1500, Y0 + 1500)
    r = pg.render(_spec())
    r.binary["boundary.geojson"] = _geojson([LONLAT.transform(x, y) for x, y in ring], None)
    r.binary["dem.tif"] = _dem("EPSG:4326", (west, south, east, north))
    root = r.write(tmp_path / "p")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = aquitardmap.run(root, tmp_path / "out")
    pg.check_result(result)
    pg.check_outputs(tmp_path / "out", result)
