"""``aquitardmap compare RUN_A RUN_B``: what changed between two runs."""

from __future__ import annotations

from pathlib import Path

import click

from aquitardmap.cli._common import console, guarded
from aquitardmap.compare import (
    CHANGES_MAP,
    Comparison,
    compare_runs,
    default_changes_dir,
    write_comparison,
)
from aquitardmap.outputs import names as outputs


def compare_and_report(run_a: Path, run_b: Path, out: Path, *, debug: bool = False,
                       name_a: str | None = None) -> Comparison:
    """Compare two runs, write the comparison into ``out`` and print its summary (shared
    by ``compare`` and ``run --since``)."""
    def work() -> Comparison:
        cmp = compare_runs(run_a, run_b, name_a=name_a)
        write_comparison(cmp, out)
        return cmp

    cmp = guarded(work, debug)
    click.echo(cmp.text, nl=False)
    console.print(f"Wrote the comparison to {out.resolve()}; open {CHANGES_MAP} in a browser.",
                  markup=False)
    return cmp


@click.command("compare")
@click.argument("run_a", type=click.Path(path_type=Path))
@click.argument("run_b", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=None,
              help="Folder for the comparison (default: RUN_B's folder name + "
              "'_changes' beside it); replaced as a whole when complete.")
@click.option("--debug", is_flag=True, help="Show the traceback of an internal error.")
def compare_command(run_a: Path, run_b: Path, out_dir: Path | None, debug: bool) -> None:
    """Compare two output folders of `aquitardmap run` (RUN_A earlier, RUN_B later): zones
    gained and lost, AVI class changes, thickness change and the boreholes that caused
    them."""
    compare_and_report(run_a, run_b, out_dir or default_changes_dir(run_b), debug=debug)
    console.print(f"[yellow]Caution:[/] {outputs.CAUTION}")
