"""Variogram reuse between runs (:mod:`aquitardmap.geostat.cache.variograms`).

The policy is checked against hand arithmetic on invented models; the pipeline checks use a
synthetic region (``make_synthetic_region``, invented data from a known truth) with a store:
run, ``add`` 10 holes, run again. The reference for the second run is a run *without any
cache* that is given the same models as manual ``[variograms.<surface>]`` tables: every
output grid (in float64, before it is written as float32 GeoTIFF), the cross-validation
residuals and the zones must agree to 1e-9. The fact that ordinary kriging estimates do not
change when the variogram is multiplied by a constant (the reason the tolerance on the sill
matters little) is from Isaaks & Srivastava (1989), ch. 12, and is checked against pykrige.
"""

from __future__ import annotations

import json
import re
import shutil

import numpy as np
import pandas as pd
import pytest

import aquitardmap
from aquitardmap.config.project import read_project
from aquitardmap.evaluation.synthetic.region import hold_back_holes, make_synthetic_region
from aquitardmap.geostat.cache.variograms import (
    KEPT_FILE,
    VariogramBook,
    model_difference,
    open_variogram_book,
    read_kept,
)
from aquitardmap.geostat.drift import RESIDUAL_NAME
from aquitardmap.geostat.variogram import VariogramModel
from aquitardmap.inputs.store import add_files, create_store
from aquitardmap.outputs.write import output_grids

KEPT = VariogramModel("spherical", nugget=1.0, psill=9.0, range_m=1000.0)


def _book(tmp_path, **kw) -> VariogramBook:
    return VariogramBook(tmp_path / KEPT_FILE, kept={"aquitard": KEPT}, **kw)


# ------------------------------------------------------------------------------ the policy
def test_model_difference_is_relative_to_the_kept_sill_and_range():
    fresh = VariogramModel("spherical", nugget=1.5, psill=9.0, range_m=1100.0)
    d = model_difference(KEPT, fresh)
    # hand arithmetic: nugget 0.5 / sill 10; sill 10.5 vs 10; range 100 / 1000
    assert d["nugget"] == pytest.approx(0.05) and d["sill"] == pytest.approx(0.05)
    assert d["psill"] == 0.0 and d["range"] == pytest.approx(0.1)
    assert model_difference(KEPT, VariogramModel("exponential", 1.0, 9.0, 1000.0)) is None
    nested = VariogramModel("spherical", 1.0, 9.0, 1000.0, model2="exponential", psill2=5.0,
                            range2_m=5000.0)
    assert model_difference(nested, KEPT) is None  # a second structure appeared or went
    d2 = model_difference(nested, VariogramModel("spherical", 1.0, 9.0, 1000.0,
                                                 model2="exponential", psill2=6.5,
                                                 range2_m=4000.0))
    assert d2["psill2"] == pytest.approx(0.1) and d2["range2"] == pytest.approx(0.2)


def test_a_fit_within_the_tolerance_reuses_the_kept_model(tmp_path):
    book = _book(tmp_path)
    fresh = VariogramModel("spherical", nugget=1.2, psill=9.3, range_m=1080.0)
    used, source = book.settle("aquitard", fresh, "fitted")
    assert used == KEPT and source == "reused"
    d = book.decisions["aquitard"]
    assert d.decision == "reused" and d.refit == fresh and d.kept == KEPT
    assert d.as_dict()["largest_relative_difference"] == pytest.approx(0.08)  # range


@pytest.mark.parametrize(("fresh", "words"), [
    (VariogramModel("spherical", 1.0, 9.0, 1150.0), "15.0% in range"),
    (VariogramModel("spherical", 2.5, 9.0, 1000.0), "in nugget"),
    (VariogramModel("gaussian", 1.0, 9.0, 1000.0), "structures"),
])
def test_a_fit_beyond_the_tolerance_or_of_another_family_is_used(tmp_path, fresh, words):
    book = _book(tmp_path)
    used, source = book.settle("aquitard", fresh, "fitted")
    assert used == fresh and source == "fitted"
    assert book.decisions["aquitard"].decision == "refit"
    assert words in book.decisions["aquitard"].reason


def test_a_turned_anisotropy_axis_is_refit_and_an_isotropic_angle_ignored(tmp_path):
    kept = VariogramModel("spherical", 1.0, 9.0, 1000.0, anisotropy_ratio=2.0,
                          anisotropy_angle_deg=170.0)
    book = VariogramBook(tmp_path / KEPT_FILE, kept={"aquitard": kept, "UMC": KEPT})
    # 170° and 5° are 15° apart (axes, modulo 180°)
    turned = VariogramModel("spherical", 1.0, 9.0, 1000.0, anisotropy_ratio=2.0,
                            anisotropy_angle_deg=5.0)
    assert book.settle("aquitard", turned, "fitted")[0] == turned
    assert book.decisions["aquitard"].difference["anisotropy_angle_deg"] == pytest.approx(15)
    # an isotropic model has no axis: its angle is not compared
    iso = VariogramModel("spherical", 1.0, 9.0, 1000.0, anisotropy_angle_deg=45.0)
    assert book.settle("UMC", iso, "fitted")[0] == KEPT


def test_forced_refit_zero_tolerance_manual_and_fallback(tmp_path):
    fresh = VariogramModel("spherical", 1.0, 9.0, 1010.0)
    forced = _book(tmp_path, refit=True)
    assert forced.settle("aquitard", fresh, "fitted")[0] == fresh
    assert "forced" in forced.decisions["aquitard"].reason
    off = _book(tmp_path, within=0.0)
    assert off.settle("aquitard", fresh, "fitted")[0] == fresh
    assert "reuse_variogram_within = 0" in off.decisions["aquitard"].reason
    book = _book(tmp_path)
    assert book.settle("aquitard", fresh, "manual") == (fresh, "manual")
    assert book.decisions["aquitard"].decision == "manual"
    assert book.settle("aquitard", fresh, "default") == (fresh, "default")
    assert book.decisions["aquitard"].decision == "fallback"


def test_kept_models_round_trip_and_a_broken_file_is_ignored(tmp_path):
    path = tmp_path / "cache" / KEPT_FILE
    book = open_variogram_book(path)
    book.settle("aquitard", KEPT, "fitted")
    book.settle("UMC", KEPT, "manual")
    book.save()
    assert read_kept(path) == {"aquitard": KEPT}  # manual models are not kept
    assert [p.name for p in path.parent.iterdir()] == [KEPT_FILE]  # no temporary left
    path.write_text("{not json")
    assert read_kept(path) == {}
    path.write_text(json.dumps({"format": "kept-variograms-v1",
                                "surfaces": {"aquitard": {"model": {"model": "spherical",
                                                                    "nugget": "x"}}}}))
    assert read_kept(path) == {}
    book = open_variogram_book(None)  # no project cache: nothing kept, nothing written
    assert book.settle("aquitard", KEPT, "fitted") == (KEPT, "fitted")
    assert "no project cache" in book.decisions["aquitard"].reason
    assert book.save() is None


def test_sill_level_does_not_change_ordinary_kriging_estimates():
    """Why the sill tolerance matters little: pykrige's ordinary kriging with the sill
    scaled by 1.5 gives the same estimates, and variances scaled by 1.5."""
    pykrige = pytest.importorskip("pykrige")
    rng = np.random.default_rng(0)
    x, y = rng.uniform(0, 1000, 40), rng.uniform(0, 1000, 40)
    z = rng.normal(10, 2, 40)
    gx, gy = np.linspace(0, 1000, 7), np.linspace(0, 1000, 5)
    out = []
    for f in (1.0, 1.5):
        ok = pykrige.OrdinaryKriging(x, y, z, variogram_model="spherical",
                                     variogram_parameters={"sill": 4.0 * f, "range": 400.0,
                                                           "nugget": 0.5 * f})
        out.append(ok.execute("grid", gx, gy))
    np.testing.assert_allclose(out[1][0], out[0][0], rtol=1e-9)
    np.testing.assert_allclose(out[1][1], 1.5 * out[0][1], rtol=1e-9)


# ------------------------------------------------------------------------------ the pipeline
N_HOLES = 2000
N_ADDED = 10


def _split_region(root, n_holes: int, n_new: int, seed: int = 1):
    """A synthetic region with ``max_neighbours = 16``, its CSVs without ``n_new`` random
    holes, the store created from them, and the held-out holes as CSVs to ``add``."""
    proj = root / "proj"
    make_synthetic_region(proj, seed=11, n_holes=n_holes, write_project_toml=True)
    toml = proj / "project.toml"
    toml.write_text(re.sub(r"max_neighbours = \d+", "max_neighbours = 16", toml.read_text()))
    incoming = hold_back_holes(proj, root / "incoming", n_new, seed=seed)
    create_store(read_project(proj))
    return proj, incoming


def _manual_variograms_toml(models: dict[str, VariogramModel]) -> str:
    """``[variograms.<surface>]`` tables holding ``models`` exactly (repr of each float)."""
    lines = []
    for name, m in models.items():
        lines.append(f"\n[variograms.{name}]")
        for key, value in m.as_dict().items():
            if key in ("psill2", "range2_m") and not m.model2:
                continue
            lines.append(f"{key} = {json.dumps(value) if isinstance(value, str) else repr(value)}")
    return "\n".join(lines) + "\n"


@pytest.fixture(scope="module")
def after_add(tmp_path_factory):
    """Run, add 10 holes, run again (both with the project cache)."""
    root = tmp_path_factory.mktemp("reuse")
    proj, incoming = _split_region(root, N_HOLES, N_ADDED)
    first = aquitardmap.run(proj)
    add_files(read_project(proj), incoming, note="ten new wells")
    second = aquitardmap.run(proj)
    return proj, first, second


@pytest.mark.slow
def test_run_after_add_reuses_variograms_and_most_tiles(after_add):
    proj, first, second = after_add
    s = second.summary
    assert s["counts"]["boreholes"] == first.summary["counts"]["boreholes"] + N_ADDED
    kriged = sorted(second.surfaces)
    # every surface (and the residual from the drift behind the probabilities)
    assert [n for n in s["variogram_reuse"]["reused"] if n != RESIDUAL_NAME] == kriged
    assert s["variogram_reuse"]["refit"] == []
    for name, surface in second.surfaces.items():
        rec = s["surfaces"][name]["variogram_reuse"]
        assert rec["decision"] == "reused" and surface.variogram_source == "reused"
        assert rec["largest_relative_difference"] < 0.1
        # the model of the first run, kept
        assert surface.variogram == first.surfaces[name].variogram
        assert rec["used"] == rec["kept"] == first.surfaces[name].variogram.as_dict()
    tiles = s["tile_cache"]
    assert tiles["cells_reused"] > 2 * tiles["cells_computed"]  # most cells came back
    assert tiles["grids_with_reuse"] == len(second.surfaces)
    kept = set(read_kept(proj / ".aquitardmap-cache" / KEPT_FILE))
    assert kept - {RESIDUAL_NAME} == set(second.surfaces)
    drift = s["probability"]["external_drift"]
    if RESIDUAL_NAME in kept:  # the probabilities fitted a residual variogram: kept too
        assert drift["variogram_reuse"]["decision"] == "reused"
        assert drift["residual_variogram"] == drift["variogram_reuse"]["kept"]


def _probability_record(summary: dict) -> dict:
    """``summary["probability"]`` without the record of where the drift residual's
    variogram came from."""
    rec = json.loads(json.dumps(summary["probability"]))
    if isinstance(rec.get("external_drift"), dict):
        rec["external_drift"].pop("variogram_reuse", None)
    return rec


def _flat(value, prefix: str = "") -> dict[str, object]:
    """Nested dicts and lists as ``{"a.b.0": leaf}``."""
    if isinstance(value, dict):
        return {k: v for key, item in value.items()
                for k, v in _flat(item, f"{prefix}{key}.").items()}
    if isinstance(value, list):
        return {k: v for i, item in enumerate(value)
                for k, v in _flat(item, f"{prefix}{i}.").items()}
    return {prefix.rstrip("."): value}


@pytest.mark.slow
def test_run_after_add_equals_a_run_without_cache_with_the_same_models(after_add, tmp_path):
    proj, _, second = after_add
    ref_proj = tmp_path / "ref"
    shutil.copytree(proj, ref_proj, ignore=shutil.ignore_patterns(".aquitardmap-cache"))
    models = {name: s.variogram for name, s in second.surfaces.items()}
    # the residual from the ground drift of the probabilities, when it was fitted
    drift = second.summary["probability"]["external_drift"]
    if drift.get("residual_variogram"):
        models[RESIDUAL_NAME] = VariogramModel(**drift["residual_variogram"])
        assert drift["variogram_reuse"]["decision"] == "reused"
    with open(ref_proj / "project.toml", "a") as f:
        f.write(_manual_variograms_toml(models))
    ref = aquitardmap.run(ref_proj, tile_cache=False)
    assert "tile_cache" not in ref.summary
    assert ref.summary["variogram_reuse"]["manual"] == sorted(models)
    assert {n: s.variogram for n, s in ref.surfaces.items()} == \
        {n: m for n, m in models.items() if n != RESIDUAL_NAME}
    got = output_grids(second.inputs, second.surfaces, second.hydraulics, second.p_thin,
                       second.probabilities)
    want = output_grids(ref.inputs, ref.surfaces, ref.hydraulics, ref.p_thin,
                        ref.probabilities)
    assert set(got) == set(want) and len(got) >= 15
    for name in want:
        a, b = np.asarray(got[name][0], float), np.asarray(want[name][0], float)
        assert np.array_equal(np.isnan(a), np.isnan(b)), name
        fin = np.isfinite(b)
        assert np.array_equal(a[~fin], b[~fin], equal_nan=True), name  # NaN, infinities
        np.testing.assert_allclose(a[fin], b[fin], rtol=1e-9, atol=1e-9, err_msg=name)
    np.testing.assert_array_equal(second.hydraulics.avi_class, ref.hydraulics.avi_class)
    # cross-validation with the same model as the grid
    for name, s in second.surfaces.items():
        pd.testing.assert_frame_equal(s.cv_table, ref.surfaces[name].cv_table, rtol=1e-9,
                                      atol=1e-9)
    # the probability model's record (indicator method: per cutoff the variogram, its
    # source and the chain segments, and the block cross-validation; latent method: the
    # variance scale and drift choice) is the same, but for where the drift residual's
    # variogram came from (reused from the store in one run, manual in the other)
    got_p, want_p = (_flat(_probability_record(r.summary)) for r in (second, ref))
    assert got_p.keys() == want_p.keys()
    for key, value in want_p.items():
        if isinstance(value, float):
            assert got_p[key] == pytest.approx(value, rel=1e-12, abs=1e-12), key
        else:
            assert got_p[key] == value, key
    assert second.zones["kind"].value_counts().to_dict() == \
        ref.zones["kind"].value_counts().to_dict()


@pytest.mark.slow
def test_zero_tolerance_or_a_forced_refit_fits_every_surface_afresh(after_add, tmp_path):
    proj, _, second = after_add
    copy = tmp_path / "proj"
    shutil.copytree(proj, copy)
    forced = aquitardmap.run(copy, refit_variograms=True)
    assert forced.summary["variogram_reuse"]["forced_refit"] is True
    for name, s in forced.surfaces.items():
        rec = forced.summary["surfaces"][name]["variogram_reuse"]
        assert rec["decision"] == "refit" and "forced" in rec["reason"]
        assert s.variogram_source == "fitted" and s.variogram.as_dict() == rec["refit"]
    # the refit models are kept now; with tolerance 0 nothing is reused either
    toml = copy / "project.toml"
    toml.write_text(toml.read_text().replace("[kriging]\n",
                                             "[kriging]\nreuse_variogram_within = 0\n", 1))
    off = aquitardmap.run(copy)
    assert off.summary["variogram_reuse"]["reused"] == []
    assert off.summary["kriging"]["reuse_variogram_within"] == 0.0
    assert all("reuse_variogram_within = 0" in off.summary["surfaces"][n]
               ["variogram_reuse"]["reason"] for n in off.surfaces)


@pytest.mark.slow
def test_many_holes_added_refits(tmp_path):
    """A first run on 150 holes, then 1,850 more: the fits move beyond the tolerance."""
    proj, incoming = _split_region(tmp_path, N_HOLES, N_HOLES - 150)
    first = aquitardmap.run(proj)
    add_files(read_project(proj), incoming)
    second = aquitardmap.run(proj)
    s = second.summary
    assert s["counts"]["boreholes"] == first.summary["counts"]["boreholes"] + N_HOLES - 150
    assert "aquitard" in s["variogram_reuse"]["refit"]
    for name, surface in second.surfaces.items():
        rec = s["surfaces"][name]["variogram_reuse"]
        worst = rec["largest_relative_difference"]
        # every decision follows the recorded difference
        assert (rec["decision"] == "reused") == (worst is not None and worst < 0.1), name
        if rec["decision"] == "refit":
            assert surface.variogram.as_dict() == rec["refit"] == rec["used"]
