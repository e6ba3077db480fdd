"""Variogram choices from project.toml, and bad input for the geostatistics: too few holes,
all-equal values, duplicate locations, holes outside the grid, units nobody passed
through, exclusion of suspicious holes by id."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from pyproj import CRS
from shapely.geometry import box

from aquitardmap.config.project import read_project
from aquitardmap.config.settings import KrigingSettings, QASettings
from aquitardmap.errors import InputError
from aquitardmap.evaluation.synthetic.region import make_synthetic_region
from aquitardmap.geostat.stage import build_surfaces
from aquitardmap.geostat.surfaces import krige_thickness
from aquitardmap.geostat.variogram import VariogramModel
from aquitardmap.grid import make_grid
from aquitardmap.inputs.load import load_inputs
from aquitardmap.pipeline import run
from aquitardmap.screening.stage import borehole_table
from aquitardmap.screening.suspicious import suspicious_columns

from conftest import MINIMAL_PROJECT_TOML as MINIMAL

CRS_M = CRS.from_epsg(32632)
GRID = make_grid(box(0, 0, 3000, 3000), 100.0, CRS_M)



def _holes(n, seed=0, mean=15.0, sd=3.0):
    rng = np.random.default_rng(seed)
    return rng.uniform(100, 2900, n), rng.uniform(100, 2900, n), rng.normal(mean, sd, n)


# --- too few holes, all equal, duplicates -------------------------------------------------

def test_few_holes_use_a_documented_default_variogram_not_a_constant():
    x, y, t = _holes(5)
    s = krige_thickness("CLAY", x, y, t, np.full(5, "full"), GRID, KrigingSettings())
    assert s.variogram_source == "default"
    assert any("default spherical variogram" in n for n in s.notes)
    assert np.nanmax(s.thickness_m) - np.nanmin(s.thickness_m) > 1.0  # not constant
    assert s.variogram.psill == pytest.approx(np.var(t))


def test_two_holes_give_their_mean_with_a_clear_note():
    x, y, t = _holes(2)
    s = krige_thickness("CLAY", x, y, t, np.full(2, "full"), GRID, KrigingSettings())
    assert any("only 2 hole(s)" in n and "mean" in n for n in s.notes)
    assert np.allclose(s.thickness_m[GRID.mask], t.mean(), atol=1e-6)


def test_all_equal_values_give_that_constant_with_zero_sd_and_a_note():
    x, y, _ = _holes(12)
    s = krige_thickness("CLAY", x, y, np.full(12, 7.5), np.full(12, "full"), GRID,
                        KrigingSettings())
    assert s.variogram_source == "constant"
    assert np.allclose(s.thickness_m[GRID.mask], 7.5)
    assert np.all(s.sd_m[GRID.mask] == 0)
    assert any("all 12 holes" in n and "7.5 m everywhere" in n for n in s.notes)


def test_duplicate_locations_are_averaged_named_and_noted():
    x, y, t = _holes(20, seed=2)
    x = np.append(x, x[0])
    y = np.append(y, y[0])
    t = np.append(t, t[0] + 2.0)
    ids = np.array([f"H{i}" for i in range(21)])
    s = krige_thickness("CLAY", x, y, t, np.full(21, "full"), GRID, KrigingSettings(),
                        ids=ids)
    assert any("share a location" in n and "2.00 m" in n for n in s.notes)
    assert "H0+H20" in set(s.cv_table["borehole_id"])
    assert len(s.cv_table) == 20


# --- variogram choices ----------------------------------------------------------------------

def test_manual_variogram_is_used_as_given():
    x, y, t = _holes(30)
    manual = VariogramModel("exponential", 0.2, 9.0, 700.0, 1.5, 30.0)
    s = krige_thickness("CLAY", x, y, t, np.full(30, "full"), GRID,
                        KrigingSettings(variograms={"CLAY": manual}))
    assert s.variogram == manual and s.variogram_source == "manual"


def test_nested_and_anisotropic_fits_on_request():
    x, y, t = _holes(60, seed=4)
    s = krige_thickness("CLAY", x, y, t, np.full(60, "full"), GRID,
                        KrigingSettings(nested_model="exponential", anisotropy="auto"))
    assert s.variogram.model2 == "exponential" and s.variogram.range2_m >= s.variogram.range_m
    assert s.directional is not None and len(s.directional.ranges_m) == 4
    assert s.variogram.anisotropy_ratio == pytest.approx(s.directional.ratio)
    iso = krige_thickness("CLAY", x, y, t, np.full(60, "full"), GRID, KrigingSettings())
    assert iso.variogram.anisotropy_ratio == 1.0 and iso.directional is not None


def _project(tmp_path, extra):
    (tmp_path / "project.toml").write_text(MINIMAL + extra, encoding="utf-8")
    (tmp_path / "collars.csv").write_text("borehole_id,x,y,ground_elev_m,total_depth_m\n")
    (tmp_path / "intervals.csv").write_text("borehole_id,from_m,to_m,unit\n")
    return tmp_path


def test_project_toml_reads_variograms_and_geostatistics_keys(tmp_path):
    p = read_project(_project(tmp_path, """
[kriging]
nested_model = "exponential"
anisotropy = "auto"
lag_width_m = 150
n_directions = 6
direction_tolerance_deg = 15

[variograms.aquitard]
model = "spherical"
nugget = 0.5
psill = 40.0
range_m = 1200
anisotropy_ratio = 2.0
anisotropy_angle_deg = 30
model2 = "exponential"
psill2 = 10
range2_m = 5000

[screening]
zone_basis = "kriged_thickness"
p_window_threshold = 0.7
p_thin_threshold = 0.4
probability_draws = 32
probability_seed = 5
probability_variance_from_cv = false
window_latent_floor_m = 1.5
window_proof_radius_m = 450

[qa]
cv_standardised_error_max = 2.5
"""))
    k = p.kriging
    assert (k.nested_model, k.anisotropy, k.lag_width_m, k.n_directions,
            k.direction_tolerance_deg) == ("exponential", "auto", 150.0, 6, 15.0)
    assert k.variograms["aquitard"] == VariogramModel("spherical", 0.5, 40.0, 1200.0, 2.0,
                                                      30.0, "exponential", 10.0, 5000.0)
    s = p.screening
    assert (s.zone_basis, s.p_window_threshold, s.p_thin_threshold, s.probability_draws,
            s.probability_seed, s.probability_variance_from_cv) == ("kriged_thickness", 0.7,
                                                                    0.4, 32, 5, False)
    assert s.window_latent_floor_m == 1.5 and s.window_proof_radius_m == 450.0
    assert p.qa.cv_standardised_error_max == 2.5


def test_defaults_of_the_new_keys(tmp_path):
    p = read_project(_project(tmp_path, ""))
    assert p.kriging.nested_model == "" and p.kriging.anisotropy == "none"
    assert p.kriging.variograms == {}
    assert p.screening.zone_basis == "probability"
    assert (p.screening.p_window_threshold, p.screening.p_thin_threshold) == (0.5, 0.5)
    assert p.kriging.external_drift == "auto"
    assert p.screening.probability_variance_from_cv is True
    assert p.screening.window_latent_floor_m == 3.0
    assert p.screening.window_proof_radius_m == 300.0
    assert p.qa.cv_standardised_error_max == 3.0


def test_bad_variogram_tables_are_reported_with_line_and_column(tmp_path):
    with pytest.raises(InputError) as exc:
        read_project(_project(tmp_path, """
[kriging]
nested_model = "cubic"
external_drift = "dem"

[variograms.aquitard]
model = "linear"
psill = -1
range_m = 1000
sill = 3

[variograms.NOPE]
model = "spherical"
psill = 1
range_m = 100

[variograms.CLAY]
model = "spherical"
range_m = 100
model2 = "gaussian"

[screening]
p_thin_threshold = 1.5
zone_basis = "both"
probability_variance_from_cv = "yes"
window_latent_floor_m = 0
window_proof_radius_m = -5
"""))
    text = "\n".join(str(p) for p in exc.value.problems)
    lines = (tmp_path / "project.toml").read_text().splitlines()
    assert "nested_model must be" in text
    assert "[kriging] external_drift must be one of none, ground, auto, got 'dem'" in text
    assert "[variograms.aquitard] model must be one of" in text
    n_model = next(i for i, ln in enumerate(lines, 1) if ln.startswith('model = "linear"'))
    assert f"project.toml, line {n_model}, column 1: [variograms.aquitard] model" in text
    assert "[variograms.aquitard] psill must be > 0" in text
    assert "unknown key 'sill'" in text
    assert "'NOPE' is not a kriged surface" in text
    assert "[variograms.CLAY] psill is required" in text
    assert "model2 needs psill2 and range2_m" in text
    assert "p_thin_threshold must be <= 1.0" in text
    assert "zone_basis must be one of" in text
    assert "probability_variance_from_cv must be true or false" in text
    assert "[screening] window_proof_radius_m must be >= 0, got -5" in text
    n_floor = next(i for i, ln in enumerate(lines, 1) if ln.startswith("window_latent_floor"))
    assert (f"line {n_floor}, column 1: [screening] window_latent_floor_m must be > 0, got 0"
            in text)


# --- holes outside the grid, units nobody passed through, exclusion by id ---------------

def test_hole_outside_the_grid_is_suspicious():
    cols = pd.DataFrame({"x": [500.0, 9000.0], "y": [500.0, 500.0], "qa_flags": ["", ""]},
                        index=["IN", "OUT"])
    cv = pd.DataFrame(columns=["borehole_id", "error_m", "standardised_error"])
    sus = suspicious_columns(cols, cv, QASettings(), GRID)
    assert list(sus["suspicious"]) == [False, True]
    assert "outside the grid" in sus.at["OUT", "suspicious_reasons"]


def test_large_standardised_residual_and_stack_break_are_suspicious():
    cols = pd.DataFrame({"x": [500.0, 600.0, 700.0], "y": [500.0] * 3,
                         "qa_flags": ["", "unit order breaks the stack", ""],
                         "dem_misfit_m": [0.5, 0.0, -4.0]}, index=["A", "B", "C"])
    cv = pd.DataFrame({"borehole_id": ["A", "B+C"], "error_m": [-12.0, 1.0],
                       "standardised_error": [-3.5, 0.4]})
    sus = suspicious_columns(cols, cv, QASettings(dem_misfit_m=3.0), GRID)
    assert "3.5 kriging SDs" in sus.at["A", "suspicious_reasons"]
    assert sus.at["B", "suspicious_reasons"] == "unit order breaks the stack"
    assert "differs from the DEM by -4.0 m" in sus.at["C", "suspicious_reasons"]
    assert sus.at["C", "cv_standardised_error"] == 0.4  # shared row of a merged location
    assert sus["suspicious"].all()


@pytest.fixture(scope="module")
def small_region(tmp_path_factory):
    root = tmp_path_factory.mktemp("small")
    make_synthetic_region(root, seed=21, character="bedrock_highs", n_holes=120,
                          extent_m=(5000.0, 3500.0), hazards=False, write_project_toml=True)
    return root


def test_unit_that_no_hole_passes_through_is_a_clear_input_error(small_region):
    inputs = load_inputs(small_region)
    inputs.columns["status_LAM"] = np.where(inputs.columns["status_LAM"] == "full",
                                            "lower_bound", inputs.columns["status_LAM"])
    with pytest.raises(InputError) as exc, warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        build_surfaces(inputs)
    assert "full thickness of LAM" in str(exc.value)
    assert "cannot be mapped" in str(exc.value)


def test_suspicious_hole_can_be_excluded_by_id_without_editing_data(small_region):
    first = run(small_region)
    sus = first.boreholes[first.boreholes["suspicious"].astype(bool)]
    assert len(sus) >= 1  # the generator's elevation blunders at least
    target = str(sus["borehole_id"].iloc[0])
    toml = (small_region / "project.toml").read_text()
    (small_region / "project.toml").write_text(
        toml.replace("exclude_boreholes = []", f'exclude_boreholes = ["{target}"]'))
    second = run(small_region)
    row = second.boreholes.set_index("borehole_id").loc[target]
    assert bool(row["excluded"])
    cv_ids = {i for ids in second.surfaces["aquitard"].cv_table["borehole_id"]
              for i in str(ids).split("+")}
    assert target not in cv_ids
    assert second.summary["counts"]["excluded"] == 1
    listed = {d["borehole_id"]: d for d in second.summary["suspicious_boreholes"]}
    assert listed[target]["excluded"] is True


def test_borehole_table_without_surfaces_keeps_its_old_columns(small_region):
    inputs = load_inputs(small_region)
    assert "suspicious" not in borehole_table(inputs).columns
