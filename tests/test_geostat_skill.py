"""Skill of the window / thin zones against known truths: probability zones vs the baseline.

Baseline (issue 3): the kriged total thickness thresholded at the window (1 m) and thin (5 m)
thresholds. Tool: cells where P(thinner than the threshold) reaches the configured
probability threshold (``p_window_threshold`` and ``p_thin_threshold``, 0.5 by default), the
probabilities honouring holes that prove a window and holes that stopped in the clay, with
the variance level set by cross-validation (:mod:`aquitardmap.probability`). Scores: area
recall (share of the truth's cells below the threshold that are flagged) and area precision
(share of flagged cells that are below it in the truth), on the cells of the study area;
window zones scored against truth < 1 m, thin-or-window zones against truth < 5 m.

The truths are the generator's truth grids (aquitardmap.synthetic), the outside reference:
the bundled demo region and two further seeded regions of other character generated here.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from aquitardmap.grid import read_raster
from aquitardmap.pipeline import build_surfaces, load_inputs
from aquitardmap.probability import cv_variance_scale, thickness_probabilities
from aquitardmap.synthetic import make_synthetic_region

from conftest import DEMO

#: Extra regions: (character, seed); smaller than the demo to keep the tests fast.
REGIONS = {"demo": None, "channel_cut": ("channel_cut", 11),
           "bedrock_highs": ("bedrock_highs", 12)}
SMALL = {"n_holes": 250, "extent_m": (7000.0, 5000.0), "hazards": False}


def _scores(flag: np.ndarray, truth_below: np.ndarray) -> tuple[float, float]:
    tp = float((flag & truth_below).sum())
    return tp / max(truth_below.sum(), 1), tp / max(flag.sum(), 1)


def measure(project_dir) -> dict[str, dict[str, tuple[float, float]]]:
    """{"baseline"|"tool": {"window"|"thin": (recall, precision)}} for a project with
    ``truth/aquitard_thickness_m.tif``."""
    inputs = load_inputs(project_dir)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        total = build_surfaces(inputs)["aquitard"]
    th = inputs.project.screening
    used = inputs.columns[~inputs.columns["excluded"]]
    probs = thickness_probabilities(
        used["x"].to_numpy(float), used["y"].to_numpy(float),
        used["aquitard_thickness_m"].to_numpy(float), used["status_aquitard"].to_numpy(),
        total.variogram, inputs.grid,
        {"window": th.window_thickness_m, "thin": th.thin_thickness_m},
        max_neighbours=inputs.project.kriging.max_neighbours, n_draws=th.probability_draws,
        seed=th.probability_seed, variance_scale=cv_variance_scale(total.cv))
    truth, *_ = read_raster(inputs.project.root / "truth" / "aquitard_thickness_m.tif")
    m = inputs.grid.mask & np.isfinite(truth)
    est = total.thickness_m[m]
    pw, pt = probs.p_below["window"][m], probs.p_below["thin"][m]
    win, thin = truth[m] < th.window_thickness_m, truth[m] < th.thin_thickness_m
    return {
        "baseline": {"window": _scores(est < th.window_thickness_m, win),
                     "thin": _scores(est < th.thin_thickness_m, thin)},
        "tool": {"window": _scores(pw >= th.p_window_threshold, win),
                 "thin": _scores((pt >= th.p_thin_threshold) | (pw >= th.p_window_threshold),
                                 thin)},
    }


@pytest.fixture(scope="module", params=list(REGIONS))
def skill(request, tmp_path_factory):
    spec = REGIONS[request.param]
    if spec is None:
        root = DEMO
    else:
        character, seed = spec
        root = tmp_path_factory.mktemp(request.param)
        make_synthetic_region(root, seed=seed, character=character, write_project_toml=True,
                              **SMALL)
    s = measure(root)
    for kind in ("window", "thin"):
        (br, bp), (tr, tp) = s["baseline"][kind], s["tool"][kind]
        print(f"{request.param:>14} {kind:>6}: baseline recall {br:.3f} precision {bp:.3f}; "
              f"tool recall {tr:.3f} precision {tp:.3f}")
    return request.param, s


def test_probability_zones_find_more_of_the_true_windows_at_no_loss_of_precision(skill):
    # The criterion of issue 3: beat the baseline on recall without falling below it on
    # precision (measured: recall +0.09 to +0.22, precision equal or higher).
    name, s = skill
    (br, bp), (tr, tp) = s["baseline"]["window"], s["tool"]["window"]
    assert tr > br + 0.05, name
    assert tp >= bp, name


def test_probability_zones_find_more_of_the_true_thin_clay(skill):
    # More of the thin clay everywhere; precision is at or above the baseline's on the
    # bedrock region and up to 0.045 below it on the others (README), held by the floors.
    name, s = skill
    (br, _bp), (tr, tp) = s["baseline"]["thin"], s["tool"]["thin"]
    assert tr > br, name
    assert tp >= FLOORS[name]["thin"], name


#: Precision floors of the tool from the measured figures (README), so that a regression
#: shows; where the tool is below the baseline's precision the README says by how much.
FLOORS = {"demo": {"thin": 0.90}, "channel_cut": {"thin": 0.89},
          "bedrock_highs": {"thin": 0.771}}
