"""Suggested holes vs random and regular holes, scored against the truth of synthetic regions.

For every character of synthetic region and seed: generate a small region (5 x 3.5 km,
100 m cells, 60 boreholes, no hazards), krige the total aquitard thickness, then drill N new
holes (true thickness read from the truth, full penetration) placed (a) by ``aquitardmap
suggest`` with its default settings, (b) at random (mean of 8 draws), (c) on a regular
lattice; re-krige with the variogram held fixed and measure the area whose window / thin /
neither class differs from the truth's. Prints a Markdown table (the one in the README).

    python benchmarks/drilling_designs.py [--holes 10] [--seeds 1 2 3 4 5] [--work DIR]
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

import pandas as pd

from aquitardmap.evaluation.drilling_trial import compare_designs, trials_table
from aquitardmap.evaluation.synthetic.region import make_synthetic_region
from aquitardmap.evaluation.synthetic.truth import CHARACTERS


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--holes", type=int, nargs="+", default=[5, 10])
    ap.add_argument("--seeds", type=int, nargs="+", default=[1, 2, 3, 4, 5])
    ap.add_argument("--work", type=Path, default=None)
    args = ap.parse_args()
    work = args.work or Path(tempfile.mkdtemp(prefix="drilling-designs-"))
    rows = []
    for n in args.holes:
        every = []
        for character in CHARACTERS:
            trials = []
            for seed in args.seeds:
                reg = make_synthetic_region(work / f"{character}_{seed}", seed=seed,
                                            character=character, n_holes=60,
                                            extent_m=(5000.0, 3500.0), cell_size_m=100.0,
                                            write_project_toml=True, hazards=False)
                trials.append(compare_designs(reg.root, reg.truth["aquitard"], n,
                                              n_random=8, seed=seed))
            every.extend(trials)
            t = trials_table(trials)
            rows.append(_row(n, character, trials))
            print(t.round(3).to_string(), flush=True)
        rows.append(_row(n, "all", every))
    df = pd.DataFrame(rows)
    print()
    print(_markdown(df))


def _row(n: int, label: str, trials: list) -> dict:
    t = trials_table(trials)
    per = t.iloc[:-1]
    wins = int(((per["suggested_reduction_km2"] > per["random_reduction_km2"])
                & (per["suggested_reduction_km2"] > per["regular_reduction_km2"])).sum())
    m = t.iloc[-1]
    return {"new holes": n, "character": label, "regions": len(trials),
            "misclassified before (km²)": m["before_km2"],
            "suggested (km²)": m["suggested_reduction_km2"],
            "random (km²)": m["random_reduction_km2"],
            "regular (km²)": m["regular_reduction_km2"],
            "suggested best": f"{wins}/{len(trials)}"}


def _markdown(df: pd.DataFrame) -> str:
    cells = [[f"{v:.3f}" if isinstance(v, float) else str(v) for v in row]
             for row in df.itertuples(index=False)]
    lines = ["| " + " | ".join(df.columns) + " |", "|" + "---|" * len(df.columns)]
    lines += ["| " + " | ".join(r) + " |" for r in cells]
    return "\n".join(lines)


if __name__ == "__main__":
    main()
