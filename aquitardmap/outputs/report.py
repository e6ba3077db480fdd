"""The printable report: ``report.pdf`` built from the files of one run folder.

Drawn with matplotlib only (no browser), on A4 portrait pages, each carrying the caution
in its footer:

1. the job, the data used (input files with SHA-256, counts), thresholds, flagged areas
   and the caution in full;
2. maps of total clay thickness, the chance of thin clay, travel time and vulnerability
   class (AVI, Van Stempvoort, Ewert & Wassenaar 1993), each with the flagged zones and the
   boreholes coloured by what they prove;
3. the variogram of the total thickness (experimental points from the run's full-
   penetration holes with their pair counts, and the fitted model) and any variogram
   figures the run wrote, with the cross-validation statistics of every surface;
   then, when the run checked them, how well the probabilities held up at the holes (block
   cross-validation: Brier score against the constant share, reliability table);
4. the table of flagged areas;
5. the parameters with their sources (units and conductivity, settings, methods; the
   probability method as the run's summary names it).

Like the map, the report reads only the run folder (names in :mod:`aquitardmap.outputs.names`,
styles in :mod:`aquitardmap.outputs.presentation`), so it can be rebuilt from what was delivered.
The pages are drawn by the modules of :mod:`aquitardmap.outputs.reportpages`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from aquitardmap.files import replace_atomically
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.reportpages.frame import Pages
from aquitardmap.outputs.reportpages.maps import map_pages
from aquitardmap.outputs.reportpages.statistics import calibration_page, variogram_page
from aquitardmap.outputs.reportpages.tables import parameter_pages, zone_pages
from aquitardmap.outputs.reportpages.title import title_page
from aquitardmap.outputs.runfolder import read_summary


def write_report(run_dir: str | Path, *, summary: dict[str, Any] | None = None) -> Path:
    """Write ``run_dir / report.pdf`` from the files of a run folder.

    ``summary`` is the run's summary as ``summary.json`` holds it
    (:func:`aquitardmap.outputs.summary.json_ready`), given by the run that writes the
    folder; without it ``summary.json`` is read from ``run_dir`` (a folder written before).

    Missing files leave their part out (a map page without the grid, a table saying so);
    the caution is on every page. The file is written to a temporary name and moved into
    place. Returns the path of ``report.pdf``.

    Raises:
        NotADirectoryError: ``run_dir`` is not a folder.
    """
    run_dir = Path(run_dir)
    if not run_dir.is_dir():
        raise NotADirectoryError(f"run folder not found: {run_dir}")
    if summary is None:
        summary = read_summary(run_dir)
    pages = Pages(summary)
    title_page(pages)
    map_pages(pages, run_dir)
    variogram_page(pages, run_dir)
    calibration_page(pages)
    zone_pages(pages, run_dir)
    parameter_pages(pages)
    return replace_atomically(run_dir / outputs.REPORT, pages.save)


__all__ = ["write_report"]
