"""What every command shares: how input problems and internal errors are reported."""

from __future__ import annotations

import sys
import traceback
from collections.abc import Callable
from typing import TypeVar

from rich.console import Console

from aquitardmap.errors import InputError

T = TypeVar("T")
EXIT_BAD_INPUT = 2
EXIT_INTERNAL = 1

console = Console(stderr=True, highlight=False)


def report_input_error(err: InputError) -> None:
    """Print every problem, one per line, as ``file, line L, column C: message``."""
    console.print(f"[bold red]{len(err.problems)} problem(s) in the inputs; nothing was "
                  "written.[/]")
    for p in err.problems:
        console.print(f"  - {p}", markup=False)


def guarded(fn: Callable[[], T], debug: bool = False) -> T:
    """Run ``fn``; bad input exits 2 with the list of problems, anything else exits 1."""
    try:
        return fn()
    except InputError as err:
        report_input_error(err)
        sys.exit(EXIT_BAD_INPUT)
    except KeyboardInterrupt:
        console.print("interrupted; nothing was written")
        sys.exit(EXIT_INTERNAL)
    except Exception as exc:  # noqa: BLE001 - the last line of defence of the CLI
        if debug:
            traceback.print_exc()
        console.print(f"[bold red]internal error:[/] {type(exc).__name__}: {exc}", markup=True)
        console.print("nothing was written. Re-run with --debug for the traceback and "
                      "report it.")
        sys.exit(EXIT_INTERNAL)
