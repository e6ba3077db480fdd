"""``aquitardmap compare``: zones gained and lost, AVI class and thickness change, and the
boreholes that caused them.

Checks use hand-built run folders whose differences are known exactly, read back with
rasterio and GDAL (independent readers), and areas from shapely/GEOS set operations.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys

import geopandas as gpd
import numpy as np
import pytest
import rasterio
from affine import Affine
from pyproj import CRS
from shapely.geometry import Point, box

from aquitardmap.compare import (
    AVI_CLASS_CHANGE,
    CHANGES_GPKG,
    CHANGES_JSON,
    CHANGES_MAP,
    HOLE_CHANGES_LAYER,
    THICKNESS_CHANGE,
    ZONE_CHANGES_LAYER,
    compare_runs,
    probability_model_changes,
    probability_model_text,
    write_comparison,
)
from aquitardmap.errors import InputError
from aquitardmap.grid import Grid, write_raster
from aquitardmap.outputs import names as outputs

from conftest import DEMO, demo_copy_with_new_hole

CRS_M = CRS.from_epsg(32632)
CELL = 50.0
X0, Y0 = 500000.0, 6700000.0  # upper-left corner of run A's grid


def _run(folder, *, x0, width, height, thickness, zones, holes, avi=None, range_m=300.0,
         probability=None):
    folder.mkdir()
    t = Affine(CELL, 0, x0, 0, -CELL, Y0)
    g = Grid(t, width, height, CRS_M, np.ones((height, width), bool))
    write_raster(folder / outputs.AQUITARD_THICKNESS, thickness, g)
    if avi is not None:
        write_raster(folder / "avi_class.tif", avi.astype(float), g, dtype="uint8", nodata=0)
    gpd.GeoDataFrame({"kind": [k for k, _ in zones]}, geometry=[z for _, z in zones],
                     crs=CRS_M).to_file(folder / outputs.ZONES, layer=outputs.ZONES_LAYER)
    gpd.GeoDataFrame(
        {"borehole_id": [h[0] for h in holes], "x": [h[1] for h in holes],
         "y": [h[2] for h in holes], "log": [h[3] for h in holes],
         "aquitard_thickness_m": [10.0] * len(holes), "status_aquitard": ["full"] * len(holes)},
        geometry=[Point(h[1], h[2]) for h in holes], crs=CRS_M,
    ).to_file(folder / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    (folder / outputs.SUMMARY).write_text(json.dumps({
        "run": {"started_utc": "2030-01-01T00:00:00+00:00"},
        "counts": {"boreholes": len(holes)},
        "surfaces": {"aquitard": {"variogram": {"range_m": range_m}}},
        **({"probability": probability} if probability is not None else {})}))
    return folder


@pytest.fixture()
def runs(tmp_path):
    # A: 10 x 8 cells of 10 m; B: the same lattice, two columns wider to the east, with a
    # thinner patch of 4 cells and one cell's AVI class lowered from 4 to 2.
    ta = np.full((8, 10), 10.0)
    tb = np.full((8, 12), 10.0)
    tb[2:4, 3:5] = 0.5
    avi_a = np.full((8, 10), 4)
    avi_b = np.full((8, 12), 4)
    avi_b[2, 3] = 2
    avi_b[5, 6] = 5
    win_a = box(X0, Y0 - 100, X0 + 100, Y0)               # 2 x 2 cells at the corner
    win_b = box(X0 + 50, Y0 - 100, X0 + 150, Y0)          # shifted one cell east
    thin_b = box(X0 + 150, Y0 - 200, X0 + 250, Y0 - 100)  # new thin zone
    holes_a = [("H-1", X0 + 25, Y0 - 25, "0.0–10.0 UMC"), ("H-2", X0 + 400, Y0 - 300, "x")]
    holes_b = [("H-1", X0 + 25, Y0 - 25, "0.0–10.0 UMC"), ("H-2", X0 + 400, Y0 - 300, "y"),
               ("N-1", X0 + 200, Y0 - 150, "0.0–0.5 UMC; 0.5–9.0 GRAV")]
    a = _run(tmp_path / "A", x0=X0, width=10, height=8, thickness=ta,
             zones=[("window", win_a)], holes=holes_a, avi=avi_a)
    b = _run(tmp_path / "B", x0=X0, width=12, height=8, thickness=tb,
             zones=[("window", win_b), ("thin", thin_b)], holes=holes_b, avi=avi_b)
    return a, b


def test_zones_gained_and_lost_with_the_holes_that_caused_them(runs):
    cmp = compare_runs(*runs)
    z = cmp.zone_changes
    got = {(r.kind, r.change): r.area_m2 for r in z.itertuples()}
    # shapely set difference of the known squares: one 50 x 100 m strip each way
    assert got[("window", "gained")] == pytest.approx(5000.0)
    assert got[("window", "lost")] == pytest.approx(5000.0)
    assert got[("thin", "gained")] == pytest.approx(10000.0)
    assert ("thin", "lost") not in got
    thin = z[(z["kind"] == "thin")].iloc[0]
    assert "N-1 (new)" in thin["holes_nearby"]  # 50 m away, inside the 300 m range
    h = cmp.hole_changes.set_index("borehole_id")
    assert h.loc["N-1", "change"] == "new" and h.loc["H-2", "change"] == "changed"
    assert "H-1" not in h.index
    assert cmp.summary["boreholes"] == {"new": ["N-1"], "removed": [], "changed": ["H-2"]}


def test_thickness_and_avi_change_on_the_union_grid(runs, tmp_path):
    cmp = compare_runs(*runs)
    names = write_comparison(cmp, tmp_path / "out")
    assert {CHANGES_GPKG, THICKNESS_CHANGE, AVI_CLASS_CHANGE, CHANGES_MAP, CHANGES_JSON} <= \
        set(names)
    with rasterio.open(tmp_path / "out" / THICKNESS_CHANGE) as src:
        d = src.read(1, masked=True)
        assert src.width == 12 and src.transform.c == X0
    assert d.mask[:, 10:].all()  # only in B: no change can be computed there
    assert np.allclose(d[2:4, 3:5], -9.5) and float(np.abs(d).sum()) == pytest.approx(4 * 9.5)
    with rasterio.open(tmp_path / "out" / AVI_CLASS_CHANGE) as src:
        c = src.read(1, masked=True)
    assert c[2, 3] == -2 and c[5, 6] == 1 and int((c != 0).sum()) == 2
    a = cmp.summary["avi_class"]
    assert a["transitions"] == {"low -> high": 1, "low -> extremely low": 1}
    assert a["more_vulnerable_km2"] == pytest.approx(CELL * CELL / 1e6)
    layers = gpd.read_file(tmp_path / "out" / CHANGES_GPKG, layer=ZONE_CHANGES_LAYER)
    assert len(layers) == 3
    assert len(gpd.read_file(tmp_path / "out" / CHANGES_GPKG, layer=HOLE_CHANGES_LAYER)) == 2
    assert "became more vulnerable" in cmp.text and "Caution" in cmp.text
    html_text = (tmp_path / "out" / CHANGES_MAP).read_text()
    assert "Zones gained" in html_text and "N-1" in html_text


def test_runs_on_other_lattices_are_refused(runs, tmp_path):
    a, b = runs
    c = _run(tmp_path / "C", x0=X0 + 7.0, width=10, height=8, thickness=np.ones((8, 10)),
             zones=[], holes=[("H-1", X0, Y0 - 10, "")])
    with pytest.raises(InputError, match="same lattice"):
        compare_runs(a, c)
    with pytest.raises(InputError, match="no summary.json"):
        compare_runs(a, tmp_path)


def test_escapes_user_text_in_the_map(runs, tmp_path):
    a, b = runs
    shutil.rmtree(b)
    evil = "<img src=x onerror=alert(1)>"
    _run(b, x0=X0, width=10, height=8, thickness=np.full((8, 10), 10.0), zones=[],
         holes=[(evil, X0 + 30, Y0 - 30, "0.0–1.0 <b>clay</b>")])
    cmp = compare_runs(a, b)
    write_comparison(cmp, tmp_path / "out")
    text = (tmp_path / "out" / CHANGES_MAP).read_text()
    assert evil not in text and "&lt;img src=x onerror=alert(1)&gt;" in text


# ------------------------------------------------------ changes of the probability model
def _cutoff(threshold_m, *, source="fitted", nugget=0.01, psill=0.09, range_m=1900.0,
            segments=10):
    return {"threshold_m": threshold_m, "n_data": 300, "n_event": 20,
            "variogram": {"model": "exponential", "nugget": nugget, "psill": psill,
                          "range_m": range_m, "anisotropy_ratio": 1.0,
                          "anisotropy_angle_deg": 0.0, "model2": "", "psill2": 0.0,
                          "range2_m": 0.0},
            "variogram_source": source, "n_continuity_segments": segments}


def _indicator(window=None, thin=None, other=None):
    """A ``summary.json`` of the indicator method: cutoffs 1 m (window), 5 m (thin) and
    7.5 m (a hazard-cut cell's)."""
    return {"probability": {
        "method": "indicator kriging with continuity along chains of proving holes",
        "window_thickness_m": 1.0, "thin_thickness_m": 5.0,
        "cutoffs": [_cutoff(1.0, **(window or {})), _cutoff(5.0, **(thin or {})),
                    _cutoff(7.5, **(other or {}))],
        "external_drift": {"used": False}}}


def _latent(used=True, scale=0.26):
    return {"probability": {"method": "latent Gaussian", "variance_scale": scale,
                            "external_drift": {"used": used, "reason": "cross-validation"}}}


def _what(changes):
    return {(c["cutoff"], c["what"]): (c["before"], c["after"]) for c in changes}


def test_same_model_reports_nothing():
    assert probability_model_changes(_indicator(), _indicator()) == []
    assert probability_model_changes(_latent(), _latent(scale=0.3)) == []  # 15 % < 25 %
    assert probability_model_text([]) == ""
    assert probability_model_changes({}, _indicator()) == []  # a run without probabilities


def test_a_range_change_beyond_a_quarter_is_reported_in_plain_words():
    changes = probability_model_changes(_indicator(thin={"range_m": 1900.0}),
                                        _indicator(thin={"range_m": 3100.0}))
    assert _what(changes) == {("thin-clay", "range_m"): (1900.0, 3100.0)}
    assert changes[0]["cutoff_m"] == 5.0 and changes[0]["reach"] == "study area"
    assert probability_model_text(changes) == (
        "The thin-clay probability model changed: its variogram range went from 1.9 km to "
        "3.1 km; zones may have moved for that reason rather than because of the new holes "
        "nearby.")
    # 1900 m x 1.2 is within the 25 % (hand arithmetic)
    assert probability_model_changes(_indicator(thin={"range_m": 1900.0}),
                                     _indicator(thin={"range_m": 2280.0})) == []


def test_a_source_flip_and_a_nugget_share_change_are_reported():
    # nugget shares: 0.01 / 0.10 = 0.10 before; 0.04 / 0.10 = 0.40 after (change 0.30)
    a = _indicator(window={"source": "fitted"}, other={"nugget": 0.01, "psill": 0.09})
    b = _indicator(window={"source": "default"}, other={"nugget": 0.04, "psill": 0.06})
    got = _what(probability_model_changes(a, b))
    assert got == {("window", "variogram_source"): ("fitted", "default"),
                   ("7.5 m", "nugget_share"): (0.1, 0.4)}
    text = probability_model_text(probability_model_changes(a, b))
    assert text.startswith("The window probability model changed: its variogram was fitted "
                           "and is now default")
    assert "at the cutoff(s) 7.5 m" in text
    # a change of 0.15 in the nugget share is not reported: 0.01/0.1 -> 0.025/0.1
    assert probability_model_changes(
        _indicator(other={"nugget": 0.01, "psill": 0.09}),
        _indicator(other={"nugget": 0.025, "psill": 0.075})) == []


def test_chain_segments_are_reported_as_acting_near_the_changed_holes():
    changes = probability_model_changes(_indicator(window={"segments": 50}),
                                        _indicator(window={"segments": 48}))
    assert _what(changes) == {("window", "n_continuity_segments"): (50, 48)}
    assert changes[0]["reach"] == "near the changed holes"
    assert probability_model_text(changes) == (
        "The window probability model changed: the chains of proving holes it follows went "
        "from 50 to 48 segments; this acts only near the changed holes.")


def test_latent_drift_flip_and_variance_scale_are_reported():
    # the numbers: the drift choice flipped, the variance scale went 0.26 -> 0.63
    changes = probability_model_changes(_latent(True, 0.26), _latent(False, 0.63))
    assert _what(changes) == {("", "external_drift"): (True, False),
                              ("", "variance_scale"): (0.26, 0.63)}
    text = probability_model_text(changes)
    assert text.startswith("The probability model changed: the ground elevation is no "
                           "longer used as a drift of the thickness")
    assert "the variance scale set by cross-validation went from 0.26 to 0.63" in text
    assert text.endswith("zones may have moved for that reason rather than because of the "
                         "new holes nearby.")


def test_a_method_change_is_reported_alone():
    changes = probability_model_changes(_latent(), _indicator())
    assert [c["what"] for c in changes] == ["method"]
    assert "another method" in probability_model_text(changes)


def test_compare_names_a_changed_probability_model_in_summary_text_and_zone_reasons(
        runs, tmp_path):
    a, b = runs
    for folder, summary in ((a, _indicator(thin={"range_m": 1900.0})),
                            (b, _indicator(thin={"range_m": 3100.0}))):
        s = json.loads((folder / outputs.SUMMARY).read_text())
        (folder / outputs.SUMMARY).write_text(json.dumps({**s, **summary}))
    cmp = compare_runs(a, b)
    pm = cmp.summary["probability_model"]
    assert pm["changed"] and pm["changed_over_study_area"]
    assert _what(pm["changes"]) == {("thin-clay", "range_m"): (1900.0, 3100.0)}
    assert "its variogram range went from 1.9 km to 3.1 km" in cmp.text
    assert cmp.zone_changes["reason"].str.contains("probability model").all()
    write_comparison(cmp, tmp_path / "out")
    written = json.loads((tmp_path / "out" / CHANGES_JSON).read_text())
    assert written["probability_model"] == json.loads(json.dumps(pm))


def test_runs_without_a_model_change_say_nothing_about_it(runs):
    cmp = compare_runs(*runs)  # no probability records in these summaries
    assert cmp.summary["probability_model"]["changed"] is False
    assert "probability model" not in cmp.text
    assert not cmp.zone_changes["reason"].str.contains("probability model").any()


@pytest.mark.slow
def test_compare_command_after_adding_holes_that_open_a_window(tmp_path, demo_run):
    proj = tmp_path / "proj"
    shutil.copytree(DEMO, proj, ignore=shutil.ignore_patterns("truth", "*.py"))
    # two holes proving the clay absent in the middle of thick clay
    cols = demo_run.inputs.columns
    thick = cols[(cols["status_aquitard"] == "full") & (cols["aquitard_thickness_m"] > 15)]
    x, y = float(thick["x"].iloc[0]) + 120.0, float(thick["y"].iloc[0]) + 80.0
    (tmp_path / "collars_w.csv").write_text(
        f"borehole_id,x,y,ground_elev_m,total_depth_m\nWIN-1,{x},{y},50,20\n"
        f"WIN-2,{x + 60},{y},50,20\n")
    (tmp_path / "intervals_w.csv").write_text(
        "borehole_id,from_m,to_m,unit\nWIN-1,0,2,SAND\nWIN-1,2,20,GRAV\n"
        "WIN-2,0,2,SAND\nWIN-2,2,20,GRAV\n")

    def cli(*args):
        return subprocess.run([sys.executable, "-m", "aquitardmap", *map(str, args)],
                              capture_output=True, text=True, timeout=300)

    import aquitardmap
    from aquitardmap.config.project import read_project
    from aquitardmap.inputs.store import add_files

    add_files(read_project(proj), [tmp_path / "collars_w.csv", tmp_path / "intervals_w.csv"])
    aquitardmap.run(proj, tmp_path / "B")
    r = cli("compare", demo_run.out_dir, tmp_path / "B", "--out", tmp_path / "changes")
    assert r.returncode == 0, r.stderr
    assert "2 new" in r.stdout and "Window zones" in r.stdout
    z = gpd.read_file(tmp_path / "changes" / CHANGES_GPKG, layer=ZONE_CHANGES_LAYER)
    win = z[(z["kind"] == "window") & (z["change"] == "gained")]
    hit = win[win.intersects(Point(x, y).buffer(1.0))]
    assert len(hit) == 1 and "WIN-1 (new)" in hit["holes_nearby"].iloc[0]


@pytest.mark.slow
def test_run_since_compares_with_the_earlier_run_even_when_it_replaces_it(tmp_path):
    """``run --since``: the run, then what ``compare`` writes; with ``--since`` equal to
    ``--out`` the earlier run is compared as it was before the new one replaced it."""
    import os

    proj, new_files = demo_copy_with_new_hole(tmp_path, "SN-1")

    def cli(*args):
        return subprocess.run([sys.executable, "-m", "aquitardmap", *map(str, args)],
                              capture_output=True, text=True, timeout=600,
                              env={**os.environ, "COLUMNS": "250"})

    out = tmp_path / "results"
    r = cli("run", proj, "--out", out)
    assert r.returncode == 0, r.stderr
    before = json.loads((out / outputs.SUMMARY).read_text())
    r = cli("add", proj, *new_files)
    assert r.returncode == 0, r.stderr
    # a folder that is not a run: bad input before any work, nothing written
    r = cli("run", proj, "--out", tmp_path / "other", "--since", tmp_path / "nowhere")
    assert r.returncode == 2 and "summary.json" in r.stderr
    assert not (tmp_path / "other").exists()
    r = cli("run", proj, "--out", out, "--since", out, "--refit-variograms")
    assert r.returncode == 0, r.stderr
    after = json.loads((out / outputs.SUMMARY).read_text())
    assert after["counts"]["boreholes"] == before["counts"]["boreholes"] + 1
    assert after["variogram_reuse"]["forced_refit"] is True
    changes = tmp_path / "results_changes"
    summary = json.loads((changes / CHANGES_JSON).read_text())
    assert summary["boreholes"]["new"] == ["SN-1"]
    assert summary["run_a"]["folder"].endswith("(before this run)")
    assert summary["run_a"]["boreholes"] == before["counts"]["boreholes"]
    assert "1 new" in r.stdout and "Wrote the comparison" in r.stderr
    assert r.stderr.count("Caution") == 1
    # the same files as `aquitardmap compare` writes
    assert {CHANGES_GPKG, THICKNESS_CHANGE, CHANGES_MAP} <= {p.name for p in changes.iterdir()}
