"""The first page of the report: the job, the data used (input files with SHA-256, counts),
the thresholds and flagged areas, and the caution in full.
"""

from __future__ import annotations

from aquitardmap._version import __version__
from aquitardmap.outputs.formatting import finite_float, fmt_area, fmt_sig, fmt_threshold, section
from aquitardmap.outputs.reportpages.frame import Flow, Pages, plain_text, wrap_text
from aquitardmap.outputs.wording import (
    COUNT_WORDS,
    thresholds,
    zone_labels,
    zone_tier_label,
    zone_tiers_note,
)
from aquitardmap.screening.zones import ZONE_KINDS, ZONE_TIERS

#: Characters a line of the zone-kind column of page 1 holds (0.64 of the text width at
#: 8.5 pt).
KIND_WRAP_CHARS = 64


def title_page(pages: Pages) -> None:
    """The first page: the job, the data used, thresholds and results, the caution."""
    s = pages.summary
    fig = pages.new("Aquitard screening report")
    flow = Flow(fig, 0.895)
    fig.text(0.06, flow.y, pages.name, fontsize=12, va="top")
    flow.y -= 0.03
    project = section(s, "project")
    grid = section(s, "grid")
    run = section(s, "run")
    counts = section(s, "counts")
    t = thresholds(s)
    flow.para("The job: show where the clay aquitard still protects the confined aquifer "
              "beneath and where it does not — windows where the clay is absent, thin clay, "
              "fast vertical paths — and how sure the estimate is, from the borehole logs of "
              "the study area.", size=9, width=105)
    facts = []
    if project.get("crs"):
        facts.append(f"Coordinate system: {plain_text(project.get('crs'))}")
    if grid:
        facts.append(f"Grid: {fmt_sig(finite_float(grid.get('cell_size_m')), 3)} m cells, "
                     f"{grid.get('cells_in_study_area', 'n/a')} cells in a study area of "
                     f"{fmt_sig(finite_float(grid.get('study_area_km2')), 3)} km²")
    version = plain_text(run.get("package_version") or __version__)
    facts.append(f"Run: {pages.when or 'n/a'}, aquitardmap {version}")
    flow.para("\n".join(facts), size=9, width=105)

    flow.heading("Data used")
    inputs = section(s, "inputs")
    rows = [[plain_text(name), str(v.get("sha256", "") if isinstance(v, dict) else v)]
            for name, v in inputs.items()]
    flow.table(rows, ["Input file", "SHA-256 (fingerprint of the file as read)"],
               [0.22, 0.78], fontsize=7)
    text = "; ".join(f"{counts[k]} {w}" for k, w in COUNT_WORDS.items() if k in counts)
    flow.para(text + "." if text else "", width=110)

    flow.heading("Thresholds and results")
    labels = zone_labels(s)
    zones = section(s, "zones")
    areas = zones.get("area_m2_by_kind") if isinstance(zones.get("area_m2_by_kind"), dict) else {}
    n_by = zones.get("count_by_kind") if isinstance(zones.get("count_by_kind"), dict) else {}
    area_t = section(zones, "area_m2_by_kind_and_tier")
    n_t = section(zones, "count_by_kind_and_tier")
    rows = []
    for k in ZONE_KINDS:
        rows.append([labels[k] + (", all tiers" if k in area_t else ""),
                     str(n_by.get(k, "n/a")), fmt_area(finite_float(areas.get(k)))])
        if isinstance(area_t.get(k), dict):
            counts_t = n_t.get(k) if isinstance(n_t.get(k), dict) else {}
            rows += [[f"    {zone_tier_label(s, k, tier)}", str(counts_t.get(tier, "n/a")),
                      fmt_area(finite_float(area_t[k].get(tier)))] for tier in ZONE_TIERS]
    # long kind words (the pierced threshold) wrap inside their column
    flow.table(rows, ["Flagged zone kind (threshold) and tier", "Zones", "Area"],
               [0.64, 0.12, 0.24], fontsize=8.5, wrap=[KIND_WRAP_CHARS, 0, 0])
    if zone_tiers_note(s):
        flow.para(zone_tiers_note(s), width=110)
    thick = section(s, "aquitard_thickness_m")
    if thick:
        thin = t["thin_thickness_m"]
        flow.para(f"Kriged total clay thickness: {fmt_sig(finite_float(thick.get('min')))} to "
                  f"{fmt_sig(finite_float(thick.get('max')))} m, mean "
                  f"{fmt_sig(finite_float(thick.get('mean')))} m."
                  + (f" Thin means under {fmt_threshold(thin)} m of clay." if thin else "")
                  + " The thresholds are screening choices set in project.toml, not "
                  "regulatory values.", width=110)
    flow.space()
    box_h = 0.13
    box = fig.add_axes((0.06, flow.y - box_h, 0.88, box_h))
    box.set_xticks([])
    box.set_yticks([])
    box.set_facecolor("#fff6d8")
    for spine in box.spines.values():
        spine.set_color("#e0a800")
    box.text(0.02, 0.9, "Caution", fontsize=11, weight="bold", va="top",
             transform=box.transAxes)
    box.text(0.02, 0.68, wrap_text(pages.caution, 112), fontsize=8.5, va="top",
             transform=box.transAxes, linespacing=1.35)


__all__ = ["title_page"]
