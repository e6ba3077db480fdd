"""End to end on the bundled demo region: the output contract, and skill against its truth.

The truth grids come from the seeded generator (aquitardmap.evaluation.synthetic), not from the
pipeline: they are the outside reference here.
"""

from __future__ import annotations

import hashlib
import html
import json

import geopandas as gpd
import numpy as np
import pytest
import rasterio

from aquitardmap.grid import NODATA, read_raster
from aquitardmap.outputs import names as outputs
from aquitardmap.screening.zones import ZONE_KINDS

from conftest import DEMO

AQUITARDS = ("UMC", "LMC", "LAM")
GRIDS = [outputs.AQUITARD_THICKNESS, outputs.AQUITARD_THICKNESS_SD, outputs.KV,
         outputs.LEAKANCE, outputs.TRAVEL_TIME, *(outputs.unit_thickness(c) for c in AQUITARDS)]


def test_every_contract_output_is_written(demo_run):
    names = {p.name for p in demo_run.out_dir.iterdir()}
    for required in [*GRIDS, outputs.ZONES, outputs.BOREHOLES, outputs.MAP, outputs.SUMMARY]:
        assert required in names
    # Nothing temporary is left beside the output folder.
    assert not [p for p in demo_run.out_dir.parent.iterdir() if ".partial-" in p.name]


@pytest.mark.parametrize("name", GRIDS)
def test_grids_are_float32_in_project_crs_with_nodata_outside(demo_run, name):
    with rasterio.open(demo_run.out_dir / name) as src:
        assert src.dtypes[0] == "float32"
        assert src.crs.to_epsg() == 32632
        assert src.nodata == NODATA
        arr = src.read(1)
    mask = demo_run.inputs.grid.mask
    assert np.all(arr[~mask] == NODATA)
    inside = arr[mask]
    assert np.all(np.isfinite(inside)) and np.all(inside != NODATA)
    if "thickness" in name or name == outputs.TRAVEL_TIME:
        assert inside.min() >= 0


def test_unit_thicknesses_add_up_to_total(demo_run):
    total, *_ = read_raster(demo_run.out_dir / outputs.AQUITARD_THICKNESS)
    parts = sum(read_raster(demo_run.out_dir / outputs.unit_thickness(c))[0] for c in AQUITARDS)
    m = np.isfinite(total)
    assert np.allclose(parts[m], total[m], atol=1e-3)


def test_zones_and_boreholes_tables(demo_run):
    zones = gpd.read_file(demo_run.out_dir / outputs.ZONES, layer=outputs.ZONES_LAYER)
    assert set(zones["kind"]) <= set(ZONE_KINDS)
    assert {"window", "thin"} <= set(zones["kind"])
    assert np.allclose(zones.geometry.area, zones["area_m2"])
    assert zones["reason"].str.len().min() > 40
    bh = gpd.read_file(demo_run.out_dir / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    assert len(bh) == 400
    gt = bh[bh["borehole_id"].str.startswith("GT-")]
    assert (gt["status_aquitard"] == "lower_bound").all()
    assert bh.crs.to_epsg() == 32632


def test_every_hole_that_proves_a_window_lies_in_a_window_or_thin_zone(demo_run):
    zones = gpd.read_file(demo_run.out_dir / outputs.ZONES, layer=outputs.ZONES_LAYER)
    bh = gpd.read_file(demo_run.out_dir / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    proving = bh[bh["proves_window"].astype(bool)]
    assert len(proving) >= 5
    area = zones[zones["kind"].isin(["window", "thin"])].union_all()
    assert proving.within(area).all(), proving.loc[~proving.within(area), "borehole_id"]


ZONE_COLUMNS = ["kind", "tier", "area_m2", "reason", "mean_thickness_m", "min_thickness_m",
                "mean_sd_m", "mean_p_thin", "mean_p_window", "probability", "max_probability",
                "p_threshold", "mean_travel_time_yr", "n_boreholes", "supporting_holes",
                "n_supporting_holes", "n_cells", "n_cells_unproven_window",
                "n_cells_from_holes", "mean_piercing_per_km2"]


def test_zones_gpkg_carries_tiers_probabilities_and_supporting_holes(demo_run):
    zones = gpd.read_file(demo_run.out_dir / outputs.ZONES, layer=outputs.ZONES_LAYER)
    assert set(ZONE_COLUMNS) <= set(zones.columns)
    tiered = zones[zones["kind"].isin(["window", "thin"])]
    others = zones[~zones["kind"].isin(["window", "thin"])]
    assert set(tiered["tier"]) == {"likely", "possible"} and set(others["tier"]) == {""}
    assert (tiered["max_probability"] >= tiered["probability"] - 1e-9).all()
    assert others["max_probability"].isna().all()
    # Supporting holes: the ids listed are holes proving thin clay (or a window) within
    # window_proof_radius_m of the zone (shapely distances as the reference).
    bh = demo_run.boreholes.set_index("borehole_id")
    radius = demo_run.inputs.project.screening.window_proof_radius_m
    n_listed = 0
    for z in tiered.itertuples():
        ids = [i for i in z.supporting_holes.split(",") if i]
        assert len(ids) == z.n_supporting_holes
        for i in ids:
            assert bh.loc[i, "proves_thin"] and not bh.loc[i, "excluded"]
            assert bh.loc[i, "geometry"].distance(z.geometry) <= radius + 1e-6
        n_listed += len(ids)
    assert n_listed > 0 and (others["supporting_holes"] == "").all()
    th = demo_run.inputs.project.screening
    for tier, col in (("likely", "p_window_threshold"), ("possible",
                                                         "p_window_possible_threshold")):
        win = tiered[(tiered["kind"] == "window") & (tiered["tier"] == tier)]
        assert np.all(win["p_threshold"] == getattr(th, col))
    assert tiered["reason"].str.contains("tier likely: the probability is at least|tier "
                                         "possible: cannot be ruled out").all()


def test_holes_proving_a_window_or_thin_clay_lie_in_likely_zones(demo_run):
    # Hard data honoured: each used hole proving a window lies in a likely window zone, each
    # proving thin clay in a likely window or thin zone.
    zones = gpd.read_file(demo_run.out_dir / outputs.ZONES, layer=outputs.ZONES_LAYER)
    bh = demo_run.boreholes[~demo_run.boreholes["excluded"].astype(bool)]
    likely = zones[zones["tier"] == "likely"]
    window = likely[likely["kind"] == "window"].union_all()
    both = likely[likely["kind"].isin(["window", "thin"])].union_all()
    proving_window = bh[bh["proves_window"].astype(bool)]
    proving_thin = bh[bh["proves_thin"].astype(bool)]
    assert len(proving_window) >= 5 and len(proving_thin) > len(proving_window)
    assert proving_window.within(window).all()
    assert proving_thin.within(both).all()


def test_proving_holes_are_zones_even_where_the_probabilities_say_0(demo_run):
    # The screening stage fed probability grids of 0 everywhere: no zone but the cells of
    # the holes that prove a window (likely windows) or thin clay (likely thin).
    from dataclasses import replace

    from aquitardmap.screening.stage import screen

    zero = np.where(demo_run.inputs.grid.mask, 0.0, np.nan)
    probs = replace(demo_run.probabilities, p_below={"window": zero, "thin": zero})
    _, zones = screen(demo_run.inputs, demo_run.surfaces, demo_run.hydraulics,
                      demo_run.boreholes, probabilities=probs)
    bh = demo_run.boreholes[~demo_run.boreholes["excluded"].astype(bool)]
    g = demo_run.inputs.grid
    for kind, col in (("window", "proves_window"), ("thin", "proves_thin")):
        holes = bh[bh[col].astype(bool)]
        if kind == "thin":
            holes = holes[~holes["proves_window"].astype(bool)]
        r, c = g.rowcol(holes["x"].to_numpy(), holes["y"].to_numpy())
        # Holes sharing a cell count once; a thin hole sharing a window hole's cell is in
        # the window zone.
        cells = set(zip(r, c, strict=True))
        if kind == "thin":
            rw, cw = g.rowcol(*(bh.loc[bh["proves_window"].astype(bool), k].to_numpy()
                                for k in ("x", "y")))
            cells -= set(zip(rw, cw, strict=True))
        z = zones[zones["kind"] == kind]
        assert set(z["tier"]) == {"likely"}
        assert int(z["n_cells"].sum()) == len(cells) == int(z["n_cells_from_holes"].sum())
        assert holes.within(zones[zones["kind"].isin(["window", "thin"])].union_all()).all()
        assert z["reason"].str.contains("flagged likely whatever the probability").all()


def test_summary_areas_by_tier_add_up_to_the_areas_by_kind(demo_run):
    z = demo_run.summary["zones"]
    th = demo_run.inputs.project.screening
    for kind in ("window", "thin"):
        by_tier = z["area_m2_by_kind_and_tier"][kind]
        assert set(by_tier) == {"likely", "possible"}
        assert sum(by_tier.values()) == pytest.approx(z["area_m2_by_kind"][kind])
        assert sum(z["count_by_kind_and_tier"][kind].values()) == z["count_by_kind"][kind]
    assert z["p_window_possible_threshold"] == th.p_window_possible_threshold
    assert z["p_thin_possible_threshold"] == th.p_thin_possible_threshold
    assert demo_run.summary["thresholds"]["p_thin_possible_threshold"] == \
        th.p_thin_possible_threshold


def test_holes_stopped_in_thick_clay_create_no_thin_zone(demo_run):
    # A geotechnical hole that went through >= 5 m of clay without reaching the base proves
    # >= 5 m there: its cell must not be flagged thin or window (DOMAIN §3, common practice).
    bh = demo_run.boreholes
    th = demo_run.inputs.project.screening.thin_thickness_m
    deep = bh[(bh["status_aquitard"] == "lower_bound") & (bh["aquitard_thickness_m"] >= th)]
    g = demo_run.inputs.grid
    r, c = g.rowcol(deep["x"].to_numpy(), deep["y"].to_numpy())
    ok = r >= 0
    est = demo_run.surfaces["aquitard"].thickness_m[r[ok], c[ok]]
    assert len(est) > 50
    assert np.all(est >= th - 1e-6)


def test_summary_records_hashes_version_and_caution(demo_run):
    s = json.loads((demo_run.out_dir / outputs.SUMMARY).read_text())
    assert s["caution"] == outputs.CAUTION
    sha = hashlib.sha256((DEMO / "collars.csv").read_bytes()).hexdigest()
    assert s["inputs"]["collars.csv"]["sha256"] == sha
    assert s["run"]["package_version"]
    assert s["counts"]["boreholes"] == 400
    assert s["surfaces"]["aquitard"]["variogram"]["range_m"] > 0
    assert set(s["zones"]["area_m2_by_kind"]) == set(ZONE_KINDS)
    # Two computations of the area flagged for piercing holes agree: the zones drawn from
    # the density grid and the piercing summary's count of flagged cells.
    assert s["zones"]["area_m2_by_kind"]["pierced"] / 1e6 == pytest.approx(
        s["piercing"]["flagged_area_km2"])
    html = (demo_run.out_dir / outputs.MAP).read_text()
    assert "not a substitute for site-specific investigation" in html


def test_map_and_report_say_how_the_demo_probabilities_held_up(demo_run):
    # The run's own check at the holes reaches the map's run notes with summary.json's
    # numbers, and the notes name the method the run used (indicator kriging by default).
    s = json.loads((demo_run.out_dir / outputs.SUMMARY).read_text())
    prob = s["probability"]
    assert prob["method"].startswith("indicator kriging")
    page = html.unescape((demo_run.out_dir / outputs.MAP).read_text())
    notes = page[page.index("How well the probabilities held up at the holes"):]
    for event, label in (("window", "P(window)"), ("thin", "P(thin)")):
        cv = prob["cross_validation"][event]
        assert 0 < cv["n_holes"] <= s["counts"]["boreholes"]
        assert (f"{label} (under {cv['threshold_m']:g} m)</td><td>{cv['n_holes']} holes "
                f"scored ({cv['n_event']} showing it)") in notes
        assert (f"Brier score {cv['brier']:.4f} (constant share "
                f"{cv['brier_reference']:.4f}), skill {cv['brier_skill_score']:.4f}") in notes
    assert "Journel 1983" in page and "Gibbs" not in page


def _skill(estimate: np.ndarray, truth: np.ndarray, threshold_m: float) -> tuple[float, float]:
    m = np.isfinite(estimate) & np.isfinite(truth)
    pred, real = estimate[m] < threshold_m, truth[m] < threshold_m
    tp = float((pred & real).sum())
    return tp / max(real.sum(), 1), tp / max(pred.sum(), 1)


def test_skill_against_the_demo_truth(demo_run):
    # Reference: the generator's truth grid (demo_region/truth), on the same grid.
    est = demo_run.surfaces["aquitard"].thickness_m
    truth, *_ = read_raster(DEMO / "truth" / "aquitard_thickness_m.tif")
    assert truth.shape == est.shape
    m = np.isfinite(est) & np.isfinite(truth)
    rmse = float(np.sqrt(np.mean((est[m] - truth[m]) ** 2)))
    rec_w, prec_w = _skill(est, truth, 1.0)
    rec_t, prec_t = _skill(est, truth, 5.0)
    print(f"demo skill: rmse {rmse:.2f} m; window recall {rec_w:.2f} precision {prec_w:.2f}; "
          f"thin(<5 m) recall {rec_t:.2f} precision {prec_t:.2f}")
    # Floors from the measured figures (README), so a regression shows.
    assert rmse < 5.5
    assert prec_w >= 0.9 and rec_w >= 0.3
    assert prec_t >= 0.85 and rec_t >= 0.12
