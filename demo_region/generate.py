"""Regenerate the invented Ostrel Valley demo region from its known truth.

Usage::

    python demo_region/generate.py [--out DIR] [--seed N]

Without options it rewrites the data files of ``demo_region/`` (collars, intervals, samples,
DEM, boundary and ``truth/``) with the demo seed; ``demo_region/project.toml`` is kept as it
is. Into any other folder it also writes a ``project.toml`` with the same stack, so the
folder is a complete project.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
if str(HERE.parent) not in sys.path:  # run from a source tree without installing
    sys.path.insert(0, str(HERE.parent))

from aquitardmap.evaluation.synthetic.region import DEMO_SEED, make_synthetic_region  # noqa: E402

DEMO_NAME = "Ostrel Valley (invented demo)"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--out", type=Path, default=HERE,
                        help="folder to write (default: the demo_region folder)")
    parser.add_argument("--seed", type=int, default=DEMO_SEED,
                        help=f"random seed (default: the demo seed, {DEMO_SEED})")
    args = parser.parse_args(argv)
    out = args.out
    write_toml = not (out / "project.toml").exists()
    region = make_synthetic_region(out, seed=args.seed, write_project_toml=write_toml,
                                   project_name=DEMO_NAME)
    c = region.counts
    print(f"wrote {out}: {c['total']} boreholes ({c['water_well']} water wells, "
          f"{c['geotechnical']} geotechnical, {c['cored']} cored); study area "
          f"{region.area_km2:.1f} km2, no clay on {region.window_area_km2:.2f} km2, "
          f"under 5 m of clay on {region.thin_area_km2:.2f} km2")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
