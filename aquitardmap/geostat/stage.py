"""Stage 2: the kriged unit surfaces of a project (total aquitard and every unit of the
column), with censored holes honoured (:mod:`aquitardmap.geostat.surfaces`)."""

from __future__ import annotations

import warnings

from aquitardmap.errors import InputError, Problem
from aquitardmap.geostat.context import DEFAULT_CONTEXT, KrigingContext
from aquitardmap.geostat.surfaces import Surface, krige_column
from aquitardmap.inputs.load import Inputs


def build_surfaces(inputs: Inputs, context: KrigingContext = DEFAULT_CONTEXT
                   ) -> dict[str, Surface]:
    """Stage 2: krige the total aquitard thickness and each unit above the aquifer
    (``context``: where the kriging runs, and the run's tile cache and kept variograms).

    Fallbacks taken for a surface (too few holes, all holes equal, merged duplicates) are
    added to ``inputs.warnings``.

    Raises:
        InputError: a unit that no borehole passes through completely.
    """
    p = inputs.project
    used = inputs.columns[~inputs.columns["excluded"]]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        try:
            surfaces = krige_column(used, [u.code for u in p.column_units],
                                    [u.code for u in p.aquitard_units], inputs.grid, p.kriging,
                                    context=context)
        except ValueError as exc:
            raise InputError([Problem(p.files["intervals"].name, 0, 0,
                                      f"{exc}: holes that stop in it only give lower bounds, "
                                      "so it cannot be mapped; add holes that pass through "
                                      "it or merge it with a neighbouring unit of the stack"
                                      )]) from exc
    for s in surfaces.values():
        inputs.warnings.extend(Problem(p.files["intervals"].name, 0, 0, n) for n in s.notes)
    return surfaces
