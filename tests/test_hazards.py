"""Hazard polygons: reading and checking hazards.geojson, and the cut they make."""

from __future__ import annotations

import json

import geopandas as gpd
import numpy as np
import pytest
from pyproj import CRS
from shapely.geometry import Point, box

from aquitardmap.errors import ProblemList
from aquitardmap.grid import make_grid
from aquitardmap.inputs.hazards import annotate_zones, read_hazards, removed_depth_grid_m

CRS_M = CRS.from_epsg(32632)


def _write(path, features, crs="EPSG:32632"):
    urn = f"urn:ogc:def:crs:{crs.replace(':', '::')}"
    fc = {"type": "FeatureCollection",
          "crs": {"type": "name", "properties": {"name": urn}},
          "features": [{"type": "Feature", "properties": p, "geometry": g}
                       for p, g in features]}
    path.write_text(json.dumps(fc))
    return path


def _square(x0, y0, size):
    return box(x0, y0, x0 + size, y0 + size).__geo_interface__


def test_valid_hazards_are_read(tmp_path):
    path = _write(tmp_path / "hazards.geojson", [
        ({"name": "Old pit", "kind": "pit", "removed_depth_m": 6.0}, _square(0, 0, 100)),
        ({"kind": "landslide_scar", "removed_depth_m": 12}, _square(200, 0, 100)),
    ])
    problems, notes = ProblemList(), []
    hz = read_hazards(path, CRS_M, problems, notes)
    assert not problems
    assert list(hz["name"]) == ["Old pit", "landslide_scar 2"]
    assert list(hz["removed_depth_m"]) == [6.0, 12.0]
    assert hz.crs.equals(CRS_M)


def test_bad_hazards_are_listed_not_clipped(tmp_path):
    path = _write(tmp_path / "hazards.geojson", [
        ({"name": "A", "kind": "pit", "removed_depth_m": -2}, _square(0, 0, 100)),
        ({"name": "B", "kind": "crater", "removed_depth_m": 3}, _square(0, 0, 100)),
        ({"name": "C", "kind": "pit", "removed_depth_m": "deep"}, _square(0, 0, 100)),
        ({"name": "D", "kind": "pit", "removed_depth_m": 3}, Point(5, 5).__geo_interface__),
    ])
    problems, notes = ProblemList(), []
    hz = read_hazards(path, CRS_M, problems, notes)
    msgs = [p.message for p in problems.problems]
    assert len(msgs) == 4 and len(hz) == 0
    assert "feature 1 ('A'): removed_depth_m must be > 0, got -2" in msgs[0]
    assert "kind must be one of" in msgs[1] and "'crater'" in msgs[1]
    assert "must be a number" in msgs[2]
    assert "must be a polygon" in msgs[3]
    assert all(p.file == "hazards.geojson" for p in problems.problems)


def test_absent_file_gives_no_hazards():
    problems, notes = ProblemList(), []
    assert len(read_hazards(None, CRS_M, problems, notes)) == 0 and not problems


def test_removed_depth_grid_keeps_the_deepest_cut_and_touched_cells():
    grid = make_grid(box(0, 0, 500, 500), 50.0, CRS_M)
    hz = gpd.GeoDataFrame({"name": ["deep", "shallow", "tiny"], "kind": ["pit"] * 3,
                           "removed_depth_m": [10.0, 4.0, 2.0]},
                          geometry=[box(100, 100, 200, 200), box(150, 150, 300, 300),
                                    box(410, 410, 420, 420)], crs=CRS_M)
    removed, index = removed_depth_grid_m(hz, grid)
    r, c = grid.rowcol(np.array([175.0, 275.0, 415.0, 25.0]), np.array([175.0, 275.0, 415.0,
                                                                        25.0]))
    assert removed[r, c].tolist() == [10.0, 4.0, 2.0, 0.0]   # overlap: deepest cut wins
    assert index[r, c].tolist() == [0, 1, 2, -1]
    # A 10 m pit inside one 50 m cell still cuts that cell (all_touched).
    assert int((index == 2).sum()) == 1


def test_zones_touched_by_a_hazard_say_so():
    hz = gpd.GeoDataFrame({"name": ["Old pit"], "kind": ["pit"], "removed_depth_m": [6.0]},
                          geometry=[box(0, 0, 10, 10)], crs=CRS_M)
    zones = gpd.GeoDataFrame({"kind": ["thin", "thin"], "reason": ["Thin clay; x.", "Thin."]},
                             geometry=[box(5, 5, 50, 50), box(100, 100, 150, 150)], crs=CRS_M)
    out = annotate_zones(zones, hz)
    assert out["hazards"].tolist() == ["Old pit", ""]
    assert out["reason"][0].endswith("cut down by Old pit (pit, 6 m removed).")
    assert out["reason"][1] == "Thin."


@pytest.mark.parametrize("crs", ["EPSG:4326"])
def test_hazards_in_another_crs_are_reprojected(tmp_path, crs):
    from pyproj import Transformer
    t = Transformer.from_crs(CRS_M, crs, always_xy=True)
    x0, y0 = t.transform(550000, 6715000)
    x1, y1 = t.transform(550100, 6715100)
    path = _write(tmp_path / "hazards.geojson", [
        ({"kind": "excavation", "removed_depth_m": 5}, box(x0, y0, x1, y1).__geo_interface__),
    ], crs=crs)
    problems, notes = ProblemList(), []
    hz = read_hazards(path, CRS_M, problems, notes)
    assert not problems and any("reprojected" in n.message for n in notes)
    assert hz.geometry.iloc[0].area == pytest.approx(1e4, rel=0.01)
