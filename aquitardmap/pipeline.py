"""The whole screening run, stage by stage: logs → surfaces → hydraulics → zones → outputs.

Each stage is a public function a notebook can call in turn; :func:`run` calls them in
order and writes every output into a temporary folder that replaces ``out_dir`` only when
all of it is written, so a failed or interrupted run never leaves a half-written result and
never damages the previous one.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

import geopandas as gpd
import numpy as np

from aquitardmap.config.settings import ComputeSettings
from aquitardmap.errors import InputError, Problem
from aquitardmap.geostat.cache.folders import open_tile_cache, tile_folder, variogram_book
from aquitardmap.geostat.compute import compute_session, describe
from aquitardmap.geostat.context import KrigingContext
from aquitardmap.geostat.drift import RESIDUAL_NAME
from aquitardmap.geostat.probability import (
    ThicknessProbabilities,
)
from aquitardmap.geostat.stage import build_surfaces
from aquitardmap.geostat.surfaces import Surface
from aquitardmap.hydraulics.stage import Hydraulics, compute_hydraulics
from aquitardmap.inputs.load import Inputs, load_inputs
from aquitardmap.outputs.staging import staged_output_dir
from aquitardmap.outputs.summary import build_summary
from aquitardmap.outputs.webmap.assets import find_web_assets
from aquitardmap.outputs.write import write_outputs
from aquitardmap.screening.stage import borehole_table, screen, thickness_probability_grids

#: Called with (stage description, stage number from 1, number of stages).
ProgressFn = Callable[[str, int, int], None]


STAGES = (
    "Reading and checking inputs",
    "Kriging unit thicknesses",
    "Computing conductivity and hydraulics",
    "Drawing flagged zones",
    "Writing outputs and map",
)


@dataclass
class RunResult:
    """What a run produced (in memory) and where it wrote it."""

    out_dir: Path | None
    inputs: Inputs
    surfaces: dict[str, Surface]
    hydraulics: Hydraulics
    p_thin: np.ndarray
    zones: gpd.GeoDataFrame
    boreholes: gpd.GeoDataFrame
    summary: dict
    probabilities: ThicknessProbabilities | None = None


def _refuse_out_over_project(project_dir: str | Path, out_dir: str | Path) -> None:
    """An output folder that is the project folder, or holds it, would be replaced with the
    inputs inside: refused before any work."""
    root, out = Path(project_dir).resolve(), Path(out_dir).resolve()
    if root == out or root.is_relative_to(out):
        raise InputError([Problem(str(out), 0, 0, "the output folder is the project folder "
                                  "or holds it; replacing it would delete the inputs: choose "
                                  "another --out")])


def run(project_dir: str | Path, out_dir: str | Path | None = None, *,
        progress: ProgressFn | None = None, self_contained_map: bool = False,
        compute: ComputeSettings | None = None,
        tile_cache: str | Path | bool | None = None,
        refit_variograms: bool = False) -> RunResult:
    """Run the whole screening on a project folder and write every output to ``out_dir``.

    With ``out_dir=None`` nothing is written (the result is returned in memory only).
    ``self_contained_map=True`` writes a ``map.html`` that opens without network (Leaflet
    inlined from a local copy, no background tiles); the local copy is looked for before
    any work is done. ``compute`` replaces the project's ``[compute]`` settings (where the
    kriging tiles run: this process, or a Dask cluster; the numbers are the same).
    The summary records the seconds spent in each stage (``run.stage_seconds``).

    Raises:
        InputError: when inputs are unusable (nothing is written).
        WebAssetsNotFound: ``self_contained_map`` and no local Leaflet (nothing is written).

    ``tile_cache``: grid kriging reuses the tiles whose deciding data are unchanged
    (:mod:`aquitardmap.geostat.cache.tiles`; same numbers as without it). By default (None) this is
    on for a project with a store, in ``PROJECT/.aquitardmap-cache/tiles``; False turns it
    off; a path names the folder. ``summary.json`` then counts tiles reused and kriged.

    Variograms: with the cache, a surface reuses the model the previous run used while a
    fresh fit differs from it by less than ``[kriging] reuse_variogram_within``
    (:mod:`aquitardmap.geostat.cache.variograms`); ``refit_variograms=True`` always uses the fresh
    fit. ``summary.json`` records each surface's decision (``variogram_reuse``).
    """
    def step(i: int) -> None:
        if progress is not None:
            progress(STAGES[i], i + 1, len(STAGES))

    if out_dir is not None:
        _refuse_out_over_project(project_dir, out_dir)
    if self_contained_map and out_dir is not None:
        find_web_assets()
    started = datetime.now(UTC)
    t0 = time.perf_counter()
    seconds: dict[str, float] = {}

    def lap(name: str, since: float) -> float:
        now = time.perf_counter()
        seconds[name] = round(now - since, 3)
        return now

    step(0)
    inputs = load_inputs(project_dir)
    t = lap("inputs", t0)
    folder = tile_folder(inputs.project, tile_cache)
    # the kept variograms serve the surfaces and the probabilities (residual from the drift)
    book = variogram_book(inputs.project, folder, refit_variograms)
    cache = open_tile_cache(folder)
    with compute_session(compute or inputs.project.compute) as runner:
        step(1)
        surfaces = build_surfaces(inputs, KrigingContext(runner, cache, book))
        t = lap("surfaces", t)
        step(2)
        hyd = compute_hydraulics(inputs, surfaces)
        t = lap("hydraulics", t)
        step(3)
        boreholes = borehole_table(inputs, surfaces)
        probabilities = None
        if inputs.project.screening.zone_basis == "probability":
            probabilities = thickness_probability_grids(inputs, surfaces, hyd,
                                                        KrigingContext(runner, None, book))
        p_thin, zones = screen(inputs, surfaces, hyd, boreholes, probabilities=probabilities)
        t = lap("zones", t)
        compute_info = describe(runner)
    summary = build_summary(inputs, surfaces, hyd, zones, boreholes, started, t0, probabilities)
    summary["compute"] = compute_info
    summary["run"]["stage_seconds"] = seconds
    if cache is not None:
        summary["tile_cache"] = {"folder": str(cache.folder), **cache.stats.as_dict()}
    summary["variogram_reuse"] = book.summary()
    for name, decision in book.decisions.items():
        if name in summary["surfaces"]:
            summary["surfaces"][name]["variogram_reuse"] = decision.as_dict()
    drift = summary.get("probability", {}).get("external_drift")
    if isinstance(drift, dict) and RESIDUAL_NAME in book.decisions:
        drift["variogram_reuse"] = book.decisions[RESIDUAL_NAME].as_dict()
    written = None
    if out_dir is not None:
        step(4)
        with staged_output_dir(out_dir) as tmp:
            write_outputs(tmp, inputs, surfaces, hyd, p_thin, zones, boreholes, summary,
                          self_contained_map=self_contained_map,
                          probabilities=probabilities)
        written = Path(out_dir).resolve()
    if cache is not None:
        cache.prune()  # keep only the tiles of this (successful) run
        book.save()  # and the variograms it used
    return RunResult(written, inputs, surfaces, hyd, p_thin, zones, boreholes, summary,
                     probabilities)
