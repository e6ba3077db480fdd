"""Score drilling designs against a known truth (synthetic regions).

A *design* is a set of new hole locations. Drilling it on a synthetic region means reading
the true total aquitard thickness at each site (full penetration, no noise), adding those
holes to the region's data and kriging the total thickness again with the same variogram
(held fixed, as :mod:`aquitardmap.drilling.design` assumes). The score is the area whose screening
class (window / thin / neither, from the project thresholds) differs from the truth's,
before and after drilling. Hazards (pits, cuttings) are not considered here: the kriged
total thickness is compared with the truth's total (generate the region with
``hazards=False`` for the suggestions to screen the same thickness).
:func:`compare_designs` pits the suggested holes of
:func:`aquitardmap.drilling.suggest.suggest_holes`
against random holes and holes on a regular grid.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from aquitardmap.config.settings import ScreeningThresholds
from aquitardmap.drilling.suggest import suggest_holes, total_thickness_surface
from aquitardmap.geostat.surfaces import Surface, krige_thickness
from aquitardmap.grid import Grid, read_raster
from aquitardmap.inputs.load import Inputs, load_inputs

DESIGNS = ("suggested", "random", "regular")


def screening_class(thickness_m: np.ndarray, th: ScreeningThresholds) -> np.ndarray:
    """0 window (below ``window_thickness_m``), 1 thin (below ``thin_thickness_m``), 2
    neither; -1 where the thickness is NaN."""
    t = np.asarray(thickness_m, float)
    with np.errstate(invalid="ignore"):
        out = np.where(t < th.window_thickness_m, 0, np.where(t < th.thin_thickness_m, 1, 2))
    return np.where(np.isfinite(t), out, -1)


def misclassified_area_m2(estimate_m: np.ndarray, truth_m: np.ndarray, grid: Grid,
                          th: ScreeningThresholds) -> float:
    """Area (m²) of study-area cells whose window / thin / neither class differs from the
    truth's."""
    wrong = grid.mask & (screening_class(estimate_m, th) != screening_class(truth_m, th))
    return float(wrong.sum() * grid.cell_area_m2)


def truth_at(truth_m: np.ndarray, grid: Grid, x_m: np.ndarray, y_m: np.ndarray) -> np.ndarray:
    """True thickness (m) of the cells holding the points (NaN outside the grid)."""
    r, c = grid.rowcol(np.asarray(x_m, float), np.asarray(y_m, float))
    ok = r >= 0
    out = np.full(r.size, np.nan)
    out[ok] = truth_m[r[ok], c[ok]]
    return out


def random_sites(grid: Grid, n: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """``n`` distinct study-area cell centres drawn uniformly at random."""
    xs, ys = grid.cell_centres()
    rows, cols = np.nonzero(grid.mask)
    pick = rng.choice(rows.size, size=min(n, rows.size), replace=False)
    return xs[cols[pick]], ys[rows[pick]]


def regular_sites(grid: Grid, n: int) -> tuple[np.ndarray, np.ndarray]:
    """About ``n`` study-area cell centres on a square lattice: the lattice spacing is the
    largest that puts at least ``n`` nodes inside the study area, centred on the area's
    bounding box; surplus nodes (when no spacing gives exactly ``n``) are dropped evenly
    along the node order."""
    xs, ys = grid.cell_centres()
    rows, cols = np.nonzero(grid.mask)
    cx, cy = xs[cols], ys[rows]
    x0, y0 = 0.5 * (cx.min() + cx.max()), 0.5 * (cy.min() + cy.max())
    inside = set(zip(rows.tolist(), cols.tolist(), strict=True))

    def nodes(spacing: float) -> list[tuple[float, float]]:
        kx = int(np.ceil((cx.max() - cx.min()) / spacing / 2)) + 1
        ky = int(np.ceil((cy.max() - cy.min()) / spacing / 2)) + 1
        out = []
        for j in range(-ky, ky + 1):
            for i in range(-kx, kx + 1):
                x, y = x0 + i * spacing, y0 + j * spacing
                r, c = grid.rowcol(np.array([x]), np.array([y]))
                if (int(r[0]), int(c[0])) in inside:
                    out.append((float(xs[c[0]]), float(ys[r[0]])))
        return out

    lo, hi = grid.cell_size_m, float(np.hypot(np.ptp(cx), np.ptp(cy))) + grid.cell_size_m
    best = nodes(lo)
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        pts = nodes(mid)
        if len(pts) >= n:
            lo, best = mid, pts
        else:
            hi = mid
    keep = np.round(np.linspace(0, len(best) - 1, min(n, len(best)))).astype(int)
    pts = np.array(best)[keep]
    return pts[:, 0], pts[:, 1]


def drill(inputs: Inputs, surface: Surface, x_m: np.ndarray, y_m: np.ndarray,
          thickness_m: np.ndarray) -> np.ndarray:
    """Kriged total thickness after adding full-penetration holes with the given true
    thicknesses, with the variogram of ``surface`` held fixed (m, grid shaped)."""
    used = inputs.columns[~inputs.columns["excluded"]]
    x = np.concatenate([used["x"].to_numpy(float), x_m])
    y = np.concatenate([used["y"].to_numpy(float), y_m])
    t = np.concatenate([used["aquitard_thickness_m"].to_numpy(float), thickness_m])
    status = np.concatenate([used["status_aquitard"].to_numpy(), np.full(len(x_m), "full")])
    return krige_thickness("aquitard", x, y, t, status, inputs.grid, inputs.project.kriging,
                           with_cv=False, model=surface.variogram).thickness_m


@dataclass(frozen=True)
class Trial:
    """One region's comparison: misclassified area before and after each design (m²)."""

    region: str
    before_m2: float
    after_m2: dict[str, float]


def compare_designs(region_dir: str | Path, truth_path: str | Path, n_holes: int, *,
                    n_random: int = 5, seed: int = 0) -> Trial:
    """Drill ``n_holes`` suggested, random (mean of ``n_random`` draws) and regular holes in
    a synthetic region and score each against the truth.

    The suggestions use the project's ``[drilling]`` settings with every cell a candidate.
    """
    inputs = load_inputs(region_dir)
    truth, _, _, _ = read_raster(truth_path)
    g = inputs.grid
    if truth.shape != g.mask.shape:
        raise ValueError(f"truth grid {truth.shape} does not match the project grid "
                         f"{g.mask.shape}")
    th = inputs.project.screening
    surface = total_thickness_surface(inputs)
    before = misclassified_area_m2(surface.thickness_m, truth, g, th)

    def score(x: np.ndarray, y: np.ndarray) -> float:
        est = drill(inputs, surface, x, y, truth_at(truth, g, x, y))
        return misclassified_area_m2(est, truth, g, th)

    sug = suggest_holes(inputs, surface, n_holes).holes
    after = {"suggested": score(sug["x"].to_numpy(float), sug["y"].to_numpy(float))}
    rng = np.random.default_rng(seed)
    after["random"] = float(np.mean([score(*random_sites(g, n_holes, rng))
                                     for _ in range(n_random)]))
    after["regular"] = score(*regular_sites(g, n_holes))
    return Trial(str(region_dir), before, after)


def trials_table(trials: list[Trial]) -> pd.DataFrame:
    """One row per region and a mean row: misclassified area before and after each design
    (km²) and the reduction each design achieved (km²)."""
    rows = []
    for t in trials:
        row = {"region": Path(t.region).name, "before_km2": t.before_m2 / 1e6}
        for d in DESIGNS:
            row[f"{d}_after_km2"] = t.after_m2[d] / 1e6
            row[f"{d}_reduction_km2"] = (t.before_m2 - t.after_m2[d]) / 1e6
        rows.append(row)
    df = pd.DataFrame(rows)
    mean = {"region": "mean", **df.drop(columns="region").mean().to_dict()}
    return pd.concat([df, pd.DataFrame([mean])], ignore_index=True)
