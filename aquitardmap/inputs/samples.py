"""Checks of the samples table that warn without refusing: lab K values that look like cm/s.

The table itself is read and validated in :mod:`aquitardmap.inputs.logs`; the conductivity
of each unit is worked out in :mod:`aquitardmap.hydraulics.conductivity`.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from aquitardmap.config.settings import Unit
from aquitardmap.errors import Problem
from aquitardmap.units import M_S_PER_CM_S

#: A lab K (m/s) at or above this in a unit whose role is ``aquitard`` gets a warning: it is
#: above the range of clays and silty clays (about 1e-12 to 1e-9 m/s for unweathered
#: marine clay, Freeze & Cherry 1979 Table 2.2, *from memory*) by a factor of 100, the
#: factor between cm/s and m/s.
AQUITARD_K_HINT_M_S = 1e-7


def lab_k_magnitude_warnings(samples: pd.DataFrame, units: Sequence[Unit],
                             file_name: str, column: int = 0) -> list[Problem]:
    """Warnings for lab K values that look like cm/s written in the m/s column.

    A lab K at or above :data:`AQUITARD_K_HINT_M_S` in a unit whose role is ``aquitard`` is
    above the range of clays by the cm/s-to-m/s factor of 100 or more. The value is used as
    given (nothing is clipped or rescaled); the warning names file, line and column and
    says what to check.

    Args:
        samples: the samples table (with ``unit``, ``k_lab_m_s`` and ``line`` columns).
        units: the stack.
        file_name: name of the samples file, for the messages.
        column: column number of ``k_lab_m_s`` in that file (0 when unknown).

    Returns:
        One :class:`~aquitardmap.errors.Problem` per suspicious sample.
    """
    if not len(samples) or "k_lab_m_s" not in samples:
        return []
    role = {u.code: u.role for u in units}
    out = []
    for row in samples.itertuples(index=False):
        k = float(row.k_lab_m_s)
        code = getattr(row, "unit", None)
        if not (np.isfinite(k) and role.get(code) == "aquitard" and k >= AQUITARD_K_HINT_M_S):
            continue
        line = int(getattr(row, "line", 0) or 0)
        out.append(Problem(file_name, line, column,
                           f"k_lab_m_s = {k:g} m/s in aquitard unit {code} is above "
                           f"{AQUITARD_K_HINT_M_S:g} m/s, more than clays reach; if the "
                           f"laboratory reported cm/s, the value in m/s is {k * M_S_PER_CM_S:g}"
                           " (1 cm/s = 0.01 m/s). Used as given."))
    return out


__all__ = ["AQUITARD_K_HINT_M_S", "lab_k_magnitude_warnings"]
