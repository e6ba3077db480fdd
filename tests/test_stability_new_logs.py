"""Zones stay put when a batch of logs that disagree with their neighbours is added (issue 15,
item 6).

The demo region is run, then 15 holes taken from *another* synthetic region (another seed and
character of
:func:`aquitardmap.evaluation.synthetic.region.make_synthetic_region`, same CRS and origin, so they
fall inside the demo's study area, with logs from another truth: a batch of mislocated well
records) are added with ``aquitardmap add``, and the demo is run again. The checks are
against the logs themselves and cell arithmetic, not against the method:

- every hole used that proves a window (passed through less than ``window_thickness_m`` of
  clay) lies in a likely window zone, before and after;
- the window + thin zone area does not collapse (after ≥ 0.5 × before, all tiers and the
  likely tier);
- beyond the batch's reach (cells farther than :data:`REACH_M` from every new hole) the
  cells keep their zone kind and tier (measured share printed; the floor below is set from
  it).

``aquitardmap compare`` of the two runs reports any change of the probability model read
from the two ``summary.json`` files; with the latent-Gaussian method, whose variance scale
the batch moves (the failure the issue describes), compare names that change as the cause
of zones lost far from the new holes.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from rasterio.features import rasterize
from scipy.spatial import cKDTree

import aquitardmap
from aquitardmap.compare import CHANGES_JSON, MODEL_RANGE_CHANGE, ZONE_CHANGES_LAYER
from aquitardmap.evaluation.synthetic.region import make_synthetic_region
from aquitardmap.outputs import names as outputs

from conftest import DEMO, demo_copy

#: The batch: 15 holes of a region of another seed and character.
N_NEW = 15
FOREIGN_SEED = 7
FOREIGN_CHARACTER = "channel_cut"
#: Prefix of the new holes' ids (the foreign region uses the demo's id scheme).
PREFIX = "XB-"
#: Cells farther than this from every new hole are outside the batch's reach (m): about
#: twice the radius of the 32 nearest holes the indicator kriging uses at the demo's hole
#: density (printed by the test).
REACH_M = 2000.0
#: Least share of the zone cells beyond the reach that keep their kind and tier; measured
#: 0.992 on this batch, 0.983-1.0 on four batches of other seeds and characters (3
#: bedrock_highs, 11 esker_window, 5 ridge_and_channel, 8 channel_cut).
FAR_UNCHANGED_MIN = 0.95
TIERS = (("window", "likely"), ("thin", "likely"), ("window", "possible"),
         ("thin", "possible"))


def _cli(*args) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "aquitardmap", *map(str, args)],
                          capture_output=True, text=True, timeout=600,
                          env={**os.environ, "COLUMNS": "250"})


@pytest.fixture(scope="module")
def foreign_batch(tmp_path_factory) -> list[Path]:
    """Collars, intervals and samples CSVs of :data:`N_NEW` holes of the foreign region that
    lie inside the demo's study area, ids prefixed with :data:`PREFIX`."""
    root = tmp_path_factory.mktemp("foreign")
    make_synthetic_region(root / "region", seed=FOREIGN_SEED, character=FOREIGN_CHARACTER,
                          hazards=False)
    collars = pd.read_csv(root / "region" / "collars.csv", dtype=str)
    area = gpd.read_file(DEMO / "boundary.geojson").union_all()
    pts = gpd.GeoSeries(gpd.points_from_xy(collars["x"].astype(float),
                                           collars["y"].astype(float)))
    inside = collars.loc[pts.within(area).to_numpy(), "borehole_id"].to_numpy()
    chosen = set(np.random.default_rng(FOREIGN_SEED).choice(inside, N_NEW, replace=False))
    files = []
    for name in ("collars", "intervals", "samples"):
        df = pd.read_csv(root / "region" / f"{name}.csv", dtype=str)
        df = df[df["borehole_id"].isin(chosen)].copy()
        df["borehole_id"] = PREFIX + df["borehole_id"]
        if len(df):
            files.append(root / f"{name}_batch.csv")
            df.to_csv(files[-1], index=False)
    return files


def _before_after(root: Path, files: list[Path], screening: str = ""):
    proj = demo_copy(root, screening=screening)
    before = aquitardmap.run(proj, root / "before")
    r = _cli("add", proj, *files, "--note", "well records of uncertain location")
    assert r.returncode == 0, r.stderr
    after = aquitardmap.run(proj, root / "after")
    r = _cli("compare", root / "before", root / "after", "--out", root / "changes")
    assert r.returncode == 0, r.stderr
    return before, after, r.stdout, root / "changes"


@pytest.fixture(scope="module")
def runs(tmp_path_factory, foreign_batch):
    """The demo before and after the batch, with the default settings."""
    return _before_after(tmp_path_factory.mktemp("default"), foreign_batch)


@pytest.fixture(scope="module")
def latent_runs(tmp_path_factory, foreign_batch):
    """The same with ``probability_method = "latent_gaussian"`` (the issue's setting)."""
    return _before_after(tmp_path_factory.mktemp("latent"), foreign_batch,
                         'probability_method = "latent_gaussian"\n')


def _tier_cells(result) -> dict[tuple[str, str], np.ndarray]:
    """Cells whose centre lies in a window / thin zone of each tier (zone edges are cell
    edges)."""
    grid = result.inputs.grid
    out = {}
    for kind, tier in TIERS:
        z = result.zones[(result.zones["kind"] == kind) & (result.zones["tier"] == tier)]
        burnt = (rasterize(((g, 1) for g in z.geometry), out_shape=grid.mask.shape,
                           transform=grid.transform, fill=0, dtype="uint8").astype(bool)
                 if len(z) else np.zeros(grid.mask.shape, bool))
        out[(kind, tier)] = burnt & grid.mask
    return out


def _labels(cells: dict[tuple[str, str], np.ndarray]) -> np.ndarray:
    lab = np.zeros(next(iter(cells.values())).shape, int)
    for i, key in enumerate(TIERS, start=1):
        lab[cells[key] & (lab == 0)] = i
    return lab


def _new_holes(result) -> pd.DataFrame:
    bh = result.boreholes
    return bh[bh["borehole_id"].str.startswith(PREFIX)]


def _far_cells(result) -> np.ndarray:
    grid = result.inputs.grid
    new = _new_holes(result)
    xs, ys = grid.cell_centres()
    xx, yy = np.meshgrid(xs, ys)
    d, _ = cKDTree(np.column_stack([new["x"], new["y"]])).query(
        np.column_stack([xx.ravel(), yy.ravel()]))
    return (d.reshape(xx.shape) > REACH_M) & grid.mask


def _proving_outside_likely_windows(result) -> tuple[int, list[str]]:
    bh = result.boreholes
    th = result.inputs.project.screening
    used = bh[~bh["excluded"].astype(bool)]
    proving = used[(used["status_aquitard"] == "full")
                   & (used["aquitard_thickness_m"] < th.window_thickness_m)]
    r, c = result.inputs.grid.rowcol(proving["x"].to_numpy(), proving["y"].to_numpy())
    inside = _tier_cells(result)[("window", "likely")][r, c]
    return len(proving), sorted(proving.loc[~inside, "borehole_id"])


def _km2(cells: np.ndarray, result) -> float:
    return float(cells.sum() * result.inputs.grid.cell_area_m2 / 1e6)


@pytest.mark.slow
def test_the_batch_is_added_as_one_batch_of_holes_that_disagree(runs):
    before, after, _, _ = runs
    new = _new_holes(after)
    assert len(new) == N_NEW and not len(_new_holes(before))
    assert after.summary["counts"]["boreholes"] == before.summary["counts"]["boreholes"] + N_NEW
    # they come from another truth: several disagree with their neighbours or the DEM
    print(f"\nnew holes flagged suspicious: {int(new['suspicious'].astype(bool).sum())} of "
          f"{N_NEW}")
    assert new["suspicious"].astype(bool).sum() >= 3


@pytest.mark.slow
def test_proven_windows_stay_in_likely_window_zones(runs):
    before, after, _, _ = runs
    for name, result in (("before", before), ("after", after)):
        n, missing = _proving_outside_likely_windows(result)
        print(f"\n{name}: {n} holes prove a window, outside a likely window zone: {missing}")
        assert n >= 14 and missing == []
    demo_ids = set(before.boreholes["borehole_id"])
    n_demo, _ = _proving_outside_likely_windows(before)
    assert n_demo == 14  # the demo's 14 holes that prove no clay (README)
    assert demo_ids <= set(after.boreholes["borehole_id"])


@pytest.mark.slow
def test_window_and_thin_zones_do_not_collapse_and_stay_beyond_the_batch_reach(runs):
    before, after, _, _ = runs
    assert np.array_equal(before.inputs.grid.mask, after.inputs.grid.mask)
    cb, ca = _tier_cells(before), _tier_cells(after)
    for key in TIERS:
        print(f"\n{key[0]} {key[1]}: {_km2(cb[key], before):.3f} -> "
              f"{_km2(ca[key], after):.3f} km²", end="")
    all_b, all_a = _labels(cb) > 0, _labels(ca) > 0
    likely_b = cb[("window", "likely")] | cb[("thin", "likely")]
    likely_a = ca[("window", "likely")] | ca[("thin", "likely")]
    print(f"\nwindow + thin, all tiers: {_km2(all_b, before):.3f} -> "
          f"{_km2(all_a, after):.3f} km²; likely tier: {_km2(likely_b, before):.3f} -> "
          f"{_km2(likely_a, after):.3f} km²")
    assert _km2(all_b, before) > 1.0 and _km2(likely_b, before) > 0.5
    assert all_a.sum() >= 0.5 * all_b.sum()
    assert likely_a.sum() >= 0.5 * likely_b.sum()

    far = _far_cells(after)
    lb, la = _labels(cb), _labels(ca)
    zoned_far = far & ((lb > 0) | (la > 0))
    share = float(np.mean(lb[zoned_far] == la[zoned_far]))
    n_used = int((~before.boreholes["excluded"].astype(bool)).sum())
    radius = np.sqrt(32 / np.pi * before.summary["grid"]["study_area_km2"] * 1e6 / n_used)
    print(f"cells beyond {REACH_M:.0f} m of every new hole: {int(far.sum())} of "
          f"{int(after.inputs.grid.mask.sum())}; {int(zoned_far.sum())} of them in a zone "
          f"before or after, {share:.3f} keep their kind and tier (32-hole neighbourhood "
          f"radius at the demo's mean density: {radius:.0f} m)")
    assert zoned_far.sum() >= 200
    assert share >= FAR_UNCHANGED_MIN


def _reported(changes: dict) -> dict[tuple, dict]:
    return {(c["cutoff_m"], c["what"]): c for c in changes["probability_model"]["changes"]}


@pytest.mark.slow
def test_compare_reports_the_probability_model_changes_the_summaries_show(runs):
    before, after, stdout, folder = runs
    changes = json.loads((folder / CHANGES_JSON).read_text(encoding="utf-8"))
    reported = _reported(changes)
    pa = json.loads((before.out_dir / outputs.SUMMARY).read_text())["probability"]
    pb = json.loads((after.out_dir / outputs.SUMMARY).read_text())["probability"]
    assert changes["probability_model"]["method_a"] == pa["method"] == pb["method"]
    by_t = {c["threshold_m"]: c for c in pa["cutoffs"]}
    n_expected = 0
    for cb in pb["cutoffs"]:
        ca = by_t.get(cb["threshold_m"])
        if ca is None:
            continue
        t = round(cb["threshold_m"], 6)
        ra, rb = ca["variogram"]["range_m"], cb["variogram"]["range_m"]
        if abs(rb - ra) > MODEL_RANGE_CHANGE * ra:
            assert reported[(t, "range_m")]["before"] == pytest.approx(ra)
            n_expected += 1
        else:
            assert (t, "range_m") not in reported
        sa, sb = ca["n_continuity_segments"], cb["n_continuity_segments"]
        if sa != sb:
            assert (reported[(t, "n_continuity_segments")]["before"],
                    reported[(t, "n_continuity_segments")]["after"]) == (sa, sb)
            n_expected += 1
        if ca["variogram_source"] != cb["variogram_source"]:
            assert reported[(t, "variogram_source")]["after"] == cb["variogram_source"]
            n_expected += 1
    print(f"\nprobability model changes reported: {len(reported)} "
          f"({sorted({w for _, w in reported})}); over the study area: "
          f"{changes['probability_model']['changed_over_study_area']}; "
          f"{changes['probability_model']['text']}")
    assert len(reported) >= n_expected
    # with the default method no choice that acts on the whole study area flipped: only the
    # chains near the new holes changed (measured on this batch)
    assert not changes["probability_model"]["changed_over_study_area"]
    assert changes["probability_model"]["changed"] == bool(reported)
    if reported:
        assert changes["probability_model"]["text"] in stdout


@pytest.mark.slow
def test_compare_names_the_latent_variance_scale_change_as_the_cause(latent_runs):
    before, after, stdout, folder = latent_runs
    sa = before.summary["probability"]["variance_scale"]
    sb = after.summary["probability"]["variance_scale"]
    changes = json.loads((folder / CHANGES_JSON).read_text(encoding="utf-8"))
    cb, ca = _tier_cells(before), _tier_cells(after)
    far = _far_cells(after)
    lb, la = _labels(cb), _labels(ca)
    zoned_far = far & ((lb > 0) | (la > 0))
    print(f"\nlatent method: variance scale {sa:.3f} -> {sb:.3f}; ground drift used "
          f"{before.summary['probability']['external_drift']['used']} -> "
          f"{after.summary['probability']['external_drift']['used']}; zone cells beyond "
          f"{REACH_M:.0f} m keeping kind and tier: "
          f"{float(np.mean(lb[zoned_far] == la[zoned_far])):.3f}")
    print(changes["probability_model"]["text"])
    assert abs(sb - sa) > 0.25 * sa  # the batch moves the variance scale (as in the issue)
    scale = _reported(changes)[(None, "variance_scale")]
    assert (scale["before"], scale["after"]) == (pytest.approx(sa), pytest.approx(sb))
    assert f"went from {sa:.2f} to {sb:.2f}" in stdout
    assert "zones may have moved for that reason" in stdout
    zones = gpd.read_file(folder / "changes.gpkg", layer=ZONE_CHANGES_LAYER)
    prob = zones[zones["kind"].isin(["window", "thin"])]
    assert len(prob) and prob["reason"].str.contains("probability model").all()
