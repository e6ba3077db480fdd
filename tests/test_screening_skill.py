"""The skill of a whole screening run (aquitardmap.evaluation.skill.screening_skill) is the skill of
what the run writes.

Reference: the files a full ``run`` writes (zones.gpkg, p_thin.tif, p_window.tif,
boreholes.gpkg) scored here by hand against the generator's truth grid — recall and
precision by counting cells, the Brier score as the mean squared difference between the
probability and the 0/1 outcome (Brier 1950, Monthly Weather Review 78:1–3), holes in
zones by a point-in-polygon join (geopandas) rather than by grid cells.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
from rasterio.features import rasterize

from aquitardmap.evaluation.skill import TRUTH_THICKNESS, pooled_skill, screening_skill
from aquitardmap.evaluation.synthetic.region import make_synthetic_region
from aquitardmap.grid import read_raster
from aquitardmap.outputs import names as outputs
from aquitardmap.pipeline import run

SMALL = {"n_holes": 250, "extent_m": (7000.0, 5000.0), "hazards": False}


@pytest.fixture(scope="module")
def region(tmp_path_factory):
    root = tmp_path_factory.mktemp("channel")
    make_synthetic_region(root, seed=11, character="channel_cut", write_project_toml=True,
                          **SMALL)
    result = run(root, tmp_path_factory.mktemp("out") / "run")
    return root, result, screening_skill(root)


def _cells(polygons, grid) -> np.ndarray:
    if len(polygons) == 0:
        return np.zeros(grid.mask.shape, bool)
    return rasterize(((g, 1) for g in polygons.geometry), out_shape=grid.mask.shape,
                     transform=grid.transform, fill=0, dtype="uint8").astype(bool)


def test_zone_scores_are_those_of_the_written_zones(region):
    root, result, s = region
    grid = result.inputs.grid
    truth, *_ = read_raster(root / TRUTH_THICKNESS)
    m = grid.mask & np.isfinite(truth)
    zones = gpd.read_file(result.out_dir / outputs.ZONES)
    window = _cells(zones[zones["kind"] == "window"], grid)
    union = window | _cells(zones[zones["kind"] == "thin"], grid)
    for cells, below, score in ((window, truth < 1.0, s.zones["window"]),
                                (union, truth < 5.0, s.zones["thin"])):
        hits = int((cells & below & m).sum())
        assert score.flagged_cells == int((cells & m).sum())
        assert score.truth_cells == int((below & m).sum())
        assert score.recall == pytest.approx(hits / (below & m).sum(), abs=1e-12)
        assert score.precision == pytest.approx(hits / (cells & m).sum(), abs=1e-12)
    assert s.mask_source == "zone_masks"
    assert s.tiers == {} or "tier" in zones.columns


@pytest.mark.parametrize("kind, threshold_m, file", [("thin", 5.0, outputs.P_THIN_PROB),
                                                     ("window", 1.0, outputs.P_WINDOW_PROB)])
def test_probability_scores_are_those_of_the_written_grids(region, kind, threshold_m, file):
    root, result, s = region
    truth, *_ = read_raster(root / TRUTH_THICKNESS)
    p, *_ = read_raster(result.out_dir / file)  # float32 on disk
    m = result.inputs.grid.mask & np.isfinite(truth)
    event = (truth[m] < threshold_m).astype(float)
    score = s.probability[kind]
    assert score.cells == int(m.sum())
    assert score.brier == pytest.approx(np.mean((p[m] - event) ** 2), rel=1e-5)
    assert score.sum_p_over_area == pytest.approx(p[m].sum() / event.sum(), rel=1e-5)
    assert score.reliability.cells.sum() == m.sum()


def test_proving_holes_are_counted_in_the_written_zones(region):
    _, result, s = region
    holes = gpd.read_file(result.out_dir / outputs.BOREHOLES)
    holes = holes[holes["excluded"].astype(str).str.lower() != "true"]
    zones = gpd.read_file(result.out_dir / outputs.ZONES)
    area = zones[zones["kind"].isin(["window", "thin"])]
    window = zones[zones["kind"] == "window"]
    for kind, column in (("window", "proves_window"), ("thin", "proves_thin")):
        provers = holes[holes[column].astype(str).str.lower() == "true"]
        ids = s.proving[kind].borehole_ids
        assert set(ids) <= set(provers["borehole_id"])
        assert len(ids) + s.proving[kind].n_outside == len(provers)
        in_any = gpd.sjoin(provers, area[["geometry"]], predicate="within")
        in_window = gpd.sjoin(provers, window[["geometry"]], predicate="within")
        assert s.proving[kind].in_any_zone == in_any["borehole_id"].nunique()
        assert s.proving[kind].in_window_zone == in_window["borehole_id"].nunique()
    assert s.proving["window"].count > 0


def test_indicator_baseline_and_matched_recall_and_pooling(region):
    _, _, s = region
    # the tool's best P(thin) zone reaches at least the indicator zone's precision
    assert s.at_indicator_precision.precision >= s.indicator.precision
    assert 0.0 < s.indicator.recall <= 1.0
    # pooling a region with itself counts every cell twice and keeps every ratio
    twice = pooled_skill([s, s])
    assert twice.cells == 2 * s.cells and twice.regions == 2
    assert twice.zones["thin"].flagged_cells == 2 * s.zones["thin"].flagged_cells
    assert twice.zones["thin"].recall == pytest.approx(s.zones["thin"].recall, abs=1e-12)
    assert twice.probability["window"].brier == pytest.approx(s.probability["window"].brier)
    assert twice.proving["window"].count == 2 * s.proving["window"].count
