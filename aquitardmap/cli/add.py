"""``aquitardmap add PROJECT FILE...``: add new borehole logs to the project store."""

from __future__ import annotations

from pathlib import Path

import click

from aquitardmap.cli._common import console, guarded
from aquitardmap.config.project import read_project
from aquitardmap.inputs.store import add_files, store_path


@click.command("add")
@click.argument("project", type=click.Path(path_type=Path))
@click.argument("files", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--note", default="", help="A note kept with the batch (e.g. where the logs "
              "came from).")
@click.option("--replace", is_flag=True, help="Where a borehole id is already stored with "
              "different data, the new version wins; the stored one is kept in history.")
@click.option("--debug", is_flag=True, help="Show the traceback of an internal error.")
def add_command(project: Path, files: tuple[Path, ...], note: str, replace: bool,
                debug: bool) -> None:
    """Validate FILES (CSV tables, a .gpkg or an .xlsx workbook) and add them to the PROJECT
    store as one batch, or nothing. On first use the store is created from the project's
    CSV files."""
    def work():
        proj = read_project(project)
        return proj, add_files(proj, files, note=note, replace=replace)

    proj, result = guarded(work, debug)
    if result.initial is not None:
        b = result.initial
        console.print(f"Created {store_path(proj).name} from the project's CSV files: batch "
                      f"{b.batch_id}, {b.n_added} boreholes, {b.n_intervals} intervals, "
                      f"{b.n_samples} samples.", markup=False)
    for w in result.warnings:
        console.print(f"  note: {w}", markup=False)
    console.print(result.message[0].upper() + result.message[1:] + ".", markup=False)
    if result.replaced:
        console.print(f"Replaced (old versions kept in history): {', '.join(result.replaced)}",
                      markup=False)
