"""Skill of the screening answer against known truths: zones that find the unprotected
ground, probabilities that mean what they say, hard data honoured (issue 15).

The truths are generators' truth grids, the outside reference: regions of the project's own
generator with sparse, evenly scattered wells and a narrow buried ridge and infilled channel
crossing the clay (``ridge_and_channel``, 12 km × 10 km, 260 and 600 holes, three seeds
each), and regions of the independent generator (``aquitardmap.evaluation.independent``,
which shares no truth-building code with ``aquitardmap.evaluation.synthetic``).
Every score comes from a whole run of the pipeline's stages with the default settings
(:func:`aquitardmap.evaluation.skill.screening_skill`), pooled over the
regions of a set (cells summed,
not a mean of ratios). The textbook method beside it: ordinary indicator kriging of
I(T < 5 m) read at P ≥ 0.2 (Goovaerts 1997, ch. 7; :func:`aquitardmap.evaluation.skill.
indicator_kriging_probability`). The acceptance figures are those of issue 15 ("Done when").
"""

from __future__ import annotations

import numpy as np
import pytest

from aquitardmap.evaluation.independent import make_independent_region
from aquitardmap.evaluation.skill import pooled_skill, recall_at_precision, reliability, score_cells
from aquitardmap.evaluation.skill import screening_skill as run_skill
from aquitardmap.evaluation.synthetic.region import make_synthetic_region

SEEDS = (101, 102, 103)
RIDGE = {"character": "ridge_and_channel", "extent_m": (12_000.0, 10_000.0),
         "hazards": False, "write_project_toml": True}
#: Independent regions: (character, holes, layout); 10 km × 8 km.
INDEPENDENT = (("straight_cuts", 200, "poisson"), ("sinuous_ridges", 300, "jittered"),
               ("patchy_highs", 300, "poisson"))


def _ridge(holes: int, tmp_path_factory):
    skills = []
    for seed in SEEDS:
        root = tmp_path_factory.mktemp(f"ridge{holes}_{seed}")
        make_synthetic_region(root, seed=seed, n_holes=holes, **RIDGE)
        skills.append(run_skill(root))
    s = pooled_skill(skills)
    _print(f"ridge_and_channel/{holes}", s)
    return s


@pytest.fixture(scope="module")
def ridge_260(tmp_path_factory):
    return _ridge(260, tmp_path_factory)


@pytest.fixture(scope="module")
def ridge_600(tmp_path_factory):
    return _ridge(600, tmp_path_factory)


@pytest.fixture(params=[260, 600], ids=lambda n: f"{n}holes")
def ridge(request):
    return request.param, request.getfixturevalue(f"ridge_{request.param}")


@pytest.fixture(scope="module")
def independent(tmp_path_factory):
    skills = []
    for character, holes, layout in INDEPENDENT:
        for seed in (1, 2):
            root = tmp_path_factory.mktemp(f"{character}_{seed}")
            make_independent_region(root, seed=seed, character=character, n_holes=holes,
                                    layout=layout)
            skills.append(run_skill(root))
    s = pooled_skill(skills)
    _print("independent", s)
    return s


def _print(name: str, s) -> None:
    z = s.zones["thin"]
    print(f"\n{name}: window + thin zones recall {z.recall:.3f} precision {z.precision:.3f}; "
          f"ΣP/area thin {s.probability['thin'].sum_p_over_area:.3f} window "
          f"{s.probability['window'].sum_p_over_area:.3f}; IK at P ≥ 0.2 recall "
          f"{s.indicator.recall:.3f} precision {s.indicator.precision:.3f}; tool recall at "
          f"IK precision {s.at_indicator_precision.recall:.3f}")
    for kind in ("thin", "window"):
        r = s.probability[kind].reliability
        print(f"  reliability {kind}: " + "  ".join(
            f"[{lo:.1f},{hi:.1f}) n={n} p={mp:.2f} obs={ob:.2f}"
            for lo, hi, n, mp, ob in zip(r.edges[:-1], r.edges[1:], r.cells, r.mean_p,
                                         r.observed, strict=True) if n))


#: Issue 15: window + thin zones (all tiers) against truth < 5 m, pooled, default settings.
ZONE_FLOORS = {260: (0.45, 0.35), 600: (0.60, 0.45)}


def test_zones_find_the_thin_ground_between_sparse_wells(ridge):
    holes, s = ridge
    min_recall, min_precision = ZONE_FLOORS[holes]
    z = s.zones["thin"]
    assert z.recall >= min_recall, (holes, z)
    assert z.precision >= min_precision, (holes, z)


def test_every_proving_hole_lies_in_a_zone(ridge, independent):
    # Issue 15 item 1: a hole proving a window lies in a window zone with P(window) >= 0.9
    # at its cell; a hole proving thin clay lies in a thin or window zone (every such hole
    # whose reported location lies in the study area: one outside it has no cell).
    for s in (ridge[1], independent):
        w, t = s.proving["window"], s.proving["thin"]
        assert w.count > 0 and t.count > 0
        assert w.in_window_zone == w.count
        assert t.in_any_zone == t.count
        assert np.all(w.p_at_cell[np.isfinite(w.p_at_cell)] >= 0.9)


def test_probabilities_add_up_to_the_true_area(ridge, independent):
    # Σ P over the cells is the area the probabilities expect: within 0.8–1.25 of the
    # true area (issue 15).
    for s in (ridge[1], independent):
        for kind in ("window", "thin"):
            ratio = s.probability[kind].sum_p_over_area
            assert 0.8 <= ratio <= 1.25, (kind, ratio)


@pytest.fixture(scope="module")
def ridge_both(request):
    """The ridge-and-channel regions of both densities, pooled (the issue's pooled set)."""
    return pooled_skill([request.getfixturevalue("ridge_260"),
                         request.getfixturevalue("ridge_600")])


def test_probabilities_mean_what_they_say_between_sparse_wells(ridge_both):
    # Reliability (Murphy & Winkler 1977, from memory): in every probability bin holding at
    # least 500 cells, the share of cells below the threshold in the truth is within 0.1
    # of the bin's mean probability (issue 15), pooled over the regions of both densities.
    for kind in ("window", "thin"):
        r = ridge_both.probability[kind].reliability
        ok = r.cells >= 500
        dev = np.abs(r.observed[ok] - r.mean_p[ok])
        assert np.all(dev <= 0.1), (kind, r.mean_p[ok], r.observed[ok])


def test_better_than_indicator_kriging_at_its_own_precision(ridge_both, independent):
    # Issue 15 item 5: at the precision ordinary indicator kriging reaches at P >= 0.2, the
    # tool's P(thin) finds at least as much of the thin ground, pooled over every region.
    s = pooled_skill([ridge_both, independent])
    print(f"\nall regions: IK {s.indicator.recall:.3f} at precision "
          f"{s.indicator.precision:.3f}; tool {s.at_indicator_precision.recall:.3f}")
    assert s.at_indicator_precision.recall >= s.indicator.recall, s.indicator


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
