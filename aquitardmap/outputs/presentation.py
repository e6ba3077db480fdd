"""How the outputs of a run are shown to people: layer titles, units, colours and words.

The web map (:mod:`aquitardmap.outputs.webmap`) and the printable report
(:mod:`aquitardmap.outputs.report`) take every drawing decision from here, so a grid, a zone or
a borehole looks and reads the same in both.

Continuous grids use perceptually uniform colour maps (viridis, magma, cividis; van der
Walt & Smith 2015, the matplotlib defaults designed for uniform lightness steps), oriented
so that *darker means less protection* on every protection layer. Classes (zone kinds,
borehole categories, vulnerability classes) use our own palette and plain words.

All text here is plain (not HTML-escaped); each writer escapes for its own medium.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any

from aquitardmap.geostat.indicator import METHOD as INDICATOR_METHOD
from aquitardmap.geostat.probability import METHOD as LATENT_METHOD
from aquitardmap.hydraulics.column import AVI_CLASSES
from aquitardmap.outputs import names as outputs
from aquitardmap.screening.zones import TIERED_KINDS, ZONE_TIERS

#: Optional grids that other stages may write; shown when present.
P_THIN_FILE = "p_thin.tif"
P_WINDOW_FILE = "p_window.tif"
AVI_CLASS_FILE = outputs.AVI_CLASS

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
    derived_from: str = ""  # a class grid computed from another file, when its own is absent
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


def fmt_threshold(value: float) -> str:
    """A threshold as a person wrote it: 5 -> '5', 0.5 -> '0.5'."""
    return f"{value:g}"


def finite_float(value: Any) -> float | None:
    """``value`` as a finite float, or None when it is missing, not a number or not finite
    (values read back from summary.json and GeoPackage columns)."""
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if math.isfinite(out) else None


def run_date(started_utc: str) -> str:
    """An ISO 8601 time as 'YYYY-MM-DD HH:MM UTC'; text that is not ISO 8601 is kept."""
    try:
        when = datetime.fromisoformat(started_utc.replace("Z", "+00:00"))
    except ValueError:
        return started_utc
    if when.tzinfo is not None:
        when = when.astimezone(UTC)
    return when.strftime("%Y-%m-%d %H:%M UTC")


def section(summary: dict[str, Any], key: str) -> dict[str, Any]:
    """``summary[key]`` when it is a dict, else ``{}``."""
    value = summary.get(key)
    return value if isinstance(value, dict) else {}


def thresholds(summary: dict[str, Any]) -> dict[str, float | None]:
    """Screening thresholds from the summary (None where missing)."""
    t = summary.get("thresholds") if isinstance(summary.get("thresholds"), dict) else {}
    return {k: finite_float(t.get(k)) for k in ("window_thickness_m", "thin_thickness_m",
                                         "fast_travel_time_yr", "piercing_flag_per_km2")}


def gradient_words(summary: dict[str, Any]) -> str:
    """How the vertical gradient was set, from the summary ("unit gradient" by default)."""
    hyd = summary.get("hydraulics") if isinstance(summary.get("hydraulics"), dict) else {}
    text = str(hyd.get("gradient_assumption") or "").strip()
    return text or "stated uniform vertical gradient"


def grid_styles(files: set[str] | list[str], summary: dict[str, Any],
                descriptions: dict[str, tuple[str, str]] | None = None) -> list[GridStyle]:
    """The grids of a run folder to draw, in display order, each with its style.

    Args:
        files: names of the files in the run folder.
        summary: the run's ``summary.json`` (``{}`` when missing).
        descriptions: ``{file: (description, units)}`` from the GeoTIFF metadata, used for
            grids this module does not know (they are listed last, under "Other grids").

    The better of two probability grids is shown: ``p_thin.tif`` (from the geostatistics
    stage) over ``p_thin_approx.tif``. Without ``avi_class.tif`` the vulnerability class is
    derived from ``resistance_yr.tif`` (``derived_from`` says so).
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
    if P_THIN_FILE in files:
        styles.append(GridStyle(P_THIN_FILE, PROTECTION, f"Chance the clay is {thin_words}",
                                "%", "magma_r", fixed_range=(0.0, 100.0), factor=100.0,
                                note="Darker = more likely thin.",
                                short=f"Chance of clay {thin_words}"))
    elif outputs.P_THIN in files:
        styles.append(GridStyle(outputs.P_THIN, PROTECTION,
                                f"Chance the clay is {thin_words} (approximate)", "%",
                                "magma_r", fixed_range=(0.0, 100.0), factor=100.0,
                                note="Darker = more likely thin. Approximate: assumes a "
                                "Gaussian error of the kriged thickness.",
                                short=f"Chance of clay {thin_words}"))
    if P_WINDOW_FILE in files:
        words = (f"absent (under {fmt_threshold(window)} m)" if window is not None
                 else "absent")
        styles.append(GridStyle(P_WINDOW_FILE, PROTECTION, f"Chance the clay is {words}", "%",
                                "magma_r", fixed_range=(0.0, 100.0), factor=100.0,
                                note="Darker = more likely a window.",
                                short="Chance of no clay (window)"))
    styles.append(GridStyle(outputs.TRAVEL_TIME, PROTECTION, "Travel time down to the aquifer",
                            "years", "viridis", log=True,
                            note=f"Darker = faster. Advective; {gradient_words(summary)}.",
                            short="Travel time to the aquifer"))
    if AVI_CLASS_FILE in files:
        styles.append(GridStyle(AVI_CLASS_FILE, PROTECTION, "Aquifer vulnerability class (AVI)",
                                "", classes=avi_classes(), short="Vulnerability class (AVI)",
                                note="Van Stempvoort, Ewert & Wassenaar (1993)."))
    elif outputs.RESISTANCE in files:
        styles.append(GridStyle(AVI_CLASS_FILE, PROTECTION, "Aquifer vulnerability class (AVI)",
                                "", classes=avi_classes(), derived_from=outputs.RESISTANCE,
                                short="Vulnerability class (AVI)",
                                note="Van Stempvoort, Ewert & Wassenaar (1993); from the "
                                "hydraulic resistance grid."))
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
    styles = [s for s in styles if s.file in files or s.derived_from in files]
    known = {s.file for s in styles} | {outputs.P_THIN, P_THIN_FILE}
    for f in sorted(files):
        if f.endswith(".tif") and f not in known:
            desc, units = (descriptions or {}).get(f, ("", ""))
            title = desc.strip() or f[:-4].replace("_", " ")
            styles.append(GridStyle(f, OTHER, title[:1].upper() + title[1:], units.strip(),
                                    "viridis"))
    return styles


#: Plain words for the ``counts`` of ``summary.json``, in reading order.
COUNT_WORDS = {
    "boreholes": "boreholes", "excluded": "excluded by the user",
    "reached_aquifer": "reached the aquifer (full clay thickness)",
    "aquitard_lower_bound_holes": "stopped in the clay (lower bounds)",
    "proves_window": "prove a window (no clay)", "qa_flagged": "QA-flagged",
    "samples": "grain-size / lab samples",
}


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


def zone_thresholds(summary: dict[str, Any]) -> dict[tuple[str, str], float | None]:
    """Probability threshold of each tier of window and thin zones, from the summary's
    ``zones`` section (None where missing)."""
    zones = summary.get("zones") if isinstance(summary.get("zones"), dict) else {}
    return {(kind, tier): finite_float(zones.get(
        f"p_{kind}_threshold" if tier == "likely" else f"p_{kind}_possible_threshold"))
        for kind in TIERED_KINDS for tier in ZONE_TIERS}


def zone_tier_label(summary: dict[str, Any], kind: str, tier: str) -> str:
    """Plain words for a tier of a window or thin zone, e.g. ``"likely (chance at least
    50 %)"`` or ``"possible: cannot be ruled out (chance at least 15 %)"``; "" for no
    tier."""
    if tier not in ZONE_TIERS:
        return ""
    p = zone_thresholds(summary).get((kind, tier))
    words = "likely" if tier == "likely" else "possible: cannot be ruled out"
    return words + (f" (chance at least {fmt_percent(p)})" if p is not None else "")


def zone_tiers_note(summary: dict[str, Any]) -> str:
    """What the two tiers mean and which one a cell takes ("" unless the zones were drawn
    in tiers)."""
    zones = summary.get("zones") if isinstance(summary.get("zones"), dict) else {}
    if not zones.get("tiers"):
        return ""
    p = zone_thresholds(summary)
    radius = finite_float(zones.get("window_proof_radius_m"))

    def pct(kind: str, tier: str) -> str:
        v = p[(kind, tier)]
        return "n/a" if v is None else fmt_percent(v)

    near = (f" and a hole proving a window lies within {fmt_threshold(radius)} m"
            if radius is not None else "")
    return ("Window and thin zones come in two tiers. Likely: the chance is at least "
            f"{pct('window', 'likely')} (window){near}, or at least {pct('thin', 'likely')} "
            "(thin); a cell holding a hole that proves a window or thin clay is likely "
            "whatever the chance. Possible: what the holes cannot rule out, the chance at "
            f"least {pct('window', 'possible')} (window) or {pct('thin', 'possible')} (thin); "
            "a hole there would tell. A cell lies in one zone only: the higher tier first, "
            "then window before thin.")


def zone_labels(summary: dict[str, Any]) -> dict[str, str]:
    """Plain-language name of each zone kind, with its threshold when the summary has it."""
    t = thresholds(summary)
    labels = {"window": "Window: clay absent", "thin": "Thin clay", "fast": "Fast path",
              "pierced": "Pierced by many boreholes"}
    if t["window_thickness_m"] is not None:
        labels["window"] += f" (under {fmt_threshold(t['window_thickness_m'])} m)"
    if t["thin_thickness_m"] is not None:
        labels["thin"] += f" (under {fmt_threshold(t['thin_thickness_m'])} m)"
    if t["fast_travel_time_yr"] is not None:
        labels["fast"] += (f": travel time under {fmt_threshold(t['fast_travel_time_yr'])}"
                           " years")
    if t.get("piercing_flag_per_km2") is not None:
        labels["pierced"] += (f": {fmt_threshold(t['piercing_flag_per_km2'])} or more per km²"
                              " reach the aquifer through the clay")
    return labels


def zones_and_thickness_note(summary: dict[str, Any]) -> str:
    """Why a probability zone and the thickness layer can disagree ("" when the zones were
    drawn from the kriged thickness or the summary does not say)."""
    zones = summary.get("zones")
    if not isinstance(zones, dict) or zones.get("basis") != "probability":
        return ""
    prob = summary.get("probability")
    drift = prob.get("external_drift") if isinstance(prob, dict) else None
    drift = drift if isinstance(drift, dict) else {}
    return ("The thickness layer is the ordinary-kriged mean"
            + (" (without the drift)" if drift.get("used") else "")
            + "; a zone marks where the chance that the clay is thinner than the threshold "
            "reaches its tier's threshold, so it can cover cells whose mean thickness is "
            "above the threshold, and miss cells whose mean is below it.")


# --------------------------------------------------------------------------- probability method

#: Kinds of probability method a summary can name (``[screening] probability_method``).
INDICATOR = "indicator"
LATENT_GAUSSIAN = "latent_gaussian"

#: The methods text of the latent Gaussian method (the rows the report printed before the
#: indicator method existed).
_LATENT_ROWS: tuple[tuple[str, str], ...] = (
    ("Chance of thin clay or a window", "latent Gaussian thickness with inequality data: "
     "window holes −L ≤ Z ≤ 0 (L = window_latent_floor_m), holes stopped in the clay "
     "Z ≥ depth, drawn by a Gibbs sampler "
     "(Freulon & de Fouquet 1993) and kriged (Verly 1983); p_thin.tif, p_window.tif"),
    ("Ground as external drift", "kriging with an external drift (Wackernagel 2003, "
     "Multivariate Geostatistics; Hengl et al. 2007), used for the probabilities when "
     "cross-validation favours it"),
)


def probability_method_kind(summary: dict[str, Any]) -> str:
    """Which method made P(window) and P(thin): :data:`INDICATOR`, :data:`LATENT_GAUSSIAN`,
    or "" when the summary has no probability section or names a method not known here.

    Read from ``summary["probability"]["method"]`` (the names recorded by
    :mod:`aquitardmap.geostat.indicator` and :mod:`aquitardmap.geostat.probability`)."""
    prob = summary.get("probability")
    method = prob.get("method") if isinstance(prob, dict) else None
    if method == INDICATOR_METHOD:
        return INDICATOR
    if method == LATENT_METHOD:
        return LATENT_GAUSSIAN
    return ""


def _cutoff_at(cutoffs: list[Any], threshold_m: float | None) -> dict[str, Any]:
    """The summary's cutoff entry at ``threshold_m`` ({} when absent)."""
    if threshold_m is None:
        return {}
    for c in cutoffs:
        if isinstance(c, dict) and finite_float(c.get("threshold_m")) is not None and \
                abs(float(c["threshold_m"]) - threshold_m) < 1e-6:
            return c
    return {}


def _indicator_rows(summary: dict[str, Any]) -> list[tuple[str, str]]:
    prob = summary["probability"]
    cutoffs = [c for c in prob.get("cutoffs") or [] if isinstance(c, dict)]
    ratio = finite_float(prob.get("continuity_ratio"))
    corridor = finite_float(prob.get("chain_corridor_m"))
    sd = finite_float(prob.get("location_sd_m"))
    floor = finite_float(prob.get("hard_data_floor"))
    t = thresholds(summary)
    rows = [
        ("Chance of thin clay or a window",
         "indicator kriging: for each cutoff t, the indicator 1 where the clay is thinner than "
         "t, else 0, is kriged from the holes, and the estimate is the chance that the clay "
         "is thinner than t, with no assumption on the shape of the thickness distribution "
         "(Journel 1983, Math. Geol. 15(3); Goovaerts 1997, Geostatistics for Natural "
         "Resources Evaluation, ch. 7). A hole that reached the aquifer gives 1 or 0; one "
         "that stopped in the clay gives 0 at cutoffs up to its depth and is left out above "
         "it. Estimates are kept within 0–1 and made to rise with the cutoff (order "
         "relations, Deutsch & Journel 1998, GSLIB). p_window.tif, p_thin.tif"),
        ("Continuity along proving holes",
         "between two holes that prove thin clay, with no hole proving thick clay within "
         + (f"{fmt_threshold(corridor)} m" if corridor is not None else "a corridor")
         + " of the line between them, nearby cells are kriged with an anisotropy along that "
         "line" + (f" (ratio {fmt_threshold(ratio)})" if ratio is not None else "")
         + ", so the chance follows a buried ridge or channel instead of fading in a disc "
         "around each hole: locally varying anisotropy (te Stroet & Snepvangers 2005, "
         "Math. Geol. 37(6))"),
    ]
    if floor is not None:
        near = f", or within {fmt_threshold(sd)} m of one" if sd is not None else ""
        rows.append(("Holes that prove thin clay or a window",
                     f"a cell holding such a hole (not excluded){near}, gets a chance of at "
                     f"least {fmt_percent(floor)}: the location error of the records may "
                     "spread the evidence, never erase it"))
    if cutoffs:
        n_default = sum(c.get("variogram_source") == "default" for c in cutoffs)
        families = sorted({str(section(c, "variogram").get("model") or "")
                           for c in cutoffs} - {""})
        lo = finite_float(cutoffs[0].get("threshold_m"))
        hi = finite_float(cutoffs[-1].get("threshold_m"))
        text = (f"{len(cutoffs)} cutoffs from {fmt_threshold(lo) if lo is not None else 'n/a'} "
                f"to {fmt_threshold(hi) if hi is not None else 'n/a'} m; "
                f"{' and '.join(families) or 'n/a'} models fitted to the experimental "
                f"indicator variograms (Cressie weights) at {len(cutoffs) - n_default}, the "
                f"default model (sill p(1 − p), range three hole spacings) at {n_default}, "
                "where too few holes lay on one side of the cutoff")
        for name, words in (("window", "window"), ("thin", "thin clay")):
            c = _cutoff_at(cutoffs, t[f"{name}_thickness_m"])
            v = section(c, "variogram")
            if c:
                text += (f"; {words} (under {fmt_threshold(float(c['threshold_m']))}"
                         f" m): {c.get('n_event', 'n/a')} of {c.get('n_data', 'n/a')} holes "
                         f"show it, range {fmt_sig(finite_float(v.get('range_m')), 3)} m, "
                         f"{c.get('n_continuity_segments', 'n/a')} chain segments")
        rows.append(("Indicator variograms in this run", text))
    return rows


def probability_method_notes(summary: dict[str, Any]) -> list[tuple[str, str]]:
    """How P(window) and P(thin) were made, as ``(what, method and published source)`` rows
    of plain text: the one wording of the report's methods page and the map's notes.

    The rows describe the method the summary says was used (:func:`probability_method_kind`):
    the indicator method with its settings from ``summary["probability"]``, or the latent
    Gaussian method; a method not known here is named as the summary gives it. With an
    ``external_drift.reason`` the drift decision of the run is added. [] when the summary
    has no probability section.
    """
    prob = summary.get("probability")
    if not isinstance(prob, dict):
        return []
    kind = probability_method_kind(summary)
    if kind == INDICATOR:
        rows = _indicator_rows(summary)
    elif kind == LATENT_GAUSSIAN:
        rows = list(_LATENT_ROWS)
    else:
        rows = ([("Probabilities from", str(prob["method"]))] if prob.get("method") else [])
    drift = section(prob, "external_drift")
    if drift.get("reason"):
        rows.append(("External drift in this run", str(drift["reason"])))
    return rows


# --------------------------------------------------------------------------- calibration

#: Heading of the calibration check of the probabilities (report and map alike).
CALIBRATION_HEADING = "How well the probabilities held up at the holes"
#: The events the calibration check scores, in order, with plain words.
CALIBRATION_EVENTS = (("window", "P(window)"), ("thin", "P(thin)"))
#: Shown for an empty bin of a reliability table.
EMPTY_BIN = "–"


@dataclass(frozen=True)
class ReliabilityBin:
    """One bin of a reliability table read back from the summary (None where empty)."""

    p_from: float
    p_to: float
    n: int
    mean_p: float | None
    observed: float | None

    @property
    def label(self) -> str:
        """The bin's range of chances, e.g. ``"10–30 %"``."""
        return f"{100 * self.p_from:.0f}–{100 * self.p_to:.0f} %"


@dataclass(frozen=True)
class CalibrationCheck:
    """Block cross-validation of one probability at the holes, read back from
    ``summary["probability"]["cross_validation"][event]`` (None where missing)."""

    event: str
    label: str
    threshold_m: float | None
    block_m: float | None
    n_blocks: int | None
    n_holes: int | None
    n_event: int | None
    brier: float | None
    brier_reference: float | None
    skill_score: float | None
    bins: tuple[ReliabilityBin, ...]


def _count(value: Any) -> int | None:
    v = finite_float(value)
    return None if v is None else int(v)


def calibration_checks(summary: dict[str, Any]) -> list[CalibrationCheck]:
    """The calibration checks of the run, P(window) then P(thin); [] when the summary has
    none (the latent Gaussian method, or a run from before the check)."""
    cv = section(section(summary, "probability"), "cross_validation")
    out = []
    for event, label in CALIBRATION_EVENTS:
        c = section(cv, event)
        if not c:
            continue
        bins = []
        for b in c.get("reliability") or []:
            if not isinstance(b, dict):
                continue
            lo, hi = finite_float(b.get("p_from")), finite_float(b.get("p_to"))
            if lo is None or hi is None:
                continue
            n = _count(b.get("n")) or 0
            bins.append(ReliabilityBin(lo, hi, n,
                                       finite_float(b.get("mean_p")) if n else None,
                                       finite_float(b.get("observed")) if n else None))
        out.append(CalibrationCheck(
            event, label, finite_float(c.get("threshold_m")), finite_float(c.get("block_m")),
            _count(c.get("n_blocks")), _count(c.get("n_holes")), _count(c.get("n_event")),
            finite_float(c.get("brier")), finite_float(c.get("brier_reference")),
            finite_float(c.get("brier_skill_score")), tuple(bins)))
    return out


def fmt_brier(value: float | None) -> str:
    """A Brier score (or skill score) to four decimals, as summary.json stores it."""
    return "n/a" if value is None else f"{value:.4f}"


def fmt_bin_share(value: float | None) -> str:
    """A mean chance or observed share of a reliability bin; :data:`EMPTY_BIN` when the bin
    is empty."""
    return EMPTY_BIN if value is None else fmt_percent(value)


def _event_words(check: CalibrationCheck) -> str:
    if check.threshold_m is None:
        return "the clay was " + ("absent" if check.event == "window" else "thin")
    t = f" {fmt_threshold(check.threshold_m)} m"
    if check.event == "window":
        return f"the clay was absent (under{t})"
    return f"the clay was thinner than{t}"


def calibration_reading(summary: dict[str, Any]) -> str:
    """How to read the calibration check, in plain words, with an example from the run's own
    reliability table ("" without a check)."""
    checks = calibration_checks(summary)
    if not checks:
        return ""
    block = next((c.block_m for c in checks if c.block_m is not None), None)
    size = f" of {fmt_sig(block, 3)} m" if block is not None else ""
    text = (f"The study area is cut into square blocks{size}; each block's holes are held out "
            "together and their chances predicted from the holes outside it, then compared "
            "with what the holes logged. Brier score: the mean of (chance − outcome)², 0 is "
            "perfect (Brier 1950); the constant share is the score of giving every hole the "
            "share of holes that show it; skill = 1 − Brier / constant share (above 0: better "
            "than the constant share). Reliability: a map means what it says when, in each "
            "bin, the observed share is close to the mean chance.")
    example = None
    for check in sorted(checks, key=lambda c: c.event != "thin"):
        filled = [b for b in check.bins if b.n and b.mean_p is not None
                  and b.observed is not None and b.mean_p >= 0.1]
        if filled:
            example = (check, max(filled, key=lambda b: b.n))
            break
    if example is not None:
        check, b = example
        text += (f" For example, in the {b.n} holes given about {fmt_percent(b.mean_p)} for "
                 f"{check.label}, {_event_words(check)} in {fmt_percent(b.observed)}.")
    return text + (" Block cross-validation is a pessimistic check: each hole is predicted "
                   "without its neighbours, whereas the maps use every hole.")


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


# --------------------------------------------------------------------------- numbers


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


__all__ = [
    "AVI_CLASS_FILE", "CALIBRATION_EVENTS", "CALIBRATION_HEADING", "COUNT_WORDS",
    "EMPTY_BIN", "GROUPS",
    "HOLE_STYLES", "INDICATOR", "LATENT_GAUSSIAN", "P_THIN_FILE", "P_WINDOW_FILE",
    "POSSIBLE_DASH", "ZONE_COLOURS", "CalibrationCheck", "ClassStyle", "GridStyle",
    "HoleStyle", "ReliabilityBin", "ZoneStyle", "avi_classes", "calibration_checks",
    "calibration_reading", "fmt_area", "fmt_bin_share", "fmt_brier",
    "fmt_m", "fmt_percent", "fmt_sig", "fmt_threshold", "fmt_years", "gradient_words",
    "grid_styles", "hole_category", "hole_category_of", "probability_method_kind",
    "probability_method_notes", "section", "thresholds", "truthy", "unit_colour",
    "unit_colours", "zone_labels", "zone_style", "zone_thresholds", "zone_tier_label",
    "zone_tiers_note",
]
