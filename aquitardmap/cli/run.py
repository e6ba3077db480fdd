"""``aquitardmap run PROJECT --out DIR``: the whole screening."""

from __future__ import annotations

import shutil
import tempfile
from dataclasses import replace
from pathlib import Path

import click
from rich.progress import BarColumn, Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

from aquitardmap.cli._common import console, guarded
from aquitardmap.cli.compare import compare_and_report
from aquitardmap.compare import check_run, default_changes_dir
from aquitardmap.config.project import read_project
from aquitardmap.config.settings import ComputeSettings
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.webmap.assets import WebAssetsNotFound, find_web_assets
from aquitardmap.pipeline import run
from aquitardmap.screening.zones import ZONE_KINDS, ZONE_TIERS


def flagged_area_words(zones: dict) -> str:
    """The flagged area of each zone kind in km² (summary.json ``zones``), window and thin
    split by tier when they were drawn in tiers: ``window 0.45 km² (likely 0.20, possible
    0.25)``."""
    areas = zones.get("area_m2_by_kind", {})
    by_tier = zones.get("area_m2_by_kind_and_tier") or {}
    parts = []
    for k in ZONE_KINDS:
        text = f"{k} {areas.get(k, 0.0) / 1e6:.2f} km²"
        if k in by_tier:
            text += " (" + ", ".join(f"{t} {by_tier[k].get(t, 0.0) / 1e6:.2f}"
                                     for t in ZONE_TIERS) + ")"
        parts.append(text)
    return ", ".join(parts)


@click.command("run")
@click.argument("project", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Folder for the outputs; replaced as a whole only when the run succeeds.")
@click.option("--offline-map", "offline_map", is_flag=True,
              help="Write a map.html that opens without network: Leaflet inlined from the "
                   "copy shipped in the package (or the folder in AQUITARDMAP_WEB_ASSETS), no "
                   "background map tiles; the background is a shaded relief of the DEM unless "
                   "[map] background = \"none\".")
@click.option("--compute", "compute_mode", type=click.Choice(["local", "single", "dask"]),
              default=None,
              help="Where the heavy work runs: worker processes on this machine's cores "
                   "(local, the default), this process only (single) or a Dask cluster "
                   "(dask; needs the 'dask' extra). Default: [compute] mode of project.toml.")
@click.option("--scheduler", default=None, metavar="ADDRESS",
              help="Address of a running Dask scheduler, e.g. tcp://10.0.0.5:8786 (implies "
                   "--compute dask). Without it, dask mode starts local worker processes.")
@click.option("--workers", type=click.IntRange(min=0), default=None,
              help="Worker processes on this machine (local mode, or dask without --scheduler); "
                   "0: one per core; 1 in local mode: this process only.")
@click.option("--refit-variograms", "refit_variograms", is_flag=True,
              help="Use this run's fitted variograms even where they agree with the ones "
                   "kept from the previous run (see [kriging] reuse_variogram_within).")
@click.option("--since", "since", type=click.Path(path_type=Path), default=None,
              metavar="RUN_DIR",
              help="After the run, compare it with the earlier run in RUN_DIR (it may be "
                   "--out itself, compared as it was before this run) and write what "
                   "changed as `aquitardmap compare RUN_DIR OUT` does, into OUT_changes "
                   "beside --out.")
@click.option("--debug", is_flag=True, help="Show the traceback of an internal error.")
def run_command(project: Path, out_dir: Path, offline_map: bool, compute_mode: str | None,
                scheduler: str | None, workers: int | None, refit_variograms: bool,
                since: Path | None, debug: bool) -> None:
    """Run every stage on the PROJECT folder and write grids, zones, boreholes, summary and
    the planners' map to --out."""
    if since is None:
        _run(project, out_dir, offline_map, compute_mode, scheduler, workers,
             refit_variograms, debug)
        return
    guarded(lambda: check_run(since), debug)  # not a run: bad input, before any work
    with tempfile.TemporaryDirectory(prefix="aquitardmap-since-") as tmp:
        earlier, name = since, None
        if since.resolve() == out_dir.resolve():  # the run replaces it: keep a copy first
            earlier = Path(tmp) / "earlier"
            guarded(lambda: shutil.copytree(since, earlier), debug)
            name = f"{since} (before this run)"
        _run(project, out_dir, offline_map, compute_mode, scheduler, workers,
             refit_variograms, debug, caution=False)
        compare_and_report(earlier, out_dir, default_changes_dir(out_dir), debug=debug,
                           name_a=name)
    console.print(f"[yellow]Caution:[/] {outputs.CAUTION}")


def _run(project: Path, out_dir: Path, offline_map: bool, compute_mode: str | None,
         scheduler: str | None, workers: int | None, refit_variograms: bool, debug: bool,
         *, caution: bool = True) -> None:
    """The run itself, with its progress bar and closing lines."""
    overrides: dict[str, object] = {}
    if compute_mode is not None:
        overrides["mode"] = compute_mode
    if scheduler:
        overrides["scheduler"] = scheduler
        overrides.setdefault("mode", "dask")
    if workers is not None:
        overrides["workers"] = workers

    def compute_settings() -> ComputeSettings | None:
        if not overrides:
            return None
        return replace(read_project(project).compute, **overrides)
    if offline_map:
        try:
            find_web_assets()
        except WebAssetsNotFound as exc:
            raise click.UsageError(str(exc)) from None
    with Progress(SpinnerColumn(), TextColumn("{task.description}"), BarColumn(),
                  TextColumn("{task.completed}/{task.total}"), TimeElapsedColumn(),
                  console=console, transient=False) as bar:
        task = bar.add_task("Starting", total=5)

        def progress(stage: str, i: int, n: int) -> None:
            bar.update(task, description=stage, completed=i - 1, total=n)

        result = guarded(lambda: run(project, out_dir, progress=progress,
                                     self_contained_map=offline_map,
                                     compute=compute_settings(),
                                     refit_variograms=refit_variograms), debug)
        bar.update(task, description="Done", completed=5)
    s = result.summary
    console.print(f"Wrote {len(s['outputs'])} files to {result.out_dir}", markup=False)
    console.print("Flagged area: " + flagged_area_words(s["zones"]), markup=False)
    times = ", ".join(f"{k} {v:.1f} s" for k, v in s["run"].get("stage_seconds", {}).items())
    if times:
        console.print(f"Time per stage: {times}", markup=False)
    reuse, tiles = s.get("variogram_reuse", {}), s.get("tile_cache")
    if tiles is not None:
        n = tiles["cells_computed"] + tiles["cells_reused"]
        console.print(f"Project cache: variograms reused for {len(reuse.get('reused', []))}, "
                      f"refit for {len(reuse.get('refit', []))} surface(s); "
                      f"{tiles['cells_computed'] / max(n, 1):.1%} of the grid cells kriged "
                      "again", markup=False)
    console.print(f"Open {result.out_dir / outputs.MAP} in a browser.", markup=False)
    if caution:
        console.print(f"[yellow]Caution:[/] {outputs.CAUTION}")
