"""Command line: ``aquitardmap run``, ``check`` and ``suggest`` (one file per command).

Exit status: 0 success, 2 bad input (every problem listed, nothing written), 1 internal
error.
"""

from __future__ import annotations

import click

from aquitardmap._version import __version__
from aquitardmap.cli.add import add_command
from aquitardmap.cli.check import check_command
from aquitardmap.cli.compare import compare_command
from aquitardmap.cli.history import history_command
from aquitardmap.cli.run import run_command
from aquitardmap.cli.suggest import suggest_command
from aquitardmap.cli.undo import undo_command


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="aquitardmap")
def cli() -> None:
    """Screen the integrity of clay aquitards from borehole logs.

    Screening-level estimates only: interpolated between boreholes, with uncertainty; not a
    substitute for site-specific investigation.
    """


cli.add_command(run_command)
cli.add_command(check_command)
cli.add_command(add_command)
cli.add_command(history_command)
cli.add_command(undo_command)
cli.add_command(suggest_command)
cli.add_command(compare_command)


def main() -> None:
    """Entry point of the ``aquitardmap`` console script."""
    cli()
