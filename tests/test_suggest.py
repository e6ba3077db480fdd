"""``aquitardmap suggest``: outputs, bad input, settings, and skill against a known truth."""

from __future__ import annotations

import subprocess
import sys

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from shapely.geometry import Point

from aquitardmap.config.project import read_project
from aquitardmap.drilling.suggest import COLUMNS, suggest, suggest_holes, total_thickness_surface
from aquitardmap.errors import InputError
from aquitardmap.evaluation.drilling_trial import (
    compare_designs,
    misclassified_area_m2,
    regular_sites,
    screening_class,
    trials_table,
)
from aquitardmap.evaluation.synthetic.region import make_synthetic_region
from aquitardmap.grid import write_raster
from aquitardmap.inputs.load import load_inputs
from aquitardmap.outputs import names as outputs

SMALL = {"n_holes": 60, "extent_m": (5000.0, 3500.0), "cell_size_m": 100.0,
         "write_project_toml": True, "hazards": False}


def _cli(*args):
    r = subprocess.run([sys.executable, "-m", "aquitardmap", *map(str, args)],
                       capture_output=True, text=True, timeout=600)
    r.stderr = " ".join(r.stderr.split())  # the console wraps long lines
    return r


@pytest.fixture(scope="module")
def region(tmp_path_factory):
    root = tmp_path_factory.mktemp("suggest") / "region"
    return make_synthetic_region(root, seed=3, character="esker_window", **SMALL)


def test_cli_writes_ranked_holes_as_gpkg_and_csv(region, tmp_path):
    out = tmp_path / "out"
    r = _cli("suggest", region.root, "--holes", 3, "--out", out)
    assert r.returncode == 0, r.stderr
    assert "Caution" in r.stderr and "Suggested holes" in r.stderr
    csv = pd.read_csv(out / outputs.SUGGESTED_HOLES_CSV)
    assert list(csv.columns) == list(COLUMNS)
    assert csv["rank"].tolist() == [1, 2, 3]
    assert (csv["expected_reduction_m2"] > 0).all()
    assert (np.diff(csv["expected_uncertain_after_m2"]) < 0).all()
    assert csv["reason"].str.contains("expected to settle").all()
    gdf = gpd.read_file(out / outputs.SUGGESTED_HOLES, layer=outputs.SUGGESTED_HOLES_LAYER)
    assert gdf.crs.to_epsg() == 32632 and len(gdf) == 3
    assert np.allclose(gdf.geometry.x, csv["x"]) and np.allclose(gdf.geometry.y, csv["y"])
    area = gpd.read_file(region.files["boundary"]).geometry.iloc[0]
    assert all(area.contains(Point(x, y)) for x, y in zip(csv["x"], csv["y"], strict=True))
    xy = csv[["x", "y"]].to_numpy()
    d = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    assert d[np.triu_indices(3, 1)].min() >= 250.0  # default [drilling] min_spacing_m
    # written under temporary names and moved into place: nothing else is left behind
    assert sorted(p.name for p in out.iterdir()) == sorted(
        [outputs.SUGGESTED_HOLES, outputs.SUGGESTED_HOLES_CSV])


def test_candidates_outside_the_area_exit_2_with_file_and_feature(region, tmp_path):
    inside = gpd.read_file(region.files["boundary"]).geometry.iloc[0].representative_point()
    cand = tmp_path / "sites.geojson"
    gpd.GeoDataFrame({"name": ["ok", "far"]},
                     geometry=[inside, Point(inside.x + 50_000, inside.y)],
                     crs="EPSG:32632").to_file(cand)
    out = tmp_path / "out"
    r = _cli("suggest", region.root, "--candidates", cand, "--out", out)
    assert r.returncode == 2
    assert "sites.geojson, line 2" in r.stderr and "outside the study area" in r.stderr
    assert not out.exists()
    # the same file in another CRS: refused, naming both
    gpd.GeoDataFrame(geometry=[inside], crs="EPSG:32632").to_crs(4326).to_file(cand)
    r = _cli("suggest", region.root, "--candidates", cand, "--out", out)
    assert r.returncode == 2 and "EPSG:4326" in r.stderr and "EPSG:32632" in r.stderr
    assert not out.exists()


def test_candidates_restrict_the_sites(region, tmp_path):
    inputs = load_inputs(region.root)
    surface = total_thickness_surface(inputs)
    poly = inputs.area.centroid.buffer(400.0)
    cand = tmp_path / "land.gpkg"
    gpd.GeoDataFrame({"name": ["Municipal lot"]}, geometry=[poly],
                     crs="EPSG:32632").to_file(cand)
    from aquitardmap.drilling.candidates import read_candidates

    sites = read_candidates(cand, inputs.project.crs, inputs.area, inputs.grid)
    res = suggest_holes(inputs, surface, 2, candidates=sites)
    assert len(res.holes) >= 1
    for x, y in zip(res.holes["x"], res.holes["y"], strict=True):
        assert poly.contains(Point(x, y))
    assert res.holes["reason"].str.contains("feature 1 'Municipal lot' of land.gpkg").all()
    assert (res.holes["candidate_feature"] == 1).all()


def test_priority_grid_steers_the_holes(region, tmp_path):
    inputs = load_inputs(region.root)
    g = inputs.grid
    xs, _ = g.cell_centres()
    mid = float(np.median(xs))
    pr = np.where(np.broadcast_to(xs[None, :], g.mask.shape) > mid, 1.0, 0.0)
    path = tmp_path / "priority.tif"
    write_raster(path, pr, g)
    res, written = suggest(region.root, tmp_path / "out", 3, priority_path=path)
    assert (res.holes["x"] > mid).all() and res.weighted
    assert res.holes["reason"].str.contains("weighted by the priority grid").all()
    bad = tmp_path / "negative.tif"
    write_raster(bad, pr - 1.0, g)
    with pytest.raises(InputError, match="negative"):
        suggest(region.root, tmp_path / "out2", 3, priority_path=bad)


def test_drilling_settings_are_read_and_checked(region, tmp_path):
    text = (region.root / "project.toml").read_text()
    proj = tmp_path / "p"
    proj.mkdir()
    for f in ("collars.csv", "intervals.csv"):
        (proj / f).write_bytes((region.root / f).read_bytes())
    (proj / "project.toml").write_text(text)
    d = read_project(proj).drilling
    assert (d.holes, d.p_low, d.p_high, d.target, d.min_spacing_m, d.priority_grid) == (
        5, 0.1, 0.9, "thin", 250.0, None)
    (proj / "project.toml").write_text(text + '\n[drilling]\nholes = 8\np_low = 0.2\n'
                                       'p_high = 0.8\ntarget = "both"\nmin_spacing_m = 500\n')
    d = read_project(proj).drilling
    assert (d.holes, d.p_low, d.p_high, d.target, d.min_spacing_m) == (8, 0.2, 0.8, "both",
                                                                       500.0)
    n = text.count("\n") + 1
    (proj / "project.toml").write_text(text + '\n[drilling]\nholes = 2.5\np_low = 0.9\n'
                                       'p_high = 0.5\ntarget = "deep"\n'
                                       'priority_grid = "../x.tif"\nspacing = 3\n')
    with pytest.raises(InputError) as err:
        read_project(proj)
    lines = sorted(p.line for p in err.value.problems)
    assert lines == [n + 2, n + 4, n + 5, n + 6, n + 7]
    msgs = " ".join(p.message for p in err.value.problems)
    for word in ("whole number", "p_high must lie between", "target must be one of",
                 "outside the project folder", "unknown key 'spacing'"):
        assert word in msgs


def test_regular_sites_are_spread_and_inside(region):
    inputs = load_inputs(region.root)
    x, y = regular_sites(inputs.grid, 10)
    assert x.size == 10
    r, c = inputs.grid.rowcol(x, y)
    assert inputs.grid.mask[r, c].all()
    d = np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])
    assert d[np.triu_indices(10, 1)].min() >= 500.0


def test_misclassified_area_counts_class_changes(region):
    inputs = load_inputs(region.root)
    g = inputs.grid
    th = inputs.project.screening
    truth = np.where(g.mask, 10.0, np.nan)
    est = truth.copy()
    rows, cols = np.nonzero(g.mask)
    est[rows[0], cols[0]] = 0.5  # a false window
    est[rows[1], cols[1]] = 3.0  # a false thin cell
    est[rows[2], cols[2]] = 9.0  # same class: not an error
    assert screening_class(np.array([0.5, 3.0, 9.0, np.nan]), th).tolist() == [0, 1, 2, -1]
    assert misclassified_area_m2(est, truth, g, th) == 2 * g.cell_area_m2


# Skill against a known truth: drilling the suggested holes (thickness read from the truth,
# full penetration) must shrink the misclassified window/thin area more than as many random
# holes (mean of 5 draws) and holes on a regular grid, averaged over three seeded regions of
# each character. (All three characters, five seeds each: benchmarks/drilling_designs.py and
# the README.)
SKILL_SEEDS = (1, 2, 3)
SKILL_HOLES = 10


@pytest.fixture(scope="module", params=["esker_window", "bedrock_highs"])
def skill_trials(request, tmp_path_factory):
    trials = []
    for seed in SKILL_SEEDS:
        root = tmp_path_factory.mktemp("skill") / f"{request.param}_{seed}"
        reg = make_synthetic_region(root, seed=seed, character=request.param, **SMALL)
        trials.append(compare_designs(reg.root, reg.truth["aquitard"], SKILL_HOLES,
                                      n_random=5, seed=seed))
    return trials


@pytest.mark.slow
def test_suggested_holes_beat_random_and_regular_holes_against_the_truth(skill_trials):
    table = trials_table(skill_trials)
    print(table.round(3).to_string())
    mean = table.iloc[-1]
    assert mean["suggested_reduction_km2"] > 0
    assert mean["suggested_reduction_km2"] > 1.5 * mean["random_reduction_km2"]
    assert mean["suggested_reduction_km2"] > 1.5 * mean["regular_reduction_km2"]


def _band_area_m2(p_thin, grid):
    inside = grid.mask & np.isfinite(p_thin)
    return float(np.sum(inside & (p_thin >= 0.1) & (p_thin <= 0.9)) * grid.cell_area_m2)


@pytest.mark.parametrize("with_hazard", [False, True])
def test_uncertain_area_is_the_one_the_run_screens(region, tmp_path, with_hazard):
    # The uncertain area today is exactly the area where the run's P(thin) lies in the band,
    # also when a hazard cuts the column (then the protective thickness is screened).
    import shutil

    import aquitardmap

    root = tmp_path / "proj"
    shutil.copytree(region.root, root, ignore=shutil.ignore_patterns("truth"))
    if with_hazard:
        area = gpd.read_file(root / "boundary.geojson").geometry.iloc[0]
        c = area.centroid
        gpd.GeoDataFrame({"name": ["Pit P1"], "kind": ["pit"], "removed_depth_m": [12.0]},
                         geometry=[c.buffer(700.0)], crs="EPSG:32632").to_file(
            root / "hazards.geojson", driver="GeoJSON")
    run = aquitardmap.run(root, None)
    res, _ = suggest(root, tmp_path / "out", 2)
    assert res.uncertain_now_m2 == pytest.approx(_band_area_m2(run.p_thin, run.inputs.grid))
    word = "protective aquitard" if with_hazard else "kriged total aquitard"
    assert res.holes["reason"].str.startswith(word.capitalize()).all()


def test_suggestions_appear_on_the_run_map(region, tmp_path):
    import aquitardmap

    out = tmp_path / "run"
    aquitardmap.run(region.root, out)
    assert "Suggested new holes" not in (out / outputs.MAP).read_text()
    res, _ = suggest(region.root, out, 2)
    page = (out / outputs.MAP).read_text()
    assert "Suggested new holes" in page and "Where to drill next (2, ranked)" in page
    assert "Suggested hole 1" in page and "expected to settle" in page
    # the run folder still holds the run, plus the two suggestion files
    assert (out / outputs.SUMMARY).exists() and (out / outputs.SUGGESTED_HOLES).exists()


def test_suggest_uses_the_variograms_the_last_run_kept(region, tmp_path, monkeypatch):
    # The suggestions must rest on the model the run used (kept between runs), not on a
    # fresh fit that may differ by up to the reuse tolerance.
    import json
    import shutil

    import aquitardmap
    import aquitardmap.drilling.suggest as sg
    from aquitardmap.geostat.cache.variograms import KEPT_FILE
    from aquitardmap.inputs.store import create_store

    proj = tmp_path / "proj"
    shutil.copytree(region.root, proj)
    create_store(read_project(proj))
    aquitardmap.run(proj, tmp_path / "run")
    kept_path = proj / ".aquitardmap-cache" / KEPT_FILE
    doc = json.loads(kept_path.read_text())
    model = doc["surfaces"]["aquitard"]["model"]
    model["range_m"] *= 1.05  # within the default tolerance (0.1): the kept one is used
    kept_path.write_text(json.dumps(doc))
    seen = []
    original = sg.plan_holes

    def spy(model, *args, **kwargs):
        seen.append(model)
        return original(model, *args, **kwargs)

    monkeypatch.setattr(sg, "plan_holes", spy)
    suggest(proj, tmp_path / "out", 2)
    assert seen and seen[0].range_m == pytest.approx(model["range_m"], rel=1e-12)
    fresh = total_thickness_surface(load_inputs(proj)).variogram  # outside: a fresh fit
    assert fresh.range_m == pytest.approx(model["range_m"] / 1.05, rel=1e-9)
