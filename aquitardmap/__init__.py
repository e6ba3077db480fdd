"""aquitardmap: screening maps of clay aquitard integrity from borehole logs.

Screening-level estimates only: see ``aquitardmap.outputs.CAUTION``.
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("aquitardmap")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+source"


from aquitardmap.pipeline import (  # noqa: E402 - needs __version__ above
    RunResult,
    build_surfaces,
    compute_hydraulics,
    load_inputs,
    run,
    screen,
)

__all__ = ["RunResult", "__version__", "build_surfaces", "compute_hydraulics", "load_inputs",
           "run", "screen"]
