"""``aquitardmap history PROJECT``: list the batches of the project store."""

from __future__ import annotations

from pathlib import Path

import click
from rich.table import Table

from aquitardmap.cli._common import console, guarded
from aquitardmap.config.project import read_project
from aquitardmap.inputs.store import history, store_path


@click.command("history")
@click.argument("project", type=click.Path(path_type=Path))
@click.option("--debug", is_flag=True, help="Show the traceback of an internal error.")
def history_command(project: Path, debug: bool) -> None:
    """List the batches of the PROJECT store, oldest first."""
    proj = guarded(lambda: read_project(project), debug)
    batches = guarded(lambda: history(proj), debug)
    if not batches:
        console.print(f"No store yet ({store_path(proj).name}); the boreholes are read from "
                      "the project's CSV files. `aquitardmap add` creates it.", markup=False)
        return
    t = Table(title=f"Batches of {store_path(proj).name}")
    for col in ("batch", "added (UTC)", "files (sha256)", "boreholes", "note", "state"):
        t.add_column(col, overflow="fold")
    for b in batches:
        files = "\n".join(f"{name} ({sha[:10]})" for name, sha in b.files)
        holes = (f"{b.n_added} added, {b.n_replaced} replaced, {b.n_unchanged} unchanged; "
                 f"{b.n_intervals} intervals, {b.n_samples} samples")
        t.add_row(str(b.batch_id), b.added_utc.replace("+00:00", "Z"), files, holes, b.note,
                  "live" if b.live else f"undone {b.undone_utc}")
    console.print(t)
