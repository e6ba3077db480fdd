"""Benchmark: re-gridding after adding boreholes, with the tile cache, against a full run.

A synthetic region (random data, no meaning) of ``--holes`` boreholes and a grid of
``--cells`` cells (square, 25 m cells); ordinary kriging with the nearest 16 data and a
spherical model with nugget (the variogram held fixed, as when it is pinned between runs).

1. full run into an empty cache;
2. add 10 holes at random places, run again with the cache (only the cells of tiles a new
   hole can reach, and cells new to the grid, are kriged);
3. full re-run of the new data with no cache at all (what step 2 replaces), and the largest
   difference between 2 and 3 (must be below 1e-9).

Prints the times and, last, ``incremental_over_full=<ratio of 2 to 3>``. Not a test: it never
asserts on time. ``--quick`` runs a smaller region (about a minute).

    python benchmarks/bench_regrid.py            # 5,000 holes, 1,000,000 cells
    python benchmarks/bench_regrid.py --quick    # 1,000 holes, 250,000 cells
"""

from __future__ import annotations

import argparse
import math
import tempfile
import time
from pathlib import Path

import numpy as np
from affine import Affine
from pyproj import CRS

from aquitardmap.geostat.cache.tiles import TileCache
from aquitardmap.geostat.context import KrigingContext
from aquitardmap.geostat.kriging import krige_grid
from aquitardmap.geostat.variogram import VariogramModel
from aquitardmap.grid import Grid

CELL_M = 25.0
K = 16


def _field(x: np.ndarray, y: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    return (12.0 + 4.0 * np.sin(x / 2300.0) * np.cos(y / 3100.0)
            + rng.normal(0.0, 1.0, x.size))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--holes", type=int, default=5000)
    ap.add_argument("--cells", type=int, default=1_000_000)
    ap.add_argument("--added", type=int, default=10)
    ap.add_argument("--quick", action="store_true", help="1,000 holes and 250,000 cells")
    ap.add_argument("--seed", type=int, default=7)
    a = ap.parse_args()
    if a.quick:
        a.holes, a.cells = 1000, 250_000
    side = int(round(math.sqrt(a.cells)))
    extent = side * CELL_M
    x0, y0 = 400000.0, 6800000.0
    grid = Grid(Affine(CELL_M, 0, x0, 0, -CELL_M, y0), side, side, CRS.from_epsg(32632),
                np.ones((side, side), bool))
    rng = np.random.default_rng(a.seed)
    x = rng.uniform(x0, x0 + extent, a.holes)
    y = rng.uniform(y0 - extent, y0, a.holes)
    z = _field(x, y, rng)
    model = VariogramModel("spherical", nugget=0.5, psill=8.0, range_m=6000.0)
    xa = rng.uniform(x0, x0 + extent, a.added)
    ya = rng.uniform(y0 - extent, y0, a.added)
    x2, y2 = np.concatenate([x, xa]), np.concatenate([y, ya])
    z2 = np.concatenate([z, _field(xa, ya, rng)])
    print(f"region: {a.holes} holes, {side} x {side} = {side * side:,} cells of {CELL_M:g} m, "
          f"k = {K}; adding {a.added} holes")
    with tempfile.TemporaryDirectory() as tmp:
        cache_dir = Path(tmp) / "cache"
        krige_grid(x[:50], y[:50], z[:50], model, grid, max_neighbours=K)  # compile, warm up
        t = time.perf_counter()
        c = TileCache(cache_dir)
        krige_grid(x, y, z, model, grid, max_neighbours=K, context=KrigingContext(tiles=c))
        t_first = time.perf_counter() - t
        print(f"full run (empty cache): {t_first:8.2f} s  ({c.stats.cells_computed:,} cells)")
        t = time.perf_counter()
        c = TileCache(cache_dir)
        warm = krige_grid(x2, y2, z2, model, grid, max_neighbours=K,
                          context=KrigingContext(tiles=c))
        t_inc = time.perf_counter() - t
        s = c.stats
        print(f"after adding {a.added} holes:  {t_inc:8.2f} s  ({s.cells_computed:,} cells "
              f"kriged, {s.cells_reused:,} reused: "
              f"{s.cells_computed / (s.cells_computed + s.cells_reused):.1%} kriged)")
        t = time.perf_counter()
        cold = krige_grid(x2, y2, z2, model, grid, max_neighbours=K)
        t_full = time.perf_counter() - t
        print(f"full re-run, no cache:  {t_full:8.2f} s")
    diff = max(float(np.nanmax(np.abs(warm.estimate - cold.estimate))),
               float(np.nanmax(np.abs(warm.variance - cold.variance))))
    print(f"largest difference incremental vs full re-run: {diff:.3g}")
    print(f"incremental_over_full={t_inc / t_full:.4f}")


if __name__ == "__main__":
    main()
