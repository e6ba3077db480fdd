"""Head surfaces: points kriged like the thickness surfaces, grids resampled."""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import CRS
from shapely.geometry import box

from aquitardmap.config.settings import KrigingSettings
from aquitardmap.errors import ProblemList
from aquitardmap.grid import make_grid, write_raster
from aquitardmap.hydraulics.heads import head_surface, krige_head_points
from aquitardmap.inputs.heads import read_head_input

CRS_M = CRS.from_epsg(32632)
GRID = make_grid(box(0, 0, 2000, 2000), 100.0, CRS_M)


def _plane(x, y):
    return 50.0 + 0.002 * x - 0.001 * y


def test_kriged_points_reproduce_a_planar_water_table():
    # A plane sampled at 60 scattered points; ordinary kriging of a smooth surface inside
    # the data hull should reproduce it closely (exact at the data, Isaaks & Srivastava
    # 1989, ch. 12). Tolerance 0.3 m on a 6 m relief.
    rng = np.random.default_rng(3)
    x, y = rng.uniform(0, 2000, 60), rng.uniform(0, 2000, 60)
    est, model = krige_head_points(x, y, _plane(x, y), GRID, KrigingSettings())
    xs, ys = GRID.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    inner = (xx > 300) & (xx < 1700) & (yy > 300) & (yy < 1700)
    assert np.nanmax(np.abs(est - _plane(xx, yy))[inner]) < 0.3
    assert est.min() > 40 and model.range_m > 0      # no clipping at zero


def test_too_few_points_are_refused(tmp_path):
    path = tmp_path / "water_table.csv"
    path.write_text("x,y,head_m\n0,0,50\n100,100,51\n200,0,52\n")
    problems, notes = ProblemList(), []
    assert read_head_input(path, "water_table", GRID, problems, notes) is None
    assert "at least 8" in problems.problems[0].message


def test_bad_rows_are_reported_with_line_and_column(tmp_path):
    path = tmp_path / "aquifer_head.csv"
    path.write_text("x,y,head_m\n0,0,50\n100,100,high\n")
    problems, notes = ProblemList(), []
    assert read_head_input(path, "aquifer_head", GRID, problems, notes) is None
    p = problems.problems[0]
    assert (p.file, p.line, p.column) == ("aquifer_head.csv", 3, 3)


def test_grid_input_is_resampled(tmp_path):
    xs, ys = GRID.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    path = write_raster(tmp_path / "wt.tif", _plane(xx, yy), GRID)
    problems, notes = ProblemList(), []
    s = head_surface(read_head_input(path, "water_table", GRID, problems, notes), GRID,
                     KrigingSettings())
    assert s.source == "grid" and not problems
    assert np.allclose(s.head_m, _plane(xx, yy), atol=1e-4)
    assert s.as_dict()["min_m"] == pytest.approx(float(_plane(xx, yy).min()), abs=1e-4)
