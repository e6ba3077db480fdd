"""Piercing boreholes and their density."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from pyproj import CRS
from shapely.geometry import box

from aquitardmap.grid import make_grid
from aquitardmap.hydraulics.piercing import piercing_mask, piercing_table, point_density_per_km2

CRS_M = CRS.from_epsg(32632)


def _columns():
    return pd.DataFrame({
        "x": [125.0, 175.0, 175.0, 475.0, 125.0, 125.0],
        "y": [125.0, 125.0, 175.0, 475.0, 175.0, 175.0],
        "status_aquitard": ["full", "full", "full", "full", "lower_bound", "full"],
        "reached_aquifer": [True, True, True, True, False, True],
        "aquitard_thickness_m": [12.0, 8.0, 0.0, 20.0, 15.0, 10.0],
        "total_depth_m": [20.0, 15.0, 6.0, 30.0, 15.0, 18.0],
        "depth_to_aquifer_m": [14.0, 10.0, 2.0, 23.0, np.nan, 12.0],
        "excluded": [False, False, False, False, False, True],
    }, index=pd.Index(["A", "B", "W", "D", "G", "X"], name="borehole_id"))


def test_only_holes_through_clay_into_the_aquifer_pierce():
    # W logs no clay (a window), G stopped in the clay, X is excluded.
    assert piercing_mask(_columns()).tolist() == [True, True, False, True, False, False]


def test_density_is_count_in_circle_over_its_area():
    grid = make_grid(box(0, 0, 500, 500), 50.0, CRS_M)
    cols = _columns()
    p = cols[piercing_mask(cols)]
    dens = point_density_per_km2(p["x"].to_numpy(), p["y"].to_numpy(), grid, 100.0)
    # Circle of 100 m: area π·1e4 m² = 0.0314159 km². At cell centre (125, 125): A at 0 m,
    # B at 50 m, D far -> 2 holes / 0.0314159 km² = 63.662 per km² (hand computation).
    r, c = grid.rowcol(np.array([125.0, 325.0]), np.array([125.0, 325.0]))
    assert dens[r[0], c[0]] == pytest.approx(2 / (np.pi * 1e4 / 1e6), rel=1e-12)
    assert dens[r[1], c[1]] == 0.0
    table = piercing_table(cols, dens, grid, flag_per_km2=50.0)
    assert table["borehole_id"].tolist() == ["A", "B", "D"]
    assert table["in_flagged_cell"].tolist() == [True, True, False]
    with pytest.raises(ValueError):
        point_density_per_km2(p["x"].to_numpy(), p["y"].to_numpy(), grid, 0.0)
