"""Re-gridding only what changed: tiles from the cache equal a full kriging (to 1e-9).

Reference: kriging of the whole grid from all data in one call of
``aquitardmap.geostat.kriging.krige_grid`` without a cache (pykrige, or the local engine, with the
nearest ``k`` data), and a run with an empty cache. Data here are random (no meaning).
"""

from __future__ import annotations

import json
import shutil

import numpy as np
import pytest
from affine import Affine
from pyproj import CRS

from aquitardmap.geostat.cache.tiles import TileCache
from aquitardmap.geostat.context import KrigingContext
from aquitardmap.geostat.kriging import krige_grid
from aquitardmap.geostat.variogram import VariogramModel
from aquitardmap.grid import Grid

CELL = 100.0


def _grid(x0=500000.0, y0=6702000.0, width=90, height=70, hole=True):
    mask = np.ones((height, width), bool)
    if hole:
        mask[:8, :11] = False  # a study area that is not a rectangle
    return Grid(Affine(CELL, 0, x0, 0, -CELL, y0), width, height, CRS.from_epsg(32632), mask)


def _data(n, seed):
    rng = np.random.default_rng(seed)
    x = rng.uniform(499500.0, 509500.0, n)
    y = rng.uniform(6694500.0, 6702500.0, n)
    z = 10.0 + 3.0 * np.sin(x / 1500.0) + rng.normal(0, 1.0, n)
    return x, y, z


MODEL = VariogramModel("spherical", nugget=0.3, psill=4.0, range_m=2500.0)


def test_tiles_equal_one_full_kriging(tmp_path):
    g = _grid()
    x, y, z = _data(400, 1)
    ref = krige_grid(x, y, z, MODEL, g, max_neighbours=16)
    cache = TileCache(tmp_path / "c")
    got = krige_grid(x, y, z, MODEL, g, max_neighbours=16, context=KrigingContext(tiles=cache))
    assert cache.stats.cells_reused == 0 and cache.stats.cells_computed == int(g.mask.sum())
    inside = g.mask
    assert np.isnan(got.estimate[~inside]).all()
    np.testing.assert_allclose(got.estimate[inside], ref.estimate[inside], rtol=0, atol=1e-9)
    np.testing.assert_allclose(got.variance[inside], ref.variance[inside], rtol=0, atol=1e-9)


@pytest.mark.parametrize("anisotropy", [(1.0, 0.0), (0.4, 30.0)])
def test_after_adding_holes_only_nearby_tiles_are_kriged_again(tmp_path, anisotropy):
    ratio, angle = anisotropy
    model = VariogramModel("spherical", nugget=0.3, psill=4.0, range_m=2500.0,
                           anisotropy_ratio=ratio, anisotropy_angle_deg=angle)
    x, y, z = _data(600, 2)
    g = _grid()
    first = TileCache(tmp_path / "c")
    krige_grid(x, y, z, model, g, max_neighbours=16, context=KrigingContext(tiles=first))
    n_cells = first.stats.cells_computed
    # ten new holes in one corner, and a study area grown by two columns to the east
    rng = np.random.default_rng(3)
    x2 = np.concatenate([x, rng.uniform(500000.0, 501500.0, 10)])
    y2 = np.concatenate([y, rng.uniform(6695000.0, 6696500.0, 10)])
    z2 = np.concatenate([z, rng.normal(9.0, 1.0, 10)])
    g2 = _grid(width=92)
    second = TileCache(tmp_path / "c")
    warm = krige_grid(x2, y2, z2, model, g2, max_neighbours=16,
                      context=KrigingContext(tiles=second))
    _cache = TileCache(tmp_path / "cold")
    cold = krige_grid(x2, y2, z2, model, g2, max_neighbours=16,
                      context=KrigingContext(tiles=_cache))
    full = krige_grid(x2, y2, z2, model, g2, max_neighbours=16)
    inside = g2.mask
    # identical to a run with an empty cache, and to one kriging of the whole grid
    np.testing.assert_allclose(warm.estimate[inside], cold.estimate[inside], rtol=0, atol=1e-9)
    np.testing.assert_allclose(warm.estimate[inside], full.estimate[inside], rtol=0, atol=1e-9)
    np.testing.assert_allclose(warm.variance[inside], full.variance[inside], rtol=0, atol=1e-9)
    s = second.stats
    assert s.cells_computed > 0 and s.cells_reused > 0
    # every cell new to the study area (two columns) was kriged
    assert s.cells_computed >= 2 * g2.height
    if ratio == 1.0:  # with anisotropy the bound is wider (by max(1,a)/min(1,a))
        assert s.cells_reused > 0.6 * n_cells  # most of the grid came from the cache
    assert second.prune() == 1  # the first run's entry is no longer needed


def test_a_changed_value_changes_only_tiles_whose_region_holds_it(tmp_path):
    x, y, z = _data(500, 4)
    g = _grid(hole=False)
    _cache = TileCache(tmp_path / "c")
    before = krige_grid(x, y, z, MODEL, g, max_neighbours=12, context=KrigingContext(tiles=_cache))
    z2 = z.copy()
    i = int(np.argmin((x - 504000.0) ** 2 + (y - 6698000.0) ** 2))
    z2[i] += 5.0
    cache = TileCache(tmp_path / "c")
    after = krige_grid(x, y, z2, MODEL, g, max_neighbours=12, context=KrigingContext(tiles=cache))
    full = krige_grid(x, y, z2, MODEL, g, max_neighbours=12)
    np.testing.assert_allclose(after.estimate, full.estimate, rtol=0, atol=1e-9)
    changed = ~np.isclose(after.estimate, before.estimate, rtol=0, atol=1e-12)
    assert changed.any() and cache.stats.cells_reused > 0
    # every cell whose value changed was kriged again (the others were reused)
    assert cache.stats.cells_computed >= int(changed.sum())


@pytest.mark.slow
def test_pipeline_reuses_tiles_and_matches_a_run_without_cache(tmp_path):
    import aquitardmap
    from aquitardmap.config.project import read_project
    from aquitardmap.inputs.store import add_files

    from conftest import demo_copy_with_new_hole

    proj, new_files = demo_copy_with_new_hole(tmp_path, "TC-1")
    toml = proj / "project.toml"
    toml.write_text(toml.read_text().replace("max_neighbours = 64", "max_neighbours = 16"))
    add_files(read_project(proj), new_files)
    first = aquitardmap.run(proj)
    t1 = first.summary["tile_cache"]
    assert t1["cells_computed"] > 0 and t1["cells_reused"] == 0
    again = aquitardmap.run(proj)
    t2 = again.summary["tile_cache"]
    assert t2["cells_computed"] == 0 and t2["cells_reused"] == t1["cells_computed"]
    for name, s in first.surfaces.items():
        assert np.array_equal(s.thickness_m, again.surfaces[name].thickness_m, equal_nan=True)
    plain = aquitardmap.run(proj, tile_cache=False)
    assert "tile_cache" not in plain.summary
    for name, s in plain.surfaces.items():
        np.testing.assert_allclose(again.surfaces[name].thickness_m, s.thickness_m, rtol=0,
                                   atol=1e-9)
        np.testing.assert_allclose(again.surfaces[name].sd_m, s.sd_m, rtol=0, atol=1e-9)


# --------------------------------------------------------------------------------------------
# The reach of a changed hole, against brute force: every cell whose k nearest data (in the
# variogram's isotropic frame, scipy's cKDTree on all cells) differ between the old and the
# new data set must be among the cells the cache kriges again.

def _knn_sets(xy, grid, model, k):
    from scipy.spatial import cKDTree

    from aquitardmap.geostat.variogram import anisotropy_matrix

    a = anisotropy_matrix(model.anisotropy_ratio, model.anisotropy_angle_deg)
    xs, ys = grid.cell_centres()
    gx, gy = np.meshgrid(xs, ys)
    cells = np.column_stack([gx.ravel(), gy.ravel()])
    _, idx = cKDTree(xy @ a.T).query(cells @ a.T, k=k)
    return idx


@pytest.mark.parametrize("case", range(12))
def test_reached_cells_hold_every_cell_whose_neighbours_changed(case):
    from aquitardmap.geostat.cache.tiles import _Lattice, reached_cells

    rng = np.random.default_rng(100 + case)
    g = _grid(width=int(rng.integers(20, 60)), height=int(rng.integers(20, 60)), hole=False)
    n = int(rng.integers(20, 200))
    k = int(rng.integers(1, 20))
    ratio = float(rng.choice([1.0, 1.0, 2.5, 6.0]))
    model = VariogramModel("spherical", 0.2, 3.0, 2000.0, anisotropy_ratio=ratio,
                           anisotropy_angle_deg=float(rng.uniform(-90, 90)))
    x0, y0 = g.transform.c, g.transform.f
    span_x, span_y = g.width * CELL, g.height * CELL
    # data around and beyond the grid; some changed holes outside it
    old = np.column_stack([rng.uniform(x0 - 0.3 * span_x, x0 + 1.3 * span_x, n),
                           rng.uniform(y0 - 1.3 * span_y, y0 + 0.3 * span_y, n)])
    n_add = int(rng.integers(1, 6))
    added = np.column_stack([rng.uniform(x0 - 0.2 * span_x, x0 + 1.2 * span_x, n_add),
                             rng.uniform(y0 - 1.2 * span_y, y0 + 0.2 * span_y, n_add)])
    removed = rng.choice(n, int(rng.integers(0, 4)), replace=False)
    new = np.concatenate([np.delete(old, removed, axis=0), added])
    kk_old, kk_new = min(k, len(old)), min(k, len(new))
    # neighbour sets as hole numbers, comparable between the two data sets
    old_id = np.arange(n)
    new_id = np.concatenate([np.delete(old_id, removed), n + np.arange(n_add)])
    before = np.sort(old_id[_knn_sets(old, g, model, kk_old).reshape(-1, kk_old)], axis=1)
    after = np.sort(new_id[_knn_sets(new, g, model, kk_new).reshape(-1, kk_new)], axis=1)
    truly = np.flatnonzero(~(before == after).all(axis=1)) if kk_old == kk_new \
        else np.arange(g.width * g.height)
    assert truly.size > 0
    lat = _Lattice(g, 6)
    got = np.union1d(reached_cells(lat, k, model, new, added),
                     reached_cells(lat, k, model, old, old[removed]))
    assert np.isin(truly, got).all()
    assert got.size <= g.width * g.height


def test_a_chain_of_small_changes_equals_full_kriging_each_time(tmp_path):
    from aquitardmap.geostat.cache.tiles import MAX_CHAIN

    g = _grid(hole=False)
    x, y, z = _data(500, 8)
    rng = np.random.default_rng(9)
    cache = TileCache(tmp_path / "c")
    krige_grid(x, y, z, MODEL, g, max_neighbours=12, context=KrigingContext(tiles=cache))
    kinds = []
    for step in range(MAX_CHAIN + 3):
        if step % 3 == 2:  # remove two holes (as an undo does)
            x, y, z = x[2:], y[2:], z[2:]
        else:  # add three
            x = np.concatenate([x, rng.uniform(500000.0, 509000.0, 3)])
            y = np.concatenate([y, rng.uniform(6695000.0, 6702000.0, 3)])
            z = np.concatenate([z, rng.normal(10.0, 2.0, 3)])
        cache = TileCache(tmp_path / "c")
        got = krige_grid(x, y, z, MODEL, g, max_neighbours=12, context=KrigingContext(tiles=cache))
        assert cache.stats.cells_reused > 0.5 * g.mask.size
        cache.prune()
        full = krige_grid(x, y, z, MODEL, g, max_neighbours=12)
        np.testing.assert_allclose(got.estimate, full.estimate, rtol=0, atol=1e-9)
        np.testing.assert_allclose(got.variance, full.variance, rtol=0, atol=1e-9)
        entries = [p for p in (tmp_path / "c").iterdir()]
        metas = [json.loads((p / "meta.json").read_text()) for p in entries]
        kinds.append(sorted(m["kind"] for m in metas))
        assert sum(m["kind"] == "full" for m in metas) == 1  # one full entry, its patches
        assert len(entries) <= MAX_CHAIN + 1
    # a full entry again once the chain reached its longest
    assert kinds[MAX_CHAIN] == ["full"]


def test_a_broken_chain_is_not_used(tmp_path):
    g = _grid(hole=False)
    x, y, z = _data(300, 10)
    _cache = TileCache(tmp_path / "c")
    krige_grid(x, y, z, MODEL, g, max_neighbours=12, context=KrigingContext(tiles=_cache))
    x2, y2, z2 = (np.concatenate([a, [b]]) for a, b in ((x, 503000.0), (y, 6699000.0),
                                                        (z, 30.0)))
    cache = TileCache(tmp_path / "c")
    krige_grid(x2, y2, z2, MODEL, g, max_neighbours=12, context=KrigingContext(tiles=cache))
    # the full entry the patch builds on disappears (a user cleaning up by hand)
    for p in (tmp_path / "c").iterdir():
        if json.loads((p / "meta.json").read_text())["kind"] == "full":
            shutil.rmtree(p)
    z3 = z2.copy()
    z3[0] += 1.0
    cache = TileCache(tmp_path / "c")
    got = krige_grid(x2, y2, z3, MODEL, g, max_neighbours=12, context=KrigingContext(tiles=cache))
    assert cache.stats.cells_reused == 0
    full = krige_grid(x2, y2, z3, MODEL, g, max_neighbours=12)
    np.testing.assert_allclose(got.estimate, full.estimate, rtol=0, atol=1e-9)
