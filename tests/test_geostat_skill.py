"""Skill of the window / thin zones against known truths: probability zones vs the baseline.

Baseline (issue 3): the kriged total thickness (ordinary kriging) thresholded at the window
(1 m) and thin (5 m) thresholds. Tool: cells where P(thinner than the threshold) reaches the
configured likely-tier probability threshold (``p_window_threshold`` 0.5 and
``p_thin_threshold`` 0.5 by default) and the cells holding a hole that proves a window or
thin clay, the probabilities honouring holes that prove a window and holes that stopped in
the clay, with the ground elevation as an external drift where cross-validation favours it
and the variance level set by cross-validation (:mod:`aquitardmap.probability`,
:mod:`aquitardmap.drift`). Scores: area recall (share of the truth's cells below the
threshold that are flagged) and area precision (share of flagged cells that are below it in
the truth), on the cells of the study area; window zones scored against truth < 1 m,
thin-or-window zones against truth < 5 m.

The truths are the generator's truth grids (aquitardmap.synthetic), the outside reference:
the bundled demo region and two further seeded regions of other character generated here.
"""

from __future__ import annotations

import numpy as np
import pytest

from aquitardmap.skill import recall_at_precision, reliability, score_cells, zone_skill
from aquitardmap.synthetic import make_synthetic_region

from conftest import DEMO

#: Extra regions: (character, seed); smaller than the demo to keep the tests fast.
REGIONS = {"demo": None, "channel_cut": ("channel_cut", 11),
           "bedrock_highs": ("bedrock_highs", 12)}
SMALL = {"n_holes": 250, "extent_m": (7000.0, 5000.0), "hazards": False}


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
    s = zone_skill(root)
    for kind in ("window", "thin"):
        b, t = s["baseline"][kind], s["tool"][kind]
        m = s["matched"][kind]
        print(f"{request.param:>14} {kind:>6}: baseline recall {b.recall:.3f} precision "
              f"{b.precision:.3f}; tool recall {t.recall:.3f} precision {t.precision:.3f}; "
              f"best P threshold at the baseline's precision: recall {m.recall:.3f} "
              f"(P >= {m.p_threshold:.2f})")
    return request.param, s


#: What each region must show. "criterion": issue 3's acceptance rule, recall above the
#: baseline's (by at least :data:`MIN_RECALL_GAIN`) and precision not below it. Otherwise
#: floors from the measured figures (README "Zones from probabilities against the truth"),
#: so that a regression shows: on the channel region the zones find far more of the
#: windows and thin clay but flag the cells just beyond the channel's edges, where clay is
#: left, so their precision is below the baseline's. These three regions are not a sample:
#: over 8 seeded regions of each character (``benchmarks/bench_zone_skill.py``) the rule
#: holds for the thin zones in most esker and bedrock regions and for the window zones in
#: few (README), which this test does not hide by its choice of regions.
#: The tool here is the likely tier of the zones. Issue 15 withdrew issue 3's rule; with the
#: provisional likely thin threshold 0.5 (was 0.6) the thin zones find more (demo recall
#: 0.265 against 0.159) at a precision a little below the baseline's (0.900 against 0.919;
#: channel_cut 0.901), so the thin rows of those two regions are floors from these
#: measured figures until the probability work sets the final defaults.
MIN_RECALL_GAIN = 0.01
EXPECT = {
    "demo": {"window": "criterion", "thin": {"recall_gain": 0.09, "precision": 0.89}},
    "bedrock_highs": {"window": "criterion", "thin": "criterion"},
    "channel_cut": {"window": {"recall_gain": 0.28, "precision": 0.90},
                    "thin": {"recall_gain": 0.17, "precision": 0.89}},
}


@pytest.mark.parametrize("kind", ["window", "thin"])
def test_probability_zones_against_the_kriged_baseline(skill, kind):
    name, s = skill
    (br, bp), (tr, tp) = ((x.recall, x.precision) for x in (s["baseline"][kind],
                                                             s["tool"][kind]))
    rule = EXPECT[name][kind]
    if rule == "criterion":
        assert tr > br + MIN_RECALL_GAIN, (name, kind)
        assert tp >= bp, (name, kind)
    else:
        assert tr >= br + rule["recall_gain"], (name, kind)
        assert tp >= rule["precision"], (name, kind)


def test_best_threshold_is_at_least_the_default_one(skill):
    """The window zone is one of the zones "P(window) ≥ q near a proving hole" that
    :func:`recall_at_precision` tries, so where it reaches the baseline's precision the best
    threshold finds at least as much (consistency of two separate computations)."""
    name, s = skill
    b, t, m = s["baseline"]["window"], s["tool"]["window"], s["matched"]["window"]
    assert m.min_precision == b.precision
    if t.precision >= b.precision:
        assert m.recall >= t.recall - 1e-12, name
    if np.isfinite(m.p_threshold):
        assert m.precision >= b.precision, name


def test_scores_count_cells_by_hand():
    """Recall and precision on a 2 × 3 case counted by hand (definition: share of the true
    cells flagged, share of the flagged cells true; common practice)."""
    flag = [[True, True, False], [False, True, False]]
    truth = [[True, False, False], [True, True, False]]
    s = score_cells(flag, truth)
    assert (s.recall, s.precision) == (pytest.approx(2 / 3), pytest.approx(2 / 3))
    assert (s.flagged_cells, s.truth_cells) == (3, 3)
    assert score_cells([[False]], [[True]]).precision == 1.0
    assert score_cells([[True]], [[False]]).recall == 1.0


def test_recall_at_precision_counted_by_hand():
    """Five cells sorted by P: 0.9 (true), 0.8 (false), 0.8 (true), 0.6 (true), 0.1
    (false). Zones P ≥ q for q = 0.9, 0.8, 0.6, 0.1 have precision 1, 2/3, 3/4, 3/5 and
    recall 1/3, 2/3, 1, 1 (definitions as in :func:`score_cells`; common practice)."""
    p = [0.8, 0.9, 0.1, 0.6, 0.8]
    truth = [False, True, False, True, True]
    m = recall_at_precision(p, truth, 0.7)
    assert (m.recall, m.precision, m.p_threshold) == (1.0, 0.75, 0.6)
    m = recall_at_precision(p, truth, 0.8)
    assert (m.recall, m.precision, m.p_threshold) == (pytest.approx(1 / 3), 1.0, 0.9)
    m = recall_at_precision(p, truth, 1.01)
    assert m.recall == 0.0 and np.isnan(m.p_threshold)


def test_recall_at_precision_equals_trying_every_threshold():
    """Against the brute force: every distinct positive P as threshold, scored with
    :func:`score_cells` (an independent path: boolean masks, no sorting)."""
    rng = np.random.default_rng(7)
    p = np.round(rng.uniform(0, 1, 400), 2)
    p[:20] = 0.0
    truth = rng.uniform(0, 1, 400) < p
    for target in (0.5, 0.7, 0.85, 0.95):
        best = 0.0
        for q in np.unique(p[p > 0]):
            sc = score_cells(p >= q, truth)
            if sc.precision >= target:
                best = max(best, sc.recall)
        assert recall_at_precision(p, truth, target).recall == pytest.approx(best)


def test_reliability_table_counted_by_hand():
    """Bins, mean probability and observed frequency of 6 forecasts counted by hand
    (reliability table: Murphy & Winkler 1977, from memory); NaN left out, 1.0 in the last
    bin."""
    p = [0.05, 0.2, 0.25, 0.95, 1.0, float("nan")]
    event = [False, True, False, True, False, True]
    r = reliability(p, event, edges=(0.0, 0.1, 0.5, 1.0))
    assert r.cells.tolist() == [1, 2, 2]
    assert r.mean_p == pytest.approx([0.05, 0.225, 0.975])
    assert r.observed == pytest.approx([0.0, 0.5, 0.5])
    both = r.pooled(reliability([0.3], [True], edges=(0.0, 0.1, 0.5, 1.0)))
    assert both.cells.tolist() == [1, 3, 2]
    assert both.observed[1] == pytest.approx(2 / 3)
    assert both.mean_p[1] == pytest.approx(0.25)


def test_probabilities_mean_what_they_say(skill):
    """Among the cells given P(window) or P(thin) of 0.5 or more, the share that is a
    window (thin) in the truth is within 0.2 of their mean P (a reliable forecast matches
    them; Murphy & Winkler 1977, from memory). The tolerance covers a region's few hundred
    such cells, which lie together in a few zones."""
    name, s = skill
    for kind in ("window", "thin"):
        r = s["reliability"][kind]
        high = np.asarray(r.edges[:-1]) >= 0.5
        n = r.cells[high]
        if n.sum() == 0:
            continue
        mean_p = float((r.mean_p[high] * n).sum() / n.sum())
        observed = float((r.observed[high] * n).sum() / n.sum())
        assert abs(observed - mean_p) <= 0.2, (name, kind, mean_p, observed, n.sum())
