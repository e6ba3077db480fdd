"""The plain words of a run: its thresholds, counts, zone kinds and tiers, and how the
probabilities were made, read from its summary.

The web map (:mod:`aquitardmap.outputs.webmap`) and the printable report
(:mod:`aquitardmap.outputs.report`) take these words from here, so both say the same. All text
here is plain (not HTML-escaped); each writer escapes for its own medium.
"""

from __future__ import annotations

from typing import Any

from aquitardmap.geostat.indicator import METHOD as INDICATOR_METHOD
from aquitardmap.geostat.probability import METHOD as LATENT_METHOD
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.formatting import (
    finite_float,
    fmt_percent,
    fmt_sig,
    fmt_threshold,
    section,
)
from aquitardmap.screening.zones import TIERED_KINDS, ZONE_TIERS


def caution_text(summary: dict[str, Any]) -> str:
    """The caution of the run: the summary's own, always holding the screening caution
    (:data:`aquitardmap.outputs.names.CAUTION`)."""
    text = str(summary.get("caution") or "").strip() or outputs.CAUTION
    if outputs.CAUTION not in text:
        text = f"{text} {outputs.CAUTION}"
    return text


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


#: Plain words for the ``counts`` of ``summary.json``, in reading order.
COUNT_WORDS = {
    "boreholes": "boreholes", "excluded": "excluded by the user",
    "reached_aquifer": "reached the aquifer (full clay thickness)",
    "aquitard_lower_bound_holes": "stopped in the clay (lower bounds)",
    "proves_window": "prove a window (no clay)", "qa_flagged": "QA-flagged",
    "samples": "grain-size / lab samples",
}


# --------------------------------------------------------------------------- zones


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


__all__ = ["COUNT_WORDS", "INDICATOR", "LATENT_GAUSSIAN", "caution_text", "gradient_words",
           "probability_method_kind", "probability_method_notes", "thresholds",
           "zone_labels", "zone_thresholds", "zone_tier_label", "zone_tiers_note",
           "zones_and_thickness_note"]
