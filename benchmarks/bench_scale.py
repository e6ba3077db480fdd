"""Benchmark: a regional run on all cores against one core, the CPU of each stage, and the
peak memory of a run of about 4 million cells.

A synthetic region (``make_synthetic_region``: invented data from a known truth, seed 5,
20,000 holes over 40 x 28 km by default) is run whole, outputs and all, without the tile
cache, each run in a fresh Python process (so its peak memory is its own):

1. ``[compute] mode = "single"``: the whole run on one core. Its CPU seconds per stage are
   the work each stage does (every task runs in that one process, so the process's own CPU
   time is all of it);
2. ``mode = "local"`` with the default workers (every core of this machine): wall seconds;
3. a region of the same holes on a finer grid (``--peak-cell``, about 4 M cells in the study
   area by default): peak resident memory of the run's process and of its largest worker.

Prints, last, ``all_cores_over_one_core_wall=<ratio>``, ``cpu_seconds_one_core=<total>`` and
``peak_memory_mb=<process + largest worker>`` (an upper bound: forked workers share
the parent's pages until they write them). Not a test: it never asserts on time.

    python benchmarks/bench_scale.py                  # 20,000 holes, 25 m cells, 4 M cells
    python benchmarks/bench_scale.py --holes 5000 --extent-km 20 14 --no-peak
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

STAGES = ("inputs", "surfaces", "hydraulics", "zones", "outputs")


def _one(project: str, out: str, mode: str) -> None:
    """One whole run in this process: prints a JSON line of wall and CPU seconds per stage
    (this process's CPU, and that of its worker processes once they ended) and peak memory."""
    import aquitardmap
    from aquitardmap.config.settings import ComputeSettings

    marks: list[tuple[float, float]] = []

    def mark(*_) -> None:
        marks.append((time.perf_counter(), time.process_time()))

    result = aquitardmap.run(project, out, progress=mark, tile_cache=False,
                             compute=ComputeSettings(mode=mode))
    mark()
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    stages = {name: {"wall_s": marks[i + 1][0] - marks[i][0],
                     "cpu_s": marks[i + 1][1] - marks[i][1]} for i, name in enumerate(STAGES)}
    print(json.dumps({
        "stages": stages, "wall_s": marks[-1][0] - marks[0][0],
        "cpu_s": marks[-1][1] - marks[0][1],
        "worker_cpu_s": children.ru_utime + children.ru_stime,
        "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
        "worker_peak_mb": children.ru_maxrss / 1024,
        "cells": result.summary["grid"]["cells_in_study_area"],
        "workers": result.summary["compute"].get("workers", 1)}))


def _run(project: Path, out: Path, mode: str) -> dict:
    done = subprocess.run([sys.executable, __file__, "_one", str(project), str(out), mode],
                          check=True, capture_output=True, text=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def _region(root: Path, holes: int, extent_km: tuple[float, float], cell_m: float) -> Path:
    from aquitardmap.evaluation.synthetic.region import make_synthetic_region

    make_synthetic_region(root, seed=5, n_holes=holes, cell_size_m=cell_m,
                          extent_m=(extent_km[0] * 1000, extent_km[1] * 1000),
                          write_project_toml=True)
    return root


def main() -> None:
    if len(sys.argv) == 5 and sys.argv[1] == "_one":
        _one(*sys.argv[2:])
        return
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--holes", type=int, default=20000)
    ap.add_argument("--extent-km", type=float, nargs=2, default=(40.0, 28.0))
    ap.add_argument("--cell", type=float, default=25.0, help="cell size (m)")
    ap.add_argument("--peak-cell", type=float, default=14.5,
                    help="cell size (m) of the memory run (14.5 m: about 4 M cells in the "
                         "default study area)")
    ap.add_argument("--no-peak", action="store_true", help="skip the memory run")
    ap.add_argument("--peak-only", action="store_true", help="only the memory run")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        # compile the kernels (numba keeps them on disk) on a small region
        _run(_region(root / "warm", 300, (5.0, 4.0), 50.0), root / "warm-out", "single")
        one = every = peak = None
        if not a.peak_only:
            proj = _region(root / "proj", a.holes, tuple(a.extent_km), a.cell)
            one = _run(proj, root / "one", "single")
            every = _run(proj, root / "all", "local")
        if not a.no_peak:
            fine = _region(root / "fine", a.holes, tuple(a.extent_km), a.peak_cell)
            peak = _run(fine, root / "fine-out", "local")
    if one is not None:
        print(f"region: {a.holes} holes, {a.extent_km[0]:g} x {a.extent_km[1]:g} km, cells of "
              f"{a.cell:g} m, {one['cells']:,} cells in the study area")
        print(f"{'stage':<12}{'CPU, one core':>15}{'wall, one core':>16}"
              f"{'wall, ' + str(every['workers']) + ' workers':>18}")
        rows = [(n, one["stages"][n]["cpu_s"], one["stages"][n]["wall_s"],
                 every["stages"][n]["wall_s"]) for n in STAGES]
        rows.append(("total", one["cpu_s"], one["wall_s"], every["wall_s"]))
        for name, cpu, wall_one, wall_all in rows:
            print(f"{name:<12}{cpu:>13.1f} s{wall_one:>14.1f} s{wall_all:>16.1f} s")
        print(f"all cores: {every['cpu_s']:.1f} s CPU in the run's process + "
              f"{every['worker_cpu_s']:.1f} s in its workers")
    if peak is not None:
        print(f"memory run: {peak['cells']:,} cells in the study area, {peak['wall_s']:.0f} s "
              f"wall; peak {peak['peak_mb']:.0f} MB in the run's process, "
              f"{peak['worker_peak_mb']:.0f} MB in its largest worker")
    if one is not None:
        print(f"all_cores_over_one_core_wall={every['wall_s'] / one['wall_s']:.4f}")
        print(f"cpu_seconds_one_core={one['cpu_s']:.1f}")
    if peak is not None:
        print(f"peak_memory_mb={peak['peak_mb'] + peak['worker_peak_mb']:.0f}")


if __name__ == "__main__":
    main()
