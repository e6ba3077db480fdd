"""``aquitardmap check PROJECT``: validate the inputs and print what was found."""

from __future__ import annotations

from pathlib import Path

import click
from rich.table import Table

from aquitardmap.cli._common import console, guarded
from aquitardmap.inputs.load import load_inputs


@click.command("check")
@click.argument("project", type=click.Path(path_type=Path))
@click.option("--debug", is_flag=True, help="Show the traceback of an internal error.")
def check_command(project: Path, debug: bool) -> None:
    """Validate the PROJECT folder's inputs; write nothing. Exit 2 lists every problem."""
    inputs = guarded(lambda: load_inputs(project), debug)
    p = inputs.project
    c = inputs.columns
    used = c[~c["excluded"]]
    console.print(f"[bold]{p.name}[/]  ({p.crs.to_string()}, {p.cell_size_m:g} m cells, "
                  f"{int(inputs.grid.mask.sum())} cells in the study area)")
    t = Table(title="Stack (top to bottom)")
    for col in ("code", "name", "role", "default K (m/s)", "K method"):
        t.add_column(col)
    for u in p.units:
        t.add_row(u.code, u.name, u.role, f"{u.k_default_m_s:.2g}", u.k_method)
    console.print(t)
    console.print(f"Boreholes: {len(c)} ({len(c) - len(used)} excluded); reached the aquifer: "
                  f"{int(used['reached_aquifer'].sum())}; stopped in the clay (lower bounds): "
                  f"{int((used['status_aquitard'] == 'lower_bound').sum())}; QA-flagged: "
                  f"{int((used['qa_flags'] != '').sum())}; samples: "
                  f"{len(inputs.boreholes.samples)}")
    for w in inputs.warnings:
        console.print(f"  note: {w}", markup=False)
    console.print("[green]Inputs are usable.[/]")
