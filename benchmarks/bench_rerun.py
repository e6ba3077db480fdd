"""Benchmark: a whole ``run`` after ``add`` against a whole run without cache, stage by stage.

A synthetic region (``make_synthetic_region``: invented data from a known truth) with a
project store: the region's holes but ``--added`` of them are the store's first batch;

1. ``run`` (fills the project cache: kriged tiles and kept variograms);
2. ``add`` the held-out holes as one batch;
3. ``run`` again (the variograms are reused while a fresh fit agrees with the kept ones,
   and only the cells the new holes can reach are kriged again);
4. a full ``run`` of the same data without any cache (``tile_cache=False``).

3 and 4 are repeated ``--repeat`` times (the project cache is put back as it was after 1
before each repeat) and the least time of each stage is kept. Prints the CPU seconds of this
process in each stage of 3 and 4 (wall times on a shared machine are noisy) and their
ratio, the cache counts and the variogram decisions, and, last,
``whole_run_after_add_over_full=<ratio of the CPU seconds>``. Every run is on one core
(``[compute] mode = "single"``), so this process's CPU time is all the work a run does (with
the default pool of workers their CPU would not be counted); the wall time on all cores is
``bench_scale.py``'s. Every run writes its outputs
(map, report and all). Not a test: it never asserts on time.

    python benchmarks/bench_rerun.py            # 5,000 holes, cells of 25 m
    python benchmarks/bench_rerun.py --quick    # 2,000 holes, cells of 50 m
"""

from __future__ import annotations

import argparse
import re
import shutil
import tempfile
import time
from pathlib import Path

import aquitardmap
from aquitardmap.config.project import read_project
from aquitardmap.config.settings import ComputeSettings
from aquitardmap.evaluation.synthetic.region import hold_back_holes, make_synthetic_region
from aquitardmap.inputs.store import add_files, create_store

#: Every run of this benchmark: all of its work in this process.
ONE_CORE = ComputeSettings(mode="single")
STAGES = ("inputs", "surfaces", "hydraulics", "zones", "outputs")


def _timed_run(project: Path, out: Path, **kw) -> tuple[dict[str, float], dict]:
    """CPU seconds of this process in each stage of a run (from the progress calls that
    open each stage; ``outputs`` is writing the grids, zones, map and report), and the
    run's summary."""
    marks: list[float] = []
    kw.setdefault("compute", ONE_CORE)
    result = aquitardmap.run(project, out, progress=lambda *_: marks.append(
        time.process_time()), **kw)
    marks.append(time.process_time())
    stages = {name: marks[i + 1] - marks[i] for i, name in enumerate(STAGES)}
    stages["total"] = marks[-1] - marks[0]
    return stages, result.summary


def _least(a: dict[str, float] | None, b: dict[str, float]) -> dict[str, float]:
    return b if a is None else {k: min(a[k], b[k]) for k in b}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--holes", type=int, default=5000)
    ap.add_argument("--cell", type=float, default=25.0, help="cell size (m)")
    ap.add_argument("--extent-km", type=float, nargs=2, default=(20.0, 14.0))
    ap.add_argument("--added", type=int, default=10)
    ap.add_argument("--k", type=int, default=16, help="[kriging] max_neighbours")
    ap.add_argument("--quick", action="store_true", help="2,000 holes, 10 x 7 km, 50 m cells")
    ap.add_argument("--seed", type=int, default=11)
    ap.add_argument("--repeat", type=int, default=2)
    a = ap.parse_args()
    if a.quick:
        a.holes, a.cell, a.extent_km = 2000, 50.0, (10.0, 7.0)
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        proj = root / "proj"
        make_synthetic_region(proj, seed=a.seed, n_holes=a.holes, cell_size_m=a.cell,
                              extent_m=(a.extent_km[0] * 1000, a.extent_km[1] * 1000),
                              write_project_toml=True)
        toml = proj / "project.toml"
        toml.write_text(re.sub(r"max_neighbours = \d+", f"max_neighbours = {a.k}",
                               toml.read_text()))
        incoming = hold_back_holes(proj, root / "incoming", a.added, seed=a.seed)
        create_store(read_project(proj))
        # compile the kernels, warm the file cache
        aquitardmap.run(proj, tile_cache=False, compute=ONE_CORE)
        first, _ = _timed_run(proj, root / "run1")
        t = time.perf_counter()
        add_files(read_project(proj), incoming, note="benchmark")
        t_add = time.perf_counter() - t
        cache = proj / ".aquitardmap-cache"
        shutil.copytree(cache, root / "cache-after-first")
        after = full = None
        for _ in range(a.repeat):
            shutil.rmtree(cache)
            shutil.copytree(root / "cache-after-first", cache)
            t, s_after = _timed_run(proj, root / "run2")
            after = _least(after, t)
            t, s_full = _timed_run(proj, root / "run3", tile_cache=False)
            full = _least(full, t)
    g = s_full["grid"]
    print(f"region: {a.holes} holes ({a.added} added), {g['width']} x {g['height']} grid of "
          f"{a.cell:g} m, {g['cells_in_study_area']:,} cells in the study area, "
          f"{len(s_full['surfaces'])} kriged surfaces, k = {a.k}")
    print(f"first run (empty cache): {first['total']:.1f} s CPU; add: {t_add:.2f} s")
    tiles = s_after["tile_cache"]
    share = tiles["cells_computed"] / max(1, tiles["cells_computed"] + tiles["cells_reused"])
    print(f"after add: {tiles['cells_computed']:,} cells kriged, {tiles['cells_reused']:,} "
          f"reused ({share:.1%} kriged)")
    reuse = s_after["variogram_reuse"]
    print(f"variograms reused: {', '.join(reuse['reused']) or '-'}; refit: "
          f"{', '.join(reuse['refit']) or '-'}")
    print(f"CPU seconds, least of {a.repeat}:")
    print(f"{'stage':<12}{'full, no cache':>16}{'after add':>12}{'ratio':>8}")
    for stage in (*STAGES, "total"):
        ratio = after[stage] / full[stage] if full[stage] > 0 else float("nan")
        print(f"{stage:<12}{full[stage]:>14.2f} s{after[stage]:>10.2f} s{ratio:>8.2f}")
    print(f"whole_run_after_add_over_full={after['total'] / full['total']:.4f}")


if __name__ == "__main__":
    main()
