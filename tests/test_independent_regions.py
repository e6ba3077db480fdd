"""Tests of the independent region generator (aquitardmap.evaluation.independent).

Its regions are invented data drawn from a known truth; the checks hold it to the input
contract the pipeline reads (loaded by ``aquitardmap.inputs.load.load_inputs``), to the truth
grid the pipeline builds from the boundary, to its own stated recording noise (contacts with
sd 0.25 m, rounded to 0.1 m) and to the target share of thin clay of the screening-skill
issue (2-10 % of the area under 5 m).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial import cKDTree

from aquitardmap.evaluation.independent import (
    INDEPENDENT_CHARACTERS,
    LAYOUTS,
    make_independent_region,
)
from aquitardmap.grid import read_raster
from aquitardmap.inputs.load import load_inputs
from aquitardmap.outputs import names as outputs

SMALL = {"n_holes": 60, "extent_m": (4000.0, 3000.0)}
CLAY = ("UMC", "LMC", "LAM")


@pytest.fixture(scope="module")
def regions(tmp_path_factory) -> dict[str, dict]:
    return {c: make_independent_region(tmp_path_factory.mktemp(c), seed=7, character=c,
                                       layout=LAYOUTS[i % 3], **SMALL)
            for i, c in enumerate(INDEPENDENT_CHARACTERS)}


def _logged_clay(root) -> tuple[pd.Series, pd.Series]:
    iv = pd.read_csv(root / "intervals.csv")
    clay = (iv[iv.unit.isin(CLAY)].assign(b=lambda d: d.to_m - d.from_m)
            .groupby("borehole_id").b.sum())
    last = iv.groupby("borehole_id").unit.last()
    return clay.reindex(last.index, fill_value=0.0), last


def test_every_character_loads_and_its_truth_is_on_the_pipeline_grid(regions):
    for character, r in regions.items():
        inputs = load_inputs(r["root"])  # raises InputError on any input problem
        grid = inputs.grid
        truth, transform, crs, _ = read_raster(r["root"] / "truth" / outputs.AQUITARD_THICKNESS)
        assert truth.shape == (grid.height, grid.width), character
        assert transform == grid.transform and crs == grid.crs, character
        np.testing.assert_array_equal(np.isfinite(truth), grid.mask)
        assert r["counts"]["total"] == 60 == len(pd.read_csv(r["root"] / "collars.csv"))
        assert r["counts"]["cored"] >= 2 and r["counts"]["geotechnical"] >= 3


def test_share_of_thin_clay_is_in_the_target_range(regions):
    for character, r in regions.items():
        truth = read_raster(r["root"] / "truth" / outputs.AQUITARD_THICKNESS)[0]
        share = float(np.mean(truth[np.isfinite(truth)] < 5.0))
        assert 0.02 <= share <= 0.10, (character, share)
        assert share == pytest.approx(r["share_below_5m"])
        assert 0.0 < r["area_below_1m_km2"] <= r["area_below_5m_km2"]


def test_logged_clay_agrees_with_the_truth_at_the_true_position(regions):
    for character, r in regions.items():
        truth = pd.read_csv(r["root"] / "truth" / "boreholes.csv").set_index("borehole_id")
        logged, last = _logged_clay(r["root"])
        full = truth[truth.kind != "geotechnical"]
        assert (last[full.index] == "GRAV").all(), character
        err = logged[full.index] - full.aquitard_thickness_m
        # two contacts with sd 0.25 m each and 0.1 m rounding: 1.5 m is over 4 sd
        assert err.abs().max() < 1.5, (character, err.abs().max())
        exact = full[full.kind == "cored"]
        assert (logged[exact.index] - exact.aquitard_thickness_m).abs().max() < 0.03
        # geotechnical holes stop inside the clay: their log is a lower bound
        gt = truth[truth.kind == "geotechnical"]
        assert last[gt.index].isin(CLAY).all() and (gt.aquitard_thickness_m >= 8.0).all()
        assert (logged[gt.index] < gt.aquitard_thickness_m).all()
        # truth/boreholes.csv is the truth raster at the true positions (up to the variation
        # within a 50 m cell)
        ras, transform, _, _ = read_raster(r["root"] / "truth" / outputs.AQUITARD_THICKNESS)
        col, row = ~transform @ (truth.x_true.to_numpy(), truth.y_true.to_numpy())
        at = ras[row.astype(int), col.astype(int)]
        assert np.median(np.abs(at - truth.aquitard_thickness_m)) < 0.5, character


def test_water_well_positions_carry_the_stated_error(regions):
    dxy = []
    for r in regions.values():
        c = pd.read_csv(r["root"] / "collars.csv").merge(
            pd.read_csv(r["root"] / "truth" / "boreholes.csv"), on="borehole_id")
        ww, other = c[c.kind == "water_well"], c[c.kind != "water_well"]
        dxy.append(np.concatenate([ww.x - ww.x_true, ww.y - ww.y_true]))
        assert np.abs(other.x - other.x_true).max() <= 0.006
    assert 15.0 < np.concatenate(dxy).std() < 25.0  # sd 20 m


def test_same_seed_same_files_other_seed_other_files(tmp_path, regions):
    kw = {"character": "straight_cuts", "layout": "poisson", **SMALL}
    ref = regions["straight_cuts"]["root"]
    again = make_independent_region(tmp_path / "a", seed=7, **kw)["root"]
    other = make_independent_region(tmp_path / "b", seed=8, **kw)["root"]
    for name in ("collars.csv", "intervals.csv", "samples.csv", "truth/boreholes.csv"):
        assert (again / name).read_bytes() == (ref / name).read_bytes(), name
    assert (other / "collars.csv").read_bytes() != (ref / "collars.csv").read_bytes()


def test_layouts_differ_in_how_even_they_are(tmp_path):
    spread = {}
    for layout in LAYOUTS:
        r = make_independent_region(tmp_path / layout, seed=4, character="patchy_highs",
                                    layout=layout, **SMALL)
        t = pd.read_csv(r["root"] / "truth" / "boreholes.csv")
        xy = t[["x_true", "y_true"]].to_numpy()
        spread[layout] = float(cKDTree(xy).query(xy, k=2)[0][:, 1].mean())
    # mean nearest-neighbour distance: jittered grid > uniform (Poisson) > clustered
    assert spread["jittered"] > spread["poisson"] > spread["clustered"], spread


def test_bad_arguments_are_refused(tmp_path):
    with pytest.raises(ValueError, match="character"):
        make_independent_region(tmp_path, seed=1, character="volcano")
    with pytest.raises(ValueError, match="layout"):
        make_independent_region(tmp_path, seed=1, character="straight_cuts", layout="grid")
    with pytest.raises(ValueError, match="extent_m"):
        make_independent_region(tmp_path, seed=1, character="straight_cuts",
                                extent_m=(1000.0, 3000.0))
