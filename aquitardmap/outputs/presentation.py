"""How the outputs of a run are drawn: grid layers (titles, units, colour ramps, classes and
legend groups), zones, boreholes and the units of strip logs.

The web map (:mod:`aquitardmap.outputs.webmap`) and the printable report
(:mod:`aquitardmap.outputs.report`) take every drawing decision from here, so a grid, a zone or
a borehole looks the same in both. Their words come from :mod:`aquitardmap.outputs.wording`
and :mod:`aquitardmap.outputs.calibration`, their numbers from
:mod:`aquitardmap.outputs.formatting`.

Continuous grids use perceptually uniform colour maps (viridis, magma, cividis; van der
Walt & Smith 2015, the matplotlib defaults designed for uniform lightness steps), oriented
so that *darker means less protection* on every protection layer. Classes (zone kinds,
borehole categories, vulnerability classes) use our own palette and plain words.

All text here is plain (not HTML-escaped); each writer escapes for its own medium.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from aquitardmap.hydraulics.column import AVI_CLASSES
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.formatting import fmt_threshold, truthy
from aquitardmap.outputs.wording import gradient_words, thresholds

PROTECTION = "Protection"
UNCERTAINTY = "Uncertainty"
UNITS = "Clay units and cover"
HYDRAULICS = "Hydraulics"
HAZARDS = "Integrity hazards"
OTHER = "Other grids"
GROUPS = (PROTECTION, UNCERTAINTY, UNITS, HYDRAULICS, HAZARDS, OTHER)


@dataclass(frozen=True)
class ClassStyle:
    """One class of a class grid: its integer code, colour and words."""

    code: int
    colour: str
    label: str


@dataclass(frozen=True)
class GridStyle:
    """How one grid file is drawn and named.

    ``factor`` scales stored values for display (100 turns a probability into per cent).
    ``classes`` is non-empty for class grids (then ``cmap`` is unused).
    """

    file: str
    group: str
    title: str
    units: str
    cmap: str = "viridis"
    log: bool = False
    fixed_range: tuple[float, float] | None = None
    factor: float = 1.0
    note: str = ""
    classes: tuple[ClassStyle, ...] = field(default_factory=tuple)
    short: str = ""  # name in a layer list, when shorter than the title

    @property
    def label(self) -> str:
        """Title with units (and "log scale"), as a layer list shows it."""
        extra = [] if self.classes else [u for u in (self.units,) if u]
        if self.log and not self.classes:
            extra.append("log scale")
        return f"{self.title} ({', '.join(extra)})" if extra else self.title


# Our own palette for the Aquifer Vulnerability Index classes, darkest = most vulnerable,
# in step with "darker means less protection" on the continuous layers.
_AVI_COLOURS = {1: "#4a1248", 2: "#9c2f5e", 3: "#d9704a", 4: "#efc15a", 5: "#f6f0cf"}


def avi_classes() -> tuple[ClassStyle, ...]:
    """The AVI classes (Van Stempvoort, Ewert & Wassenaar 1993) with colours and words.

    Labels say the vulnerability and the resistance range, e.g. ``"High vulnerability
    (resistance 10–100 years)"``; bounds come from
    :data:`aquitardmap.hydraulics.column.AVI_CLASSES`.
    """
    out = []
    for code, lower, upper, words in AVI_CLASSES:
        if math.isinf(lower):
            rng = f"under {10 ** upper:g} years"
        elif math.isinf(upper):
            rng = f"{10 ** lower:g} years or more"
        else:
            rng = f"{10 ** lower:g}–{10 ** upper:g} years"
        out.append(ClassStyle(code, _AVI_COLOURS.get(code, "#888888"),
                              f"{words.capitalize()} vulnerability (resistance {rng})"))
    return tuple(out)


def grid_styles(files: set[str] | list[str], summary: dict[str, Any],
                descriptions: dict[str, tuple[str, str]] | None = None) -> list[GridStyle]:
    """The grids of a run folder to draw, in display order, each with its style.

    Args:
        files: names of the files in the run folder.
        summary: the run's ``summary.json`` (``{}`` when missing).
        descriptions: ``{file: (description, units)}`` from the GeoTIFF metadata, used for
            grids this module does not know (they are listed last, under "Other grids").

    The better of two probability grids is shown: ``p_thin.tif`` (from the geostatistics
    stage) over ``p_thin_approx.tif``. The vulnerability class is the ``avi_class.tif`` the
    hydraulics stage wrote (a folder without it has no class layer).
    """
    files = set(files)
    t = thresholds(summary)
    thin = t["thin_thickness_m"]
    window = t["window_thickness_m"]
    thin_words = f"thinner than {fmt_threshold(thin)} m" if thin is not None else "thin"
    styles: list[GridStyle] = [
        GridStyle(outputs.AQUITARD_THICKNESS, PROTECTION, "Total clay (aquitard) thickness",
                  "m", "viridis", note="Darker = thinner clay, less protection.",
                  short="Clay thickness"),
    ]
    if outputs.AQUITARD_THICKNESS_EFFECTIVE in files:
        styles.append(GridStyle(outputs.AQUITARD_THICKNESS_EFFECTIVE, PROTECTION,
                                "Effective clay thickness (after hazards and weathered crust)",
                                "m", "viridis", short="Effective clay thickness",
                                note="The clay the hydraulics count as protective. Darker = "
                                "less protection."))
    if outputs.P_THIN_PROB in files:
        styles.append(GridStyle(outputs.P_THIN_PROB, PROTECTION,
                                f"Chance the clay is {thin_words}", "%", "magma_r",
                                fixed_range=(0.0, 100.0), factor=100.0,
                                note="Darker = more likely thin.",
                                short=f"Chance of clay {thin_words}"))
    elif outputs.P_THIN in files:
        styles.append(GridStyle(outputs.P_THIN, PROTECTION,
                                f"Chance the clay is {thin_words} (approximate)", "%",
                                "magma_r", fixed_range=(0.0, 100.0), factor=100.0,
                                note="Darker = more likely thin. Approximate: assumes a "
                                "Gaussian error of the kriged thickness.",
                                short=f"Chance of clay {thin_words}"))
    if outputs.P_WINDOW_PROB in files:
        words = (f"absent (under {fmt_threshold(window)} m)" if window is not None
                 else "absent")
        styles.append(GridStyle(outputs.P_WINDOW_PROB, PROTECTION,
                                f"Chance the clay is {words}", "%", "magma_r",
                                fixed_range=(0.0, 100.0), factor=100.0,
                                note="Darker = more likely a window.",
                                short="Chance of no clay (window)"))
    styles.append(GridStyle(outputs.TRAVEL_TIME, PROTECTION, "Travel time down to the aquifer",
                            "years", "viridis", log=True,
                            note=f"Darker = faster. Advective; {gradient_words(summary)}.",
                            short="Travel time to the aquifer"))
    if outputs.AVI_CLASS in files:
        styles.append(GridStyle(outputs.AVI_CLASS, PROTECTION,
                                "Aquifer vulnerability class (AVI)", "", classes=avi_classes(),
                                short="Vulnerability class (AVI)",
                                note="Van Stempvoort, Ewert & Wassenaar (1993)."))
    styles.append(GridStyle(outputs.AQUITARD_THICKNESS_SD, UNCERTAINTY,
                            "Uncertainty of the clay thickness (one standard deviation)", "m",
                            "cividis_r", note="Darker = less certain; largest far from "
                            "boreholes.", short="Thickness uncertainty (± 1 SD)"))
    listed: set[str] = set()
    for unit in summary.get("units") or []:
        if not isinstance(unit, dict):
            continue
        code = str(unit.get("code") or "").strip()
        name = str(unit.get("name") or code).strip()
        if not code or code in listed or "/" in code or "\\" in code:
            continue
        f = outputs.unit_thickness(code)
        if f in files:
            listed.add(code)
            styles.append(GridStyle(f, UNITS, f"{name} [{code}] thickness", "m", "viridis",
                                    short=f"{name} [{code}]"))
    prefix, suffix = outputs.unit_thickness("*").split("*")
    for f in sorted(files):
        if f.startswith(prefix) and f.endswith(suffix):
            code = f[len(prefix):-len(suffix)]
            if code and code not in listed:
                listed.add(code)
                styles.append(GridStyle(f, UNITS, f"Unit {code} thickness", "m", "viridis",
                                        short=f"Unit {code}"))
    styles += [
        GridStyle(outputs.COVER_THICKNESS, UNITS, "Cover above the clay, thickness", "m",
                  "cividis", short="Cover above the clay"),
        GridStyle(outputs.KV, HYDRAULICS, "Vertical hydraulic conductivity of the column, Kv",
                  "m/s", "magma_r", log=True, note="Darker = more permeable.",
                  short="Vertical conductivity Kv"),
        GridStyle(outputs.LEAKANCE, HYDRAULICS, "Leakance of the column", "1/s", "magma_r",
                  log=True, note="Darker = leakier.", short="Leakance"),
        GridStyle(outputs.RESISTANCE, HYDRAULICS, "Hydraulic resistance of the column",
                  "years", "viridis", log=True, note="Darker = less resistance.",
                  short="Hydraulic resistance"),
        GridStyle(outputs.DIFFUSION_TIME, HYDRAULICS,
                  "Diffusion time scale through the clay, B²/De", "years", "viridis", log=True,
                  note="Darker = faster diffusion.", short="Diffusion time scale"),
        GridStyle(outputs.PECLET, HYDRAULICS, "Péclet number (diffusion time / advective time)",
                  "", "cividis", log=True, short="Péclet number",
                  note="Above 1 advection governs, below 1 diffusion governs."),
        GridStyle(outputs.VERTICAL_GRADIENT, HYDRAULICS,
                  "Vertical hydraulic gradient (downward positive)", "m/m", "viridis",
                  short="Vertical gradient"),
        GridStyle(outputs.PIERCING_DENSITY, HAZARDS,
                  "Boreholes piercing the clay into the aquifer, density", "holes/km²",
                  "magma_r", short="Piercing boreholes (density)",
                  note="Darker = more holes through the clay (possible vertical conduits)."),
        GridStyle(outputs.HAZARD_REMOVED, HAZARDS,
                  "Clay removed by excavations, pits and slides", "m", "magma_r",
                  short="Clay removed by hazards", note="Darker = more clay removed."),
    ]
    styles = [s for s in styles if s.file in files]
    known = {s.file for s in styles} | {outputs.P_THIN, outputs.P_THIN_PROB}
    for f in sorted(files):
        if f.endswith(".tif") and f not in known:
            desc, units = (descriptions or {}).get(f, ("", ""))
            title = desc.strip() or f[:-4].replace("_", " ")
            styles.append(GridStyle(f, OTHER, title[:1].upper() + title[1:], units.strip(),
                                    "viridis"))
    return styles


# --------------------------------------------------------------------------- zones

ZONE_COLOURS = {"window": "#d7191c", "thin": "#f59b1a", "fast": "#1f9fd9",
                "pierced": "#7b3fa0"}
#: Zone kinds drawn as an open dashed outline on top of the others (they may coincide with
#: a window or thin zone), with their dash pattern (SVG ``stroke-dasharray``).
ZONE_DASHES = {"fast": "7 5", "pierced": "2 4"}
ZONE_OTHER_COLOUR = "#6d6d6d"
#: Outline of the *possible* tier of window and thin zones: the kind's colour, a lighter
#: fill and this dash-dot pattern (SVG ``stroke-dasharray``), unlike the solid likely tier
#: and the dashes of fast and pierced zones.
POSSIBLE_DASH = "10 4 2 4"


@dataclass(frozen=True)
class ZoneStyle:
    """How a zone of one kind and tier is drawn: outline colour, fill opacity (0..1),
    outline weight (px) and dash pattern (SVG ``stroke-dasharray``; "" = solid)."""

    colour: str
    fill_opacity: float
    weight: float
    dash: str


def zone_style(kind: str, tier: str = "") -> ZoneStyle:
    """Style of a zone: likely (and untiered) window and thin zones filled with a solid
    outline, possible ones lighter with a dash-dot outline of the same colour; fast and
    pierced zones open dashed outlines on top."""
    colour = ZONE_COLOURS.get(kind, ZONE_OTHER_COLOUR)
    if kind in ZONE_DASHES:
        return ZoneStyle(colour, 0.08, 3.0, ZONE_DASHES[kind])
    if tier == "possible":
        return ZoneStyle(colour, 0.07, 2.0, POSSIBLE_DASH)
    return ZoneStyle(colour, 0.2, 2.5, "")


# --------------------------------------------------------------------------- boreholes


@dataclass(frozen=True)
class HoleStyle:
    fill: str
    edge: str
    label: str


#: What a borehole proves, in legend order.
HOLE_STYLES: dict[str, HoleStyle] = {
    "window": HoleStyle("#d7191c", "#222222", "Reached the aquifer through no clay (proves a "
                        "window)"),
    "thin": HoleStyle("#f59b1a", "#222222", "Reached the aquifer through thin clay"),
    "full": HoleStyle("#2c7bb6", "#222222", "Reached the aquifer: full clay thickness"),
    "lower_bound": HoleStyle("#ffffff", "#222222", "Stopped in the clay: thickness is a lower "
                             "bound"),
    "unknown": HoleStyle("#a0a0a0", "#222222", "Stopped above the clay: says nothing about it"),
    "suspicious": HoleStyle("#000000", "#ffffff", "Suspicious (QA-flagged) or excluded"),
}



def hole_category(*, reached_aquifer: bool, status: str, proves_window: bool,
                  proves_thin: bool, suspicious: bool) -> str:
    """Key of :data:`HOLE_STYLES` for one borehole.

    Suspicious (QA-flagged or excluded) holes are their own category: what they seem to
    prove is in doubt. ``status`` is the aquitard status (``full``, ``lower_bound``,
    ``unknown``).
    """
    if suspicious:
        return "suspicious"
    if proves_window:
        return "window"
    if status == "full" or (reached_aquifer and status not in {"lower_bound", "unknown"}):
        return "thin" if proves_thin else "full"
    if status == "lower_bound":
        return "lower_bound"
    return "unknown"


def hole_category_of(row: dict[str, Any]) -> str:
    """:func:`hole_category` of one row of ``boreholes.gpkg`` (a dict of its columns).

    Suspicious: any QA flag, excluded, or a true ``suspicious`` column."""
    status = str(row.get("status_aquitard") or "").strip().lower()
    flags = row.get("qa_flags")
    flagged = isinstance(flags, str) and bool(flags.strip())
    return hole_category(
        reached_aquifer=truthy(row.get("reached_aquifer")), status=status,
        proves_window=truthy(row.get("proves_window")),
        proves_thin=truthy(row.get("proves_thin")),
        suspicious=flagged or truthy(row.get("excluded")) or truthy(row.get("suspicious")))


# --------------------------------------------------------------------------- units in logs

_ROLE_PALETTES = {
    "cover": ("#e9d48f", "#d8bd70", "#f1e3b4"),
    "aquitard": ("#8d6e52", "#b09275", "#6c5643", "#c8b197", "#9a8060"),
    "aquifer": ("#7db5dc", "#5b97c4", "#a6cde8"),
}
_OTHER_UNIT_COLOUR = "#bdbdbd"


def unit_colours(units: list[dict[str, Any]]) -> dict[str, str]:
    """Colour of each unit code for strip logs: sandy for cover, browns for clays, blues
    for aquifers, grey otherwise; units of one role take its colours in stack order."""
    out: dict[str, str] = {}
    seen: dict[str, int] = {}
    for unit in units:
        if not isinstance(unit, dict):
            continue
        code = str(unit.get("code") or "")
        role = str(unit.get("role") or "")
        palette = _ROLE_PALETTES.get(role)
        if not code or code in out:
            continue
        if palette is None:
            out[code] = _OTHER_UNIT_COLOUR
            continue
        i = seen.get(role, 0)
        seen[role] = i + 1
        out[code] = palette[i % len(palette)]
    return out


def unit_colour(colours: dict[str, str], code: str) -> str:
    return colours.get(code, _OTHER_UNIT_COLOUR)



__all__ = [
    "GROUPS", "HOLE_STYLES", "POSSIBLE_DASH", "ZONE_COLOURS", "ClassStyle", "GridStyle",
    "HoleStyle", "ZoneStyle", "avi_classes", "grid_styles", "hole_category",
    "hole_category_of", "unit_colour", "unit_colours", "zone_style",
]
