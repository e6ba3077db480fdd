"""What changed between two runs: zones gained and lost, AVI class changes, thickness change,
and the boreholes that caused them.

:func:`compare_runs` reads two output folders of :func:`aquitardmap.run` (``A`` the earlier,
``B`` the later) and :func:`write_comparison` writes:

``changes.gpkg``
    layer ``zone_changes``: polygons of zones gained (in B, not in A) or lost (in A, not in
    B), per kind, with their area, the new, changed or removed boreholes within the
    influence distance, and a plain reason; layer ``hole_changes``: boreholes new, removed
    or changed (collar or log), with both logs.
``thickness_change_m.tif``
    total aquitard thickness of B minus A (m), on the union of both grids; nodata where
    either run has no value.
``avi_class_change.tif`` (when both runs have ``avi_class.tif``)
    AVI class of B minus class of A: negative = more vulnerable in B, positive = less.
``changes_map.html``
    a small map for planners: zones gained and lost, boreholes that changed, the caution.
``changes.json``, ``changes.txt``
    the numbers, and a short summary in plain language.

Both runs must be on the same lattice (same CRS and cell size, origins a whole number of
cells apart), which is always the case for two runs of one project: grid edges are snapped
to multiples of the cell size (:mod:`aquitardmap.grid`). Their extents may differ (a
study area drawn around the boreholes grows with new holes).

The influence distance is the range of B's fitted variogram of the total aquitard
thickness: beyond it a datum has (almost) no weight in ordinary kriging (Isaaks &
Srivastava 1989, ch. 12), so a zone that changed with no changed hole within it changed
for another reason (a refitted variogram, other settings), and the reason says so.

The probabilities behind the window and thin zones come from a model refitted at every run
(``summary.json`` → ``probability``). When that model changed between the runs
(:func:`probability_model_changes`: the method; per cutoff the source of the indicator
variogram, its range by more than :data:`MODEL_RANGE_CHANGE`, its nugget share by more than
:data:`MODEL_NUGGET_SHARE_CHANGE`, the number of chain segments; for the latent-Gaussian
method the ground drift used or not and the variance scale by more than
:data:`MODEL_VARIANCE_SCALE_CHANGE`), the summary, the text and the zone reasons name it as
a likely cause of zone changes: zones may then move far from any new hole.
"""

from __future__ import annotations

import html
import json
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
from affine import Affine
from shapely.geometry import box
from shapely.ops import unary_union

from aquitardmap.errors import InputError, Problem
from aquitardmap.grid import Grid, read_raster, write_raster
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.staging import staged_output_dir

CHANGES_GPKG = "changes.gpkg"
ZONE_CHANGES_LAYER = "zone_changes"
HOLE_CHANGES_LAYER = "hole_changes"
THICKNESS_CHANGE = "thickness_change_m.tif"
AVI_CLASS_CHANGE = "avi_class_change.tif"
CHANGES_MAP = "changes_map.html"
CHANGES_JSON = "changes.json"
CHANGES_TEXT = "changes.txt"
AVI_FILE = getattr(outputs, "AVI_CLASS", "avi_class.tif")

#: Thickness changes smaller than this (m) are not counted as change in the summary.
THICKNESS_CHANGE_REPORT_M = 0.5
#: AVI class names (Van Stempvoort, Ewert & Wassenaar 1993), class 1 to 5.
AVI_NAMES = {1: "extremely high", 2: "high", 3: "moderate", 4: "low", 5: "extremely low"}
_HOLE_FIELDS = ("x", "y", "ground_elev_m", "total_depth_m", "log")
#: Probability-model changes reported as a likely cause of zone changes
#: (:func:`probability_model_changes`): a variogram range that moved by more than this share
#: of the earlier range, ...
MODEL_RANGE_CHANGE = 0.25
#: ... a nugget share of the sill (nugget / (nugget + partial sills)) that moved by more
#: than this, ...
MODEL_NUGGET_SHARE_CHANGE = 0.2
#: ... and, for the latent-Gaussian method, a variance scale that moved by more than this
#: share of the earlier one.
MODEL_VARIANCE_SCALE_CHANGE = 0.25
#: Zone kinds drawn from the probabilities.
PROBABILITY_KINDS = ("window", "thin")
#: Changes whose effect stays near the changed holes (``reach`` of
#: :func:`probability_model_changes`); every other change acts on the whole study area.
LOCAL_CHANGES = {"n_continuity_segments": "near the changed holes"}


@dataclass
class Comparison:
    """The differences between run A and run B (see the module docstring)."""

    run_a: Path
    run_b: Path
    zone_changes: gpd.GeoDataFrame
    hole_changes: gpd.GeoDataFrame
    grid: Grid
    thickness_change_m: np.ndarray
    avi_class_change: np.ndarray | None
    influence_m: float
    summary: dict = field(default_factory=dict)
    text: str = ""


def _problem(path: Path, message: str) -> InputError:
    return InputError([Problem(str(path), 0, 0, message)])


def check_run(run: str | Path) -> dict:
    """The summary of an output folder of :func:`aquitardmap.run`.

    Raises:
        InputError: the folder is not a run, or a file the comparison reads is missing.
    """
    run = Path(run)
    if not (run / outputs.SUMMARY).is_file():
        raise _problem(run, "not an aquitardmap output folder (no summary.json)")
    for name in (outputs.AQUITARD_THICKNESS, outputs.ZONES, outputs.BOREHOLES):
        if not (run / name).is_file():
            raise _problem(run, f"{name} is missing from this run folder")
    return json.loads((run / outputs.SUMMARY).read_text(encoding="utf-8"))


def _union_grid(ta: Affine, shape_a: tuple[int, int], tb: Affine, shape_b: tuple[int, int],
                crs, run_b: Path) -> tuple[Grid, tuple[int, int], tuple[int, int]]:
    """The grid covering both rasters, and the (row, col) offset of each inside it."""
    cell = ta.a
    if abs(tb.a - cell) > 1e-9 * cell or abs(ta.e + cell) > 1e-9 * cell \
            or abs(tb.e + cell) > 1e-9 * cell:
        raise _problem(run_b, f"the runs have different cell sizes ({ta.a:g} m and "
                       f"{tb.a:g} m); compare runs of one project")
    for off in ((ta.c - tb.c) / cell, (ta.f - tb.f) / cell):
        if abs(off - round(off)) > 1e-6:
            raise _problem(run_b, "the runs' grids are not on the same lattice; compare runs "
                           "of one project")
    xmin = min(ta.c, tb.c)
    ymax = max(ta.f, tb.f)
    xmax = max(ta.c + cell * shape_a[1], tb.c + cell * shape_b[1])
    ymin = min(ta.f - cell * shape_a[0], tb.f - cell * shape_b[0])
    width, height = int(round((xmax - xmin) / cell)), int(round((ymax - ymin) / cell))
    transform = Affine(cell, 0.0, xmin, 0.0, -cell, ymax)

    def offset(t: Affine) -> tuple[int, int]:
        return int(round((ymax - t.f) / cell)), int(round((t.c - xmin) / cell))

    grid = Grid(transform, width, height, crs, np.zeros((height, width), dtype=bool))
    return grid, offset(ta), offset(tb)


def _place(arr: np.ndarray, grid: Grid, off: tuple[int, int], fill: float = np.nan
           ) -> np.ndarray:
    out = np.full((grid.height, grid.width), fill, dtype=float)
    r, c = off
    out[r:r + arr.shape[0], c:c + arr.shape[1]] = arr
    return out


def _read_zones(run: Path) -> gpd.GeoDataFrame:
    z = gpd.read_file(run / outputs.ZONES, layer=outputs.ZONES_LAYER)
    return z[z.geometry.notna() & ~z.geometry.is_empty]


def _hole_changes(run_a: Path, run_b: Path) -> gpd.GeoDataFrame:
    a = gpd.read_file(run_a / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    b = gpd.read_file(run_b / outputs.BOREHOLES, layer=outputs.BOREHOLES_LAYER)
    a = a.drop_duplicates("borehole_id").set_index("borehole_id")
    b = b.drop_duplicates("borehole_id").set_index("borehole_id")
    rows = []
    for bid in b.index.union(a.index, sort=False):
        in_a, in_b = bid in a.index, bid in b.index
        if in_b and not in_a:
            change, geom = "new", b.at[bid, "geometry"]
        elif in_a and not in_b:
            change, geom = "removed", a.at[bid, "geometry"]
        else:
            differs = [f for f in _HOLE_FIELDS if f in a.columns and f in b.columns
                       and str(a.at[bid, f]) != str(b.at[bid, f])]
            if not differs:
                continue
            change, geom = "changed", b.at[bid, "geometry"]
        rows.append({
            "borehole_id": str(bid), "change": change,
            "log_a": str(a.at[bid, "log"]) if in_a and "log" in a.columns else "",
            "log_b": str(b.at[bid, "log"]) if in_b and "log" in b.columns else "",
            "aquitard_thickness_a_m": float(a.at[bid, "aquitard_thickness_m"]) if in_a
            else np.nan,
            "aquitard_thickness_b_m": float(b.at[bid, "aquitard_thickness_m"]) if in_b
            else np.nan,
            "status_aquitard_b": str(b.at[bid, "status_aquitard"]) if in_b else "",
            "geometry": geom,
        })
    cols = ["borehole_id", "change", "log_a", "log_b", "aquitard_thickness_a_m",
            "aquitard_thickness_b_m", "status_aquitard_b", "geometry"]
    return gpd.GeoDataFrame(pd.DataFrame(rows, columns=cols), geometry="geometry",
                            crs=b.crs or a.crs)


def _zone_changes(za: gpd.GeoDataFrame, zb: gpd.GeoDataFrame, holes: gpd.GeoDataFrame,
                  influence_m: float, cell_area_m2: float, crs, *,
                  model_changed: bool = False) -> gpd.GeoDataFrame:
    """Zones gained and lost per kind; with ``model_changed`` (the probability model
    changed between the runs) every window and thin reason names it as a likely cause."""
    rows = []
    kinds = sorted(set(za["kind"]) | set(zb["kind"]))
    for kind in kinds:
        ua = unary_union(list(za.loc[za["kind"] == kind, "geometry"]))
        ub = unary_union(list(zb.loc[zb["kind"] == kind, "geometry"]))
        for change, geom in (("gained", ub.difference(ua)), ("lost", ua.difference(ub))):
            if geom.is_empty:
                continue
            parts = getattr(geom, "geoms", [geom])
            for part in parts:
                if part.geom_type not in ("Polygon", "MultiPolygon") \
                        or part.area < 0.5 * cell_area_m2:
                    continue
                near = holes[holes.distance(part) <= influence_m] if len(holes) else holes
                near = near.assign(d=near.distance(part)).sort_values("d")
                ids = [f"{r.borehole_id} ({r.change})" for r in near.itertuples()]
                by_model = model_changed and kind in PROBABILITY_KINDS
                if ids:
                    reason = (f"{kind} zone {change}; boreholes within {influence_m:,.0f} m: "
                              + ", ".join(ids[:8]) + (" ..." if len(ids) > 8 else ""))
                    if by_model:
                        reason += ("; the probability model also changed between the runs "
                                   "and may be the cause (see the summary)")
                elif by_model:
                    reason = (f"{kind} zone {change} with no new, changed or removed borehole "
                              f"within {influence_m:,.0f} m: the likely cause is the change "
                              "of the probability model between the runs (see the summary), "
                              "not nearby data")
                else:
                    reason = (f"{kind} zone {change} with no new, changed or removed borehole "
                              f"within {influence_m:,.0f} m: the change comes from the "
                              "refitted variogram or other settings, not from nearby data")
                rows.append({"change": change, "kind": kind, "area_m2": float(part.area),
                             "n_holes_nearby": len(ids), "holes_nearby": ", ".join(ids),
                             "reason": reason, "geometry": part})
    cols = ["change", "kind", "area_m2", "n_holes_nearby", "holes_nearby", "reason",
            "geometry"]
    out = gpd.GeoDataFrame(pd.DataFrame(rows, columns=cols), geometry="geometry", crs=crs)
    return out.sort_values(["kind", "change", "area_m2"], ascending=[True, True, False]
                           ).reset_index(drop=True)


def _influence_m(summary_b: dict, cell_size_m: float) -> float:
    try:
        r = float(summary_b["surfaces"]["aquitard"]["variogram"]["range_m"])
        if np.isfinite(r) and r > 0:
            return r
    except (KeyError, TypeError, ValueError):
        pass
    return 20.0 * cell_size_m


def _distance_text(m: float) -> str:
    return f"{m / 1000:.1f} km" if m >= 1000 else f"{m:,.0f} m"


def _nugget_share(v: dict) -> float:
    sill = sum(float(v.get(k) or 0.0) for k in ("nugget", "psill", "psill2"))
    return float(v.get("nugget") or 0.0) / sill if sill > 0 else float("nan")


def _cutoff_name(threshold_m: float, prob: dict) -> str:
    if np.isclose(threshold_m, float(prob.get("window_thickness_m", np.nan))):
        return "window"
    if np.isclose(threshold_m, float(prob.get("thin_thickness_m", np.nan))):
        return "thin-clay"
    return f"{threshold_m:g} m"


def _cutoff_changes(ca: dict, cb: dict) -> list[tuple[str, object, object, str]]:
    """(what, before, after, words) for one cutoff present in both runs."""
    out: list[tuple[str, object, object, str]] = []
    sa, sb = ca.get("variogram_source"), cb.get("variogram_source")
    if sa != sb:
        out.append(("variogram_source", sa, sb,
                    f"its variogram was {sa} and is now {sb}"
                    + (" (the holes no longer show a structure at this cutoff)"
                       if sb == "default" else "")))
    va, vb = ca.get("variogram") or {}, cb.get("variogram") or {}
    if va.get("model") != vb.get("model"):
        out.append(("variogram_model", va.get("model"), vb.get("model"),
                    f"its variogram family went from {va.get('model')} to {vb.get('model')}"))
    ra, rb = float(va.get("range_m") or np.nan), float(vb.get("range_m") or np.nan)
    if np.isfinite(ra) and np.isfinite(rb) and ra > 0 \
            and abs(rb - ra) > MODEL_RANGE_CHANGE * ra:
        out.append(("range_m", ra, rb, f"its variogram range went from {_distance_text(ra)} "
                    f"to {_distance_text(rb)}"))
    na, nb = _nugget_share(va), _nugget_share(vb)
    if np.isfinite(na) and np.isfinite(nb) and abs(nb - na) > MODEL_NUGGET_SHARE_CHANGE:
        out.append(("nugget_share", round(na, 4), round(nb, 4),
                    f"the nugget share of its variogram went from {na:.0%} to {nb:.0%}"))
    ga, gb = ca.get("n_continuity_segments"), cb.get("n_continuity_segments")
    if ga is not None and gb is not None and ga != gb:
        out.append(("n_continuity_segments", int(ga), int(gb),
                    f"the chains of proving holes it follows went from {ga} to {gb} "
                    "segments"))
    return out


def probability_model_changes(summary_a: dict, summary_b: dict) -> list[dict]:
    """Changes of the probability model behind the window and thin zones between two runs,
    from the ``probability`` section of their ``summary.json`` (module docstring), earliest
    cutoffs first; ``[]`` when nothing reportable changed.

    Each change: ``{"cutoff_m": threshold or None, "cutoff": "window", "thin-clay", "7.5 m"
    or "" (for the whole model), "what": "method", "variogram_source", "variogram_model",
    "range_m", "nugget_share", "n_continuity_segments", "external_drift" or
    "variance_scale", "before", "after", "reach", "text": plain words}``. ``reach`` is
    ``"study area"`` for a choice that acts on every cell (a variogram, the drift, the
    variance scale, the method), ``"near the changed holes"`` for the chains of proving
    holes: a segment joins two holes at most a few hole spacings apart and is broken by a
    hole between them, so its count changes only where holes changed.
    """
    pa, pb = summary_a.get("probability") or {}, summary_b.get("probability") or {}
    if not pa or not pb:
        return []
    out: list[dict] = []

    def add(cutoff_m, cutoff, what, before, after, text):
        out.append({"cutoff_m": cutoff_m, "cutoff": cutoff, "what": what, "before": before,
                    "after": after, "reach": LOCAL_CHANGES.get(what, "study area"),
                    "text": text})

    if pa.get("method") != pb.get("method"):
        add(None, "", "method", pa.get("method"), pb.get("method"),
            f"the probabilities were made by another method ({pa.get('method')} before, "
            f"{pb.get('method')} now)")
        return out
    by_t = {round(float(c["threshold_m"]), 6): c for c in pa.get("cutoffs") or []}
    for cb in sorted(pb.get("cutoffs") or [], key=lambda c: float(c["threshold_m"])):
        t = round(float(cb["threshold_m"]), 6)
        if t not in by_t:
            continue
        for what, before, after, text in _cutoff_changes(by_t[t], cb):
            add(t, _cutoff_name(t, pb), what, before, after, text)
    da, db = pa.get("external_drift") or {}, pb.get("external_drift") or {}
    if bool(da.get("used")) != bool(db.get("used")):
        now = "used" if db.get("used") else "no longer used"
        add(None, "", "external_drift", bool(da.get("used")), bool(db.get("used")),
            f"the ground elevation is {now} as a drift of the thickness"
            + (f" ({db['reason']})" if db.get("reason") else ""))
    sa, sb = pa.get("variance_scale"), pb.get("variance_scale")
    if sa is not None and sb is not None and float(sa) > 0 \
            and abs(float(sb) - float(sa)) > MODEL_VARIANCE_SCALE_CHANGE * float(sa):
        add(None, "", "variance_scale", float(sa), float(sb),
            f"the variance scale set by cross-validation went from {float(sa):.2f} to "
            f"{float(sb):.2f}")
    return out


def probability_model_text(changes: list[dict]) -> str:
    """The changes of :func:`probability_model_changes` in plain words ("" for none): one
    sentence for the whole model, one per window and thin-clay cutoff, one for the other
    cutoffs (used where hazards or the crust cut the clay) when a choice that acts on the
    whole study area changed there. A sentence with such a change says that zones may have
    moved for that reason; one with only changes near the changed holes says where they
    act."""
    if not changes:
        return ""

    def sentence(head: str, group: list[dict]) -> str:
        far = any(c["reach"] == "study area" for c in group)
        tail = ("zones may have moved for that reason rather than because of the new holes "
                "nearby." if far else "this acts only near the changed holes.")
        return head + "; ".join(c["text"] for c in group) + "; " + tail

    sentences = []
    whole = [c for c in changes if c["cutoff_m"] is None]
    if whole:
        sentences.append(sentence("The probability model changed: ", whole))
    for name in ("window", "thin-clay"):
        group = [c for c in changes if c["cutoff"] == name]
        if group:
            sentences.append(sentence(f"The {name} probability model changed: ", group))
    others = sorted({c["cutoff"] for c in changes
                     if c["cutoff_m"] is not None and c["reach"] == "study area"
                     and c["cutoff"] not in ("window", "thin-clay")},
                    key=lambda n: float(n.split()[0]))
    if others:
        sentences.append("The probability model also changed at the cutoff(s) "
                         + ", ".join(others) + " (used where hazards or the weathered crust "
                         "cut the clay); see changes.json.")
    return " ".join(sentences)


def default_changes_dir(run_b: str | Path) -> Path:
    """Where a comparison goes when no folder is named: beside the later run, named after
    it with ``_changes``."""
    run_b = Path(run_b)
    return run_b.parent / f"{run_b.name}_changes"


def compare_runs(run_a: str | Path, run_b: str | Path, *, name_a: str | None = None
                 ) -> Comparison:
    """Compare two output folders of :func:`aquitardmap.run` (A earlier, B later).

    ``name_a`` is how run A is named in the summary (default: its folder), e.g. for a copy
    of a run taken before a new run replaced it.

    Raises:
        InputError: a folder is not a run, a file is missing, or the grids do not line up.
    """
    run_a, run_b = Path(run_a), Path(run_b)
    sa, sb = check_run(run_a), check_run(run_b)
    ta_arr, ta, crs_a, _ = read_raster(run_a / outputs.AQUITARD_THICKNESS)
    tb_arr, tb, crs_b, _ = read_raster(run_b / outputs.AQUITARD_THICKNESS)
    if crs_a is not None and crs_b is not None and not crs_a.equals(crs_b):
        raise _problem(run_b, f"the runs are in different CRSs ({crs_a.to_string()} and "
                       f"{crs_b.to_string()})")
    grid, oa, ob = _union_grid(ta, ta_arr.shape, tb, tb_arr.shape, crs_b or crs_a, run_b)
    a = _place(ta_arr, grid, oa)
    b = _place(tb_arr, grid, ob)
    both = np.isfinite(a) & np.isfinite(b)
    grid = Grid(grid.transform, grid.width, grid.height, grid.crs,
                np.isfinite(a) | np.isfinite(b))
    change = np.where(both, b - a, np.nan)

    avi_change = None
    avi_counts: dict[str, int] = {}
    if (run_a / AVI_FILE).is_file() and (run_b / AVI_FILE).is_file():
        ca, cta, _, _ = read_raster(run_a / AVI_FILE)
        cb, ctb, _, _ = read_raster(run_b / AVI_FILE)
        if ca.shape == ta_arr.shape and cta == ta and cb.shape == tb_arr.shape and ctb == tb:
            ca, cb = _place(ca, grid, oa), _place(cb, grid, ob)
            ok = np.isfinite(ca) & np.isfinite(cb) & (ca > 0) & (cb > 0)
            avi_change = np.where(ok, cb - ca, np.nan)
            moved = ok & (ca != cb)
            pairs, counts = np.unique(np.stack([ca[moved], cb[moved]]).astype(int), axis=1,
                                      return_counts=True)
            for (f, t), n in zip(pairs.T, counts, strict=True):
                avi_counts[f"{AVI_NAMES.get(f, f)} -> {AVI_NAMES.get(t, t)}"] = int(n)

    holes = _hole_changes(run_a, run_b)
    influence = _influence_m(sb, grid.cell_size_m)
    model = probability_model_changes(sa, sb)
    model_far = any(c["reach"] == "study area" for c in model)
    zones = _zone_changes(_read_zones(run_a), _read_zones(run_b), holes, influence,
                          grid.cell_area_m2, grid.crs, model_changed=model_far)
    cmp = Comparison(run_a, run_b, zones, holes, grid, change, avi_change, influence)
    cmp.summary = _summary(cmp, sa, sb, avi_counts, both)
    cmp.summary["probability_model"] = {
        "method_a": (sa.get("probability") or {}).get("method"),
        "method_b": (sb.get("probability") or {}).get("method"),
        "changed": bool(model), "changed_over_study_area": model_far, "changes": model,
        "text": probability_model_text(model)}
    if name_a is not None:
        cmp.summary["run_a"]["folder"] = name_a
    cmp.text = _plain_text(cmp.summary)
    return cmp


def _summary(cmp: Comparison, sa: dict, sb: dict, avi_counts: dict[str, int],
             both: np.ndarray) -> dict:
    cell_km2 = cmp.grid.cell_area_m2 / 1e6
    ch = cmp.thickness_change_m
    big = np.abs(np.nan_to_num(ch)) >= THICKNESS_CHANGE_REPORT_M
    zones = {}
    for kind in sorted(set(cmp.zone_changes["kind"])):
        z = cmp.zone_changes[cmp.zone_changes["kind"] == kind]
        zones[kind] = {c: {"area_km2": float(z.loc[z["change"] == c, "area_m2"].sum() / 1e6),
                           "count": int((z["change"] == c).sum())}
                       for c in ("gained", "lost")}
    holes = cmp.hole_changes
    avi = None
    if cmp.avi_class_change is not None:
        d = cmp.avi_class_change
        avi = {"cells_changed": int(np.nansum(d != 0)),
               "more_vulnerable_km2": float(np.nansum(d < 0) * cell_km2),
               "less_vulnerable_km2": float(np.nansum(d > 0) * cell_km2),
               "transitions": avi_counts}
    return {
        "caution": outputs.CAUTION,
        "run_a": {"folder": str(cmp.run_a), "started_utc": sa.get("run", {}).get("started_utc"),
                  "boreholes": sa.get("counts", {}).get("boreholes")},
        "run_b": {"folder": str(cmp.run_b), "started_utc": sb.get("run", {}).get("started_utc"),
                  "boreholes": sb.get("counts", {}).get("boreholes")},
        "boreholes": {k: sorted(holes.loc[holes["change"] == k, "borehole_id"])
                      for k in ("new", "removed", "changed")},
        "influence_distance_m": cmp.influence_m,
        "zones": zones,
        "thickness_change_m": {
            "report_threshold_m": THICKNESS_CHANGE_REPORT_M,
            "area_changed_km2": float(big.sum() * cell_km2),
            "max_increase_m": float(np.nanmax(ch)) if both.any() else 0.0,
            "max_decrease_m": float(-np.nanmin(ch)) if both.any() else 0.0,
            "cells_compared": int(both.sum()),
        },
        "avi_class": avi,
    }


def _km2(v: float) -> str:
    return f"{v:.2f} km²" if v >= 0.01 else f"{v * 1e6:,.0f} m²"


def _plain_text(s: dict) -> str:
    """A short summary for planners, in plain words."""
    h = s["boreholes"]
    lines = [
        "What changed between the two screening runs",
        f"Earlier run: {s['run_a']['folder']} ({s['run_a']['boreholes']} boreholes, "
        f"{s['run_a']['started_utc']})",
        f"Later run:   {s['run_b']['folder']} ({s['run_b']['boreholes']} boreholes, "
        f"{s['run_b']['started_utc']})",
        "",
        f"Boreholes: {len(h['new'])} new, {len(h['removed'])} removed, {len(h['changed'])} "
        "with a changed log or position."
        + (f" New: {', '.join(h['new'][:10])}{' ...' if len(h['new']) > 10 else ''}."
           if h["new"] else ""),
    ]
    if not s["zones"]:
        lines.append("Flagged zones: no zone was gained or lost.")
    for kind, z in s["zones"].items():
        g, lo = z["gained"], z["lost"]
        lines.append(f"{kind.capitalize()} zones: {_km2(g['area_km2'])} newly flagged in "
                     f"{g['count']} place(s); {_km2(lo['area_km2'])} no longer flagged in "
                     f"{lo['count']} place(s).")
    t = s["thickness_change_m"]
    lines.append(f"Total clay thickness changed by {t['report_threshold_m']:g} m or more over "
                 f"{_km2(t['area_changed_km2'])}; the largest increase is "
                 f"{t['max_increase_m']:.1f} m and the largest decrease "
                 f"{t['max_decrease_m']:.1f} m.")
    if s["avi_class"] is not None:
        a = s["avi_class"]
        lines.append(f"Vulnerability class (AVI): {_km2(a['more_vulnerable_km2'])} became more "
                     f"vulnerable and {_km2(a['less_vulnerable_km2'])} less vulnerable.")
    model = (s.get("probability_model") or {}).get("text")
    if model:
        lines.append(model)
    lines.append(f"Each changed zone lists the changed boreholes within "
                 f"{s['influence_distance_m']:,.0f} m (the range of the fitted variogram); "
                 "see changes.gpkg and changes_map.html.")
    lines += ["", "Caution: " + s["caution"]]
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------------------------
# Writing


def _write_map(path: Path, cmp: Comparison) -> None:
    import folium

    z = cmp.zone_changes.to_crs(4326) if len(cmp.zone_changes) else cmp.zone_changes
    hz = cmp.hole_changes.to_crs(4326) if len(cmp.hole_changes) else cmp.hole_changes
    outline = gpd.GeoSeries([box(*cmp.grid.bounds)], crs=cmp.grid.crs)
    extent = outline.to_crs(4326).total_bounds
    m = folium.Map(tiles=None, control_scale=True)
    folium.TileLayer("OpenStreetMap", name="Base map").add_to(m)
    m.fit_bounds([[extent[1], extent[0]], [extent[3], extent[2]]])
    colours = {"gained": "#c0392b", "lost": "#2471a3"}
    for change in ("gained", "lost"):
        part = z[z["change"] == change] if len(z) else z
        fg = folium.FeatureGroup(name=f"Zones {change}")
        for r in part.itertuples():
            tip = html.escape(f"{r.kind} zone {change}: {_km2(r.area_m2 / 1e6)}. {r.reason}")
            folium.GeoJson(r.geometry.__geo_interface__, tooltip=tip,
                           style_function=lambda _f, c=colours[change]: {
                               "color": c, "fillColor": c, "weight": 1.5,
                               "fillOpacity": 0.45}).add_to(fg)
        fg.add_to(m)
    fg = folium.FeatureGroup(name="Boreholes new, changed or removed")
    hole_colour = {"new": "#1e8449", "changed": "#b9770e", "removed": "#566573"}
    for r in hz.itertuples():
        text = html.escape(f"{r.borehole_id}: {r.change}. Log: {r.log_b or r.log_a}")
        folium.CircleMarker([r.geometry.y, r.geometry.x], radius=5, weight=1,
                            color=hole_colour[r.change], fill=True, fill_opacity=0.9,
                            tooltip=text).add_to(fg)
    fg.add_to(m)
    folium.LayerControl(collapsed=False).add_to(m)
    summary = html.escape(cmp.text).replace("\n", "<br>")
    legend = ("<div style='position:fixed;bottom:12px;left:12px;z-index:9999;max-width:460px;"
           "max-height:45%;overflow:auto;background:white;padding:8px 10px;border:1px solid "
           "#888;font:12px sans-serif'>"
           "<b>Red</b>: newly flagged zones; <b>blue</b>: no longer flagged; dots: boreholes "
           f"new (green), changed (amber), removed (grey).<br><br>{summary}</div>")
    m.get_root().html.add_child(folium.Element(legend))
    m.save(str(path))


def write_comparison(cmp: Comparison, out_dir: str | Path) -> list[str]:
    """Write the comparison files into ``out_dir`` (replaced as a whole when complete).

    An existing ``out_dir`` is replaced only when it is empty or holds a previous
    comparison (``changes.json``); the replacement is atomic (see
    :func:`aquitardmap.outputs.staging.staged_output_dir`).

    Returns the names of the files written.
    """
    with staged_output_dir(out_dir, marker=CHANGES_JSON, what="comparison") as tmp:
        names = [CHANGES_GPKG, THICKNESS_CHANGE, CHANGES_MAP, CHANGES_JSON, CHANGES_TEXT]
        cmp.zone_changes.to_file(tmp / CHANGES_GPKG, layer=ZONE_CHANGES_LAYER, driver="GPKG")
        cmp.hole_changes.to_file(tmp / CHANGES_GPKG, layer=HOLE_CHANGES_LAYER, driver="GPKG")
        write_raster(tmp / THICKNESS_CHANGE, cmp.thickness_change_m, cmp.grid,
                     description="total aquitard thickness, later run minus earlier run",
                     units="m")
        if cmp.avi_class_change is not None:
            write_raster(tmp / AVI_CLASS_CHANGE, cmp.avi_class_change, cmp.grid, dtype="int8",
                         nodata=-128, description="AVI class of the later run minus the "
                         "earlier (negative = more vulnerable)", units="classes")
            names.append(AVI_CLASS_CHANGE)
        _write_map(tmp / CHANGES_MAP, cmp)
        (tmp / CHANGES_TEXT).write_text(cmp.text, encoding="utf-8")
        (tmp / CHANGES_JSON).write_text(json.dumps({**cmp.summary, "outputs": sorted(names)},
                                                   indent=2), encoding="utf-8")
    return sorted(names)


__all__ = ["Comparison", "check_run", "compare_runs", "default_changes_dir",
           "probability_model_changes", "probability_model_text", "write_comparison"]
