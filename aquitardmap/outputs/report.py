"""The printable report: ``report.pdf`` built from the files of one run folder.

Drawn with matplotlib only (no browser), on A4 portrait pages, each carrying the caution
in its footer:

1. the job, the data used (input files with SHA-256, counts), thresholds, flagged areas
   and the caution in full;
2. maps of total clay thickness, the chance of thin clay, travel time and vulnerability
   class (AVI, Van Stempvoort, Ewert & Wassenaar 1993), each with the flagged zones and the
   boreholes coloured by what they prove;
3. the variogram of the total thickness (experimental points from the run's full-
   penetration holes with their pair counts, and the fitted model) and any variogram
   figures the run wrote, with the cross-validation statistics of every surface;
   then, when the run checked them, how well the probabilities held up at the holes (block
   cross-validation: Brier score against the constant share, reliability table);
4. the table of flagged areas;
5. the parameters with their sources (units and conductivity, settings, methods; the
   probability method as the run's summary names it).

Like the map, the report reads only the run folder (names in :mod:`aquitardmap.outputs.names`,
styles in :mod:`aquitardmap.outputs.presentation`), so it can be rebuilt from what was delivered.
"""

from __future__ import annotations

import math
import os
import textwrap
import uuid
from dataclasses import fields
from pathlib import Path
from typing import Any

import geopandas as gpd
import matplotlib.image
import numpy as np
from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.colors import BoundaryNorm, ListedColormap, LogNorm, Normalize
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import FuncFormatter

from aquitardmap._version import __version__
from aquitardmap.geostat.variogram import (
    VariogramModel,
    default_lags,
    experimental_variogram,
)
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.presentation import (
    AVI_CLASS_FILE,
    CALIBRATION_HEADING,
    COUNT_WORDS,
    EMPTY_BIN,
    HOLE_STYLES,
    P_THIN_FILE,
    P_WINDOW_FILE,
    ZONE_COLOURS,
    ZONE_DASHES,
    ZONE_OTHER_COLOUR,
    GridStyle,
    calibration_checks,
    calibration_reading,
    finite_float,
    fmt_area,
    fmt_bin_share,
    fmt_brier,
    fmt_percent,
    fmt_sig,
    fmt_threshold,
    fmt_years,
    hole_category_of,
    probability_method_notes,
    run_date,
    thresholds,
    zone_labels,
    zone_style,
    zone_tier_label,
    zone_tiers_note,
    zones_and_thickness_note,
)
from aquitardmap.outputs.runfolder import (
    GridData,
    project_crs,
    read_grid,
    read_layer,
    read_summary,
    section,
    styles_in,
)
from aquitardmap.screening.zones import TIERED_KINDS, ZONE_KINDS, ZONE_TIERS

A4_IN = (8.27, 11.69)
#: Cells drawn per map at most (larger grids are thinned by striding).
MAX_MAP_CELLS = 1_500_000
#: The maps, in order: (file of the grid, or a list of alternatives).
MAP_FILES: tuple[tuple[str, ...], ...] = (
    (outputs.AQUITARD_THICKNESS,),
    (P_THIN_FILE, outputs.P_THIN),
    (outputs.TRAVEL_TIME,),
    (AVI_CLASS_FILE,),
)
ZONE_TABLE_ROWS_PER_PAGE = 34

#: Methods of every run; the probability method of the run follows them
#: (:func:`aquitardmap.outputs.presentation.probability_method_notes`).
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


# --------------------------------------------------------------------------- text helpers


def _plain(value: Any) -> str:
    """User text safe for matplotlib: ``$`` would start mathtext."""
    return ("" if value is None else str(value)).replace("$", r"\$")


def _wrap(text: str, width: int) -> str:
    return "\n".join(textwrap.fill(p, width) if p else "" for p in text.split("\n"))


# --------------------------------------------------------------------------- page frame


class _Pages:
    """A4 pages with a header (project, run) and the caution and page number in the
    footer; numbered once all pages are known."""

    def __init__(self, summary: dict[str, Any]) -> None:
        self.summary = summary
        self.figures: list[Figure] = []
        project = section(summary, "project")
        run = section(summary, "run")
        self.name = _plain(str(project.get("name") or "").strip() or "Aquitard screening")
        started = str(run.get("started_utc") or "").strip()
        self.when = run_date(started) if started else ""
        caution = str(summary.get("caution") or "").strip() or outputs.CAUTION
        if outputs.CAUTION not in caution:
            caution = f"{caution} {outputs.CAUTION}"
        self.caution = caution

    def new(self, heading: str) -> Figure:
        fig = Figure(figsize=A4_IN)  # no pyplot: nothing global is touched
        fig.text(0.06, 0.965, f"{self.name} — aquitard screening report", fontsize=8,
                 color="#555555")
        if self.when:
            fig.text(0.94, 0.965, f"run {self.when}", fontsize=8, color="#555555",
                     ha="right")
        fig.add_artist(Line2D([0.06, 0.94], [0.958, 0.958], color="#999999", lw=0.6))
        fig.text(0.06, 0.93, heading, fontsize=14, weight="bold", va="top")
        fig.text(0.06, 0.045, _wrap("Caution. " + self.caution, 150), fontsize=6.3,
                 color="#6b4e00", va="top")
        self.figures.append(fig)
        return fig

    def save(self, path: Path) -> None:
        n = len(self.figures)
        meta = {"Title": f"Aquitard screening report — {self.name}",
                "Subject": "Screening-level estimate: " + outputs.CAUTION,
                "Creator": f"aquitardmap {__version__}"}
        with PdfPages(path, metadata=meta) as pdf:
            for i, fig in enumerate(self.figures, start=1):
                fig.text(0.94, 0.012, f"page {i} of {n}", fontsize=7, ha="right",
                         color="#555555")
                pdf.savefig(fig)


class _Flow:
    """Writes headings, paragraphs and tables down a page from ``y`` (figure fraction),
    each sized to its content."""

    LEFT, WIDTH, BOTTOM = 0.06, 0.88, 0.085

    def __init__(self, fig: Figure, y: float) -> None:
        self.fig = fig
        self.y = y

    @staticmethod
    def _line_h(fontsize: float, spacing: float = 1.35) -> float:
        return fontsize * spacing / 72 / A4_IN[1]

    def heading(self, text: str, size: float = 11) -> None:
        self.y -= self._line_h(size, 0.5)
        self.fig.text(self.LEFT, self.y, text, fontsize=size, weight="bold", va="top")
        self.y -= self._line_h(size, 1.6)

    def para(self, text: str, size: float = 8.5, width: int = 120, colour: str = "#222222"
             ) -> None:
        if not text:
            return
        wrapped = _wrap(text, width)
        self.fig.text(self.LEFT, self.y, wrapped, fontsize=size, va="top", color=colour,
                      linespacing=1.35)
        self.y -= self._line_h(size) * (wrapped.count("\n") + 1) + self._line_h(size, 0.6)

    def space(self, size: float = 8) -> None:
        self.y -= self._line_h(size)

    def table(self, rows: list[list[str]], header: list[str], widths: list[float], *,
              fontsize: float = 7.5, wrap: list[int] | None = None) -> None:
        """A table as wide as the text, rows as tall as their wrapped lines."""
        if wrap:
            rows = [[_wrap(c, w) if w else c for c, w in zip(r, wrap, strict=True)]
                    for r in rows]
        body = rows or [["—"] + [""] * (len(header) - 1)]
        lines = [1] + [max(str(c).count("\n") + 1 for c in r) for r in body]
        line_h = self._line_h(fontsize, 1.3)
        pad = self._line_h(fontsize, 0.45)
        heights = [n * line_h + pad for n in lines]
        total = sum(heights)
        ax = self.fig.add_axes((self.LEFT, self.y - total, self.WIDTH, total))
        ax.axis("off")
        tab = ax.table(cellText=body, colLabels=header, colWidths=widths, bbox=(0, 0, 1, 1),
                       cellLoc="left", colLoc="left")
        tab.auto_set_font_size(False)
        tab.set_fontsize(fontsize)
        for (r, _c), cell in tab.get_celld().items():
            cell.set_height(heights[r] / total)
            cell.set_edgecolor("#bbbbbb")
            cell.set_linewidth(0.4)
            cell.PAD = 0.02
            if r == 0:
                cell.set_facecolor("#e8ecef")
                cell.set_text_props(weight="bold")
        self.y -= total + self._line_h(fontsize, 0.9)


# --------------------------------------------------------------------------- page 1


def _title_page(pages: _Pages, run_dir: Path) -> None:
    s = pages.summary
    fig = pages.new("Aquitard screening report")
    flow = _Flow(fig, 0.895)
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
        facts.append(f"Coordinate system: {_plain(project.get('crs'))}")
    if grid:
        facts.append(f"Grid: {fmt_sig(finite_float(grid.get('cell_size_m')), 3)} m cells, "
                     f"{grid.get('cells_in_study_area', 'n/a')} cells in a study area of "
                     f"{fmt_sig(finite_float(grid.get('study_area_km2')), 3)} km²")
    version = _plain(run.get("package_version") or __version__)
    facts.append(f"Run: {pages.when or 'n/a'}, aquitardmap {version}")
    flow.para("\n".join(facts), size=9, width=105)

    flow.heading("Data used")
    inputs = section(s, "inputs")
    rows = [[_plain(name), str(v.get("sha256", "") if isinstance(v, dict) else v)]
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
    flow.table(rows, ["Flagged zone kind (threshold) and tier", "Zones", "Area"],
               [0.64, 0.12, 0.24], fontsize=8.5)
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
    box.text(0.02, 0.68, _wrap(pages.caution, 112), fontsize=8.5, va="top",
             transform=box.transAxes, linespacing=1.35)


# --------------------------------------------------------------------------- map pages


def _km(x: float, _pos: Any = None) -> str:
    return f"{x / 1000:g}"


def _scale_bar(ax, extent: tuple[float, float, float, float]) -> None:
    x0, x1, y0, y1 = extent
    span = x1 - x0
    target = span / 5
    length = 10 ** math.floor(math.log10(target))
    for m in (5, 2, 1):
        if m * length <= target:
            length *= m
            break
    bx, by = x0 + 0.04 * span, y0 + 0.05 * (y1 - y0)
    ax.plot([bx, bx + length], [by, by], color="black", lw=3, solid_capstyle="butt")
    label = f"{length / 1000:g} km" if length >= 1000 else f"{length:g} m"
    ax.text(bx + length / 2, by + 0.03 * (y1 - y0), label, ha="center", va="bottom",
            fontsize=7, bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.7,
                              "pad": 1})


def _draw_grid(ax, fig: Figure, data: GridData) -> None:
    style = data.style
    values = data.values
    step = max(1, math.ceil(math.sqrt(values.size / MAX_MAP_CELLS)))
    shown = values[::step, ::step]
    t = data.transform
    h, w = values.shape
    extent = (t.c, t.c + t.a * w, t.f + t.e * h, t.f)
    if style.classes:
        codes = [c.code for c in style.classes]
        cmap = ListedColormap([c.colour for c in style.classes])
        norm = BoundaryNorm([c - 0.5 for c in codes] + [codes[-1] + 0.5], cmap.N)
        ax.imshow(np.ma.masked_invalid(shown), extent=extent, cmap=cmap, norm=norm,
                  interpolation="nearest", origin="upper")
        present = set(np.unique(values[np.isfinite(values)]).astype(int).tolist())
        handles = [Patch(facecolor=c.colour, edgecolor="#555555",
                         label=_wrap(c.label + ("" if c.code in present else " (none here)"),
                                     24)) for c in style.classes]
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=6.3,
                  frameon=False, title="Class", title_fontsize=7, labelspacing=0.8)
        return
    v = np.ma.masked_invalid(shown * style.factor)
    if style.log:
        positive = v[v > 0]
        vmin = float(positive.min()) if positive.count() else 1.0
        vmax = float(positive.max()) if positive.count() else 10.0
        if vmax <= vmin:
            vmax = vmin * 10
        norm = LogNorm(vmin=vmin, vmax=vmax, clip=True)
        v = np.ma.where(v > 0, v, vmin)
    elif style.fixed_range is not None:
        norm = Normalize(*style.fixed_range)
    else:
        lo = float(v.min()) if v.count() else 0.0
        hi = float(v.max()) if v.count() else 1.0
        norm = Normalize(lo, hi if hi > lo else lo + 1.0)
    im = ax.imshow(v, extent=extent, cmap=style.cmap, norm=norm, interpolation="nearest",
                   origin="upper")
    cb = fig.colorbar(im, ax=ax, fraction=0.035, pad=0.02)
    cb.set_label(style.label, fontsize=7)
    cb.ax.tick_params(labelsize=7)


def _zone_linestyle(kind: str, tier: str = "") -> str:
    """Matplotlib line style of a zone outline (:func:`zone_style`): solid, dash-dot for
    the possible tier, broken for the kinds the map draws as open outlines on top
    (:data:`ZONE_DASHES`), dotted for pierced zones."""
    if kind not in ZONE_DASHES:
        return "-." if zone_style(kind, tier).dash else "-"
    return ":" if kind == "pierced" else "--"


def _zone_tiers(zones: gpd.GeoDataFrame) -> list[str]:
    """Each zone's tier, ``""`` where it has none (or the layer has no tier column)."""
    if "tier" not in zones:
        return [""] * len(zones)
    return [t if t in ZONE_TIERS else "" for t in zones["tier"].fillna("").astype(str)]


def _draw_zones_and_holes(ax, zones: gpd.GeoDataFrame | None,
                          holes: gpd.GeoDataFrame | None) -> None:
    if zones is not None and len(zones):
        keys = list(zip(zones["kind"].astype(str).str.lower(), _zone_tiers(zones),
                        strict=True))
        for kind, tier in sorted(set(keys)):
            part = zones[[k == (kind, tier) for k in keys]]
            colour = ZONE_COLOURS.get(kind, ZONE_OTHER_COLOUR)
            part.boundary.plot(ax=ax, color=colour,
                               linewidth=1.3 if kind in ZONE_DASHES else
                               (0.9 if tier == "possible" else 1.1),
                               linestyle=_zone_linestyle(kind, tier))
    if holes is not None and len(holes):
        cats = [hole_category_of(r) for r in holes.drop(columns="geometry").to_dict("records")]
        xs, ys = holes.geometry.x.to_numpy(), holes.geometry.y.to_numpy()
        for cat, style in HOLE_STYLES.items():
            m = np.array([c == cat for c in cats])
            if m.any():
                ax.scatter(xs[m], ys[m], s=9, c=style.fill, edgecolors=style.edge,
                           linewidths=0.5, zorder=5)


def _common_legend(fig: Figure, y: float, zones_label: dict[str, str],
                   summary: dict[str, Any] | None = None) -> None:
    tiered = bool(section(summary or {}, "zones").get("tiers"))
    handles = []
    for k, c in ZONE_COLOURS.items():
        for tier in (ZONE_TIERS if tiered and k in TIERED_KINDS else ("",)):
            words = zones_label.get(k, k)
            if tier:
                words += f", {zone_tier_label(summary or {}, k, tier)}"
            handles.append(Line2D([], [], color=c, lw=1.3, ls=_zone_linestyle(k, tier),
                                  label=words))
    handles += [Line2D([], [], marker="o", ls="", markerfacecolor=s.fill,
                       markeredgecolor=s.edge, markersize=5, label=s.label)
                for s in HOLE_STYLES.values()]
    fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.06, y), ncol=2,
               fontsize=6.6, frameon=False, title="Zones and boreholes", title_fontsize=7.5,
               alignment="left")


def _map_pages(pages: _Pages, run_dir: Path) -> None:
    s = pages.summary
    styles = {st.file: st for st in styles_in(run_dir, s)}
    chosen: list[GridStyle] = []
    for alternatives in MAP_FILES:
        for f in alternatives:
            if f in styles:
                chosen.append(styles[f])
                break
    if P_WINDOW_FILE in styles:
        chosen.insert(2, styles[P_WINDOW_FILE])
    crs = project_crs(run_dir, s)
    zones = read_layer(run_dir / outputs.ZONES, outputs.ZONES_LAYER, crs, crs)
    holes = read_layer(run_dir / outputs.BOREHOLES, outputs.BOREHOLES_LAYER, crs, crs)
    labels = zone_labels(s)
    for k in range(0, len(chosen), 2):
        fig = pages.new("Maps" if k == 0 else "Maps (continued)")
        for j, style in enumerate(chosen[k:k + 2]):
            ax = fig.add_axes((0.08, 0.575 - 0.38 * j, 0.70, 0.31))
            ax.set_anchor("N")
            data = read_grid(run_dir, style)
            _draw_grid(ax, fig, data)
            _draw_zones_and_holes(ax, zones, holes)
            t = data.transform
            h, w = data.values.shape
            extent = (t.c, t.c + t.a * w, t.f + t.e * h, t.f)
            ax.set_xlim(extent[0], extent[1])
            ax.set_ylim(extent[2], extent[3])
            ax.set_aspect("equal")
            ax.xaxis.set_major_formatter(FuncFormatter(_km))
            ax.yaxis.set_major_formatter(FuncFormatter(_km))
            ax.tick_params(labelsize=7)
            ax.set_xlabel("Easting (km)", fontsize=7)
            ax.set_ylabel("Northing (km)", fontsize=7)
            title = style.title + (" — from the resistance grid" if style.derived_from else "")
            ax.set_title(_plain(title), fontsize=9.5, loc="left")
            if style.note:
                ax.text(0.0, -0.135, _plain(style.note), transform=ax.transAxes, fontsize=6.8,
                        color="#444444", va="top")
            _scale_bar(ax, extent)
        _common_legend(fig, 0.142, labels, s)


# --------------------------------------------------------------------------- variograms


def _model_from(summary_variogram: dict[str, Any]) -> VariogramModel | None:
    names = {f.name for f in fields(VariogramModel)}
    try:
        return VariogramModel(**{k: v for k, v in summary_variogram.items() if k in names})
    except (TypeError, ValueError):
        return None


def _variogram_page(pages: _Pages, run_dir: Path) -> None:
    s = pages.summary
    fig = pages.new("Variogram and cross-validation")
    surfaces = section(s, "surfaces")
    total = surfaces.get("aquitard") if isinstance(surfaces.get("aquitard"), dict) else {}
    crs = project_crs(run_dir, s)
    holes = read_layer(run_dir / outputs.BOREHOLES, outputs.BOREHOLES_LAYER, crs, crs)
    ax = fig.add_axes((0.1, 0.60, 0.82, 0.28))
    drew = False
    if holes is not None and len(holes) >= 3 and "aquitard_thickness_m" in holes.columns:
        full = holes[(holes.get("status_aquitard", "").astype(str) == "full")
                     & ~holes.get("excluded", False).astype(bool)]
        full = full[np.isfinite(full["aquitard_thickness_m"].astype(float))]
        if len(full) >= 3:
            x, y = full.geometry.x.to_numpy(), full.geometry.y.to_numpy()
            z = full["aquitard_thickness_m"].to_numpy(float)
            kriging = section(s, "kriging")
            n_lags, max_lag = default_lags(x, y)
            n_lags = int(kriging.get("n_lags") or 0) or n_lags
            exp = experimental_variogram(x, y, z, n_lags=n_lags, max_lag_m=max_lag)
            # no pair at all when the holes share one position
            most = max(exp.n_pairs.max(), 1) if exp.n_pairs.size else 1
            ax.scatter(exp.lag_m, exp.gamma, s=14 + 60 * exp.n_pairs / most,
                       color="#2c7bb6", zorder=3, label="experimental (marker size ∝ pairs)")
            for h, g, n in zip(exp.lag_m, exp.gamma, exp.n_pairs, strict=True):
                ax.annotate(str(int(n)), (h, g), textcoords="offset points", xytext=(0, 5),
                            fontsize=5.5, ha="center", color="#555555")
            model = _model_from(total.get("variogram") or {})
            if model is not None and exp.lag_m.size:
                hh = np.linspace(0, exp.lag_m.max() * 1.05, 200)
                nugget = model.nugget if model.nugget > 1e-9 * model.sill else 0.0
                label = (f"fitted {model.model}: nugget {fmt_sig(nugget, 2)} m², sill "
                         f"{fmt_sig(model.sill, 3)} m², range {fmt_sig(model.range_m, 3)} m")
                if getattr(model, "model2", ""):
                    label += (f" + {model.model2} (partial sill "
                              f"{fmt_sig(getattr(model, 'psill2', 0.0), 3)} m², range "
                              f"{fmt_sig(getattr(model, 'range2_m', 0.0), 3)} m)")
                if model.anisotropy_ratio > 1.0 + 1e-9:
                    label += (f"; along the major axis ({model.anisotropy_angle_deg:g}°, "
                              f"ratio {fmt_sig(model.anisotropy_ratio, 2)})")
                ax.plot(hh, model.gamma(hh), color="#d7191c", lw=1.4, label=_wrap(label, 90))
            ax.set_xlabel("Distance between holes (m)", fontsize=8)
            ax.set_ylabel("Semivariance (m²)", fontsize=8)
            ax.set_title(f"Total clay thickness: {len(full)} holes that reached the aquifer",
                         fontsize=9.5, loc="left")
            ax.legend(fontsize=7, loc="lower right")
            ax.tick_params(labelsize=7)
            drew = True
    if not drew:
        ax.axis("off")
        ax.text(0, 0.5, "Too few holes reached the aquifer to draw a variogram.", fontsize=9)
    pngs = sorted(p for p in run_dir.glob("*.png") if "variogram" in p.name.lower())
    flow = _Flow(fig, 0.54)
    if pngs:
        flow.para(f"Variogram figures written by the run: {', '.join(p.name for p in pngs)} "
                  "(following pages).")
    flow.heading("Leave-one-out cross-validation")
    rows = []
    for name, surf in surfaces.items():
        if not isinstance(surf, dict):
            continue
        cv = surf.get("cross_validation") if isinstance(surf.get("cross_validation"),
                                                        dict) else {}
        label = "Total clay" if name == "aquitard" else _plain(name)
        rows.append([label, str(surf.get("n_full", "")), str(surf.get("n_lower_bounds", "")),
                     fmt_sig(finite_float(cv.get("mean_error")), 2),
                     fmt_sig(finite_float(cv.get("rmse")), 3),
                     fmt_sig(finite_float(cv.get("mean_standardised_error")), 2),
                     fmt_sig(finite_float(cv.get("variance_standardised_error")), 2)])
    flow.table(rows, ["Surface", "Full holes", "Lower bounds", "Mean error (m)", "RMSE (m)",
                      "Mean std. error", "Var. std. error"],
               [0.16, 0.11, 0.13, 0.15, 0.13, 0.16, 0.16], fontsize=7.5)
    flow.para("A mean error near 0 means no bias; a variance of the standardised errors near "
              "1 means the kriging SD is about right (below 1: the SD is pessimistic, above 1: "
              "optimistic). n/a: not computed for that surface.", size=7.5, width=135,
              colour="#444444")
    for p in pngs:
        fig = pages.new(f"Variogram figure: {_plain(p.name)}")
        ax = fig.add_axes((0.06, 0.12, 0.88, 0.78))
        ax.axis("off")
        try:
            ax.imshow(matplotlib.image.imread(p))
        except (OSError, ValueError, SyntaxError):
            ax.text(0, 0.5, f"{_plain(p.name)} could not be read.", fontsize=9)


# --------------------------------------------------------------------------- calibration

def _calibration_page(pages: _Pages) -> None:
    """The block cross-validation of P(window) and P(thin) at the holes: scores and the
    reliability table (no page when the summary has no check)."""
    s = pages.summary
    checks = calibration_checks(s)
    if not checks:
        return
    fig = pages.new(CALIBRATION_HEADING)
    flow = _Flow(fig, 0.895)
    flow.para(calibration_reading(s), size=8.5, width=118)
    flow.heading("Scores", size=10)
    rows = [[c.label + ("" if c.threshold_m is None else
                        f" (under {fmt_threshold(c.threshold_m)} m)"),
             "n/a" if c.n_holes is None else str(c.n_holes),
             "n/a" if c.n_event is None else str(c.n_event),
             ("n/a" if c.n_blocks is None else str(c.n_blocks)) + " of "
             + ("n/a" if c.block_m is None else f"{fmt_sig(c.block_m, 3)} m"),
             fmt_brier(c.brier), fmt_brier(c.brier_reference), fmt_brier(c.skill_score)]
            for c in checks]
    flow.table(rows, ["Chance of", "Holes scored", "showing it", "Blocks", "Brier score",
                      "Constant share", "Skill score"],
               [0.2, 0.12, 0.11, 0.15, 0.14, 0.15, 0.13], fontsize=8)
    flow.heading("Reliability: holes by the chance they were given", size=10)
    edges = []
    for c in checks:
        edges += [b.label for b in c.bins if b.label not in edges]
    header = ["Chance given"]
    widths = [0.16]
    for c in checks:
        header += [f"{c.label} n", "mean P", "observed"]
        widths += [0.14, 0.14, 0.14]
    widths = [w / sum(widths) for w in widths]
    rel_rows = []
    for label in edges:
        row = [label]
        for c in checks:
            b = next((b for b in c.bins if b.label == label), None)
            row += ([EMPTY_BIN] * 3 if b is None else
                    [str(b.n), fmt_bin_share(b.mean_p), fmt_bin_share(b.observed)])
        rel_rows.append(row)
    flow.table(rel_rows, header, widths, fontsize=8)
    flow.para(f"{EMPTY_BIN}: no hole was given a chance in that bin. Observed: the share of "
              "the bin's holes that logged a window (P(window)) or thin clay (P(thin)).",
              size=7.5, width=135, colour="#444444")


# --------------------------------------------------------------------------- zones table


def _zone_pages(pages: _Pages, run_dir: Path) -> None:
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
            rows.append([str(i), _plain(labels.get(kind, kind).split(" (")[0].split(":")[0]),
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
    widths = [0.04, 0.11, 0.075, 0.085, 0.125, 0.075, 0.065, 0.075, 0.07, 0.12, 0.065,
              0.09]
    chunks = [rows[i:i + ZONE_TABLE_ROWS_PER_PAGE]
              for i in range(0, len(rows), ZONE_TABLE_ROWS_PER_PAGE)] or [[]]
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
            intro_flow = _Flow(fig, 0.895)
            intro_flow.para(intro, size=8, width=120)
        flow = _Flow(fig, intro_flow.y if k == 0 else 0.895)
        if chunk:
            flow.table(chunk, header, widths, fontsize=7.5)
        else:
            flow.para("No zones were flagged in this run.", size=10)


# --------------------------------------------------------------------------- parameters


def _flat(prefix: str, value: Any, out: list[tuple[str, str]]) -> None:
    if isinstance(value, dict):
        for k, v in value.items():
            _flat(f"{prefix}.{k}" if prefix else str(k), v, out)
    elif isinstance(value, list):
        out.append((prefix, ", ".join(_plain(v) for v in value) or "—"))
    elif isinstance(value, float):
        out.append((prefix, f"{value:g}"))
    else:
        out.append((prefix, _plain(value)))


def _parameter_pages(pages: _Pages, run_dir: Path) -> None:
    s = pages.summary
    fig = pages.new("Parameters and their sources")
    flow = _Flow(fig, 0.895)
    flow.heading("Units of the stack and their hydraulic conductivity")
    rows = []
    for u in s.get("units") or []:
        if not isinstance(u, dict):
            continue
        n_used, n_all = u.get("n_used"), u.get("n_samples")
        samples = f"{n_used} of {n_all}" if n_used is not None and n_all is not None else ""
        rows.append([_plain(u.get("code")), _plain(u.get("name")), _plain(u.get("role")),
                     fmt_sig(finite_float(u.get("effective_porosity")), 2),
                     fmt_sig(finite_float(u.get("k_m_s")), 2),
                     fmt_sig(finite_float(u.get("kv_m_s")), 2),
                     _plain(u.get("k_source") or "default"), samples])
    flow.table(rows, ["Code", "Name", "Role", "nₑ", "K (m/s)", "Kv (m/s)", "K source",
                      "Samples used"], [0.08, 0.27, 0.1, 0.07, 0.11, 0.11, 0.14, 0.12],
               fontsize=7.2, wrap=[0, 32, 0, 0, 0, 0, 16, 0])
    notes = [f"{_plain(u.get('code'))}: {_plain(u.get('note'))}" for u in s.get("units") or []
             if isinstance(u, dict) and u.get("note")]
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
    flow = _Flow(fig, 0.895)
    rows = [[m, ref] for m, ref in METHODS]
    rows += [[_plain(m), _plain(ref)] for m, ref in probability_method_notes(s)]
    rows.append(list(ZONE_TIERS_METHOD))
    avi = section(s, "avi")
    if avi.get("source"):
        rows.append(["AVI classes used", _plain(avi["source"])])
    if zones_and_thickness_note(s):
        rows.append(["Zones and the thickness map", _plain(zones_and_thickness_note(s))])
    flow.table(rows, ["What", "Method and published source"], [0.25, 0.75], fontsize=7.5,
               wrap=[30, 88])
    warnings = [w for w in s.get("warnings") or [] if isinstance(w, str)]
    if warnings:
        flow.heading("Notes from the run")
        flow.para("\n".join(f"• {_plain(w)}" for w in warnings[:25]), size=7, width=130)


# --------------------------------------------------------------------------- entry point


def write_report(run_dir: str | Path) -> Path:
    """Write ``run_dir / report.pdf`` from the files of a run folder.

    Missing files leave their part out (a map page without the grid, a table saying so);
    the caution is on every page. The file is written to a temporary name and moved into
    place. Returns the path of ``report.pdf``.

    Raises:
        NotADirectoryError: ``run_dir`` is not a folder.
    """
    run_dir = Path(run_dir)
    if not run_dir.is_dir():
        raise NotADirectoryError(f"run folder not found: {run_dir}")
    summary = read_summary(run_dir)
    pages = _Pages(summary)
    _title_page(pages, run_dir)
    _map_pages(pages, run_dir)
    _variogram_page(pages, run_dir)
    _calibration_page(pages)
    _zone_pages(pages, run_dir)
    _parameter_pages(pages, run_dir)
    target = run_dir / outputs.REPORT
    tmp = run_dir / f".{outputs.REPORT}.{os.getpid()}.{uuid.uuid4().hex}.tmp"
    try:
        pages.save(tmp)
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return target


__all__ = ["write_report"]
