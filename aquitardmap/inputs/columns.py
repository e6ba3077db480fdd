"""The per-hole column table: what each borehole's log says about the protective column.

:func:`column_table` turns the validated logs (:func:`aquitardmap.inputs.logs.read_boreholes`)
into one row per borehole with the thickness of every unit of the protective column and
whether that thickness is complete (``full``), a lower bound (``lower_bound``) or not
observed (``unknown``).

A hole that stops inside a unit does not measure that unit's thickness: it gives a lower
bound (a censored value), never a thickness. Treating it as a full thickness invents thin
zones (common practice).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import pandas as pd

from aquitardmap.config.project import Project
from aquitardmap.inputs.logs import (
    MAX_PLAUSIBLE_DEPTH_M,
    TOTAL_DEPTH_TOLERANCE_M,
    Boreholes,
    depth_text,
    log_gaps,
)

#: Status of a thickness read from one hole.
FULL = "full"
LOWER_BOUND = "lower_bound"
UNKNOWN = "unknown"

#: Plain reasons used in ``column_table(...)["qa_flags"]``.
FLAG_ORDER = "unit order breaks the stack"
FLAG_GAP = "gap in log"
FLAG_NO_INTERVALS = "no intervals"
FLAG_SHORT_LOG = "log ends above total depth"
FLAG_DEEP = "total depth implausibly deep"


def _combined_status(statuses: Sequence[str]) -> str:
    """``full`` if every status is full (or there are none), ``unknown`` if any is
    unknown, else ``lower_bound``."""
    if any(s == UNKNOWN for s in statuses):
        return UNKNOWN
    if all(s == FULL for s in statuses):
        return FULL
    return LOWER_BOUND


def column_table(boreholes: Boreholes, project: Project) -> pd.DataFrame:
    """One row per collar summarising its log over the protective column.

    The protective column is the units above the first aquifer of the stack
    (``project.column_units``). Stack positions count from 0 at the top of the stack.

    Columns (index ``borehole_id``, collar order):

    ``x, y, ground_elev_m, total_depth_m``
        copied from the collars.
    ``excluded``
        the id is in ``[qa] exclude_boreholes`` (the row stays in the table).
    ``reached_aquifer``
        the log has an interval of the first aquifer or of any unit below it in the stack.
    ``bottom_unit``
        code of the deepest interval (largest ``to_m``); ``""`` without intervals.
    ``thickness_<C>_m`` and ``status_<C>`` for every column unit C
        The thickness is the summed length of C's intervals above ``depth_to_aquifer_m``
        (clay logged below the top of the aquifer does not protect it; such a log is also
        flagged as breaking the stack order); 0 when absent. The status says what that
        number means, with *deepest level* the lowest stack position of any unit in the log
        (for a log that follows the stack this is the position of ``bottom_unit``; taking
        the lowest position keeps, e.g., a sand lens at the bottom of a clay hole from
        hiding the clay above it):

        - ``full``: the hole reached the aquifer, or its deepest level is below C: the hole
          passed through C and the thickness is complete (0 is a real absence);
        - ``lower_bound``: the hole did not reach the aquifer and stopped at C's level: C is
          at least this thick (censored; never use it as a thickness);
        - ``unknown``: the hole stopped above C (or has no intervals); the thickness (0)
          says nothing about C.
    ``cover_thickness_m`` / ``status_cover``
        sum over the cover-role column units; status ``full`` if every cover unit is full
        (also when the stack has no cover unit), ``unknown`` if any is unknown, otherwise
        ``lower_bound``.
    ``aquitard_thickness_m`` / ``status_aquitard``
        sum over the aquitard-role column units; ``full`` if the hole reached the aquifer,
        ``unknown`` if its deepest level is above the first aquitard unit (it never entered
        the clay), otherwise ``lower_bound``. A ``full`` 0 m proves a window.
    ``depth_to_aquifer_m``
        top of the shallowest interval of the first aquifer or a unit below it (m below
        ground); NaN if not reached.
    ``qa_flags``
        ``"; "``-joined plain reasons, ``""`` if none: ``"unit order breaks the stack"`` (a
        unit logged below a unit that lies lower in the stack), ``"gap in log"`` (an
        undescribed depth range, including a log that starts below ground), ``"log ends
        above total depth"`` (by more than :data:`TOTAL_DEPTH_TOLERANCE_M`), ``"no
        intervals"``, ``"total depth implausibly deep"`` (deeper than
        :data:`~aquitardmap.inputs.logs.MAX_PLAUSIBLE_DEPTH_M`).
    ``log``
        compact text of the log, e.g. ``"0.0–2.1 SAND; 2.1–14.0 UMC; 14.0–20.0 GRAV"``.

    Raises:
        ValueError: if an interval names a unit that is not in the project's stack (the
            tables did not come from :func:`read_boreholes` for this project).
    """
    rank = {u.code: i for i, u in enumerate(project.units)}
    column = project.column_units
    aquifer_rank = len(column)
    cover = [u.code for u in column if u.role == "cover"]
    aquitard = [u.code for u in column if u.role == "aquitard"]
    first_aquitard_rank = min((rank[c] for c in aquitard), default=aquifer_rank)
    unknown = set(boreholes.intervals["unit"]) - set(rank)
    if unknown:
        raise ValueError(f"intervals name units not in the project stack: "
                         f"{', '.join(sorted(map(str, unknown)))}")
    excluded = set(project.qa.exclude_boreholes)
    groups = {bid: g for bid, g in boreholes.intervals.groupby("borehole_id", sort=False)}

    rows = []
    for bid, collar in boreholes.collars.iterrows():
        g = groups.get(bid)
        ivs = ([] if g is None else
               sorted(zip(g["from_m"], g["to_m"], g["unit"], g["line"], strict=True),
                      key=lambda t: (t[0], t[1])))
        row: dict[str, object] = {
            "x": collar["x"], "y": collar["y"], "ground_elev_m": collar["ground_elev_m"],
            "total_depth_m": collar["total_depth_m"], "excluded": bid in excluded,
        }
        ranks = [rank[u] for _, _, u, _ in ivs]
        reached = any(r >= aquifer_rank for r in ranks)
        deepest_level = max(ranks, default=-1)
        aquifer_top = min((t for (t, _, u, _) in ivs if rank[u] >= aquifer_rank),
                          default=math.nan)
        row["reached_aquifer"] = reached
        row["bottom_unit"] = max(ivs, key=lambda t: t[1])[2] if ivs else ""
        statuses: dict[str, str] = {}
        thickness: dict[str, float] = {}
        for u in column:
            c = u.code
            # Overlaps are rejected on reading, so an interval lies wholly above or
            # wholly below the aquifer top.
            thickness[c] = float(sum(b - t for t, b, unit, _ in ivs
                                     if unit == c and (not reached or t < aquifer_top)))
            if reached or deepest_level > rank[c]:
                statuses[c] = FULL
            elif deepest_level == rank[c]:
                statuses[c] = LOWER_BOUND
            else:
                statuses[c] = UNKNOWN
            row[f"thickness_{c}_m"] = thickness[c]
            row[f"status_{c}"] = statuses[c]
        row["cover_thickness_m"] = float(sum(thickness[c] for c in cover))
        row["status_cover"] = _combined_status([statuses[c] for c in cover])
        row["aquitard_thickness_m"] = float(sum(thickness[c] for c in aquitard))
        if reached:
            row["status_aquitard"] = FULL
        elif deepest_level < first_aquitard_rank:
            row["status_aquitard"] = UNKNOWN
        else:
            row["status_aquitard"] = LOWER_BOUND
        row["depth_to_aquifer_m"] = aquifer_top

        flags = []
        running = -1
        for r in ranks:
            if r < running:
                flags.append(FLAG_ORDER)
                break
            running = max(running, r)
        if log_gaps([(t, b, ln) for t, b, _, ln in ivs]):
            flags.append(FLAG_GAP)
        if ivs and (max(b for _, b, _, _ in ivs)
                    < collar["total_depth_m"] - TOTAL_DEPTH_TOLERANCE_M):
            flags.append(FLAG_SHORT_LOG)
        if not ivs:
            flags.append(FLAG_NO_INTERVALS)
        if collar["total_depth_m"] > MAX_PLAUSIBLE_DEPTH_M:
            flags.append(FLAG_DEEP)
        row["qa_flags"] = "; ".join(flags)
        row["log"] = "; ".join(f"{depth_text(t)}–{depth_text(b)} {u}" for t, b, u, _ in ivs)
        rows.append(row)

    frame = pd.DataFrame(rows, index=pd.Index(list(boreholes.collars.index),
                                               name="borehole_id", dtype=object))
    if frame.empty:
        frame = pd.DataFrame(columns=_column_names(project), index=frame.index)
    frame["excluded"] = frame["excluded"].astype(bool)
    frame["reached_aquifer"] = frame["reached_aquifer"].astype(bool)
    return frame[_column_names(project)]


def _column_names(project: Project) -> list[str]:
    names = ["x", "y", "ground_elev_m", "total_depth_m", "excluded", "reached_aquifer",
             "bottom_unit"]
    for u in project.column_units:
        names += [f"thickness_{u.code}_m", f"status_{u.code}"]
    return names + ["cover_thickness_m", "status_cover", "aquitard_thickness_m",
                    "status_aquitard", "depth_to_aquifer_m", "qa_flags", "log"]



__all__ = ["FLAG_DEEP", "FLAG_GAP", "FLAG_NO_INTERVALS", "FLAG_ORDER", "FLAG_SHORT_LOG", "FULL",
           "LOWER_BOUND", "UNKNOWN", "column_table"]
