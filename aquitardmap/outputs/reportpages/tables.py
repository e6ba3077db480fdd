"""The table pages of the report: the flagged areas, and the parameters with their sources
(units and conductivity, settings, methods; the probability method as the run's summary
names it).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.formatting import (
    finite_float,
    fmt_area,
    fmt_percent,
    fmt_sig,
    fmt_threshold,
    fmt_years,
    section,
)
from aquitardmap.outputs.reportpages.frame import Flow, Pages, plain_text, wrap_text
from aquitardmap.outputs.runfolder import project_crs, read_layer
from aquitardmap.outputs.wording import (
    probability_method_notes,
    thresholds,
    zone_labels,
    zone_tiers_note,
    zones_and_thickness_note,
)
from aquitardmap.screening.zones import TIERED_KINDS, ZONE_KINDS, ZONE_TIERS

ZONE_TABLE_ROWS_PER_PAGE = 34
#: Characters a line of the zone table's kind column holds (0.13 of the text width at
#: 7.5 pt); a longer kind ("Pierced by many boreholes") wraps onto a second line.
ZONE_KIND_WRAP_CHARS = 15


def _chunks_by_lines(rows: list[list[str]], kind_chars: int) -> list[list[list[str]]]:
    """Rows of the zone table in pages of at most :data:`ZONE_TABLE_ROWS_PER_PAGE` lines
    (a row whose kind wraps takes its lines)."""
    chunks: list[list[list[str]]] = []
    used = ZONE_TABLE_ROWS_PER_PAGE
    for row in rows:
        n = wrap_text(row[1], kind_chars).count("\n") + 1
        if used + n > ZONE_TABLE_ROWS_PER_PAGE:
            chunks.append([])
            used = 0
        chunks[-1].append(row)
        used += n
    return chunks

#: Methods of every run; the probability method of the run follows them
#: (:func:`aquitardmap.outputs.wording.probability_method_notes`).
METHODS: tuple[tuple[str, str], ...] = (
    ("Thickness surfaces", "ordinary kriging (Matheron; Isaaks & Srivastava 1989, An "
     "Introduction to Applied Geostatistics, ch. 12), variogram fitted by weighted least "
     "squares (Cressie 1985)"),
    ("Holes that stop in the clay", "lower bounds honoured as inequality data (active set; "
     "Dubrule & Kostov 1986, Math. Geol. 18(1))"),
    ("K from grain size", "Hazen (1892; Freeze & Cherry 1979); Kozeny–Carman (Carrier 2003, "
     "J. Geotech. Geoenviron. Eng. 129(11)); water properties at the groundwater temperature"),
    ("Layers in series", "c = Σ b/Kv, Kv = Σb/c, leakance 1/c (Freeze & Cherry 1979); "
     "advective time t = Σ nₑ b / (Kv i)"),
    ("Vulnerability class", "Aquifer Vulnerability Index from log10 of c in years (Van "
     "Stempvoort, Ewert & Wassenaar 1993, Canadian Water Resources Journal 18(1))"),
    ("Chance of thin clay (approx.)", "Gaussian error of the kriged thickness, "
     "P = Φ((T* − t)/σ) (p_thin_approx.tif)"),
)
#: How the zone tiers are drawn from the chances (after the probability method's rows).
ZONE_TIERS_METHOD: tuple[str, str] = (
    "Zone tiers", "likely: the chance reaches p_window_threshold / p_thin_threshold "
     "(a likely window also needs a hole proving a window within window_proof_radius_m); "
     "possible, what the holes cannot rule out: it reaches p_window_possible_threshold / "
     "p_thin_possible_threshold; a cell holding a hole that proves a window or thin clay is "
     "likely whatever the chance; one zone per cell: higher tier first, then window before "
     "thin (our screening rule)")



def zone_pages(pages: Pages, run_dir: Path) -> None:
    """The table of every zone of ``zones.gpkg`` by kind and tier, largest first, over as
    many pages as it needs (a page saying so when no zone was flagged)."""
    s = pages.summary
    crs = project_crs(run_dir, s)
    zones = read_layer(run_dir / outputs.ZONES, outputs.ZONES_LAYER, crs, crs)
    labels = zone_labels(s)
    rows = []
    if zones is not None and len(zones):
        order = {k: i for i, k in enumerate(ZONE_KINDS)}
        recs = zones.drop(columns="geometry").to_dict("records")
        recs.sort(key=lambda r: (order.get(str(r.get("kind")).lower(), len(order)),
                                 -(finite_float(r.get("area_m2")) or 0.0)))
        tier_order = {t: i for i, t in enumerate(ZONE_TIERS)}
        recs.sort(key=lambda r: (order.get(str(r.get("kind")).lower(), len(order)),
                                 tier_order.get(str(r.get("tier") or ""), -1),
                                 -(finite_float(r.get("area_m2")) or 0.0)))
        for i, r in enumerate(recs, start=1):
            kind = str(r.get("kind") or "").lower()
            tier = str(r.get("tier") or "")
            n_holes = finite_float(r.get("n_boreholes"))
            n_support = finite_float(r.get("n_supporting_holes"))
            own = finite_float(r.get("probability"))
            chance = own if own is not None else finite_float(r.get("mean_p_thin"))
            most = finite_float(r.get("max_probability")) if own is not None else None
            rows.append([str(i), plain_text(labels.get(kind, kind).split(" (")[0].split(":")[0]),
                         tier if tier in ZONE_TIERS else "—",
                         fmt_area(finite_float(r.get("area_m2"))),
                         fmt_sig(finite_float(r.get("mean_thickness_m")), 2),
                         fmt_sig(finite_float(r.get("min_thickness_m")), 2),
                         fmt_sig(finite_float(r.get("mean_sd_m")), 2),
                         fmt_percent(chance), "" if most is None else fmt_percent(most),
                         fmt_years(finite_float(r.get("mean_travel_time_yr"))),
                         "" if n_holes is None else str(int(n_holes)),
                         "" if n_support is None or kind not in TIERED_KINDS
                         else str(int(n_support))])
    header = ["#", "Kind", "Tier", "Area", "Clay, mean (m)", "least (m)", "SD (m)", "Chance",
              "highest", "Travel time", "Holes", "Proving"]
    widths = [0.04, 0.13, 0.075, 0.085, 0.125, 0.075, 0.065, 0.075, 0.07, 0.11, 0.065,
              0.085]
    wrap = [0, ZONE_KIND_WRAP_CHARS] + [0] * (len(header) - 2)
    chunks = _chunks_by_lines(rows, ZONE_KIND_WRAP_CHARS) or [[]]
    for k, chunk in enumerate(chunks):
        fig = pages.new("Flagged areas" + (" (continued)" if k else ""))
        if k == 0:
            t = thresholds(s)
            intro = ("Every zone drawn on the maps, by kind and tier, largest first. " +
                     "; ".join(labels[kk] for kk in ZONE_KINDS) + ". "
                     + (zone_tiers_note(s) + " " if zone_tiers_note(s) else "") +
                     "Chance: mean over the zone of the chance it was drawn from (window "
                     "zones: that the clay is absent; thin zones: that it is thinner than "
                     f"{fmt_threshold(t['thin_thickness_m'] or float('nan'))} m; other zones: "
                     "the latter), highest: its largest value. SD: mean kriging standard "
                     "deviation of the thickness. Holes: boreholes inside. Proving: holes "
                     "proving a window or thin clay inside the zone or near it (their ids are "
                     "in zones.gpkg, supporting_holes).")
            intro_flow = Flow(fig, 0.895)
            intro_flow.para(intro, size=8, width=120)
        flow = Flow(fig, intro_flow.y if k == 0 else 0.895)
        if chunk:
            flow.table(chunk, header, widths, fontsize=7.5, wrap=wrap)
        else:
            flow.para("No zones were flagged in this run.", size=10)


def _flat(prefix: str, value: Any, out: list[tuple[str, str]]) -> None:
    if isinstance(value, dict):
        for k, v in value.items():
            _flat(f"{prefix}.{k}" if prefix else str(k), v, out)
    elif isinstance(value, list):
        out.append((prefix, ", ".join(plain_text(v) for v in value) or "—"))
    elif isinstance(value, float):
        out.append((prefix, f"{value:g}"))
    else:
        out.append((prefix, plain_text(value)))


def parameter_pages(pages: Pages) -> None:
    """The units with their conductivity, the settings, and the methods with their
    published sources (with the probability method the summary names)."""
    s = pages.summary
    fig = pages.new("Parameters and their sources")
    flow = Flow(fig, 0.895)
    flow.heading("Units of the stack and their hydraulic conductivity")
    rows = []
    for u in s.get("units") or []:
        if not isinstance(u, dict):
            continue
        n_used, n_all = u.get("n_used"), u.get("n_samples")
        samples = f"{n_used} of {n_all}" if n_used is not None and n_all is not None else ""
        rows.append([plain_text(u.get("code")), plain_text(u.get("name")),
                     plain_text(u.get("role")),
                     fmt_sig(finite_float(u.get("effective_porosity")), 2),
                     fmt_sig(finite_float(u.get("k_m_s")), 2),
                     fmt_sig(finite_float(u.get("kv_m_s")), 2),
                     plain_text(u.get("k_source") or "default"), samples])
    flow.table(rows, ["Code", "Name", "Role", "nₑ", "K (m/s)", "Kv (m/s)", "K source",
                      "Samples used"], [0.08, 0.27, 0.1, 0.07, 0.11, 0.11, 0.14, 0.12],
               fontsize=7.2, wrap=[0, 32, 0, 0, 0, 0, 16, 0])
    notes = [f"{plain_text(u.get('code'))}: {plain_text(u.get('note'))}"
             for u in s.get("units") or [] if isinstance(u, dict) and u.get("note")]
    flow.para("\n".join(notes), size=6.8, width=150, colour="#444444")
    flow.heading("Settings (project.toml, or the default where not set)")
    settings: list[tuple[str, str]] = []
    for key, source in (("thresholds", "[screening]"), ("hydraulics", "[hydraulics]"),
                        ("kriging", "[kriging]")):
        items: list[tuple[str, str]] = []
        _flat("", section(s, key), items)
        settings += [(f"{source} {k}", v) for k, v in items
                     if not any(w in k for w in ("min", "median", "max", "cells_", "meaning",
                                                 "heads", "mean_"))]
    flow.table([[k, v] for k, v in settings[:36]], ["Setting", "Value"], [0.42, 0.58],
               fontsize=7, wrap=[60, 80])

    fig = pages.new("Methods and sources")
    flow = Flow(fig, 0.895)
    rows = [[m, ref] for m, ref in METHODS]
    rows += [[plain_text(m), plain_text(ref)] for m, ref in probability_method_notes(s)]
    rows.append(list(ZONE_TIERS_METHOD))
    avi = section(s, "avi")
    if avi.get("source"):
        rows.append(["AVI classes used", plain_text(avi["source"])])
    if zones_and_thickness_note(s):
        rows.append(["Zones and the thickness map", plain_text(zones_and_thickness_note(s))])
    flow.table(rows, ["What", "Method and published source"], [0.25, 0.75], fontsize=7.5,
               wrap=[30, 88])
    warnings = [w for w in s.get("warnings") or [] if isinstance(w, str)]
    if warnings:
        flow.heading("Notes from the run")
        flow.para("\n".join(f"• {plain_text(w)}" for w in warnings[:25]), size=7, width=130)


__all__ = ["METHODS", "ZONE_TABLE_ROWS_PER_PAGE", "ZONE_TIERS_METHOD", "parameter_pages",
           "zone_pages"]
