"""Benchmark: :func:`aquitardmap.geostat.indicator.local_direction_deg` and the variogram pairs
(``aquitardmap.geostat.variogram._Pairs.of``) against the code they replaced (not a test).

    python benchmarks/bench_fast_geostat.py
    python benchmarks/bench_fast_geostat.py --segments 500 --reach 800

Data (invented): the cells of a 25 m grid over 40 km × 28 km inside an ellipse (about
1.38 million cells, at projected coordinates), ``--segments`` segments of 1–3 km either
scattered uniformly or strung along 20 winding channels, ``--reach`` m; for the variogram,
2,000, 3,000 and 4,000 holes scattered over the same area with default lags. The former
code is the reference of ``tests/test_fast_geostat.py`` (copied there as it was). Each
case is timed three times in wall seconds (the first compiled call includes loading numba's
cached machine code); every result is compared with the former code's (``identical``).
Nothing here asserts on time.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]

from test_fast_geostat import ref_local_direction_deg, ref_pairs  # noqa: E402

from aquitardmap.geostat.indicator import local_direction_deg  # noqa: E402
from aquitardmap.geostat.localkrige import numba_available  # noqa: E402
from aquitardmap.geostat.variogram import _Pairs, default_lags  # noqa: E402

ORIGIN = np.array([500_000.0, 6_700_000.0])


def cells() -> tuple[np.ndarray, np.ndarray]:
    xx, yy = np.meshgrid(np.arange(12.5, 40_000, 25.0), np.arange(12.5, 28_000, 25.0))
    inside = ((xx - 20_000) / 19_500) ** 2 + ((yy - 14_000) / 14_080) ** 2 < 1.0
    return xx[inside] + ORIGIN[0], yy[inside] + ORIGIN[1]


def segments(n: int, clustered: bool, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    if clustered:
        rows = []
        for _ in range(20):
            x, y, th = rng.uniform(0, 40_000), rng.uniform(0, 28_000), rng.uniform(0, np.pi)
            for _ in range(max(n // 20, 1)):
                th += rng.normal(0, 0.3)
                length = rng.uniform(1000, 3000)
                x1, y1 = x + length * math.cos(th), y + length * math.sin(th)
                rows.append((x, y, x1, y1))
                x = x + 0.3 * (x1 - x) + rng.normal(0, 300)
                y = y + 0.3 * (y1 - y) + rng.normal(0, 300)
        s = np.array(rows)
    else:
        a = rng.uniform(0, 1, (n, 2)) * [40_000, 28_000]
        length, th = rng.uniform(1000, 3000, n), rng.uniform(0, 2 * np.pi, n)
        s = np.column_stack([a, a + np.column_stack([length * np.cos(th),
                                                     length * np.sin(th)])])
    return s + np.tile(ORIGIN, 2)


def timed(f, repeats: int = 3):
    times, out = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = f()
        times.append(time.perf_counter() - t0)
    return times, out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--segments", type=int, default=2000)
    ap.add_argument("--reach", type=float, default=1500.0)
    args = ap.parse_args()
    tx, ty = cells()
    print(f"cells {tx.size:,}; numba {'available' if numba_available() else 'absent'}")
    for clustered in (False, True):
        segs = segments(args.segments, clustered)
        runs = {"former": lambda s=segs: ref_local_direction_deg(s, tx, ty, args.reach),
                "numpy": lambda s=segs: local_direction_deg(s, tx, ty, args.reach,
                                                            accelerate=False)}
        if numba_available():
            runs["compiled"] = lambda s=segs: local_direction_deg(s, tx, ty, args.reach,
                                                                  accelerate=True)
        results = {}
        for name, f in runs.items():
            times, results[name] = timed(f)
            print(f"local_direction_deg {'channels' if clustered else 'uniform'} "
                  f"{len(segs)} segments {name:8s}: "
                  + ", ".join(f"{t:.2f}" for t in times) + " s")
        same = all(np.array_equal(v, results["former"], equal_nan=True)
                   for v in results.values())
        print(f"  identical={same}  cells directed {int(np.isfinite(results['former']).sum()):,}")
    for n in (2000, 3000, 4000):
        rng = np.random.default_rng(n)
        x = rng.uniform(0, 40_000, n) + ORIGIN[0]
        y = rng.uniform(0, 28_000, n) + ORIGIN[1]
        z = rng.normal(size=n)
        n_lags, max_lag = default_lags(x, y)
        for directions in (False, True):
            kw = dict(n_lags=n_lags, max_lag_m=max_lag, max_lag_fraction=0.5, seed=0,
                      directions=directions)
            t_old, ref = timed(lambda a=(x, y, z), kw=kw: ref_pairs(*a, **kw), 5)
            t_new, got = timed(lambda a=(x, y, z), kw=kw: _Pairs.of(*a, **kw), 5)
            same = (all(np.array_equal(a, b) and a.dtype == b.dtype
                        for a, b in zip(ref[:3], (got.which, got.d, got.sq), strict=True))
                    and (ref[3] is None) == (got.theta_deg is None)
                    and (ref[3] is None or np.array_equal(ref[3], got.theta_deg)))
            print(f"_Pairs.of {n} holes, {n_lags} lags, directions={directions}: former "
                  f"{min(t_old) * 1e3:.0f} ms, now {min(t_new) * 1e3:.0f} ms (best of 5), "
                  f"identical={same}, pairs {got.d.size:,}")


if __name__ == "__main__":
    main()
