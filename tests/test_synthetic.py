"""Tests of the synthetic-region generator and of the committed Ostrel Valley demo.

The checks hold the generator to the input contract the pipeline reads (collars, intervals,
samples, DEM, boundary) and to the truth it claims to have drawn the data from. Ranges of
sample values are the demo brief's, which follow common practice for post-glacial clays,
sands and gravels.
"""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import rasterio

from aquitardmap.config.project import read_project
from aquitardmap.evaluation.demo_stack import CLAY_UNITS, K_TRUE_M_S, STACK
from aquitardmap.evaluation.synthetic.region import DEMO_SEED, make_synthetic_region
from aquitardmap.evaluation.synthetic.truth import CHARACTERS
from aquitardmap.grid import make_grid, read_raster, resample_to_grid
from aquitardmap.outputs import names as outputs

DEMO = Path(__file__).resolve().parents[1] / "demo_region"
COMPARED_FILES = ("collars.csv", "intervals.csv", "samples.csv", "hazards.geojson",
                  "truth/boreholes.csv",
                  "truth/truth.json")


def _read(folder: Path) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    collars = pd.read_csv(folder / "collars.csv")
    intervals = pd.read_csv(folder / "intervals.csv")
    samples = pd.read_csv(folder / "samples.csv")
    truth = pd.read_csv(folder / "truth" / "boreholes.csv")
    return collars, intervals, samples, truth


def _logs_problems(collars: pd.DataFrame, intervals: pd.DataFrame) -> list[str]:
    """Every breach of the intervals contract: per hole, contiguous from 0 to the total
    depth, positive thicknesses, units of the stack in stack order, none repeated."""
    problems = []
    depth = collars.set_index("borehole_id")["total_depth_m"]
    order = {u: i for i, u in enumerate(STACK)}
    if set(intervals.borehole_id) != set(collars.borehole_id):
        problems.append("holes without intervals or intervals without a collar")
    for bid, g in intervals.groupby("borehole_id", sort=False):
        g = g.sort_values("from_m")
        fr, to = g.from_m.to_numpy(), g.to_m.to_numpy()
        ranks = [order.get(u, -1) for u in g.unit]
        if fr[0] != 0.0:
            problems.append(f"{bid}: first interval starts at {fr[0]}")
        if not np.allclose(fr[1:], to[:-1], atol=1e-9):
            problems.append(f"{bid}: gaps or overlaps")
        if not np.all(to - fr > 0.0):
            problems.append(f"{bid}: zero or negative thickness")
        if abs(to[-1] - depth[bid]) > 1e-9:
            problems.append(f"{bid}: ends at {to[-1]}, total depth {depth[bid]}")
        if -1 in ranks or not np.all(np.diff(ranks) > 0):
            problems.append(f"{bid}: units {list(g.unit)} not in stack order")
    return problems


def _truth_at(path: Path, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    values, transform, _, _ = read_raster(path)
    rows, cols = rasterio.transform.rowcol(transform, x, y)
    return values[np.asarray(rows), np.asarray(cols)]


def _load_generate_script():
    spec = importlib.util.spec_from_file_location("demo_generate", DEMO / "generate.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def demo() -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    return _read(DEMO)


def test_demo_script_reproduces_committed_files_byte_for_byte(tmp_path):
    # the demo is regenerated with its seed by the committed script (input contract:
    # output must be byte-for-byte reproducible for a seed)
    assert _load_generate_script().main(["--out", str(tmp_path)]) == 0
    for name in COMPARED_FILES:
        assert (tmp_path / name).read_bytes() == (DEMO / name).read_bytes(), name
    meta = json.loads((DEMO / "truth" / "truth.json").read_text())
    assert meta["seed"] == DEMO_SEED and meta["synthetic"] is True


def test_demo_intervals_are_contiguous_and_in_stack_order(demo):
    collars, intervals, _, _ = demo
    assert _logs_problems(collars, intervals) == []


def test_demo_counts_and_id_patterns(demo):
    collars, _, _, truth = demo
    kinds = truth.kind.value_counts()
    assert len(collars) == 400
    assert kinds["geotechnical"] == 120  # partial_fraction 0.3 of 400
    assert 12 <= kinds["cored"] <= 15
    assert kinds["water_well"] == 400 - 120 - kinds["cored"]
    ids = collars.borehole_id
    assert ids.str.fullmatch(r"OW-\d{4}|GT-\d{3}|CH-\d{2}").all()
    assert ids.is_unique


def test_partial_holes_stop_inside_the_clay(demo):
    collars, intervals, _, truth = demo
    last = intervals.groupby("borehole_id").last()
    gt = truth[truth.kind == "geotechnical"].set_index("borehole_id")
    depth = collars.set_index("borehole_id").total_depth_m
    assert len(gt) >= 100
    assert last.loc[gt.index, "unit"].isin(CLAY_UNITS).all()
    assert depth[gt.index].between(6.0, 20.0).all()
    # censored: the true base of the clay lies below the bottom of every partial hole
    true_base = gt.thickness_SAND_m + gt.aquitard_thickness_m
    assert (true_base > depth[gt.index]).all()
    # taken as full thickness, many would claim thin clay (< 5 m) where it is >= 10 m thick
    logged_clay = (intervals[intervals.unit.isin(CLAY_UNITS)]
                   .assign(b=lambda d: d.to_m - d.from_m).groupby("borehole_id").b.sum())
    fake_thin = (logged_clay[gt.index] < 5.0) & (gt.aquitard_thickness_m >= 10.0)
    assert fake_thin.sum() >= 5


def test_water_wells_prove_the_window(demo):
    _, intervals, _, truth = demo
    units = intervals.groupby("borehole_id").unit.apply(list)
    wells = truth[truth.kind == "water_well"]
    no_clay = wells.borehole_id.map(
        lambda b: units[b][-1] == "GRAV" and not set(units[b]) & set(CLAY_UNITS))
    clay_true = _truth_at(DEMO / "truth" / outputs.AQUITARD_THICKNESS,
                          wells.x_true.to_numpy(), wells.y_true.to_numpy())
    proving = wells[no_clay.to_numpy() & (clay_true == 0.0)]
    assert len(proving) >= 5
    assert set(wells[wells.window_well == 1].borehole_id) <= set(proving.borehole_id)


def test_truth_total_is_sum_of_unit_truths_on_the_project_grid():
    tdir = DEMO / "truth"
    total, transform, crs, nodata = read_raster(tdir / outputs.AQUITARD_THICKNESS)
    parts = [read_raster(tdir / outputs.unit_thickness(u))[0] for u in CLAY_UNITS]
    with rasterio.open(tdir / outputs.AQUITARD_THICKNESS) as src:
        assert src.dtypes[0] == "float32" and src.nodata == -9999.0
    summed = (parts[0].astype(np.float32) + parts[1].astype(np.float32)
              + parts[2].astype(np.float32))
    # float32 holds about 7 significant digits: 40 m to within a few 1e-6 m
    np.testing.assert_allclose(summed, total, rtol=0, atol=2e-5)
    assert np.nanmin(total) == 0.0  # zero is data in windows, not nodata

    boundary = gpd.read_file(DEMO / "boundary.geojson")
    assert boundary.crs.to_epsg() == 32632 and len(boundary) == 1
    grid = make_grid(boundary.geometry.iloc[0], 50.0, boundary.crs)
    assert crs.to_epsg() == 32632
    assert transform == grid.transform and total.shape == (grid.height, grid.width)
    np.testing.assert_array_equal(np.isfinite(total), grid.mask)
    for name in (outputs.unit_thickness("SAND"), "ground_elev_m.tif"):
        assert np.array_equal(np.isfinite(read_raster(tdir / name)[0]), grid.mask)


def test_demo_numbers_are_in_realistic_ranges():
    # ranges of the demo brief (common practice for a post-glacial clay valley)
    tdir = DEMO / "truth"
    ground = read_raster(tdir / "ground_elev_m.tif")[0]
    sand = read_raster(tdir / outputs.unit_thickness("SAND"))[0]
    clay = read_raster(tdir / outputs.AQUITARD_THICKNESS)[0]
    assert 40.0 <= np.nanmin(ground) and np.nanmax(ground) <= 90.0
    assert np.nanmin(sand) >= 0.5 and np.nanpercentile(sand, 90) <= 5.0
    assert 15.0 <= np.nanpercentile(clay, 75) and np.nanmax(clay) <= 40.0
    meta = json.loads((tdir / "truth.json").read_text())
    areas = meta["areas_km2"]
    assert 50.0 <= areas["study_area"] <= 70.0
    assert 0.1 <= areas["clay_absent"] <= 2.0  # a window of a few hundred m by 1-3 km
    assert areas["clay_absent"] < areas["clay_below_5m"] < 0.3 * areas["study_area"]
    assert meta["k_true_m_s"] == K_TRUE_M_S


def test_dem_matches_the_true_ground():
    with rasterio.open(DEMO / "dem.tif") as src:
        assert src.crs.to_epsg() == 32632 and src.dtypes[0] == "float32"
        assert src.nodata == -9999.0 and src.res == (25.0, 25.0)
    boundary = gpd.read_file(DEMO / "boundary.geojson")
    grid = make_grid(boundary.geometry.iloc[0], 50.0, boundary.crs)
    dem_on_grid = resample_to_grid(DEMO / "dem.tif", grid)
    ground = read_raster(DEMO / "truth" / "ground_elev_m.tif")[0]
    inside = grid.mask
    assert np.isfinite(dem_on_grid[inside]).all()
    assert np.max(np.abs(dem_on_grid[inside] - ground[inside])) < 0.5


def test_water_well_noise_and_elevation_blunders(demo):
    collars, _, _, truth = demo
    m = collars.merge(truth, on="borehole_id")
    ww = m[m.kind == "water_well"]
    accurate = m[m.kind != "water_well"]
    dxy = np.concatenate([ww.x - ww.x_true, ww.y - ww.y_true])
    assert 15.0 < dxy.std() < 25.0  # reported positions jittered with sd 20 m
    # accurate holes: reported to 0.01 m, truth listed to 0.001 m
    assert np.abs(accurate.x - accurate.x_true).max() <= 0.006
    assert np.abs(accurate.ground_elev_m - accurate.ground_elev_true_m).max() <= 0.006
    assert (ww.ground_elev_m * 2 % 1 == 0).all()  # well elevations rounded to 0.5 m
    misfit = (ww.ground_elev_m - ww.ground_elev_true_m).abs()
    blunders = ww[ww.ground_elev_blunder_m != 0.0]
    assert len(blunders) in (3, 4)
    assert blunders.ground_elev_blunder_m.abs().between(6.0, 15.0).all()
    # a 3 m DEM-misfit check catches exactly the blunders
    assert set(ww[misfit > 3.0].borehole_id) == set(blunders.borehole_id)


def test_cored_hole_samples(demo):
    _, intervals, samples, truth = demo
    cored = set(truth[truth.kind == "cored"].borehole_id)
    assert set(samples.borehole_id) == cored
    iv = intervals[intervals.borehole_id.isin(cored)]
    s = samples.merge(iv, on="borehole_id")
    s = s[(s.depth_m > s.from_m) & (s.depth_m < s.to_m)]
    assert len(s) == len(samples)  # every sample lies inside exactly one interval
    per_unit = s.groupby(["borehole_id", "unit"]).size()
    clay = per_unit[per_unit.index.get_level_values("unit").isin(CLAY_UNITS)]
    assert clay.between(2, 4).all()
    assert (per_unit[per_unit.index.get_level_values("unit").isin(["SAND", "GRAV"])]
            == 1).all()
    c = s[s.unit.isin(CLAY_UNITS)]
    assert c.d10_mm.dropna().between(0.0005, 0.002).all()
    assert c.d60_mm.dropna().between(0.005, 0.03).all()
    assert c.porosity.dropna().between(0.45, 0.65).all()
    lab = c.dropna(subset=["k_lab_m_s"])
    assert 0.3 < len(lab) / len(c) < 0.7  # lab K on about half the clay samples
    for unit in CLAY_UNITS:  # log-normal around the unit's true K
        med = np.median(lab[lab.unit == unit].k_lab_m_s)
        assert K_TRUE_M_S[unit] / 3 < med < K_TRUE_M_S[unit] * 3
    sand = s[s.unit == "SAND"]
    assert sand.d10_mm.dropna().between(0.08, 0.25).all()
    assert sand.d60_mm.dropna().between(0.25, 0.8).all()
    assert sand.porosity.dropna().between(0.30, 0.38).all()
    grav = s[s.unit == "GRAV"]
    assert grav.d10_mm.dropna().between(0.2, 1.0).all()
    assert grav.d60_mm.dropna().between(2.0, 8.0).all()
    assert ((grav.d60_mm / grav.d10_mm) > 5.0).sum() >= 2  # some non-uniform gravels
    assert samples[["d10_mm", "d60_mm", "porosity"]].isna().any().all()  # blanks exist


@pytest.fixture(scope="module")
def small_regions(tmp_path_factory) -> dict[str, object]:
    out = {}
    for character in CHARACTERS:
        folder = tmp_path_factory.mktemp(character)
        out[character] = make_synthetic_region(
            folder, seed=11, character=character, n_holes=60, extent_m=(5000.0, 3500.0),
            origin_xy=(600_000.0, 6_700_000.0), write_project_toml=True)
    return out


def test_every_character_makes_a_valid_region(small_regions):
    demo_units = read_project(DEMO).units
    for character, region in small_regions.items():
        collars, intervals, _, truth = _read(region.root)
        assert _logs_problems(collars, intervals) == [], character
        assert len(collars) == 60 and region.counts["total"] == 60
        # the written project.toml carries the demo stack
        assert read_project(region.root).units == demo_units
        assert region.window_area_km2 > 0.0, character
        assert region.window_area_km2 < region.thin_area_km2 < region.area_km2
        last = intervals.groupby("borehole_id").last().unit
        gt = truth[truth.kind == "geotechnical"].borehole_id
        assert last[gt].isin(CLAY_UNITS).all()
        assert last[truth[truth.kind != "geotechnical"].borehole_id].eq("GRAV").all()


def test_characters_differ_in_window_area(small_regions):
    fractions = {c: r.window_area_km2 / r.area_km2 for c, r in small_regions.items()}
    assert len({round(f, 4) for f in fractions.values()}) == len(CHARACTERS), fractions


def test_seed_controls_the_data(tmp_path):
    kw = {"n_holes": 40, "extent_m": (4000.0, 3000.0), "character": "bedrock_highs"}
    a = make_synthetic_region(tmp_path / "a", seed=5, **kw)
    b = make_synthetic_region(tmp_path / "b", seed=5, **kw)
    c = make_synthetic_region(tmp_path / "c", seed=6, **kw)
    assert a.files["collars"].read_bytes() == b.files["collars"].read_bytes()
    assert a.files["intervals"].read_bytes() == b.files["intervals"].read_bytes()
    assert a.files["collars"].read_bytes() != c.files["collars"].read_bytes()


def test_bad_arguments_are_refused(tmp_path):
    with pytest.raises(ValueError, match="character"):
        make_synthetic_region(tmp_path, seed=1, character="volcano")
    with pytest.raises(ValueError, match="water wells"):
        make_synthetic_region(tmp_path, seed=1, n_holes=12)


@pytest.fixture(scope="module")
def ridge_and_channel(tmp_path_factory):
    folder = tmp_path_factory.mktemp("ridge_and_channel")
    return make_synthetic_region(folder, seed=104, character="ridge_and_channel",
                                 n_holes=300, extent_m=(12000.0, 10000.0))


def test_ridge_and_channel_is_a_plain_crossed_by_two_windows(ridge_and_channel):
    region = ridge_and_channel
    clay = read_raster(region.truth["aquitard"])[0]
    inside = region.grid.mask
    # the study area is nearly the whole 12 x 10 km rectangle (no narrow valley)
    assert region.area_km2 > 0.97 * 120.0
    # clay mostly 20-40 m thick, broken by windows; 4-5 % under 5 m on average over seeds
    # 101-110 (the figure), this seed within 3-6 %
    assert 20.0 <= np.nanpercentile(clay[inside], 10) and np.nanmax(clay) <= 40.0
    assert 0.03 < region.thin_area_km2 / region.area_km2 < 0.06
    # along most of each strip the clay is absent: the windows are most of the thin area
    assert region.window_area_km2 > 0.6 * region.thin_area_km2


def test_even_layout_spreads_holes_without_planted_window_wells(ridge_and_channel):
    region = ridge_and_channel
    collars, intervals, _, truth = _read(region.root)
    assert _logs_problems(collars, intervals) == []
    assert region.counts["window_wells"] == 0 and (truth.window_well == 0).all()
    assert region.counts["geotechnical"] == 60  # a fifth of 300
    assert 5 <= region.counts["cored"] <= 15
    xy = truth[["x_true", "y_true"]].to_numpy()
    d = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    np.fill_diagonal(d, np.inf)
    spacing = 0.5 * np.sqrt(region.area_km2 * 1e6 / 300)
    assert d.min() >= spacing - 1e-6
    # evenly spread: every 2 x 2 km block of the plain holds some holes
    blocks = np.floor((xy - xy.min(axis=0)) / 2000.0).astype(int)
    counts = pd.Series(list(map(tuple, blocks))).value_counts()
    assert len(counts) >= 30 and counts.min() >= 3
    # water-well location noise as in the clustered layout
    m = collars.merge(truth, on="borehole_id")
    ww = m[m.kind == "water_well"]
    assert 15.0 < np.concatenate([ww.x - ww.x_true, ww.y - ww.y_true]).std() < 25.0
    last = intervals.groupby("borehole_id").last().unit
    assert last[truth[truth.kind == "geotechnical"].borehole_id].isin(CLAY_UNITS).all()


def test_hole_layout_can_be_chosen_for_any_character(tmp_path):
    kw = {"n_holes": 60, "extent_m": (5000.0, 3500.0)}
    even = make_synthetic_region(tmp_path / "e", seed=3, character="esker_window",
                                 hole_layout="even", **kw)
    assert even.counts["window_wells"] == 0 and even.counts["geotechnical"] == 12
    clustered = make_synthetic_region(tmp_path / "c", seed=3, character="ridge_and_channel",
                                      hole_layout="clustered", **kw)
    assert clustered.counts["geotechnical"] == 18  # partial_fraction 0.3 by default
    with pytest.raises(ValueError, match="hole_layout"):
        make_synthetic_region(tmp_path / "x", seed=3, hole_layout="grid", **kw)
