"""Values read back from a run folder, and numbers written for people to read.

``summary.json`` and the GeoPackage columns are read back loosely (any value may be
missing or of the wrong type); these helpers turn them into finite numbers, dicts and
booleans, and write numbers with their units as the map and the report print them. All text
is plain (not HTML-escaped); each writer escapes for its own medium.
"""

from __future__ import annotations

import math
from datetime import UTC, datetime
from typing import Any


def finite_float(value: Any) -> float | None:
    """``value`` as a finite float, or None when it is missing, not a number or not finite
    (values read back from summary.json and GeoPackage columns)."""
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if math.isfinite(out) else None


def section(summary: dict[str, Any], key: str) -> dict[str, Any]:
    """``summary[key]`` when it is a dict, else ``{}``."""
    value = summary.get(key)
    return value if isinstance(value, dict) else {}


def truthy(value: Any) -> bool:
    """Booleans as GeoPackages deliver them: bool, 0/1, 'true'/'yes'; missing is False."""
    if value is None:
        return False
    if isinstance(value, str):
        return value.strip().lower() in {"1", "true", "yes", "y", "t"}
    try:
        if math.isnan(value):
            return False
    except TypeError:
        pass
    return bool(value)


def run_date(started_utc: str) -> str:
    """An ISO 8601 time as 'YYYY-MM-DD HH:MM UTC'; text that is not ISO 8601 is kept."""
    try:
        when = datetime.fromisoformat(started_utc.replace("Z", "+00:00"))
    except ValueError:
        return started_utc
    if when.tzinfo is not None:
        when = when.astimezone(UTC)
    return when.strftime("%Y-%m-%d %H:%M UTC")


# --------------------------------------------------------------------------- numbers


def fmt_threshold(value: float) -> str:
    """A threshold as a person wrote it: 5 -> '5', 0.5 -> '0.5'."""
    return f"{value:g}"


def fmt_sig(value: float | None, digits: int = 3) -> str:
    """A number with ``digits`` significant figures, no exponent for everyday magnitudes."""
    if value is None:
        return "n/a"
    if value == 0:
        return "0"
    if 1e-3 <= abs(value) < 1e6:
        decimals = max(0, digits - 1 - int(math.floor(math.log10(abs(value)))))
        return f"{value:.{decimals}f}"
    return f"{value:.{digits - 1}e}"


def fmt_m(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.1f} m"


def fmt_area(area_m2: float | None) -> str:
    """An area in hectares below 1 km², else in km² (1 ha = 10⁴ m², 1 km² = 10⁶ m²)."""
    if area_m2 is None:
        return "n/a"
    if area_m2 < 1e6:
        return f"{area_m2 / 1e4:.1f} ha"
    return f"{area_m2 / 1e6:.2f} km²"


def fmt_percent(p: float | None) -> str:
    """A probability 0..1 as a whole per cent; below 1 % and above 99 % say so."""
    if p is None:
        return "n/a"
    pct = 100.0 * p
    if 0 < pct < 1:
        return "under 1 %"
    if 99 < pct < 100:
        return "over 99 %"
    return f"{pct:.0f} %"


def fmt_years(value: float | None) -> str:
    """A duration in years; under a year in days (a year of 365.25 days)."""
    if value is None:
        return "n/a"
    days = value * 365.25
    if days < 1:
        return "under 1 day"
    if value < 1:
        return f"{days:.0f} days"
    return f"{fmt_sig(value, 2)} years"


__all__ = ["finite_float", "fmt_area", "fmt_m", "fmt_percent", "fmt_sig", "fmt_threshold",
           "fmt_years", "run_date", "section", "truthy"]
