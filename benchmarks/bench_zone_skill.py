"""Benchmark of zone skill: probability zones against the kriged-thickness baseline, over
many seeded synthetic regions of each character.

The skill test (``tests/test_geostat_skill.py``) scores three regions; one realisation can
flatter or wrong a method by a few cells. This script scores ``--seeds`` regions of each
character (``make_synthetic_region``: invented data from a known truth, 250 holes on
7 km × 5 km, no hazards, as in the test) and prints, per character and zone kind, the mean
and spread of recall and precision of the **baseline** (ordinary kriging of the total
thickness thresholded at 1 m / 5 m) and of the **tool** (P zones at the project's
thresholds), the ratios tool / baseline of the means, and in how many regions issue 3's
rule holds (recall above the baseline's, precision not below it), then the reliability of
P(window) and P(thin) pooled over each character's regions (per probability bin: cells, mean
P, share true in the truth). For each region it also prints the best recall that any one
threshold on P(window) or P(thin), chosen knowing the truth, reaches at the baseline's
precision, and counts the regions where that recall is above the baseline's: where it is
not, no setting of ``p_window_threshold`` / ``p_thin_threshold`` meets the rule there.
Settings can be replaced
for a comparison, e.g. ``--set kriging.external_drift=none``.

    python benchmarks/bench_zone_skill.py                  # 6 seeds per character
    python benchmarks/bench_zone_skill.py --seeds 3 --set screening.p_thin_threshold=0.7

Last line: ``window_recall_over_baseline=… thin_recall_over_baseline=…`` (means over every
region). Not a test: it asserts nothing.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

import numpy as np

from aquitardmap.evaluation.skill import beats_baseline, zone_skill
from aquitardmap.evaluation.synthetic.region import make_synthetic_region
from aquitardmap.evaluation.synthetic.truth import CHARACTERS

SMALL = {"n_holes": 250, "extent_m": (7000.0, 5000.0), "hazards": False}
FIRST_SEED = 101


def _parse_overrides(items: list[str]) -> dict[str, dict[str, object]]:
    out: dict[str, dict[str, object]] = {}
    for item in items:
        key, _, text = item.partition("=")
        section, _, name = key.partition(".")
        try:
            value: object = float(text)
        except ValueError:
            value = text
        out.setdefault(section, {})[name] = value
    return out


def _matched(s: dict, kind: str) -> str:
    m = s["matched"][kind]
    if not np.isfinite(m.p_threshold):
        return "none reaches it"
    return f"recall {m.recall:.2f} at P ≥ {m.p_threshold:.2f}"


def _some_threshold_beats(s: dict, kind: str) -> bool:
    """Whether any one P threshold, chosen knowing the truth, would meet the rule."""
    return s["matched"][kind].recall > s["baseline"][kind].recall


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=6, help="regions per character")
    ap.add_argument("--characters", nargs="*", default=list(CHARACTERS))
    ap.add_argument("--set", dest="overrides", action="append", default=[],
                    metavar="SECTION.NAME=VALUE")
    args = ap.parse_args()
    overrides = _parse_overrides(args.overrides)
    print(f"{args.seeds} regions per character; settings replaced: {overrides or 'none'}")
    rows: dict[str, list[dict]] = {}
    with tempfile.TemporaryDirectory() as tmp:
        for character in args.characters:
            for i in range(args.seeds):
                seed = FIRST_SEED + i
                root = Path(tmp) / f"{character}_{seed}"
                make_synthetic_region(root, seed=seed, character=character,
                                      write_project_toml=True, **SMALL)
                s = zone_skill(root, overrides=overrides)
                rows.setdefault(character, []).append(s)
                print(f"  {character:>13} seed {seed}: " + "; ".join(
                    f"{k} {s['baseline'][k].recall:.2f}/{s['baseline'][k].precision:.2f} → "
                    f"{s['tool'][k].recall:.2f}/{s['tool'][k].precision:.2f} (best P "
                    f"threshold at the baseline's precision: {_matched(s, k)})"
                    for k in ("window", "thin")), flush=True)
    print("\ncharacter      zones   baseline recall / precision   tool recall / precision"
          "   recall ratio   rule holds   some P threshold would")
    every = {"window": [], "thin": []}
    for character, skills in rows.items():
        for kind in ("window", "thin"):
            b = np.array([[s["baseline"][kind].recall, s["baseline"][kind].precision]
                          for s in skills])
            t = np.array([[s["tool"][kind].recall, s["tool"][kind].precision]
                          for s in skills])
            held = sum(beats_baseline(s, kind) for s in skills)
            could = sum(_some_threshold_beats(s, kind) for s in skills)
            every[kind].append((b[:, 0].mean(), t[:, 0].mean()))
            print(f"{character:>13} {kind:>6}   {b[:, 0].mean():.3f}±{b[:, 0].std():.3f} / "
                  f"{b[:, 1].mean():.3f}±{b[:, 1].std():.3f}   "
                  f"{t[:, 0].mean():.3f}±{t[:, 0].std():.3f} / "
                  f"{t[:, 1].mean():.3f}±{t[:, 1].std():.3f}   "
                  f"{t[:, 0].mean() / max(b[:, 0].mean(), 1e-9):6.2f}   "
                  f"{held} of {len(skills)}      {could} of {len(skills)}")
    print("\nreliability (pooled over the regions of a character): bin  cells  mean P  "
          "share true")
    for character, skills in rows.items():
        for kind in ("window", "thin"):
            r = skills[0]["reliability"][kind]
            for s in skills[1:]:
                r = r.pooled(s["reliability"][kind])
            cells = "  ".join(
                f"[{lo:.1f},{hi:.1f}) {n:>6} {mp:.2f} {ob:.2f}"
                for lo, hi, n, mp, ob in zip(r.edges[:-1], r.edges[1:], r.cells, r.mean_p,
                                             r.observed, strict=True) if lo >= 0.1)
            print(f"{character:>13} {kind:>6}  {cells}")
    ratio = {k: np.mean([t for _, t in v]) / max(np.mean([b for b, _ in v]), 1e-9)
             for k, v in every.items()}
    print(f"window_recall_over_baseline={ratio['window']:.2f} "
          f"thin_recall_over_baseline={ratio['thin']:.2f}")


if __name__ == "__main__":
    main()
