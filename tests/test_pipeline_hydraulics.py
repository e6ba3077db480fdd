"""The hydraulic outputs end to end: on the demo region, and on a copy of it with hazards
and head grids added."""

from __future__ import annotations

import json
import shutil

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import rasterio
from shapely.geometry import box

import aquitardmap
from aquitardmap.grid import read_raster, write_raster
from aquitardmap.hydraulics.column import AVI_CLASSES, SECONDS_PER_YEAR
from aquitardmap.outputs import names as outputs

from conftest import DEMO


def test_avi_class_grid_matches_resistance_and_summary_legend(demo_run):
    out = demo_run.out_dir
    with rasterio.open(out / outputs.AVI_CLASS) as src:
        assert src.dtypes[0] == "uint8" and src.nodata == 0
        cls = src.read(1)
    res, *_ = read_raster(out / outputs.RESISTANCE)
    mask = demo_run.inputs.grid.mask
    assert np.all(cls[~mask] == 0) and set(np.unique(cls[mask])) <= {1, 2, 3, 4, 5}
    # Class edges of Van Stempvoort et al. (1993) applied to the written resistance grid
    # (float32, so cells within float rounding of a break are skipped).
    log_c = np.log10(np.where(mask & (res > 0), res, np.nan))
    for code, lo, hi, _ in AVI_CLASSES:
        sel = mask & (log_c >= lo + 1e-5) & (log_c < hi - 1e-5)
        assert np.all(cls[sel] == code)
    s = json.loads((out / outputs.SUMMARY).read_text())
    legend = s["avi"]["classes"]
    assert [r["vulnerability"] for r in legend][0] == "extremely high vulnerability"
    assert sum(r["cells"] for r in legend) == int(mask.sum())
    print("demo AVI class areas (km²):", {r["class"]: r["area_km2"] for r in legend})


def test_diffusion_time_and_peclet_grids(demo_run):
    out = demo_run.out_dir
    hyd = demo_run.hydraulics
    h = demo_run.inputs.project.hydraulics
    td, *_ = read_raster(out / outputs.DIFFUSION_TIME)
    mask = demo_run.inputs.grid.mask
    # B²/De of the intact clay below the crust, from the thicknesses (hand formula); the
    # clay is the kriged total cut by the demo's hazards.
    total = demo_run.surfaces["aquitard"].thickness_m - hyd.hazard_removed_aquitard_m
    intact = total - hyd.crust_m
    expected = intact**2 / h.effective_diffusion_m2_s / SECONDS_PER_YEAR
    assert np.allclose(td[mask], expected[mask], rtol=1e-6)
    pe, *_ = read_raster(out / outputs.PECLET)
    ok = mask & (intact > 1e-6)
    assert np.all(np.isfinite(pe[ok])) and np.all(pe[ok] >= 0)
    assert np.all(np.isnan(pe[mask & (intact < 1e-12)]))
    # travel_time_yr.tif stays advective: not the diffusion scale.
    tt, *_ = read_raster(out / outputs.TRAVEL_TIME)
    assert np.allclose(tt[mask], hyd.travel_time_yr[mask], rtol=1e-6)


def test_piercing_boreholes_list_and_density(demo_run):
    out = demo_run.out_dir
    table = pd.read_csv(out / outputs.PIERCING_BOREHOLES)
    bh = gpd.read_file(out / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    used = bh[~bh["excluded"].astype(bool)]
    expected = used[(used["status_aquitard"] == "full") & (used["aquitard_thickness_m"] > 0)]
    assert sorted(table["borehole_id"]) == sorted(expected["borehole_id"])
    assert bh["pierces_aquitard"].astype(bool).sum() == len(table)
    assert not table["borehole_id"].str.startswith("GT-").any()   # they stop in the clay
    dens, *_ = read_raster(out / outputs.PIERCING_DENSITY)
    s = json.loads((out / outputs.SUMMARY).read_text())["piercing"]
    assert s["count"] == len(table)
    assert s["max_density_per_km2"] == pytest.approx(float(np.nanmax(dens)), rel=1e-5)
    # Density integrates to about the number of holes inside (a kernel of unit mass,
    # less what falls outside the study area): between 0.6 and 1.0 of the count.
    g = demo_run.inputs.grid
    mass = float(np.nansum(dens) * g.cell_area_m2 / 1e6)
    assert 0.6 * len(table) < mass < 1.0 * len(table) + 1
    print(f"demo piercing holes: {len(table)}, max density {s['max_density_per_km2']:.1f}"
          f"/km², flagged area {s['flagged_area_km2']:.2f} km²")


def test_summary_documents_the_hydraulic_settings(demo_run):
    s = json.loads((demo_run.out_dir / outputs.SUMMARY).read_text())
    hy = s["hydraulics"]
    assert hy["weathered_crust"] == {**hy["weathered_crust"], "depth_m": 3.0,
                                     "k_factor": 100.0, "treatment": "raise_k"}
    assert hy["gradient_source"] == "stated" and hy["effective_diffusion_m2_s"] == 5e-10
    lam = next(u for u in s["units"] if u["code"] == "LAM")
    assert lam["kv_m_s"] == pytest.approx(lam["k_m_s"] / 4.0, rel=1e-12)
    assert {"k_geomean_m_s", "log10_k_sd", "n_used", "secondary_k_factor",
            "k_beyer_geomean_m_s"} <= set(lam)
    for name in (outputs.AVI_CLASS, outputs.DIFFUSION_TIME, outputs.PECLET,
                 outputs.PIERCING_DENSITY, outputs.PIERCING_BOREHOLES):
        assert name in s["outputs"]


@pytest.fixture(scope="module")
def hazard_run(tmp_path_factory, demo_run):
    """The demo with a deep pit in thick clay, a shallow scar, and flat head grids."""
    root = tmp_path_factory.mktemp("hz") / "project"
    shutil.copytree(DEMO, root, ignore=shutil.ignore_patterns("truth"))
    total = demo_run.surfaces["aquitard"].thickness_m
    g = demo_run.inputs.grid
    r, c = np.unravel_index(np.nanargmax(total), total.shape)
    xs, ys = g.cell_centres()
    x0, y0 = float(xs[c]), float(ys[r])
    hz = gpd.GeoDataFrame(
        {"name": ["Quarry Q1", "Scar S1"], "kind": ["pit", "landslide_scar"],
         "removed_depth_m": [60.0, 2.0]},
        geometry=[box(x0 - 120, y0 - 120, x0 + 120, y0 + 120),
                  box(x0 + 1000, y0 - 100, x0 + 1200, y0 + 100)], crs=g.crs)
    hz.to_file(root / "hazards.geojson", driver="GeoJSON")
    write_raster(root / "wt.tif", np.full(g.mask.shape, 60.0), g)
    write_raster(root / "ah.tif", np.full(g.mask.shape, 55.0), g)
    with open(root / "project.toml", "a", encoding="utf-8") as f:
        f.write('\n[files]\nwater_table = "wt.tif"\naquifer_head = "ah.tif"\n')
    out = root.parent / "out"
    return aquitardmap.run(root, out), (x0, y0)


def test_a_deep_pit_opens_a_window_and_the_zone_says_why(hazard_run):
    run, (x0, y0) = hazard_run
    out = run.out_dir
    eff, *_ = read_raster(out / outputs.AQUITARD_THICKNESS_EFFECTIVE)
    removed, *_ = read_raster(out / outputs.HAZARD_REMOVED)
    g = run.inputs.grid
    r, c = g.rowcol(np.array([x0]), np.array([y0]))
    assert removed[r[0], c[0]] == 60.0 and eff[r[0], c[0]] == 0.0
    kriged, *_ = read_raster(out / outputs.AQUITARD_THICKNESS)
    assert kriged[r[0], c[0]] > 20          # the kriged surface itself is unchanged
    zones = gpd.read_file(out / outputs.ZONES, layer=outputs.ZONES_LAYER)
    from shapely.geometry import Point
    here = zones[zones.contains(Point(x0, y0)) & (zones["kind"] == "window")]
    assert len(here) == 1
    assert "Quarry Q1 (pit, 60 m removed)" in here["reason"].iloc[0]
    assert here["hazards"].iloc[0] == "Quarry Q1"
    s = json.loads((out / outputs.SUMMARY).read_text())
    q1 = next(h for h in s["hazards"] if h["name"] == "Quarry Q1")
    assert q1["n_cells"] > 0 and q1["max_aquitard_removed_m"] > 20
    # A 2 m scar takes cover (sand, 0.5–5 m thick in the demo) before any clay.
    s1 = next(h for h in s["hazards"] if h["name"] == "Scar S1")
    assert s1["max_aquitard_removed_m"] < 2.0 + 1e-9


def test_head_grids_set_the_gradient_and_scale_the_travel_time(hazard_run, demo_run):
    run, _ = hazard_run
    out = run.out_dir
    grad, *_ = read_raster(out / outputs.VERTICAL_GRADIENT)
    hyd = run.hydraulics
    column = sum(hyd.column_thickness_m.values())
    mask = (run.inputs.grid.mask & (column > 0) & (hyd.hazard_removed_m == 0)
            & (demo_run.hydraulics.hazard_removed_m == 0))
    # Darcy: i = (60 − 55) / B of the column (hand formula).
    assert np.allclose(grad[mask], 5.0 / column[mask], rtol=1e-5)
    # One steady flux q = Δh / c through the units in series; the water crosses each at
    # q / nₑ, so t = Σ nₑb · c / Δh (continuity of flux; hand formula, checked against a
    # finite-difference solution in test_hydraulics.py), with Δh = 60 − 55 m.
    por = {u.code: u.effective_porosity for u in run.inputs.project.column_units}
    stored = sum(por[code] * b for code, b in hyd.column_thickness_m.items())
    assert np.allclose(hyd.travel_time_yr[mask], stored[mask] * hyd.resistance_yr[mask] / 5.0,
                       rtol=1e-9)
    # Under the unit gradient the same column takes a different time unless the porosity
    # is one value throughout; the demo's units differ, so the two grids differ.
    assert not np.allclose(hyd.travel_time_yr[mask] * hyd.vertical_gradient[mask],
                           demo_run.hydraulics.travel_time_yr[mask], rtol=1e-3)
    s = json.loads((out / outputs.SUMMARY).read_text())["hydraulics"]
    assert s["gradient_source"] == "heads" and s["heads"]["water_table"]["source"] == "grid"
    zones = run.zones
    fast = zones[zones["kind"] == "fast"]
    assert not fast["reason"].str.contains("unit-gradient").any()


def test_demo_hazards_thin_the_clay_and_name_themselves_in_zones(demo_run):
    # demo_region/hazards.geojson (invented, from the generator): a clay pit, a road
    # cutting and a slide scar. Each cuts cover first, then clay (hand rule: clay removed
    # <= removed depth), and the pit and the scar leave thin clay that the zones name.
    s = json.loads((demo_run.out_dir / outputs.SUMMARY).read_text())
    by_name = {h["name"]: h for h in s["hazards"]}
    assert set(by_name) == {"Marrowdene brickworks clay pit", "Lidderholt road cutting",
                            "Old slide scar on the valley side"}
    for h in by_name.values():
        assert h["n_cells"] > 0
        assert 0 < h["max_aquitard_removed_m"] <= h["removed_depth_m"]
    zones = gpd.read_file(demo_run.out_dir / outputs.ZONES, layer=outputs.ZONES_LAYER)
    named = zones[zones["hazards"] != ""]
    assert {"Marrowdene brickworks clay pit", "Old slide scar on the valley side"} <= set(
        "; ".join(named["hazards"]).split("; "))
    assert named["reason"].str.contains("removed)", regex=False).all()
    assert (demo_run.out_dir / outputs.HAZARD_REMOVED).is_file()
    print("demo hazards:", {k: round(v["max_aquitard_removed_m"], 1)
                            for k, v in by_name.items()},
          "zones named:", named.groupby("kind").size().to_dict())
