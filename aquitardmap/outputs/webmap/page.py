"""Page furniture of the map: title bar, caution bar, layer panel, legend box, and the
script that wires them to the layers (with the click read-out of coordinates and values).
"""

from __future__ import annotations

import base64
import math
import re
from importlib.resources import files
from typing import Any

import numpy as np
from affine import Affine
from branca.element import MacroElement
from pyproj import CRS, Transformer

from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.calibration import (
    CALIBRATION_HEADING,
    calibration_checks,
    calibration_reading,
    fmt_brier,
    reliability_table,
)
from aquitardmap.outputs.formatting import (
    finite_float,
    fmt_area,
    fmt_sig,
    fmt_threshold,
    run_date,
    section,
)
from aquitardmap.outputs.presentation import GROUPS, PROTECTION, UNCERTAINTY, GridStyle
from aquitardmap.outputs.runfolder import GridData
from aquitardmap.outputs.webmap.markup import RawHtml, esc, js_json
from aquitardmap.outputs.webmap.overlays import LONLAT
from aquitardmap.outputs.wording import (
    COUNT_WORDS,
    caution_text,
    probability_method_notes,
    thresholds,
    zone_tiers_note,
    zones_and_thickness_note,
)

#: Groups listed openly in the panel; the others fold under "More grids".
MAIN_GROUPS = (PROTECTION, UNCERTAINTY)


def static_text(name: str) -> str:
    """A file shipped beside this module (``page.css``, ``page.js``)."""
    return files("aquitardmap.outputs.webmap").joinpath(name).read_text(encoding="utf-8")


def crs_label(crs: CRS | None) -> str:
    if crs is None:
        return ""
    epsg = crs.to_epsg()
    return f"EPSG:{epsg}" if epsg else crs.name


def header_html(summary: dict[str, Any], crs_text: str) -> str:
    """The title bar: project name, run date, package version, CRS, and a drop-down with
    the input files and their SHA-256 hashes, the thresholds, how the zones were drawn,
    how well the probabilities held up at the holes, the variogram figures and the
    counts."""
    project = section(summary, "project")
    run = section(summary, "run")
    name = str(project.get("name") or "").strip() or "Aquitard screening map"
    details = ["Aquitard screening map"]
    started = str(run.get("started_utc") or "").strip()
    if started:
        details.append(f"run {esc(run_date(started))}")
    version = str(run.get("package_version") or "").strip()
    if version:
        details.append(f"aquitardmap {esc(version)}")
    if crs_text:
        details.append(f"CRS {esc(crs_text)}")
    about = []
    inputs = section(summary, "inputs")
    if inputs:
        rows = "".join(
            f'<tr><td>{esc(f)}</td><td class="aqm-hash">'
            f'{esc(v.get("sha256", "") if isinstance(v, dict) else v)}</td></tr>'
            for f, v in inputs.items())
        about.append(f"<b>Input files (SHA-256)</b><table>{rows}</table>")
    t = thresholds(summary)
    named = [("Window: clay thinner than", t["window_thickness_m"], "m"),
             ("Thin: clay thinner than", t["thin_thickness_m"], "m"),
             ("Fast: travel time under", t["fast_travel_time_yr"], "years"),
             ("Pierced: holes through the clay from", t["piercing_flag_per_km2"], "per km²")]
    rows = "".join(f"<tr><td>{label}</td><td>{fmt_threshold(v)} {u}</td></tr>"
                   for label, v, u in named if v is not None)
    if rows:
        about.append(f"<b>Screening thresholds</b><table>{rows}</table>")
    zones_how = zone_method_html(summary)
    if zones_how:
        about.append(zones_how)
    held_up = calibration_html(summary)
    if held_up:
        about.append(held_up)
    figures = figure_links_html(summary)
    if figures:
        about.append(figures)
    counts = section(summary, "counts")
    if counts:
        rows = "".join(f"<tr><td>{esc(COUNT_WORDS.get(k, str(k).replace('_', ' ')))}</td>"
                       f"<td>{esc(v)}</td></tr>" for k, v in counts.items())
        about.append(f"<b>Counts</b><table>{rows}</table>")
    about_html = ""
    if about:
        about_html = ('<details><summary>About this run</summary><div class="aqm-about">'
                      + "".join(about) + "</div></details>")
    return (f'<header id="aqm-header"><span class="aqm-name">{esc(name)}</span>'
            f'<span class="aqm-details">{" · ".join(details)}</span>{about_html}</header>')


def zone_method_html(summary: dict[str, Any]) -> str:
    """How the window and thin zones were drawn: from the kriged thickness, or from the
    probabilities with their thresholds and the method the run used
    (:func:`aquitardmap.outputs.wording.probability_method_notes`, with the external-drift
    decision) ("" when the summary does not say)."""
    zones = section(summary, "zones")
    basis = zones.get("basis")
    if basis == "kriged_thickness":
        return ("<b>How the zones were drawn</b><p>Window and thin zones: cells where the "
                "kriged total thickness is below the thresholds.</p>")
    if basis != "probability":
        return ""
    rows = [("Window, likely tier: P(window) is at least",
             finite_float(zones.get("p_window_threshold"))),
            ("Window, possible tier (cannot be ruled out): P(window) is at least",
             finite_float(zones.get("p_window_possible_threshold"))),
            ("Thin, likely tier: P(thin) is at least",
             finite_float(zones.get("p_thin_threshold"))),
            ("Thin, possible tier (cannot be ruled out): P(thin) is at least",
             finite_float(zones.get("p_thin_possible_threshold")))]
    body = "".join(f"<tr><td>{label}</td><td>{v:g}</td></tr>" for label, v in rows
                   if v is not None)
    radius = finite_float(zones.get("window_proof_radius_m"))
    if radius is not None:
        body += ("<tr><td>Likely window only within (m) of a hole proving a window, or where "
                 f"a mapped hazard removes clay</td><td>{radius:g}</td></tr>")
    tiers = zone_tiers_note(summary)
    if tiers:
        body += f"<tr><td>Tiers</td><td>{esc(tiers)}</td></tr>"
    by_tier = section(zones, "area_m2_by_kind_and_tier")
    for kind, areas in by_tier.items():
        if isinstance(areas, dict):
            text = ", ".join(f"{esc(t)} {fmt_area(finite_float(a))}" for t, a in areas.items())
            body += f"<tr><td>{esc(kind.capitalize())} area by tier</td><td>{text}</td></tr>"
    body += "".join(f"<tr><td>{esc(what)}</td><td>{esc(how)}</td></tr>"
                    for what, how in probability_method_notes(summary))
    body += (f"<tr><td>Zones and the thickness layer</td>"
             f"<td>{esc(zones_and_thickness_note(summary))}</td></tr>")
    return f"<b>How the zones were drawn</b><table>{body}</table>"


def calibration_html(summary: dict[str, Any]) -> str:
    """The block cross-validation of P(window) and P(thin) at the holes, compact: holes
    scored, block size, Brier score beside the constant share and the skill score, the
    reliability bins and how to read them ("" when the summary has no check)."""
    checks = calibration_checks(summary)
    if not checks:
        return ""
    body = ""
    for c in checks:
        under = "" if c.threshold_m is None else f" (under {fmt_threshold(c.threshold_m)} m)"
        blocks = ("n/a" if c.n_blocks is None else str(c.n_blocks)) + " blocks of " + (
            "n/a" if c.block_m is None else f"{fmt_sig(c.block_m, 3)} m")
        body += (f"<tr><td>{esc(c.label + under)}</td><td>"
                 f"{'n/a' if c.n_holes is None else c.n_holes} holes scored "
                 f"({'n/a' if c.n_event is None else c.n_event} showing it), {blocks}; "
                 f"Brier score {fmt_brier(c.brier)} (constant share "
                 f"{fmt_brier(c.brier_reference)}), skill {fmt_brier(c.skill_score)}</td></tr>")
    table = reliability_table(checks)
    head = "<tr><th>Chance given</th>" + "".join(
        f"<th>{esc(c.label)} n</th><th>mean P</th><th>observed</th>" for c in checks) + "</tr>"
    rows = "".join("<tr>" + "".join(f"<td>{esc(x)}</td>" for x in row) + "</tr>"
                   for row in table)
    reliability = (f'<table class="aqm-reliability">{head}{rows}</table>' if table else "")
    return (f"<b>{esc(CALIBRATION_HEADING)}</b><table>{body}</table>{reliability}"
            f"<p>{esc(calibration_reading(summary))}</p>")


def figure_links_html(summary: dict[str, Any]) -> str:
    """Links to the run's variogram figures (PNG files beside the map), from
    ``summary["figures"]["variograms"]``; "" when there are none."""
    figures = section(section(summary, "figures"), "variograms")
    items = []
    for name, file in figures.items():
        file = str(file)
        if not re.fullmatch(r"[\w.-]+\.png", file):  # a plain file name beside the map
            continue
        label = ("total aquitard thickness" if name == "aquitard" else
                 "residual from the ground drift" if name == "aquitard_residual" else
                 f"{name} thickness")
        items.append(f'<li><a href="{esc(file)}" target="_blank" rel="noopener">'
                     f"{esc(label)}</a></li>")
    if not items:
        return ""
    return f"<b>Variograms (figures beside this map)</b><ul>{''.join(items)}</ul>"


#: Shown in place of the map when Leaflet did not load (a map that fetches it, opened
#: without a network connection or behind a filter).
LIBRARY_MISSING_TEXT = (
    "The map could not be drawn: its mapping library (Leaflet) is fetched from the internet "
    "when the page opens, and it did not load here (no connection, or blocked). Open this "
    "file with an internet connection, or ask for a self-contained map that needs no network: "
    "aquitardmap run PROJECT --out DIR --offline-map. The same grids and zones are in this "
    "run's folder (GeoTIFF files, zones.gpkg) and in report.pdf."
)


def library_missing_html() -> str:
    """A notice, hidden unless Leaflet failed to load once the page has loaded; without it
    such a page shows a blank map and no reason."""
    return (f'<div id="aqm-nolib" class="aqm-nolib" role="alert" hidden>'
            f'{esc(LIBRARY_MISSING_TEXT)}</div>'
            '<script>window.addEventListener("load", function () {'
            ' if (typeof L === "undefined") {'
            ' document.getElementById("aqm-nolib").hidden = false; } });</script>')


def caution_html(summary: dict[str, Any]) -> str:
    """The caution bar (always visible, never covered by the map)."""
    return (f'<footer id="aqm-caution" role="note"><b>Caution.</b> '
            f"{esc(caution_text(summary))}</footer>")


def panel_html(grids: list[tuple[GridStyle, str]], toggles: list[tuple[str, str, bool, str]],
               *, opacity_pct: int, shown: int) -> str:
    """The layer panel with the legends in it: one radio per grid (grouped; secondary
    groups folded), "none", the legend of the shown grid, opacity, then each on/off layer
    followed by its own legend.

    Args:
        grids: (style, legend html) in display order; radio value = index.
        toggles: (key, label html, checked, legend html) of the on/off layers.
        opacity_pct: starting grid opacity (per cent).
        shown: index of the grid shown at start (-1: none).
    """
    parts = ['<div id="aqm-panel" class="aqm-box" hidden>',
             '<div class="aqm-panel-head"><span>Map layers</span>'
             '<button type="button" id="aqm-fold" aria-expanded="true">hide</button></div>',
             '<div class="aqm-panel-body">']
    if grids:
        parts.append("<fieldset><legend>Shaded grid (one at a time)</legend>")
        more_open = False
        for group in GROUPS:
            members = [(i, s) for i, (s, _) in enumerate(grids) if s.group == group]
            if not members:
                continue
            if group not in MAIN_GROUPS and not more_open:
                opened = " open" if any(i == shown for i, _ in members) else ""
                parts.append(f'<details class="aqm-more"{opened}><summary>More grids: units, '
                             "hydraulics, hazards</summary>")
                more_open = True
            parts.append(f'<div class="aqm-group">{esc(group)}</div>')
            for i, s in members:
                checked = " checked" if i == shown else ""
                parts.append(f'<label title="{esc(s.label)}"><input type="radio" '
                             f'name="aqm-grid" value="{i}"{checked}>{esc(s.short or s.title)}'
                             "</label>")
        if more_open:
            parts.append("</details>")
        checked = " checked" if shown < 0 else ""
        parts.append(f'<label><input type="radio" name="aqm-grid" value="-1"{checked}>'
                     "No shaded grid</label></fieldset>")
        parts.append('<div class="aqm-grid-legends">'
                     + "".join(legend for _, legend in grids) + "</div>")
        parts.append(f'<div class="aqm-opacity"><label for="aqm-opacity" style="display:inline">'
                     f'Grid opacity</label> <input type="range" id="aqm-opacity" min="0" '
                     f'max="100" step="5" value="{opacity_pct}"> <span id="aqm-opacity-value">'
                     f"{opacity_pct} %</span></div>")
    if toggles:
        parts.append("<fieldset><legend>On top</legend>")
        for key, label, on, legend in toggles:
            checked = " checked" if on else ""
            parts.append(f'<label><input type="checkbox" data-aqm-layer="{esc(key)}"'
                         f"{checked}>{label}</label>{legend}")
        parts.append("</fieldset>")
    parts.append('<div class="aqm-note" style="margin-top:6px">Click the map for '
                 "coordinates and values; click a borehole for its log.</div>")
    parts.append("</div></div>")
    return "".join(parts)


# --------------------------------------------------------------------------- coordinates


def _poly_terms(u: np.ndarray, v: np.ndarray) -> np.ndarray:
    return np.stack([np.ones_like(u), u, v, u * u, u * v, v * v,
                     u ** 3, u * u * v, u * v * v, v ** 3], axis=-1)


def lonlat_to_xy_fit(crs: CRS, bounds: tuple[float, float, float, float],
                     tolerance_m: float = 0.5) -> dict[str, Any] | None:
    """Cubic polynomial from lon/lat to project x/y over ``bounds`` (west, south, east, north).

    Fitted by least squares to PROJ on a 15 x 15 lattice and checked on the 14 x 14 lattice
    of midpoints; None when the project CRS is geographic or the check misses by more than
    ``tolerance_m``. The browser has no PROJ, so this is how it shows project coordinates.
    """
    if crs.is_geographic:
        return None
    west, south, east, north = bounds
    lon0, lat0 = (west + east) / 2, (south + north) / 2
    su, sv = max((east - west) / 2, 1e-9), max((north - south) / 2, 1e-9)
    to_xy = Transformer.from_crs(LONLAT, crs, always_xy=True)

    def lattice(n: int, inset: float) -> tuple[np.ndarray, np.ndarray]:
        t = np.linspace(-1 + inset, 1 - inset, n)
        u, v = np.meshgrid(t, t)
        return u.ravel(), v.ravel()

    u, v = lattice(15, 0.0)
    x, y = to_xy.transform(lon0 + u * su, lat0 + v * sv)
    terms = _poly_terms(u, v)
    cx = np.linalg.lstsq(terms, x, rcond=None)[0]
    cy = np.linalg.lstsq(terms, y, rcond=None)[0]
    uc, vc = lattice(14, 1 / 14)
    xc, yc = to_xy.transform(lon0 + uc * su, lat0 + vc * sv)
    tc = _poly_terms(uc, vc)
    miss = float(np.max(np.hypot(tc @ cx - xc, tc @ cy - yc)))
    if not math.isfinite(miss) or miss > tolerance_m:
        return None
    return {"lon0": lon0, "lat0": lat0, "su": su, "sv": sv, "cx": cx.tolist(),
            "cy": cy.tolist(), "crs": esc(crs_label(crs)), "max_miss_m": miss}


def _b64_float32(values: np.ndarray) -> str:
    return base64.b64encode(np.asarray(values, dtype="<f4").tobytes()).decode("ascii")


def readout_config(grids: list[GridData], sd: GridData | None, max_cells: int
                   ) -> dict[str, Any] | None:
    """Values for the click read-out: the given grids on their common native grid, as
    little-endian float32 in base64. None when they are absent, do not share one grid, or
    together exceed ``max_cells`` values."""
    if not grids:
        return None
    first = grids[0]
    shape, transform = first.values.shape, first.transform
    same = [g for g in grids if g.values.shape == shape and g.transform == transform]
    if sd is not None and (sd.values.shape != shape or sd.transform != transform):
        sd = None
    n_values = shape[0] * shape[1] * (len(same) + (sd is not None))
    if n_values > max_cells or not isinstance(transform, Affine):
        return None
    if transform.b != 0 or transform.d != 0:
        return None  # rotated grids: no simple row/column lookup
    items = []
    for g in same:
        s = g.style
        item: dict[str, Any] = {"label": esc(s.title), "units": esc(s.units),
                                "b64": _b64_float32(g.values)}
        if s.factor == 100.0:  # a probability 0..1 shown in per cent
            item["percent"] = True
            item["units"] = "%"
        if s.units == "years":
            item["years"] = True
        if s.classes:
            item["classes"] = {str(c.code): esc(c.label) for c in s.classes}
        if sd is not None and g.style.file == outputs.AQUITARD_THICKNESS:
            item["sd_b64"] = _b64_float32(sd.values)
        items.append(item)
    cell = abs(transform.a)
    crs = first.crs
    return {"x0": transform.c, "y0": transform.f, "dx": transform.a, "dy": -transform.e,
            "nx": shape[1], "ny": shape[0], "items": items,
            "geographic": bool(crs is not None and crs.is_geographic),
            "cell": f"{cell:g} m" if not (crs is not None and crs.is_geographic)
            else f"{cell:g}°"}


class PageScript(MacroElement):
    """Adds the page script after every layer of the map exists.

    ``layers`` maps a JavaScript expression name (a folium variable) into the config with
    :func:`js_config`; the script itself is static (``page.js``)."""

    def __init__(self, config_js: str) -> None:
        super().__init__()
        self._name = "AqmPage"
        self.config_js = config_js

    def render(self, **kwargs: Any) -> None:
        map_name = self._parent.get_name()
        code = (f"{static_text('holes.js')}\n{static_text('page.js')}\n"
                f"aqmStart({map_name}, {self.config_js});\n")
        self.get_root().script.add_child(RawHtml(code), name=self.get_name())


def js_config(*, grids: list[tuple[str, str]], layers: dict[str, tuple[str, str]],
              opacity_pct: int, fit: dict[str, Any] | None,
              readout: dict[str, Any] | None, extent: list[list[float]] | None = None,
              holes: dict[str, Any] | None = None) -> str:
    """The config object of ``aqmStart`` as JavaScript source.

    Args:
        grids: (folium variable of the overlay, legend id) per grid, in panel order.
        layers: key -> (folium variable, legend id or "") of the on/off layers
            (``"null"``: the page makes the layer, as for the boreholes).
        extent: [[south, west], [north, east]] the opening view fits (degrees).
        holes: the boreholes' compact data (:meth:`features.HoleData.as_config`).
    """
    grid_js = ",".join(f'{{layer:{var},legend:{js_json(legend)}}}' for var, legend in grids)
    layer_js = ",".join(f"{js_json(k)}:{{layer:{var},legend:{js_json(legend)}}}"
                        for k, (var, legend) in layers.items())
    return (f"{{grids:[{grid_js}],layers:{{{layer_js}}},opacity:{int(opacity_pct)},"
            f"fit:{js_json(fit)},readout:{js_json(readout)},extent:{js_json(extent)},"
            f"holes:{js_json(holes)}}}")
