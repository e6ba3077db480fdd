"""The run summary (``summary.json``): what went in, what was assumed, what came out.

Everything a reviewer needs to reproduce or question a run: input file hashes, the package
version, every parameter, the fitted variograms and their cross-validation, borehole
counts, flagged areas by kind and the caution.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np


def _clean(value: Any) -> Any:
    """JSON-safe copy: numpy scalars to Python, non-finite floats to None."""
    if isinstance(value, dict):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, Path):
        return str(value)
    return value


def write_summary(path: str | Path, summary: dict[str, Any]) -> Path:
    """Write ``summary`` as indented UTF-8 JSON (non-finite numbers become null)."""
    path = Path(path)
    path.write_text(json.dumps(_clean(summary), indent=2, ensure_ascii=False) + "\n",
                    encoding="utf-8")
    return path
