"""Skill of the window and thin zones against a known truth (synthetic regions).

The question a reviewer asks of the probability zones: do they find more of the windows and
the thin clay than the plain alternative, without flagging more clay that is really there?
This module answers it on a project that carries its truth (``truth/aquitard_thickness_m.tif``,
written by :func:`aquitardmap.synthetic.make_synthetic_region`).

Baseline (issue 3): the kriged total thickness (ordinary kriging) thresholded at the window
and thin thicknesses. Tool: the likely tier of the window and thin zones the run draws
(:func:`aquitardmap.screening.zone_masks`: cells where P(thinner than the threshold)
reaches the configured likely threshold, windows only near a hole that proves one, and the
cells holding a hole that proves a window or thin clay);
hazards and the crust are left out (the truth is the thickness of the clay as laid down);
the thin zones include the window zones. Scores, cell by cell on the study area: *area
recall* (share of the truth's cells below the threshold that are flagged) and *area
precision* (share of the flagged cells that are below it in the truth). Windows are
scored against truth below the window thickness, thin zones against truth below the thin
thickness.

Example::

    >>> from aquitardmap.skill import zone_skill
    >>> s = zone_skill("demo_region")                       # doctest: +SKIP
    >>> s["tool"]["window"].recall > s["baseline"]["window"].recall  # doctest: +SKIP
    True
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from aquitardmap.grid import read_raster

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


#: Probability bins of the reliability table.
RELIABILITY_EDGES = (0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0)


@dataclass(frozen=True)
class Reliability:
    """How often the event happened in the truth among cells of each probability bin: the
    reliability table of a probability forecast (a forecast is reliable when, in each bin,
    the observed frequency matches the mean forecast probability; Murphy & Winkler 1977,
    Applied Statistics 26:41–47, from memory).

    Attributes:
        edges: bin edges (the last bin includes 1).
        cells: number of cells in each bin.
        mean_p: mean forecast probability in each bin (NaN for an empty bin).
        observed: share of the bin's cells where the event is true in the truth (NaN for
            an empty bin).
    """

    edges: tuple[float, ...]
    cells: np.ndarray
    mean_p: np.ndarray
    observed: np.ndarray

    def pooled(self, other: Reliability) -> Reliability:
        """This table and ``other`` (same edges) counted together."""
        n = self.cells + other.cells
        with np.errstate(invalid="ignore"):
            mp = (np.nan_to_num(self.mean_p) * self.cells
                  + np.nan_to_num(other.mean_p) * other.cells) / n
            ob = (np.nan_to_num(self.observed) * self.cells
                  + np.nan_to_num(other.observed) * other.cells) / n
        return Reliability(self.edges, n, mp, ob)


def reliability(p: np.ndarray, event: np.ndarray,
                edges: tuple[float, ...] = RELIABILITY_EDGES) -> Reliability:
    """Reliability table of probabilities ``p`` against the boolean truth ``event`` (same
    shape; NaN probabilities are left out)."""
    p = np.asarray(p, float).ravel()
    event = np.asarray(event, bool).ravel()
    ok = np.isfinite(p)
    p, event = p[ok], event[ok]
    b = np.clip(np.searchsorted(np.asarray(edges), p, side="right") - 1, 0, len(edges) - 2)
    n = np.bincount(b, minlength=len(edges) - 1).astype(float)
    with np.errstate(invalid="ignore"):
        mean_p = np.bincount(b, p, minlength=len(edges) - 1) / n
        observed = np.bincount(b, event.astype(float), minlength=len(edges) - 1) / n
    return Reliability(tuple(edges), n.astype(int), mean_p, observed)


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
    from aquitardmap.pipeline import (
        aquitard_probabilities,
        borehole_table,
        build_surfaces,
        load_inputs,
        window_proof_grid,
    )
    from aquitardmap.screening import proving_hole_cells, zone_masks

    inputs = load_inputs(project_dir)
    for section, values in (overrides or {}).items():
        p = inputs.project
        inputs.project = replace(p, **{section: replace(getattr(p, section), **values)})
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


def beats_baseline(skill: dict[str, dict[str, ZoneScore | Reliability]], kind: str,
                   min_recall_gain: float = 0.0) -> bool:
    """Issue 3's rule for ``kind`` (``"window"`` or ``"thin"``): the tool's recall above the
    baseline's by more than ``min_recall_gain`` and its precision not below the baseline's."""
    b, t = skill["baseline"][kind], skill["tool"][kind]
    return t.recall > b.recall + min_recall_gain and t.precision >= b.precision
