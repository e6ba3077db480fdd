"""Benchmark: the P grids of :func:`aquitardmap.geostat.probability.probability_below_grid` with the
data's kriging setup built once per grid against building it once per block (not a test).

    python benchmarks/bench_probability_blocks.py                  # 3,000 holes, ~600k cells
    python benchmarks/bench_probability_blocks.py --max-neighbours 16

Data (invented): ``--holes`` holes scattered uniformly over a 12 km square, a smooth latent
thickness with noise; 5 % of the holes prove a window and 5 % stopped in the clay, so the
Gibbs draws are used. The draws are made once, outside the timing. The grid covers the square
with about ``--cells`` cells. The run is timed twice in one process, in CPU seconds
(``time.process_time``; BLAS threads counted):

- ``per_block`` (the baseline, the code before the setup was shared): every block of
  ``CELLS_PER_BLOCK`` cells calls :func:`aquitardmap.geostat.kriging.kriging_weights`, which builds
  the k-d tree, the n × n semivariance table and the scaled drift again;
- ``once``: the shipped code (:func:`aquitardmap.geostat.kriging.prepare_locations` once, then
  :func:`aquitardmap.geostat.kriging.weights_at` per block).

The two grids are compared (max abs difference) and the last line is
``speedup_vs_per_block=<ratio>``. Nothing here asserts on time.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--holes", type=int, default=3000)
    ap.add_argument("--cells", type=int, default=600_000)
    ap.add_argument("--draws", type=int, default=4)
    ap.add_argument("--max-neighbours", type=int, default=64)
    ap.add_argument("--drift", action="store_true", help="with an external drift")
    args = ap.parse_args()
    sys.path.insert(0, str(ROOT))
    from pyproj import CRS
    from shapely.geometry import box

    import aquitardmap.geostat.probability as prob
    from aquitardmap.geostat.kriging import kriging_weights
    from aquitardmap.geostat.variogram import VariogramModel
    from aquitardmap.grid import make_grid

    side_m = 12_000.0
    rng = np.random.default_rng(7)
    x, y = rng.uniform(0, side_m, args.holes), rng.uniform(0, side_m, args.holes)
    ground = 150.0 + 0.004 * x + 5.0 * np.sin(y / 1500.0)
    t = 12.0 + 6.0 * np.sin(x / 2000.0) * np.cos(y / 2500.0) + rng.normal(0, 1.5, x.size)
    status = np.full(x.size, "full", dtype="<U11")
    kind = rng.uniform(size=x.size)
    t = np.maximum(t, 0.5)
    t[kind < 0.05] = 0.0  # windows
    status[(kind >= 0.05) & (kind < 0.10)] = "lower_bound"  # t is the depth reached
    cell_m = side_m / np.sqrt(args.cells)
    grid = make_grid(box(0, 0, side_m, side_m), cell_m, CRS.from_epsg(32632))
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    grid_ground = 150.0 + 0.004 * xx + 5.0 * np.sin(yy / 1500.0)
    model = VariogramModel("spherical", nugget=0.5, psill=8.0, range_m=3000.0)
    data = prob.censored_data(x, y, t, status, ground if args.drift else None)
    draws = prob.gibbs_draws(data, model, n_draws=args.draws, sweeps=5,
                             max_neighbours=max(8, args.max_neighbours // 2))
    n_data = data.x_m.size + data.cx_m.size
    n_cells = int(grid.mask.sum())
    blocks = -(-n_cells // prob.CELLS_PER_BLOCK)
    print(f"data={n_data} cells={n_cells} blocks={blocks} draws={args.draws} "
          f"max_neighbours={args.max_neighbours} drift={args.drift}")

    def run() -> tuple[float, np.ndarray]:
        t0 = time.process_time()
        p = prob.probability_below_grid(
            data, draws, model, grid, {"thin": 5.0}, max_neighbours=args.max_neighbours,
            grid_drift=grid_ground if args.drift else None)["thin"]
        return time.process_time() - t0, p

    # Baseline: the per-block call of the code before the change, kriging_weights from
    # the raw data locations in every block.
    ax = np.concatenate([data.x_m, data.cx_m])
    ay = np.concatenate([data.y_m, data.cy_m])
    shipped = (prob.prepare_locations, prob.weights_at)
    prob.prepare_locations = lambda *a, **k: None

    def per_block(_locations, xt_m, yt_m, *, max_neighbours, target_drift):
        drift = ({"drift": data.all_drift, "target_drift": target_drift}
                 if target_drift is not None else {})
        return kriging_weights(ax, ay, model, xt_m, yt_m, max_neighbours=max_neighbours,
                               **drift)

    prob.weights_at = per_block
    try:
        old_s, p_old = run()
    finally:
        prob.prepare_locations, prob.weights_at = shipped
    new_s, p_new = run()
    diff = float(np.nanmax(np.abs(p_old - p_new)))
    print(f"per_block_cpu_s={old_s:.2f}")
    print(f"once_cpu_s={new_s:.2f}")
    print(f"max_abs_difference={diff:.3g}")
    print(f"speedup_vs_per_block={old_s / new_s:.3f}")


if __name__ == "__main__":
    main()
