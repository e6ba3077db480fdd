"""Skill of the window and thin zones against a known truth (synthetic regions).

The question a reviewer asks of the probability zones: do they find more of the windows and
the thin clay than the plain alternative, without flagging more clay that is really there?
This module answers it on a project that carries its truth (``truth/aquitard_thickness_m.tif``,
written by :func:`aquitardmap.evaluation.synthetic.region.make_synthetic_region`).

Baseline (issue 3): the kriged total thickness (ordinary kriging) thresholded at the window
and thin thicknesses. Tool: the likely tier of the window and thin zones the run draws
(:func:`aquitardmap.screening.zones.zone_masks`: cells where P(thinner than the threshold)
reaches the configured likely threshold, windows only near a hole that proves one, and the
cells holding a hole that proves a window or thin clay);
hazards and the crust are left out (the truth is the thickness of the clay as laid down);
the thin zones include the window zones. Scores, cell by cell on the study area: *area
recall* (share of the truth's cells below the threshold that are flagged) and *area
precision* (share of the flagged cells that are below it in the truth). Windows are
scored against truth below the window thickness, thin zones against truth below the thin
thickness.

Example::

    >>> from aquitardmap.evaluation.skill import zone_skill
    >>> s = zone_skill("demo_region")                       # doctest: +SKIP
    >>> s["tool"]["window"].recall > s["baseline"]["window"].recall  # doctest: +SKIP
    True

:func:`screening_skill` scores a whole screening run the same way (the zones the run draws,
P(window) and P(thin) as forecasts, the holes that prove a window or thin clay) beside the
textbook alternative, ordinary indicator kriging (:func:`indicator_kriging_probability`).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from aquitardmap.geostat.calibration import RELIABILITY_EDGES, Reliability, reliability
from aquitardmap.geostat.indicator import indicator_data
from aquitardmap.geostat.kriging import prepare_locations, weights_at
from aquitardmap.geostat.variogram import (
    VariogramModel,
    default_lags,
    experimental_variogram,
    fit_variogram,
)
from aquitardmap.grid import Grid, read_raster

#: Where a synthetic region keeps the true total aquitard thickness.
TRUTH_THICKNESS = Path("truth") / "aquitard_thickness_m.tif"


@dataclass(frozen=True)
class ZoneScore:
    """Area recall and precision of one set of flagged cells against the truth."""

    recall: float
    precision: float
    flagged_cells: int
    truth_cells: int


def score_cells(flagged: np.ndarray, truth_below: np.ndarray) -> ZoneScore:
    """Recall and precision of boolean ``flagged`` cells against boolean ``truth_below``
    (same shape). With nothing flagged the precision is 1 (no false flag), with nothing to
    find the recall is 1."""
    flagged = np.asarray(flagged, bool)
    truth_below = np.asarray(truth_below, bool)
    tp = int((flagged & truth_below).sum())
    n_flag, n_true = int(flagged.sum()), int(truth_below.sum())
    return ZoneScore(tp / n_true if n_true else 1.0, tp / n_flag if n_flag else 1.0,
                     n_flag, n_true)


def pooled_score(scores: list[ZoneScore]) -> ZoneScore:
    """One :class:`ZoneScore` of several regions' cells counted together (not the mean of
    their ratios)."""
    tp = sum(hit_cells(s) for s in scores)
    n_flag = sum(s.flagged_cells for s in scores)
    n_true = sum(s.truth_cells for s in scores)
    return ZoneScore(tp / n_true if n_true else 1.0, tp / n_flag if n_flag else 1.0,
                     n_flag, n_true)


def hit_cells(score: ZoneScore) -> int:
    """Flagged cells that are below the threshold in the truth (recall × truth cells)."""
    return int(round(score.recall * score.truth_cells)) if score.truth_cells else 0


@dataclass(frozen=True)
class MatchedRecall:
    """The most a probability grid can find at a given precision: of every zone "P at
    least q" (one q for the whole region, chosen knowing the truth), the one with the
    highest recall whose precision is still at least ``min_precision``.

    Attributes:
        recall: its area recall (0 when no q reaches the precision).
        precision: its area precision (NaN when no q reaches it).
        p_threshold: its q (NaN when no q reaches the precision).
        min_precision: the precision asked for.
    """

    recall: float
    precision: float
    p_threshold: float
    min_precision: float


def recall_at_precision(p: np.ndarray, truth_below: np.ndarray, min_precision: float
                        ) -> MatchedRecall:
    """:class:`MatchedRecall` of probabilities ``p`` against the boolean truth
    ``truth_below`` (same shape; NaN probabilities are never flagged, cells of probability
    0 neither).

    Every distinct positive value of ``p`` is tried as the threshold: the cells are sorted
    by ``p``, and the zone "P ≥ q" is the run of cells down to the last one equal to q.
    This answers whether a zone rule on ``p`` could match the baseline at all: if even the
    best threshold in hindsight finds less than the baseline at the baseline's precision,
    no choice of ``p_…_threshold`` meets issue 3's rule in that region.
    """
    p = np.nan_to_num(np.asarray(p, float).ravel(), nan=0.0)
    event = np.asarray(truth_below, bool).ravel()
    n_true = int(event.sum())
    order = np.argsort(-p, kind="stable")
    ps, ev = p[order], event[order]
    tp = np.cumsum(ev)
    n = np.arange(1, ps.size + 1)
    # The zone "p >= q" ends at the last cell of each run of equal values.
    last = np.flatnonzero(np.r_[ps[1:] != ps[:-1], True] & (ps > 0))
    precision = tp[last] / n[last]
    ok = last[precision >= min_precision]
    if ok.size == 0 or n_true == 0:
        return MatchedRecall(0.0 if n_true else 1.0, float("nan"), float("nan"),
                             float(min_precision))
    best = ok[np.argmax(tp[ok])]
    return MatchedRecall(float(tp[best] / n_true), float(tp[best] / n[best]), float(ps[best]),
                         float(min_precision))


def zone_skill(project_dir: str | Path, *,
               overrides: dict[str, dict[str, object]] | None = None
               ) -> dict[str, dict[str, ZoneScore | Reliability | MatchedRecall]]:
    """``{"baseline" | "tool": {"window" | "thin": ZoneScore}, "reliability": {"window" |
    "thin": Reliability}, "matched": {"window" | "thin": MatchedRecall}}`` for a project
    folder that holds ``truth/aquitard_thickness_m.tif`` on its grid (module docstring); the
    reliability tables are those of P(window) and P(thin) on the study-area cells;
    ``matched`` is the best recall any one threshold on P(window) (near a hole proving a
    window, as the zones) or on P(thin) reaches at the baseline's precision
    (:func:`recall_at_precision`).

    Runs the surfaces and the probability stage of the pipeline with the project's own
    settings, or with some replaced: ``overrides`` maps a settings section of the project
    (``"kriging"``, ``"screening"``) to field values, e.g.
    ``{"kriging": {"external_drift": "none"}}``. Writes nothing.
    """
    from aquitardmap.geostat.stage import build_surfaces
    from aquitardmap.inputs.load import load_inputs
    from aquitardmap.screening.stage import (
        aquitard_probabilities,
        borehole_table,
        window_proof_grid,
    )
    from aquitardmap.screening.zones import proving_hole_cells, zone_masks

    inputs = _with_overrides(load_inputs(project_dir), overrides)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        total = build_surfaces(inputs)["aquitard"]
    th = inputs.project.screening
    probs = aquitard_probabilities(inputs, total, {"window": th.window_thickness_m,
                                                   "thin": th.thin_thickness_m})
    truth, *_ = read_raster(inputs.project.root / TRUTH_THICKNESS)
    m = inputs.grid.mask & np.isfinite(truth)
    est = total.thickness_m[m]
    pw, pt = probs.p_below["window"][m], probs.p_below["thin"][m]
    win, thin = truth[m] < th.window_thickness_m, truth[m] < th.thin_thickness_m
    proven = window_proof_grid(inputs)
    holes = borehole_table(inputs)
    window_holes, thin_holes = proving_hole_cells(holes[~holes["excluded"]], inputs.grid)
    zones = zone_masks(total.thickness_m, np.full(m.shape, np.nan), inputs.grid, th,
                       p_window=probs.p_below["window"], p_thin=probs.p_below["thin"],
                       window_proven=proven, window_holes=window_holes,
                       thin_holes=thin_holes, tiers=("likely",))
    baseline = {"window": score_cells(est < th.window_thickness_m, win),
                "thin": score_cells(est < th.thin_thickness_m, thin)}
    return {
        "baseline": baseline,
        "tool": {"window": score_cells(zones["window"][m], win),
                 "thin": score_cells((zones["thin"] | zones["window"])[m], thin)},
        "reliability": {"window": reliability(pw, win), "thin": reliability(pt, thin)},
        "matched": {kind: recall_at_precision(p_rank, truth_below,
                                              baseline[kind].precision)
                    for kind, p_rank, truth_below in (
                        ("window", np.where(proven[m], pw, 0.0), win), ("thin", pt, thin))},
    }


def _with_overrides(inputs, overrides: dict[str, dict[str, object]] | None):
    """``inputs`` with settings sections of its project replaced (see :func:`zone_skill`)."""
    for section, values in (overrides or {}).items():
        p = inputs.project
        inputs.project = replace(p, **{section: replace(getattr(p, section), **values)})
    return inputs


def beats_baseline(skill: dict[str, dict[str, ZoneScore | Reliability]], kind: str,
                   min_recall_gain: float = 0.0) -> bool:
    """Issue 3's rule for ``kind`` (``"window"`` or ``"thin"``): the tool's recall above the
    baseline's by more than ``min_recall_gain`` and its precision not below the baseline's."""
    b, t = skill["baseline"][kind], skill["tool"][kind]
    return t.recall > b.recall + min_recall_gain and t.precision >= b.precision


# --- The textbook alternative: ordinary indicator kriging ---------------------------------

#: The probability from which an indicator-kriging map is read as a zone in
#: :func:`screening_skill` (a common operating point for "thinner than" maps; common
#: practice).
INDICATOR_OPERATING_P = 0.2
#: Fewer positive indicators than this: the indicator variogram is not fitted (fallback of
#: :func:`indicator_variogram`).
MIN_POSITIVE_INDICATORS = 3
#: Range of the fallback indicator variogram, in median nearest-hole spacings.
FALLBACK_RANGE_SPACINGS = 3.0


def thickness_indicators(x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                         status: np.ndarray, threshold_m: float
                         ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(x, y, indicator) of I(total thickness < ``threshold_m``) at the holes that decide it,
    coincident holes merged (their indicators averaged, :func:`kriging.merge_coincident`).

    A hole of status ``"full"`` (through the clay) gives 1 when its thickness is below the
    threshold, else 0; a ``"lower_bound"`` hole (stopped in the clay) gives 0 when its bound
    is at least the threshold and is left out otherwise (the clay may or may not end within
    the threshold); ``"unknown"`` holes and missing thicknesses are left out (indicator
    coding of censored data, Goovaerts 1997, *Geostatistics for Natural Resources
    Evaluation*, ch. 7, from memory). The coding is the product's own
    (:func:`aquitardmap.geostat.indicator.indicator_data`): the baseline differs from the tool in
    its variogram and in having no chains and no hard-data floor, not in what a hole says.
    """
    d = indicator_data(x_m, y_m, thickness_m, status, threshold_m)
    return d.x_m, d.y_m, d.value


def indicator_variogram(x_m: np.ndarray, y_m: np.ndarray, indicators: np.ndarray
                        ) -> VariogramModel:
    """Spherical variogram of indicator data (at distinct locations).

    The experimental variogram of the indicators in the lags of
    :func:`variogram.default_lags`, fitted by :func:`variogram.fit_variogram` (spherical,
    sample variance as the sill's scale). Fallback, when fewer than
    :data:`MIN_POSITIVE_INDICATORS` indicators are positive or the fit fails (it raises,
    gives a non-finite parameter, or the variogram has fewer than 2 lags or no positive
    semivariance): a spherical model without nugget, sill p(1 − p) with p the mean
    indicator, range :data:`FALLBACK_RANGE_SPACINGS` × the median nearest-hole spacing
    (an indicator's variance is p(1 − p); the range a stated screening choice). With
    fewer than 2 data the range is 1 m.
    """
    x, y = np.asarray(x_m, float), np.asarray(y_m, float)
    ind = np.asarray(indicators, float)
    p = float(ind.mean()) if ind.size else 0.0
    if int((ind > 0).sum()) >= MIN_POSITIVE_INDICATORS:
        n_lags, max_lag = default_lags(x, y)
        exp = experimental_variogram(x, y, ind, n_lags=n_lags, max_lag_m=max_lag)
        if exp.lag_m.size >= 2 and np.any(exp.gamma > 0):
            try:
                model = fit_variogram(exp, "spherical", sample_variance=float(ind.var()))
            except (ValueError, np.linalg.LinAlgError):
                model = None
            if model is not None and np.all(np.isfinite(
                    [model.nugget, model.psill, model.range_m])):
                return model
    spacing = 1.0
    if x.size >= 2:
        from scipy.spatial import cKDTree

        d, _ = cKDTree(np.column_stack([x, y])).query(np.column_stack([x, y]), k=2)
        spacing = float(np.median(d[:, 1])) or 1.0
    return VariogramModel("spherical", nugget=0.0, psill=p * (1.0 - p),
                          range_m=FALLBACK_RANGE_SPACINGS * spacing)


def indicator_kriging_probability(x_m: np.ndarray, y_m: np.ndarray, thickness_m: np.ndarray,
                                  status: np.ndarray, grid: Grid, threshold_m: float, *,
                                  max_neighbours: int = 64) -> np.ndarray:
    """P(total thickness < ``threshold_m``) by ordinary indicator kriging, on the cells of
    ``grid`` (NaN outside its mask).

    Indicators from :func:`thickness_indicators`, variogram from
    :func:`indicator_variogram`, estimates by ordinary kriging with the nearest
    ``max_neighbours`` data (:func:`kriging.weights_at`), clipped to [0, 1] — the
    order-relation correction for a single cutoff (Journel 1983, Math. Geol. 15(3):445–468;
    Goovaerts 1997, ch. 7; from memory). Where every indicator is equal the map is that
    value. Holes, not data of the run: hazards and the crust are not applied.

    Raises:
        ValueError: when no hole decides the indicator.
    """
    x, y, ind = thickness_indicators(x_m, y_m, thickness_m, status, threshold_m)
    if ind.size == 0:
        raise ValueError(f"no borehole decides whether the clay is thinner than "
                         f"{threshold_m:g} m")
    out = np.full(grid.mask.shape, np.nan)
    if np.ptp(ind) == 0:
        out[grid.mask] = float(ind[0])
        return out
    model = indicator_variogram(x, y, ind)
    loc = prepare_locations(x, y, model)
    xs, ys = grid.cell_centres()
    rows, cols = np.nonzero(grid.mask)
    est = np.empty(rows.size)
    block = 16384
    for start in range(0, rows.size, block):
        sl = slice(start, start + block)
        w = weights_at(loc, xs[cols[sl]], ys[rows[sl]], max_neighbours=max_neighbours)
        est[sl] = w.apply(ind)
    out[rows, cols] = np.clip(est, 0.0, 1.0)
    return out


# --- Skill of a whole screening run --------------------------------------------------------

#: Ten equal probability bins, the other reliability table :func:`screening_skill` can give.
TEN_BINS = tuple(i / 10 for i in range(11))
#: Zone tiers, strongest first, when a run's zones carry a ``tier``; other tiers follow in
#: alphabetical order.
TIER_ORDER = ("likely", "possible")
#: The zone kinds whose skill is scored.
SCORED_KINDS = ("window", "thin")


@dataclass(frozen=True)
class ProbabilityScore:
    """A grid of P(thinner than a threshold) as a forecast of the truth over the scored
    cells.

    Attributes:
        sum_p: Σ P over the cells: the area (in cells) the probabilities expect to be
            below the threshold.
        truth_cells: cells below the threshold in the truth.
        squared_error_sum: Σ (P − event)² over the cells with a P (event 1 or 0).
        cells: cells with a P.
        reliability: the reliability table (:func:`reliability`).
    """

    sum_p: float
    truth_cells: int
    squared_error_sum: float
    cells: int
    reliability: Reliability

    @property
    def sum_p_over_area(self) -> float:
        """Σ P ÷ the truth's cells below the threshold: 1 when the probabilities expect
        the right area, above 1 when they expect too much (NaN without such cells)."""
        return self.sum_p / self.truth_cells if self.truth_cells else float("nan")

    @property
    def brier(self) -> float:
        """Brier score, the mean of (P − event)² (Brier 1950, Monthly Weather Review
        78:1–3; 0 is a perfect forecast)."""
        return self.squared_error_sum / self.cells if self.cells else float("nan")

    def pooled(self, other: ProbabilityScore) -> ProbabilityScore:
        """This score and ``other`` (same bins) over their cells together."""
        return ProbabilityScore(self.sum_p + other.sum_p, self.truth_cells + other.truth_cells,
                                self.squared_error_sum + other.squared_error_sum,
                                self.cells + other.cells,
                                self.reliability.pooled(other.reliability))


def probability_score(p: np.ndarray, event: np.ndarray,
                      edges: tuple[float, ...] = RELIABILITY_EDGES) -> ProbabilityScore:
    """:class:`ProbabilityScore` of probabilities ``p`` against the boolean truth ``event``
    (same shape; NaN probabilities count as 0 in Σ P and are left out of the rest)."""
    p = np.asarray(p, float).ravel()
    event = np.asarray(event, bool).ravel()
    ok = np.isfinite(p)
    return ProbabilityScore(float(np.nansum(p)), int(event.sum()),
                            float(np.sum((p[ok] - event[ok]) ** 2)), int(ok.sum()),
                            reliability(p, event, edges))


@dataclass(frozen=True)
class ProvingHoles:
    """Boreholes (not excluded) that passed through the aquitard and logged less than
    ``threshold_m`` of it inside the study area, and where the run's zones put them.

    Attributes:
        threshold_m: the thickness they prove the clay thinner than (m).
        borehole_ids: their ids (holes whose cell lies in the study area).
        in_window_zone: how many lie in a cell of a window zone.
        in_any_zone: how many lie in a cell of a window or thin zone.
        p_at_cell: P(thinner than ``threshold_m``) of the run at each one's cell.
        n_outside: such holes whose reported location lies outside the study area (no
            cell to flag; water-well records near the boundary, tens of metres off).
    """

    threshold_m: float
    borehole_ids: tuple[str, ...]
    in_window_zone: int
    in_any_zone: int
    p_at_cell: np.ndarray
    n_outside: int = 0

    @property
    def count(self) -> int:
        """Number of such holes."""
        return len(self.borehole_ids)

    def pooled(self, other: ProvingHoles) -> ProvingHoles:
        """These holes and ``other``'s (of another region) together."""
        return ProvingHoles(self.threshold_m, self.borehole_ids + other.borehole_ids,
                            self.in_window_zone + other.in_window_zone,
                            self.in_any_zone + other.in_any_zone,
                            np.concatenate([self.p_at_cell, other.p_at_cell]),
                            self.n_outside + other.n_outside)


@dataclass(frozen=True)
class ScreeningSkill:
    """Skill of one screening run (or of several pooled) against the truth.

    Attributes:
        cells: study-area cells scored (those with a truth).
        window_thickness_m, thin_thickness_m: the run's thresholds (m).
        zones: ``"window"``: window zones against truth below the window thickness;
            ``"thin"``: window or thin zones against truth below the thin thickness.
        tiers: ``{label: {"window" | "thin": ZoneScore}}``, the zones of the strongest
            tiers up to each one (labels ``"likely"``, ``"likely+possible"``) scored as
            ``zones``; empty when the run's zones carry no tier.
        probability: ``"window"``: P(window) against truth below the window thickness;
            ``"thin"``: P(thin) against truth below the thin thickness.
        proving: ``"window"``: holes proving a window (P at their cell: P(window));
            ``"thin"``: holes proving thin clay (P(thin)).
        indicator: the indicator-kriging zone P(thin) ≥ :data:`INDICATOR_OPERATING_P`
            against truth below the thin thickness.
        at_indicator_precision: the best recall one threshold on the run's P(thin) reaches
            at the indicator zone's precision (:func:`recall_at_precision`; pooled: the
            regions' best zones counted together, threshold NaN).
        at_indicator_precision_zone: the cells of that best zone, scored.
        mask_source: ``"zone_masks"`` when the zone cells came from
            :func:`aquitardmap.screening.zones.zone_masks` (equal to the drawn zones),
            ``"rasterised zones"`` when the two differed and the drawn polygons were used.
        regions: number of regions counted.
    """

    cells: int
    window_thickness_m: float
    thin_thickness_m: float
    zones: dict[str, ZoneScore]
    tiers: dict[str, dict[str, ZoneScore]]
    probability: dict[str, ProbabilityScore]
    proving: dict[str, ProvingHoles]
    indicator: ZoneScore
    at_indicator_precision: MatchedRecall
    at_indicator_precision_zone: ZoneScore
    mask_source: str
    regions: int = 1

    def pooled(self, other: ScreeningSkill) -> ScreeningSkill:
        """This skill and ``other``'s (another region, same thresholds) over their cells
        together: every score counts cells, not a mean of ratios. Tiers present in only
        one of them are dropped."""
        indicator = pooled_score([self.indicator, other.indicator])
        best = pooled_score([self.at_indicator_precision_zone,
                             other.at_indicator_precision_zone])
        return ScreeningSkill(
            cells=self.cells + other.cells,
            window_thickness_m=self.window_thickness_m,
            thin_thickness_m=self.thin_thickness_m,
            zones={k: pooled_score([self.zones[k], other.zones[k]]) for k in self.zones},
            tiers={t: {k: pooled_score([v[k], other.tiers[t][k]]) for k in v}
                   for t, v in self.tiers.items() if t in other.tiers},
            probability={k: v.pooled(other.probability[k])
                         for k, v in self.probability.items()},
            proving={k: v.pooled(other.proving[k]) for k, v in self.proving.items()},
            indicator=indicator,
            at_indicator_precision=MatchedRecall(best.recall, best.precision, float("nan"),
                                                 indicator.precision),
            at_indicator_precision_zone=best,
            mask_source=(self.mask_source if self.mask_source == other.mask_source
                         else "mixed"),
            regions=self.regions + other.regions)


def pooled_skill(skills: list[ScreeningSkill]) -> ScreeningSkill:
    """Every region's :class:`ScreeningSkill` counted together (:meth:`ScreeningSkill.pooled`).

    Raises:
        ValueError: for an empty list.
    """
    if not skills:
        raise ValueError("no skill to pool")
    out = skills[0]
    for s in skills[1:]:
        out = out.pooled(s)
    return out


def screening_skill(project_dir: str | Path, *,
                    overrides: dict[str, dict[str, object]] | None = None,
                    reliability_edges: tuple[float, ...] = RELIABILITY_EDGES
                    ) -> ScreeningSkill:
    """:class:`ScreeningSkill` of the screening run of a project folder that holds
    ``truth/aquitard_thickness_m.tif`` on its grid.

    Runs the pipeline's stages as ``run`` does — :func:`~aquitardmap.inputs.load.load_inputs`,
    ``build_surfaces``, ``compute_hydraulics``, ``thickness_probability_grids``, ``screen``
    — with the project's settings, or with some replaced (``overrides`` as in
    :func:`zone_skill`), and scores the zones it draws, its P(window) and P(thin) grids,
    and the holes that prove a window or thin clay; beside them, ordinary indicator
    kriging of I(T < thin thickness) on the same holes (:func:`indicator_kriging_probability`
    with the project's ``max_neighbours``) read at P ≥ :data:`INDICATOR_OPERATING_P`.
    Cells are those of the study area with a truth. ``reliability_edges``: bins of the
    reliability tables (e.g. :data:`TEN_BINS`). Writes nothing.

    Raises:
        ValueError: when the truth raster is not on the project's grid.
    """
    from aquitardmap.geostat.stage import build_surfaces
    from aquitardmap.hydraulics.stage import compute_hydraulics
    from aquitardmap.inputs.load import load_inputs
    from aquitardmap.screening.stage import (
        borehole_table,
        proves_thinner_than,
        screen,
        thickness_probability_grids,
    )

    inputs = _with_overrides(load_inputs(project_dir), overrides)
    th = inputs.project.screening
    grid = inputs.grid
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        surfaces = build_surfaces(inputs)
        hyd = compute_hydraulics(inputs, surfaces)
        boreholes = borehole_table(inputs, surfaces)
        probs = thickness_probability_grids(inputs, surfaces, hyd)
        _, zones = screen(inputs, surfaces, hyd, boreholes,
                          probabilities=probs if th.zone_basis == "probability" else None)
    masks, source = _run_zone_masks(inputs, surfaces, hyd, probs, zones)
    truth_path = inputs.project.root / TRUTH_THICKNESS
    truth, *_ = read_raster(truth_path)
    if truth.shape != grid.mask.shape:
        raise ValueError(f"{truth_path}: the truth raster is {truth.shape[0]} × "
                         f"{truth.shape[1]} cells, the project's grid {grid.height} × "
                         f"{grid.width}: it must be on the project's grid")
    m = grid.mask & np.isfinite(truth)
    below = {"window": truth[m] < th.window_thickness_m, "thin": truth[m] < th.thin_thickness_m}
    p_grid = {k: probs.p_below[k] for k in SCORED_KINDS}

    used = inputs.columns[~inputs.columns["excluded"]]
    ik = indicator_kriging_probability(
        used["x"].to_numpy(float), used["y"].to_numpy(float),
        used["aquitard_thickness_m"].to_numpy(float), used["status_aquitard"].to_numpy(),
        grid, th.thin_thickness_m, max_neighbours=inputs.project.kriging.max_neighbours)
    indicator = score_cells(np.nan_to_num(ik[m]) >= INDICATOR_OPERATING_P, below["thin"])
    pt = p_grid["thin"][m]
    best = recall_at_precision(pt, below["thin"], indicator.precision)
    best_zone = score_cells(np.nan_to_num(pt) >= best.p_threshold if np.isfinite(
        best.p_threshold) else np.zeros(pt.shape, bool), below["thin"])

    any_zone = masks["window"] | masks["thin"]
    proving = {}
    for kind, thr in (("window", th.window_thickness_m), ("thin", th.thin_thickness_m)):
        holes = used[proves_thinner_than(used, thr)]
        row, col = grid.rowcol(holes["x"].to_numpy(float), holes["y"].to_numpy(float))
        r, c = np.maximum(row, 0), np.maximum(col, 0)
        inside = (row >= 0) & grid.mask[r, c]
        r, c = r[inside], c[inside]
        proving[kind] = ProvingHoles(
            thr, tuple(str(i) for i in holes.index[inside]),
            int(masks["window"][r, c].sum()), int(any_zone[r, c].sum()),
            p_grid[kind][r, c], int((~inside).sum()))

    return ScreeningSkill(
        cells=int(m.sum()),
        window_thickness_m=th.window_thickness_m, thin_thickness_m=th.thin_thickness_m,
        zones={"window": score_cells(masks["window"][m], below["window"]),
               "thin": score_cells(any_zone[m], below["thin"])},
        tiers={label: {"window": score_cells(w[m], below["window"]),
                       "thin": score_cells(u[m], below["thin"])}
               for label, (w, u) in _cumulative_tiers(zones, masks, grid).items()},
        probability={k: probability_score(p_grid[k][m], below[k], reliability_edges)
                     for k in SCORED_KINDS},
        proving=proving, indicator=indicator, at_indicator_precision=best,
        at_indicator_precision_zone=best_zone, mask_source=source)


def _rasterised(zones, grid: Grid) -> np.ndarray:
    """Cells of ``grid``'s study area whose centre lies in one of the ``zones`` polygons
    (the cells they were drawn from: their edges are cell edges)."""
    from rasterio.features import rasterize

    if len(zones) == 0:
        return np.zeros(grid.mask.shape, bool)
    burnt = rasterize(((g, 1) for g in zones.geometry), out_shape=grid.mask.shape,
                      transform=grid.transform, fill=0, dtype="uint8")
    return burnt.astype(bool) & grid.mask


def _run_zone_masks(inputs, surfaces, hyd, probs, zones) -> tuple[dict[str, np.ndarray], str]:
    """Window and thin cells of the run: :func:`aquitardmap.screening.zones.zone_masks` from the
    grids ``screen`` draws its zones from, checked against the drawn polygons; where the
    two differ (``screen`` changed how it draws), the drawn polygons rasterised."""
    from aquitardmap.hydraulics.stage import screened_thickness_m
    from aquitardmap.screening.stage import window_proof_grid
    from aquitardmap.screening.zones import zone_masks

    total = surfaces["aquitard"]
    thickness = screened_thickness_m(total, hyd)
    masks = zone_masks(thickness, hyd.travel_time_yr, inputs.grid, inputs.project.screening,
                       p_window=probs.p_below["window"], p_thin=probs.p_below["thin"],
                       window_proven=window_proof_grid(inputs, hyd),
                       piercing_density_per_km2=hyd.piercing_density_per_km2)
    drawn = {k: _rasterised(zones[zones["kind"] == k], inputs.grid) for k in SCORED_KINDS}
    if all(np.array_equal(masks[k], drawn[k]) for k in SCORED_KINDS):
        return masks, "zone_masks"
    return drawn, "rasterised zones"


def _cumulative_tiers(zones, masks: dict[str, np.ndarray], grid: Grid
                      ) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """``{label: (window cells, window-or-thin cells)}`` of the strongest tiers up to each
    one (:data:`TIER_ORDER`), from the zones' ``tier`` column, else from masks named
    ``"<kind>_<tier>"``; empty when the run has no tiers."""
    by_tier: dict[str, dict[str, np.ndarray]] = {}
    if "tier" in zones.columns:
        tiers = zones["tier"].astype("string")
        for tier in tiers.dropna().unique():
            sel = zones[tiers == tier]
            by_tier[str(tier)] = {k: _rasterised(sel[sel["kind"] == k], grid)
                                  for k in SCORED_KINDS}
    else:
        for key, cells in masks.items():
            kind, _, tier = key.partition("_")
            if kind in SCORED_KINDS and tier:
                by_tier.setdefault(tier, {k: np.zeros(grid.mask.shape, bool)
                                          for k in SCORED_KINDS})[kind] = cells
    order = [t for t in TIER_ORDER if t in by_tier] + sorted(set(by_tier) - set(TIER_ORDER))
    out = {}
    window = np.zeros(grid.mask.shape, bool)
    union = np.zeros(grid.mask.shape, bool)
    for i, tier in enumerate(order):
        window = window | by_tier[tier]["window"]
        union = union | by_tier[tier]["window"] | by_tier[tier]["thin"]
        out["+".join(order[:i + 1])] = (window, union)
    return out
