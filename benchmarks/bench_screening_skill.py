"""Benchmark of a whole screening run's skill against known truths, beside ordinary
indicator kriging (the textbook method), over many seeded invented regions.

For each region (``aquitardmap.evaluation.skill.screening_skill``: the pipeline's own stages, so it
scores whatever the pipeline's probability method and zone rule produce) it prints one
line, then per character and POOLED over every region (cells summed across regions, not a
mean of ratios):

- zones: recall / precision of the window zones against truth < 1 m and of the window or
  thin zones against truth < 5 m (and of each tier, cumulatively, when zones carry tiers);
- ΣP / area: Σ P(thin) over the study-area cells ÷ cells with truth < 5 m (1 = the
  probabilities expect the right area), the same for P(window) and truth < 1 m;
- Brier score of P(thin) and P(window), and their reliability tables (per bin: cells,
  mean P, share true in the truth);
- proving holes: holes (not excluded) through the clay logging < 1 m of it, how many lie
  in a window zone and in any zone (window or thin), median P(window) at their cells;
  holes logging < 5 m in any zone, median P(thin);
- indicator kriging of I(T < 5 m) read at P ≥ 0.2: recall / precision; the tool's recall
  at that precision (the best one threshold on P(thin), chosen knowing the truth).

Regions: every character of ``aquitardmap.evaluation.synthetic`` with its default hole layout on the
size of ``bench_zone_skill`` (250 holes, 7 km × 5 km, no hazards); ``ridge_and_channel``
(when the generator has it) on 12 km × 10 km with ``--holes`` holes (default 260 and 600)
laid out evenly; each character of the independent generator
``aquitardmap.evaluation.independent`` (when it can be imported) on the small size.
Invented data from known truths; not real places.

    python benchmarks/bench_screening_skill.py --seeds 2
    python benchmarks/bench_screening_skill.py --characters channel_cut --seeds 6 \\
        --set screening.p_thin_threshold=0.5 --ten-bins

Last lines: a Markdown table for the README. Not a test: it asserts nothing.
"""

from __future__ import annotations

import argparse
import importlib
import inspect
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from aquitardmap.evaluation.skill import (
    INDICATOR_OPERATING_P,
    RELIABILITY_EDGES,
    TEN_BINS,
    ScreeningSkill,
    pooled_skill,
    screening_skill,
)
from aquitardmap.evaluation.synthetic.region import make_synthetic_region
from aquitardmap.evaluation.synthetic.truth import CHARACTERS

SMALL = {"n_holes": 250, "extent_m": (7000.0, 5000.0), "hazards": False}
RIDGE_AND_CHANNEL = "ridge_and_channel"
RIDGE_EXTENT_M = (12_000.0, 10_000.0)
RIDGE_HOLES = (260, 600)
INDEPENDENT_MODULE = "aquitardmap.evaluation.independent"
INDEPENDENT_CHARACTERS = ("straight_cuts", "sinuous_ridges", "patchy_highs", "thinning_edge")
INDEPENDENT_PREFIX = "independent:"
FIRST_SEED = 101


@dataclass(frozen=True)
class RegionKind:
    """One row of the benchmark: a label and how to write a region of it for a seed."""

    label: str
    make: Callable[[Path, int], None]


def _parse_overrides(items: list[str]) -> dict[str, dict[str, object]]:
    """``SECTION.NAME=VALUE`` items as ``{section: {name: value}}`` (numbers as floats)."""
    out: dict[str, dict[str, object]] = {}
    for item in items:
        key, _, text = item.partition("=")
        section, _, name = key.partition(".")
        if not section or not name or not text:
            raise SystemExit(f"--set {item!r}: expected SECTION.NAME=VALUE")
        try:
            value: object = float(text)
        except ValueError:
            value = {"true": True, "false": False}.get(text.lower(), text)
        out.setdefault(section, {})[name] = value
    return out


def _synthetic_kind(character: str) -> RegionKind:
    def make(root: Path, seed: int) -> None:
        make_synthetic_region(root, seed=seed, character=character,
                              write_project_toml=True, **SMALL)
    return RegionKind(character, make)


def _ridge_kind(n_holes: int) -> RegionKind:
    even = "hole_layout" in inspect.signature(make_synthetic_region).parameters

    def make(root: Path, seed: int) -> None:
        extra = {"hole_layout": "even"} if even else {}
        make_synthetic_region(root, seed=seed, character=RIDGE_AND_CHANNEL,
                              n_holes=n_holes, extent_m=RIDGE_EXTENT_M,
                              hazards=False, write_project_toml=True, **extra)
    return RegionKind(f"{RIDGE_AND_CHANNEL}/{n_holes}", make)


def _independent_kind(module, character: str) -> RegionKind:
    maker = module.make_independent_region
    layout = inspect.signature(maker).parameters.get("layout")

    def make(root: Path, seed: int) -> None:
        extra = ({"layout": "even"} if layout is not None
                 and layout.default is inspect.Parameter.empty else {})
        maker(root, seed=seed, character=character, n_holes=SMALL["n_holes"],
              extent_m=SMALL["extent_m"], cell_size_m=50.0, partial_fraction=0.3, **extra)
        if not (root / "project.toml").exists():
            raise RuntimeError(f"{INDEPENDENT_MODULE} wrote no project.toml in {root}")
    return RegionKind(f"{INDEPENDENT_PREFIX}{character}", make)


def _independent_module():
    try:
        return importlib.import_module(INDEPENDENT_MODULE)
    except ImportError:
        return None


def region_kinds(names: list[str] | None, ridge_holes: list[int]) -> list[RegionKind]:
    """The kinds of region to score: ``names`` (synthetic characters, ``ridge_and_channel``,
    independent characters with or without the ``independent:`` prefix), or by default
    every one available."""
    independent = _independent_module()
    ind_chars = tuple(getattr(independent, "CHARACTERS", INDEPENDENT_CHARACTERS)
                      ) if independent is not None else ()
    own = [c for c in CHARACTERS if c != RIDGE_AND_CHANNEL]
    if names is None:
        names = own + ([RIDGE_AND_CHANNEL] if RIDGE_AND_CHANNEL in CHARACTERS
                       else []) + [INDEPENDENT_PREFIX + c for c in ind_chars]
    kinds: list[RegionKind] = []
    for name in names:
        bare = name.removeprefix(INDEPENDENT_PREFIX)
        if name == RIDGE_AND_CHANNEL:
            if RIDGE_AND_CHANNEL not in CHARACTERS:
                print(f"skipped {name}: aquitardmap.evaluation.synthetic has no such character yet")
                continue
            kinds.extend(_ridge_kind(n) for n in ridge_holes)
        elif name in own:
            kinds.append(_synthetic_kind(name))
        elif bare in ind_chars:
            kinds.append(_independent_kind(independent, bare))
        elif bare in INDEPENDENT_CHARACTERS and independent is None:
            print(f"skipped {name}: {INDEPENDENT_MODULE} cannot be imported yet")
        else:
            raise SystemExit(f"unknown character {name!r}; known: "
                             f"{', '.join(own + [RIDGE_AND_CHANNEL, *INDEPENDENT_CHARACTERS])}")
    return kinds


def _rp(score) -> str:
    return f"{score.recall:.2f}/{score.precision:.2f}"


def _median(v: np.ndarray) -> float:
    v = v[np.isfinite(v)]
    return float(np.median(v)) if v.size else float("nan")


def region_line(label: str, seed: int, s: ScreeningSkill, seconds: float) -> str:
    pw, pt = s.proving["window"], s.proving["thin"]
    return (f"  {label:>28} seed {seed}: zones window {_rp(s.zones['window'])} thin "
            f"{_rp(s.zones['thin'])}; ΣP/area thin {s.probability['thin'].sum_p_over_area:.2f}"
            f" window {s.probability['window'].sum_p_over_area:.2f}; Brier thin "
            f"{s.probability['thin'].brier:.4f} window {s.probability['window'].brier:.4f}; "
            f"window provers {pw.in_window_zone}/{pw.count} in window zone, "
            f"{pw.in_any_zone} in any; thin provers {pt.in_any_zone}/{pt.count} in a zone; "
            f"IK {_rp(s.indicator)}, tool recall at IK precision "
            f"{s.at_indicator_precision.recall:.2f}; {seconds:.1f} s"
            + ("" if s.mask_source == "zone_masks" else f" [{s.mask_source}]"))


def summary_block(label: str, s: ScreeningSkill) -> list[str]:
    """The pooled figures of one character (or of every region)."""
    pw, pt = s.proving["window"], s.proving["thin"]
    lines = [
        f"{label} ({s.regions} regions, {s.cells} cells)",
        f"  zones        window {_rp(s.zones['window'])} (flagged {s.zones['window'].flagged_cells}"
        f", truth {s.zones['window'].truth_cells} cells)   thin {_rp(s.zones['thin'])} "
        f"(flagged {s.zones['thin'].flagged_cells}, truth {s.zones['thin'].truth_cells})",
    ]
    for tier, scores in s.tiers.items():
        lines.append(f"  tier {tier:<10} window {_rp(scores['window'])}   thin "
                     f"{_rp(scores['thin'])}")
    lines += [
        f"  ΣP/area      thin {s.probability['thin'].sum_p_over_area:.3f}   window "
        f"{s.probability['window'].sum_p_over_area:.3f}",
        f"  Brier        thin {s.probability['thin'].brier:.4f}   window "
        f"{s.probability['window'].brier:.4f}",
    ]
    for kind in ("thin", "window"):
        r = s.probability[kind].reliability
        bins = "  ".join(f"[{lo:.1f},{hi:.1f}) {n} {mp:.2f} {ob:.2f}" for lo, hi, n, mp, ob
                         in zip(r.edges[:-1], r.edges[1:], r.cells, r.mean_p, r.observed,
                                strict=True))
        lines.append(f"  reliability P({kind}) [bin cells meanP observed]: {bins}")
    lines += [
        f"  proving      window holes {pw.count} (and {pw.n_outside} outside the study area): "
        f"{pw.in_window_zone} in a window zone, "
        f"{pw.in_any_zone} in any zone, median P(window) at them {_median(pw.p_at_cell):.2f}"
        f"; thin holes {pt.count} (and {pt.n_outside} outside): {pt.in_any_zone} in a window "
        f"or thin zone, median "
        f"P(thin) {_median(pt.p_at_cell):.2f}",
        f"  indicator kriging P(T<{s.thin_thickness_m:g} m) ≥ {INDICATOR_OPERATING_P:g}: "
        f"{_rp(s.indicator)} (flagged {s.indicator.flagged_cells}); tool at its precision: "
        f"recall {s.at_indicator_precision.recall:.3f} (precision "
        f"{s.at_indicator_precision.precision:.3f}); tool thin zones {_rp(s.zones['thin'])}",
    ]
    return lines


def readme_table(pooled: dict[str, ScreeningSkill]) -> list[str]:
    head = ("| regions | n | window zones R/P | thin zones R/P | ΣP/area thin | ΣP/area "
            "window | Brier thin | Brier window | window provers in window zone | IK P≥0.2 "
            "R/P | tool R at IK precision |")
    lines = [head, "|" + "---|" * (head.count("|") - 1)]
    for label, s in pooled.items():
        pw = s.proving["window"]
        lines.append(
            f"| {label} | {s.regions} | {_rp(s.zones['window'])} | {_rp(s.zones['thin'])} | "
            f"{s.probability['thin'].sum_p_over_area:.2f} | "
            f"{s.probability['window'].sum_p_over_area:.2f} | "
            f"{s.probability['thin'].brier:.3f} | {s.probability['window'].brier:.4f} | "
            f"{pw.in_window_zone}/{pw.count} | {_rp(s.indicator)} | "
            f"{s.at_indicator_precision.recall:.2f} |")
    return lines


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=3, help="regions per character")
    ap.add_argument("--characters", nargs="*", default=None,
                    help="characters (default: every one available)")
    ap.add_argument("--holes", type=int, nargs="*", default=list(RIDGE_HOLES),
                    help=f"hole counts of {RIDGE_AND_CHANNEL} regions")
    ap.add_argument("--set", dest="overrides", action="append", default=[],
                    metavar="SECTION.NAME=VALUE")
    ap.add_argument("--ten-bins", action="store_true",
                    help="reliability in ten equal bins instead of "
                         f"{', '.join(f'{e:g}' for e in RELIABILITY_EDGES)}")
    args = ap.parse_args()
    overrides = _parse_overrides(args.overrides)
    edges = TEN_BINS if args.ten_bins else RELIABILITY_EDGES
    kinds = region_kinds(args.characters, args.holes)
    print(f"{args.seeds} regions per character; settings replaced: {overrides or 'none'}")
    rows: dict[str, list[ScreeningSkill]] = {}
    seconds: list[tuple[str, float, float]] = []
    with tempfile.TemporaryDirectory() as tmp:
        for kind in kinds:
            for i in range(args.seeds):
                seed = FIRST_SEED + i
                root = Path(tmp) / f"{kind.label.replace('/', '_').replace(':', '_')}_{seed}"
                t0 = time.perf_counter()
                kind.make(root, seed)
                t1 = time.perf_counter()
                s = screening_skill(root, overrides=overrides, reliability_edges=edges)
                t2 = time.perf_counter()
                seconds.append((kind.label, t1 - t0, t2 - t1))
                rows.setdefault(kind.label, []).append(s)
                print(region_line(kind.label, seed, s, t2 - t1), flush=True)
    if not rows:
        print("no region scored")
        return
    pooled = {label: pooled_skill(skills) for label, skills in rows.items()}
    pooled["POOLED"] = pooled_skill([s for skills in rows.values() for s in skills])
    print()
    for label, s in pooled.items():
        print("\n".join(summary_block(label, s)))
    run_s = np.array([b for _, _, b in seconds])
    gen_s = np.array([a for _, a, _ in seconds])
    slowest = max(seconds, key=lambda r: r[2])
    print(f"\nruntime per region: screening_skill mean {run_s.mean():.1f} s (max "
          f"{slowest[2]:.1f} s, {slowest[0]}), generation mean {gen_s.mean():.1f} s; "
          f"{len(seconds)} regions in {run_s.sum() + gen_s.sum():.0f} s")
    print()
    print("\n".join(readme_table(pooled)))


if __name__ == "__main__":
    main()
