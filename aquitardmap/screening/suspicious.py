"""Suspicious borehole logs: holes a reviewer should look at before trusting the maps.

A hole is listed as suspicious, with every reason that applies, when

- its leave-one-out cross-validation residual of the total aquitard thickness is large for
  the kriging uncertainty there: ``|error / kriging SD| > [qa] cv_standardised_error_max``
  (3 by default: beyond three standard deviations a datum disagrees with its neighbours
  more than the variogram allows; common practice, cf. Isaaks & Srivastava 1989, ch. 15);
- its collar elevation differs from the DEM by more than ``[qa] dem_misfit_m``;
- its unit order breaks the stack (a unit logged below one that lies lower in the stack);
- it lies outside the study area's grid.

Suspicious holes are still used; a hole is left out only when its id is put in
``[qa] exclude_boreholes`` (no need to edit the data).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from aquitardmap.config.settings import QASettings
from aquitardmap.grid import Grid
from aquitardmap.inputs.columns import FLAG_ORDER

#: Columns added to the borehole table.
COLUMNS = ("cv_error_m", "cv_standardised_error", "suspicious", "suspicious_reasons")


def suspicious_columns(columns: pd.DataFrame, cv_table: pd.DataFrame, qa: QASettings,
                       grid: Grid) -> pd.DataFrame:
    """The suspicious-log columns for every borehole of ``columns`` (same index).

    Args:
        columns: the borehole column table (index: borehole id; ``x``, ``y``, ``qa_flags``
            and optionally ``dem_misfit_m``).
        cv_table: leave-one-out residuals of the total aquitard thickness
            (:func:`aquitardmap.geostat.surfaces.cross_validation_table`); a row whose id joins
            several holes at one location with ``+`` applies to each of them.
        qa: thresholds.
        grid: the screening grid.

    Returns ``cv_error_m`` (estimate − logged thickness, m; NaN for holes not
    cross-validated), ``cv_standardised_error``, ``suspicious`` (bool) and
    ``suspicious_reasons`` (``"; "``-joined plain reasons, ``""`` if none).
    """
    out = pd.DataFrame(index=columns.index)
    out["cv_error_m"] = np.nan
    out["cv_standardised_error"] = np.nan
    for row in cv_table.itertuples():
        for bid in str(row.borehole_id).split("+"):
            if bid in out.index:
                out.at[bid, "cv_error_m"] = row.error_m
                out.at[bid, "cv_standardised_error"] = row.standardised_error
    reasons: list[list[str]] = [[] for _ in range(len(out))]
    z = out["cv_standardised_error"].to_numpy(float)
    err = out["cv_error_m"].to_numpy(float)
    limit = qa.cv_standardised_error_max
    for i in np.flatnonzero(np.abs(np.nan_to_num(z)) > limit):
        reasons[i].append(f"aquitard thickness disagrees with its neighbours: kriged from "
                          f"them it would be {err[i]:+.1f} m off, {abs(z[i]):.1f} kriging "
                          f"SDs (limit {limit:g})")
    if "dem_misfit_m" in columns:
        mis = columns["dem_misfit_m"].to_numpy(float)
        for i in np.flatnonzero(np.abs(np.nan_to_num(mis)) > qa.dem_misfit_m):
            reasons[i].append(f"collar elevation differs from the DEM by {mis[i]:+.1f} m")
    flags = columns["qa_flags"].astype(str).to_numpy() if "qa_flags" in columns else \
        np.full(len(out), "")
    for i, f in enumerate(flags):
        if FLAG_ORDER in f:
            reasons[i].append("unit order breaks the stack")
    row, _ = grid.rowcol(columns["x"].to_numpy(float), columns["y"].to_numpy(float))
    for i in np.flatnonzero(row < 0):
        reasons[i].append("outside the grid of the study area")
    out["suspicious"] = [bool(r) for r in reasons]
    out["suspicious_reasons"] = ["; ".join(r) for r in reasons]
    return out


def suspicious_list(table: pd.DataFrame) -> list[dict[str, object]]:
    """``[{"borehole_id", "reasons", "excluded"}]`` of the suspicious holes of a borehole
    table holding :data:`COLUMNS` (and ``borehole_id``, ``excluded``)."""
    sus = table[table["suspicious"].astype(bool)]
    return [{"borehole_id": str(r.borehole_id), "reasons": str(r.suspicious_reasons),
             "excluded": bool(getattr(r, "excluded", False))} for r in sus.itertuples()]
