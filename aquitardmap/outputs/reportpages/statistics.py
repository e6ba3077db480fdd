"""The statistics pages of the report: the variogram of the total thickness (experimental
points from the run's full-penetration holes with their pair counts, and the fitted model),
the variogram figures the run wrote, the cross-validation of every surface and, when the
run checked them, how well the probabilities held up at the holes.
"""

from __future__ import annotations

from dataclasses import fields
from pathlib import Path
from typing import Any

import matplotlib.image
import numpy as np

from aquitardmap.geostat.variogram import VariogramModel, default_lags, experimental_variogram
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.calibration import (
    CALIBRATION_HEADING,
    EMPTY_BIN,
    calibration_checks,
    calibration_reading,
    fmt_brier,
    reliability_table,
)
from aquitardmap.outputs.formatting import finite_float, fmt_sig, fmt_threshold, section
from aquitardmap.outputs.reportpages.frame import Flow, Pages, plain_text, wrap_text
from aquitardmap.outputs.runfolder import project_crs, read_layer


def _model_from(summary_variogram: dict[str, Any]) -> VariogramModel | None:
    names = {f.name for f in fields(VariogramModel)}
    try:
        return VariogramModel(**{k: v for k, v in summary_variogram.items() if k in names})
    except (TypeError, ValueError):
        return None


def variogram_page(pages: Pages, run_dir: Path) -> None:
    """The variogram of the total thickness from the full-penetration holes of
    ``boreholes.gpkg`` with the fitted model of the summary, and the leave-one-out
    cross-validation of every surface; then a page per variogram figure in ``run_dir``."""
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
                ax.plot(hh, model.gamma(hh), color="#d7191c", lw=1.4, label=wrap_text(label, 90))
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
    flow = Flow(fig, 0.54)
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
        label = "Total clay" if name == "aquitard" else plain_text(name)
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
        fig = pages.new(f"Variogram figure: {plain_text(p.name)}")
        ax = fig.add_axes((0.06, 0.12, 0.88, 0.78))
        ax.axis("off")
        try:
            ax.imshow(matplotlib.image.imread(p))
        except (OSError, ValueError, SyntaxError):
            ax.text(0, 0.5, f"{plain_text(p.name)} could not be read.", fontsize=9)


def calibration_page(pages: Pages) -> None:
    """The block cross-validation of P(window) and P(thin) at the holes: scores and the
    reliability table (no page when the summary has no check)."""
    s = pages.summary
    checks = calibration_checks(s)
    if not checks:
        return
    fig = pages.new(CALIBRATION_HEADING)
    flow = Flow(fig, 0.895)
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
    header = ["Chance given"]
    widths = [0.16]
    for c in checks:
        header += [f"{c.label} n", "mean P", "observed"]
        widths += [0.14, 0.14, 0.14]
    widths = [w / sum(widths) for w in widths]
    flow.table(reliability_table(checks), header, widths, fontsize=8)
    flow.para(f"{EMPTY_BIN}: no hole was given a chance in that bin. Observed: the share of "
              "the bin's holes that logged a window (P(window)) or thin clay (P(thin)).",
              size=7.5, width=135, colour="#444444")


__all__ = ["calibration_page", "variogram_page"]
