"""Geostatistics outputs of a run on the demo region: probability grids, zones drawn from
them, cross-validation residuals, variogram figures, suspicious logs, summary records."""

from __future__ import annotations

import json

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import rasterio

import aquitardmap
from aquitardmap.geostat.indicator import METHOD as INDICATOR_METHOD
from aquitardmap.grid import NODATA, read_raster
from aquitardmap.outputs import names as outputs

from conftest import demo_copy

SURFACES = ("aquitard", "SAND", "UMC", "LMC", "LAM")


@pytest.fixture(scope="module")
def summary(demo_run):
    return json.loads((demo_run.out_dir / outputs.SUMMARY).read_text())


def test_probability_grids_are_written_in_0_1_and_ordered(demo_run, summary):
    mask = demo_run.inputs.grid.mask
    pw, *_ = read_raster(demo_run.out_dir / outputs.P_WINDOW_PROB)
    pt, *_ = read_raster(demo_run.out_dir / outputs.P_THIN_PROB)
    for name in (outputs.P_WINDOW_PROB, outputs.P_THIN_PROB):
        with rasterio.open(demo_run.out_dir / name) as src:
            assert src.dtypes[0] == "float32" and src.nodata == NODATA
        assert name in summary["outputs"]
    assert np.all(np.isfinite(pw[mask])) and np.all(np.isnan(pw[~mask]))
    assert pw[mask].min() >= 0 and pt[mask].max() <= 1
    # Nested events: P(thinner than 1 m) <= P(thinner than 5 m), cell by cell (float32).
    assert np.all(pw[mask] <= pt[mask] + 1e-6)
    assert summary["probability"]["n_proving_absence"] == 14
    assert summary["probability"]["n_lower_bounds"] == 120


def test_holes_proving_a_window_have_high_window_probability(demo_run):
    pw, *_ = read_raster(demo_run.out_dir / outputs.P_WINDOW_PROB)
    bh = demo_run.boreholes
    proving = bh[bh["proves_window"].astype(bool) & ~bh["excluded"].astype(bool)]
    r, c = demo_run.inputs.grid.rowcol(proving["x"].to_numpy(), proving["y"].to_numpy())
    assert len(proving) >= 5
    assert np.median(pw[r, c]) > 0.8


def test_zones_carry_the_probability_they_were_drawn_from(demo_run, summary):
    zones = gpd.read_file(demo_run.out_dir / outputs.ZONES, layer=outputs.ZONES_LAYER)
    th = demo_run.inputs.project.screening
    assert summary["zones"]["basis"] == "probability"
    win, thin = zones[zones["kind"] == "window"], zones[zones["kind"] == "thin"]
    assert len(win) and len(thin)
    # Each tier carries its own threshold; a zone's cells reach it (but for the cells held
    # by a hole proving a window or thin clay, flagged whatever the probability says).
    for part, kind in ((win, "window"), (thin, "thin")):
        for tier, attr in (("likely", f"p_{kind}_threshold"),
                           ("possible", f"p_{kind}_possible_threshold")):
            z = part[part["tier"] == tier]
            assert len(z) and np.all(z["p_threshold"] == getattr(th, attr))
            by_p = z[z["n_cells_from_holes"] == 0]
            assert np.all(by_p["probability"] >= getattr(th, attr))
    assert np.allclose(win["probability"], win["mean_p_window"])
    assert win["reason"].str.contains("chance that the total aquitard is thinner").all()
    fast = zones[zones["kind"] == "fast"]
    assert fast["probability"].isna().all()


def test_cv_residuals_one_row_per_full_hole_of_every_surface(demo_run, summary):
    cv = pd.read_csv(demo_run.out_dir / outputs.CV_RESIDUALS)
    assert list(cv.columns) == ["surface", "borehole_id", "x", "y", "value_m", "estimate_m",
                                "error_m", "kriging_sd_m", "standardised_error"]
    assert set(cv["surface"]) == set(SURFACES)
    aq = cv[cv["surface"] == "aquitard"]
    assert len(aq) == summary["surfaces"]["aquitard"]["cross_validation"]["n"] == 280
    assert np.allclose(aq["error_m"], aq["estimate_m"] - aq["value_m"])
    assert np.allclose(aq["standardised_error"], aq["error_m"] / aq["kriging_sd_m"])
    # Statistics in the summary are those of the table (Isaaks & Srivastava 1989, ch. 15).
    s = summary["surfaces"]["aquitard"]["cross_validation"]
    assert s["rmse"] == pytest.approx(np.sqrt(np.mean(aq["error_m"] ** 2)), rel=1e-6)
    assert s["mean_error"] == pytest.approx(aq["error_m"].mean(), rel=1e-6, abs=1e-9)
    bh = demo_run.boreholes
    full_ids = set(bh.loc[(bh["status_aquitard"] == "full") & ~bh["excluded"], "borehole_id"])
    listed = {i for ids in aq["borehole_id"] for i in str(ids).split("+")}
    assert listed == full_ids
    # Coordinates are written to full precision.
    assert np.allclose(aq["y"], bh.set_index("borehole_id").loc[aq["borehole_id"], "y"])


def test_a_variogram_figure_per_surface_listed_in_the_summary(demo_run, summary):
    for name in SURFACES:
        fname = outputs.variogram_figure(name)
        assert summary["figures"]["variograms"][name] == fname
        assert summary["surfaces"][name]["figure"] == fname
        assert fname in summary["outputs"]
        data = (demo_run.out_dir / fname).read_bytes()
        assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10_000
        s = summary["surfaces"][name]
        assert s["variogram_source"] == "fitted"
        assert len(s["experimental_variogram"]["lag_m"]) >= 5
        assert set(s["cross_validation"]) >= {"mean_error", "rmse", "mean_standardised_error",
                                              "variance_standardised_error"}


@pytest.fixture(scope="module")
def latent_demo_run(tmp_path_factory):
    """The demo region run with ``probability_method = "latent_gaussian"``: the external
    drift of the probabilities exists only with that method (the default, indicator
    kriging, has none)."""
    proj = demo_copy(tmp_path_factory.mktemp("latent"),
                     screening='probability_method = "latent_gaussian"\n')
    return aquitardmap.run(proj, proj.parent / "out")


def test_the_default_method_has_no_drift_and_draws_no_residual_variogram(summary):
    assert summary["probability"]["external_drift"] == {"used": False}
    assert "aquitard_residual" not in summary["figures"]["variograms"]


def test_the_drift_residual_variogram_is_drawn_and_linked_when_used(latent_demo_run):
    run = latent_demo_run
    summary = json.loads((run.out_dir / outputs.SUMMARY).read_text())
    assert summary["probability"]["method"] != INDICATOR_METHOD
    drift = summary["probability"]["external_drift"]
    assert drift["used"]  # the demo's ground explains part of the thickness (README)
    assert drift["cross_validation_with_drift"]["rmse"] < drift["cross_validation_ordinary"][
        "rmse"]
    fname = outputs.variogram_figure("aquitard_residual")
    assert summary["figures"]["variograms"]["aquitard_residual"] == fname
    assert fname in summary["outputs"]
    assert (run.out_dir / fname).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    page = (run.out_dir / "map.html").read_text(encoding="utf-8")
    for name in [*SURFACES, "aquitard_residual"]:
        assert f'href="{outputs.variogram_figure(name)}"' in page


def test_suspicious_logs_are_listed_with_reasons(demo_run, summary):
    bh = gpd.read_file(demo_run.out_dir / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    for col in ("cv_error_m", "cv_standardised_error", "suspicious", "suspicious_reasons"):
        assert col in bh.columns
    sus = bh[bh["suspicious"].astype(bool)]
    # The four water wells with gross elevation errors (demo_region/README.md) are caught.
    dem = sus[sus["suspicious_reasons"].str.contains("differs from the DEM")]
    assert len(dem) == 4
    listed = {d["borehole_id"] for d in summary["suspicious_boreholes"]}
    assert listed == set(sus["borehole_id"])
    assert not bh.loc[~bh["suspicious"].astype(bool), "suspicious_reasons"].astype(bool).any()
