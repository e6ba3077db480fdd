"""``aquitardmap undo PROJECT BATCH``: remove a batch and restore what it replaced."""

from __future__ import annotations

from pathlib import Path

import click

from aquitardmap.cli._common import console, guarded
from aquitardmap.config.project import read_project
from aquitardmap.inputs.store import undo_batch


@click.command("undo")
@click.argument("project", type=click.Path(path_type=Path))
@click.argument("batch", type=int)
@click.option("--debug", is_flag=True, help="Show the traceback of an internal error.")
def undo_command(project: Path, batch: int, debug: bool) -> None:
    """Remove BATCH's boreholes from the PROJECT store and restore the versions it replaced
    (one transaction). The batch stays listed in the history, marked undone."""
    message = guarded(lambda: undo_batch(read_project(project), batch), debug)
    console.print(message[0].upper() + message[1:] + ".", markup=False)
