"""Candidate drilling sites from user files: points, lines, polygons; bad input refused with
the file and the feature number as the line."""

import geopandas as gpd
import numpy as np
import pytest
from pyproj import CRS
from shapely.geometry import (
    GeometryCollection,
    LineString,
    MultiPoint,
    Point,
    Polygon,
    box,
)

from aquitardmap.drilling.candidates import grid_sites, read_candidates
from aquitardmap.errors import InputError
from aquitardmap.grid import make_grid

CRS_M = CRS.from_epsg(32632)
ORIGIN = (548_000.0, 6_712_000.0)
AREA = box(ORIGIN[0], ORIGIN[1], ORIGIN[0] + 2000, ORIGIN[1] + 1000)
GRID = make_grid(AREA, 100.0, CRS_M)


def _p(dx, dy):
    return Point(ORIGIN[0] + dx, ORIGIN[1] + dy)


def _write(tmp_path, geoms, file="cand.geojson", crs=CRS_M, **cols):
    path = tmp_path / file
    gpd.GeoDataFrame(cols or None, geometry=geoms, crs=crs).to_file(path)
    return path


def test_every_cell_is_a_site_by_default():
    s = grid_sites(GRID)
    assert len(s) == 200 and np.all(s.feature == 0)


def test_points_lines_and_polygons_become_sites(tmp_path):
    line = LineString([(ORIGIN[0] + 100, ORIGIN[1] + 500), (ORIGIN[0] + 1100, ORIGIN[1] + 500)])
    poly = box(ORIGIN[0] + 1500, ORIGIN[1] + 100, ORIGIN[0] + 1700, ORIGIN[1] + 300)
    tiny = box(ORIGIN[0] + 1810, ORIGIN[1] + 810, ORIGIN[0] + 1840, ORIGIN[1] + 840)
    path = _write(tmp_path, [_p(250, 250), line, poly, MultiPoint([_p(10, 10), _p(20, 20)]),
                             tiny], name=["A", "Road 12", "Lot 7", None, "Lot 9"])
    s = read_candidates(path, CRS_M, AREA, GRID)
    assert s.source == "cand.geojson"
    by = {f: (s.x_m[s.feature == f], s.y_m[s.feature == f]) for f in range(1, 6)}
    assert len(by[1][0]) == 1 and s.label[s.feature == 1][0] == "A"
    # a 1000 m line sampled every cell width (100 m): 10 sites, half a step in
    assert len(by[2][0]) == 10 and by[2][0].min() == pytest.approx(ORIGIN[0] + 150)
    # a 200 m square over 100 m cells holds four cell centres
    assert len(by[3][0]) == 4 and s.label[s.feature == 3][0] == "Lot 7"
    assert len(by[4][0]) == 2 and s.label[s.feature == 4][0] == ""
    # a polygon too small to hold a cell centre still gives one site inside it
    assert len(by[5][0]) == 1 and tiny.contains(Point(by[5][0][0], by[5][1][0]))


def test_sites_outside_the_study_area_are_refused_with_the_feature_number(tmp_path):
    far = box(ORIGIN[0] + 5000, ORIGIN[1], ORIGIN[0] + 5200, ORIGIN[1] + 200)
    path = _write(tmp_path, [_p(100, 100), _p(2500, 100), far, None,
                             GeometryCollection([_p(5, 5)])], file="bad.gpkg")
    with pytest.raises(InputError) as err:
        read_candidates(path, CRS_M, AREA, GRID)
    probs = {p.line: p for p in err.value.problems}
    assert set(probs) == {2, 3, 4, 5}
    assert all(p.file == "bad.gpkg" for p in probs.values())
    assert "outside the study area" in probs[2].message and "feature 2" in probs[2].message
    assert "entirely outside" in probs[3].message
    assert "no geometry" in probs[4].message
    assert "not supported" in probs[5].message


def test_another_crs_is_refused_naming_both(tmp_path):
    pts = gpd.GeoSeries([_p(100, 100)], crs=CRS_M).to_crs(4326)
    path = _write(tmp_path, list(pts), crs=4326)
    with pytest.raises(InputError) as err:
        read_candidates(path, CRS_M, AREA, GRID)
    (p,) = err.value.problems
    assert p.file == "cand.geojson" and "EPSG:4326" in p.message and "EPSG:32632" in p.message


def test_geojson_without_crs_in_metres_gets_a_hint(tmp_path):
    path = tmp_path / "nocrs.geojson"
    path.write_text('{"type": "FeatureCollection", "features": [{"type": "Feature", '
                    '"properties": {}, "geometry": {"type": "Point", "coordinates": '
                    f'[{ORIGIN[0] + 100}, {ORIGIN[1] + 100}]}}}}]}}')
    with pytest.raises(InputError) as err:
        read_candidates(path, CRS_M, AREA, GRID)
    assert "look like metres" in err.value.problems[0].message


def test_unreadable_and_empty_files_are_refused(tmp_path):
    bad = tmp_path / "junk.geojson"
    bad.write_text("not json at all")
    with pytest.raises(InputError, match="junk.geojson"):
        read_candidates(bad, CRS_M, AREA, GRID)
    with pytest.raises(InputError, match="not found"):
        read_candidates(tmp_path / "missing.gpkg", CRS_M, AREA, GRID)
    empty = tmp_path / "empty.geojson"
    gpd.GeoDataFrame(geometry=[], crs=CRS_M).to_file(empty)
    with pytest.raises(InputError, match="no feature"):
        read_candidates(empty, CRS_M, AREA, GRID)


def test_polygon_partly_outside_keeps_only_cells_inside(tmp_path):
    poly = Polygon([(ORIGIN[0] + 1800, ORIGIN[1] + 400), (ORIGIN[0] + 2400, ORIGIN[1] + 400),
                    (ORIGIN[0] + 2400, ORIGIN[1] + 600), (ORIGIN[0] + 1800, ORIGIN[1] + 600)])
    s = read_candidates(_write(tmp_path, [poly]), CRS_M, AREA, GRID)
    assert len(s) == 4 and np.all(s.x_m < ORIGIN[0] + 2000)
