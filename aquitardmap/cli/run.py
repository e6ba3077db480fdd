"""``aquitardmap run PROJECT --out DIR``: the whole screening."""

from __future__ import annotations

from pathlib import Path

import click
from rich.progress import BarColumn, Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

from aquitardmap import outputs
from aquitardmap.cli._common import console, guarded
from aquitardmap.pipeline import run
from aquitardmap.webmap import WebAssetsNotFound, find_web_assets


@click.command("run")
@click.argument("project", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Folder for the outputs; replaced as a whole only when the run succeeds.")
@click.option("--offline-map", "offline_map", is_flag=True,
              help="Write a map.html that opens without network: Leaflet inlined from a local "
                   "copy (Debian's libjs-leaflet, a global npm leaflet, or the folder in "
                   "AQUITARDMAP_WEB_ASSETS) and no background map tiles.")
@click.option("--debug", is_flag=True, help="Show the traceback of an internal error.")
def run_command(project: Path, out_dir: Path, offline_map: bool, debug: bool) -> None:
    """Run every stage on the PROJECT folder and write grids, zones, boreholes, summary and
    the planners' map to --out."""
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
                                     self_contained_map=offline_map), debug)
        bar.update(task, description="Done", completed=5)
    s = result.summary
    areas = s["zones"]["area_m2_by_kind"]
    console.print(f"Wrote {len(s['outputs'])} files to {result.out_dir}", markup=False)
    console.print(f"Flagged area: window {areas['window'] / 1e6:.2f} km², thin "
                  f"{areas['thin'] / 1e6:.2f} km², fast {areas['fast'] / 1e6:.2f} km²")
    console.print(f"Open {result.out_dir / outputs.MAP} in a browser.", markup=False)
    console.print(f"[yellow]Caution:[/] {outputs.CAUTION}")
