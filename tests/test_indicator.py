"""Indicator kriging of thin / absent clay (aquitardmap.geostat.indicator) and the cross-validation
of probabilities at the holes (aquitardmap.geostat.calibration).

References: gstools' ordinary kriging (an independent implementation, PyPI) for the kriged
indicators, isotropic and along a local direction; the indicator coding of Goovaerts 1997
(*Geostatistics for Natural Resources Evaluation*, ch. 7) worked by hand; the order-relation
correction of GSLIB (Deutsch & Journel 1998, §IV.1.9, from memory) worked by hand; the Brier
score (Brier 1950) worked by hand.
"""

from __future__ import annotations

import gstools as gs
import numpy as np
import pytest

from aquitardmap.geostat.calibration import (
    block_cross_validation,
    block_labels,
    brier_score,
    reliability,
)
from aquitardmap.geostat.indicator import (
    IndicatorData,
    IndicatorProbabilities,
    IndicatorSettings,
    continuity_segments,
    correct_order,
    indicator_cdf,
    indicator_data,
    krige_indicator,
    local_direction_deg,
)
from aquitardmap.geostat.variogram import VariogramModel


def _indicators(n=60, seed=3):
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 3000, n), rng.uniform(0, 2000, n)
    v = (rng.uniform(size=n) < 0.3).astype(float)
    return IndicatorData(x, y, v, 5.0), rng.uniform(0, 3000, 80), rng.uniform(0, 2000, 80)


def test_indicator_coding_follows_goovaerts():
    # Goovaerts 1997, ch. 7: a full thickness gives 1{T < t}; a hole that stopped in the clay
    # at or below t is a sure 0; one that stopped above t cannot tell and is left out.
    x = np.array([0.0, 100.0, 200.0, 300.0, 400.0])
    t = np.array([0.0, 3.0, 12.0, 8.0, 2.0])
    st = np.array(["full", "full", "full", "lower_bound", "lower_bound"])
    d = indicator_data(x, np.zeros(5), t, st, 5.0)
    assert list(d.x_m) == [0.0, 100.0, 200.0, 300.0]
    assert list(d.value) == [1.0, 1.0, 0.0, 0.0]
    assert d.n_left_out == 1 and d.n_event == 2


def test_isotropic_indicator_kriging_equals_gstools():
    # Reference: gstools.krige.Ordinary, unique neighbourhood (all data), spherical model.
    data, xt, yt = _indicators()
    m = VariogramModel("spherical", nugget=0.02, psill=0.19, range_m=900.0)
    est = gs.krige.Ordinary(gs.Spherical(dim=2, var=0.19, len_scale=900.0, nugget=0.02),
                            [data.x_m, data.y_m], data.value, exact=False)(
        [xt, yt], mesh_type="unstructured", return_var=False)
    ours = krige_indicator(data, m, xt, yt, max_neighbours=100)
    assert np.allclose(ours, np.clip(est, 0, 1), atol=1e-8)


def test_kriging_along_a_local_direction_equals_gstools_anisotropic():
    # Reference: gstools with a geometric anisotropy along 30 degrees: range 900 m along it,
    # 900/4 m across (gstools: len_scale [major, minor], angles in radians from x).
    data, xt, yt = _indicators(seed=5)
    m = VariogramModel("spherical", nugget=0.0, psill=0.2, range_m=900.0)
    ref = gs.krige.Ordinary(gs.Spherical(dim=2, var=0.2, len_scale=[900.0, 225.0],
                                         angles=np.deg2rad(30.0)),
                            [data.x_m, data.y_m], data.value, exact=False)(
        [xt, yt], mesh_type="unstructured", return_var=False)
    ours = krige_indicator(data, m, xt, yt, max_neighbours=100,
                           direction_deg=np.full(xt.size, 30.0), continuity_ratio=4.0)
    assert np.allclose(ours, np.clip(ref, 0, 1), atol=1e-8)


def test_a_hole_on_the_line_between_two_proving_holes_breaks_the_chain():
    # Two holes proving thin clay 1 km apart; a thick-clay hole 20 m off the line between
    # them breaks the chain, one 400 m off does not (common practice: a feature that runs on
    # between two holes cannot pass through a hole that logged thick clay).
    ev = IndicatorData(np.array([0.0, 1000.0, 500.0]), np.array([0.0, 0.0, 20.0]),
                       np.array([1.0, 1.0, 0.0]), 5.0)
    assert continuity_segments(ev, max_length_m=2000, corridor_m=150).shape == (0, 4)
    far = IndicatorData(ev.x_m, np.array([0.0, 0.0, 400.0]), ev.value, 5.0)
    segs = continuity_segments(far, max_length_m=2000, corridor_m=150)
    assert segs.shape == (1, 4)
    assert continuity_segments(far, max_length_m=900, corridor_m=150).shape == (0, 4)
    ang = local_direction_deg(segs, np.array([500.0, 500.0]), np.array([50.0, 900.0]), 300)
    assert ang[0] == pytest.approx(0.0) and np.isnan(ang[1])


def test_chain_raises_the_probability_between_proving_holes():
    # Holes proving thin clay every 800 m along a line, thick clay around: midway between
    # two of them the probability is higher with the chain than without.
    xs = np.arange(0, 4001, 800.0)
    gx, gy = np.meshgrid(np.arange(-2000, 6001, 700.0), np.arange(-3000, 3001, 700.0))
    off = np.abs(gy.ravel()) > 300
    x = np.r_[xs, gx.ravel()[off]]
    y = np.r_[np.zeros(xs.size), gy.ravel()[off]]
    t = np.r_[np.zeros(xs.size), np.full(int(off.sum()), 30.0)]
    st = np.array(["full"] * x.size)
    kw = dict(xt_m=np.array([400.0]), yt_m=np.array([0.0]))
    with_chain = indicator_cdf(x, y, t, st, [5.0], settings=IndicatorSettings(), **kw)
    without = indicator_cdf(x, y, t, st, [5.0],
                            settings=IndicatorSettings(continuity_ratio=1.0), **kw)
    assert with_chain.cutoffs[0].n_segments >= xs.size - 1
    assert with_chain.cdf[0, 0] > without.cdf[0, 0] + 0.1


def test_order_relations_corrected_as_gslib():
    # GSLIB §IV.1.9 (from memory): average of the upward and downward corrections.
    c = np.array([[0.3, 0.2, 0.6, 1.2]])
    up = np.array([0.3, 0.3, 0.6, 1.0])
    down = np.array([0.2, 0.2, 0.6, 1.0])
    assert np.allclose(correct_order(c), 0.5 * (up + down))
    assert np.all(np.diff(correct_order(c)) >= 0)


def test_cdf_interpolates_between_cutoffs():
    res = IndicatorProbabilities(np.array([1.0, 5.0]), np.array([[0.2, 0.6], [0.0, 0.0]]))
    assert np.allclose(res.at(np.array([1.0, 1.0])), [0.2, 0.0])
    assert np.allclose(res.at(np.array([3.0, 3.0])), [0.4, 0.0])
    assert np.allclose(res.at(np.array([0.5, 9.0])), [0.1, 0.0])


def test_cell_of_a_proving_hole_is_at_least_0_9_whatever_the_kriging_says():
    # A lone hole proving a window among 40 holes of thick clay, with a strong nugget: the
    # kriged indicator at its location is far below 0.9; the hard datum lifts it.
    rng = np.random.default_rng(1)
    x = np.r_[1000.0, rng.uniform(0, 2000, 40)]
    y = np.r_[1000.0, rng.uniform(0, 2000, 40)]
    t = np.r_[0.0, np.full(40, 25.0)]
    st = np.array(["full"] * 41)
    s = IndicatorSettings(location_sd_m=20.0)
    res = indicator_cdf(x, y, t, st, [1.0, 5.0], np.array([1000.0, 1010.0, 1300.0]),
                        np.array([1000.0, 1000.0, 1000.0]), s)
    assert np.all(res.cdf[:2] >= 0.9)
    assert res.cdf[2, 0] < 0.9


def test_brier_score_by_hand():
    # Brier 1950: mean squared difference of forecast and outcome.
    assert brier_score(np.array([0.9, 0.2, 0.5]), np.array([True, False, False])) == \
        pytest.approx((0.01 + 0.04 + 0.25) / 3)


def test_reliability_table_by_hand():
    r = reliability(np.array([0.05, 0.05, 0.2, 0.25, 0.95]),
                    np.array([False, False, True, False, True]))
    assert list(r.cells) == [2, 2, 0, 0, 0, 1]
    assert r.observed[1] == pytest.approx(0.5) and r.mean_p[1] == pytest.approx(0.225)


def test_block_cross_validation_holds_out_whole_blocks():
    # A predictor that returns the share of events among its training holes: every held-out
    # hole is predicted without any hole of its own block (checked inside the predictor).
    rng = np.random.default_rng(2)
    x, y = rng.uniform(0, 5000, 200), rng.uniform(0, 5000, 200)
    ev = rng.uniform(size=200) < 0.2
    lab = block_labels(x, y, 1000.0)

    def predict(train, test):
        assert not np.intersect1d(lab[train], lab[test]).size
        return {"thin": np.full(int(test.sum()), ev[train].mean())}

    cv = block_cross_validation(x, y, {"thin": (5.0, np.ones(200, bool), ev)}, predict,
                                1000.0, n_folds=5)["thin"]
    assert cv.p.size == 200 and cv.n_blocks == np.unique(lab).size
    assert cv.brier == pytest.approx(cv.brier_reference, abs=0.01)
