"""aquitardmap: screening maps of clay aquitard integrity from borehole logs.

Screening-level estimates only: see ``aquitardmap.outputs.names.CAUTION``.
"""

from aquitardmap._version import __version__
from aquitardmap.pipeline import (
    RunResult,
    build_surfaces,
    compute_hydraulics,
    load_inputs,
    run,
    screen,
)

__all__ = ["RunResult", "__version__", "build_surfaces", "compute_hydraulics", "load_inputs",
           "run", "screen"]
