"""Benchmark: the probability stage against the surfaces stage on a large region (not a test).

    python benchmarks/bench_probability_stage.py            # 20,000 holes, about 1.4 M cells
    python benchmarks/bench_probability_stage.py --quick    # 4,000 holes, same grid

Data (invented): ``make_synthetic_region(seed=5, n_holes=20000, extent_m=(40000, 28000),
cell_size_m=25)`` of
:mod:`aquitardmap.evaluation.synthetic`, written once into ``--folder`` (kept and
reused when it is already there). In one process, wall and CPU seconds of:

- ``surfaces``: :func:`aquitardmap.geostat.stage.build_surfaces`;
- ``probability``: :func:`aquitardmap.screening.stage.aquitard_probabilities` with the
  thresholds ``{"window": 1.0, "thin": 5.0}``, split into the parts of
  :mod:`aquitardmap.geostat.indicator` (``indicator_data``, ``indicator_variogram``,
  ``continuity_segments``, ``local_direction_deg``, ``krige_indicator``,
  ``honour_hard_data``), once for the grid and once summed over the folds of
  ``cross_validate``.

The parts are timed by wrapping the module's functions (the wrappers cost a few calls).
Peak memory is the process's peak resident set (``resource.getrusage``) after each stage,
and the peak of Python allocations (``tracemalloc``) within the probability stage when
``--tracemalloc`` is given (it slows the run). The last lines are
``probability_over_surfaces_wall=<ratio>`` and ``..._cpu=<ratio>``. Nothing is asserted.
"""

from __future__ import annotations

import argparse
import functools
import resource
import sys
import tempfile
import time
import tracemalloc
from collections import defaultdict
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

PARTS = ("indicator_data", "indicator_variogram", "continuity_segments",
         "local_direction_deg", "krige_indicator", "honour_hard_data")


def _peak_rss_mb() -> float:
    """Peak resident set of this process so far (MB; Linux reports kB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="4,000 holes instead of 20,000")
    ap.add_argument("--holes", type=int, default=None, help="number of holes (overrides)")
    ap.add_argument("--folder", type=Path, default=None,
                    help="where the region is written (default: a folder in the temp dir)")
    ap.add_argument("--tracemalloc", action="store_true",
                    help="also trace Python allocations in the probability stage")
    args = ap.parse_args()
    sys.path.insert(0, str(ROOT))
    import aquitardmap.geostat.indicator as ind
    from aquitardmap.evaluation.synthetic.region import make_synthetic_region
    from aquitardmap.geostat.stage import build_surfaces
    from aquitardmap.inputs.load import load_inputs
    from aquitardmap.screening.stage import aquitard_probabilities

    n_holes = args.holes or (4000 if args.quick else 20000)
    folder = args.folder or Path(tempfile.gettempdir()) / f"aquitardmap_bench_{n_holes}"
    if not (folder / "project.toml").exists():
        t0 = time.perf_counter()
        make_synthetic_region(folder, seed=5, n_holes=n_holes, extent_m=(40000, 28000),
                              cell_size_m=25, write_project_toml=True)
        print(f"region written to {folder} in {time.perf_counter() - t0:.1f} s")
    inputs = load_inputs(folder)
    print(f"holes={len(inputs.columns)} cells={int(inputs.grid.mask.sum())} "
          f"rss_after_load_mb={_peak_rss_mb():.0f}")

    # per-part timers; the phase ("grid" or "cv") is set by the wrapper of cross_validate
    phase = ["grid"]
    wall: dict[tuple[str, str], float] = defaultdict(float)
    cpu: dict[tuple[str, str], float] = defaultdict(float)

    def timed(name, fn):
        @functools.wraps(fn)
        def wrapper(*a, **k):
            w0, c0 = time.perf_counter(), time.process_time()
            try:
                return fn(*a, **k)
            finally:
                wall[phase[0], name] += time.perf_counter() - w0
                cpu[phase[0], name] += time.process_time() - c0
        return wrapper

    for name in PARTS:
        setattr(ind, name, timed(name, getattr(ind, name)))
    original_cv = ind.cross_validate

    def cv_wrapper(*a, **k):
        phase[0] = "cv"
        w0, c0 = time.perf_counter(), time.process_time()
        try:
            return original_cv(*a, **k)
        finally:
            wall["cv", "total"] += time.perf_counter() - w0
            cpu["cv", "total"] += time.process_time() - c0
            phase[0] = "grid"

    import aquitardmap.screening.stage as screening_stage
    screening_stage.cross_validate = cv_wrapper

    w0, c0 = time.perf_counter(), time.process_time()
    surfaces = build_surfaces(inputs)
    surf_wall, surf_cpu = time.perf_counter() - w0, time.process_time() - c0
    rss_surfaces = _peak_rss_mb()
    print(f"surfaces: wall {surf_wall:.1f} s, cpu {surf_cpu:.1f} s, "
          f"peak_rss_mb {rss_surfaces:.0f}")

    if args.tracemalloc:
        tracemalloc.start()
    w0, c0 = time.perf_counter(), time.process_time()
    aquitard_probabilities(inputs, surfaces["aquitard"], {"window": 1.0, "thin": 5.0})
    prob_wall, prob_cpu = time.perf_counter() - w0, time.process_time() - c0
    traced = tracemalloc.get_traced_memory()[1] / 2**20 if args.tracemalloc else float("nan")
    if args.tracemalloc:
        tracemalloc.stop()
    rss_prob = _peak_rss_mb()
    print(f"probability: wall {prob_wall:.1f} s, cpu {prob_cpu:.1f} s, "
          f"peak_rss_mb {rss_prob:.0f}, traced_peak_mb {traced:.0f}")
    grid_parts = sum(wall["grid", n] for n in PARTS)
    print(f"  grid (thickness_probabilities_by_indicator): parts {grid_parts:.1f} s wall")
    for n in PARTS:
        print(f"    {n:<22} wall {wall['grid', n]:7.2f} s  cpu {cpu['grid', n]:7.2f} s")
    print(f"  cross_validate: wall {wall['cv', 'total']:.1f} s, cpu {cpu['cv', 'total']:.1f} s")
    for n in PARTS:
        print(f"    {n:<22} wall {wall['cv', n]:7.2f} s  cpu {cpu['cv', n]:7.2f} s")
    print(f"probability_over_surfaces_wall={prob_wall / surf_wall:.3f}")
    print(f"probability_over_surfaces_cpu={prob_cpu / surf_cpu:.3f}")


if __name__ == "__main__":
    main()
