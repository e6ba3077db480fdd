"""Calibration a user can check on their own data: spatial cross-validation of the
probabilities at the boreholes.

A probability map is *reliable* when, among the places it gives about 30 %, the event
happens about 30 % of the time (Murphy & Winkler 1977, Applied Statistics 26(1):41–47,
from memory). Without a known truth the holes are the only check. Each hole is predicted
from the others, but not from its neighbours: the study area is cut into square blocks
(``block_m`` on a side, a few hole spacings), and every block's holes are held out
together and predicted from the holes outside it (spatial, or blocked, cross-validation:
Roberts et al. 2017, Ecography 40(8):913–929, from memory). Leaving out single holes would
let a close neighbour predict each one, which flatters a map whose cells are mostly far from
any hole.

Scores: the Brier score, the mean of ``(p − o)²`` over the held-out holes with ``o`` 1 for
the event and 0 otherwise (Brier 1950, Monthly Weather Review 78(1):1–3), beside the score
of the constant forecast "the share of holes that show the event" (the climatological
reference, Wilks 2011, *Statistical Methods in the Atmospheric Sciences*, 3rd ed., ch. 8,
from memory); and the reliability table of the held-out probabilities.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

#: Probability bins of the reliability tables.
RELIABILITY_EDGES = (0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0)


@dataclass(frozen=True)
class Reliability:
    """How often the event happened among the items of each probability bin: the
    reliability table of a probability forecast (a forecast is reliable when, in each bin,
    the observed frequency matches the mean forecast probability; Murphy & Winkler 1977,
    from memory).

    Attributes:
        edges: bin edges (the last bin includes 1).
        cells: number of items (cells or holes) in each bin.
        mean_p: mean forecast probability in each bin (NaN for an empty bin).
        observed: share of the bin's items where the event is true (NaN for an empty bin).
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

    def as_rows(self) -> list[dict[str, float | int | None]]:
        """One dict per bin (``p_from``, ``p_to``, ``n``, ``mean_p``, ``observed``), JSON
        ready (None for an empty bin's means)."""
        def num(v: float) -> float | None:
            return None if not np.isfinite(v) else round(float(v), 4)

        return [{"p_from": lo, "p_to": hi, "n": int(n), "mean_p": num(mp), "observed": num(ob)}
                for lo, hi, n, mp, ob in zip(self.edges[:-1], self.edges[1:], self.cells,
                                             self.mean_p, self.observed, strict=True)]


def reliability(p: np.ndarray, event: np.ndarray,
                edges: tuple[float, ...] = RELIABILITY_EDGES) -> Reliability:
    """Reliability table of probabilities ``p`` against the boolean ``event`` (same shape;
    NaN probabilities are left out)."""
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


def brier_score(p: np.ndarray, event: np.ndarray) -> float:
    """Mean of ``(p − o)²`` (Brier 1950); NaN with no item."""
    p = np.asarray(p, float).ravel()
    o = np.asarray(event, bool).ravel().astype(float)
    ok = np.isfinite(p)
    return float(np.mean((p[ok] - o[ok]) ** 2)) if ok.any() else float("nan")


def block_labels(x_m: np.ndarray, y_m: np.ndarray, block_m: float) -> np.ndarray:
    """Label of the square block (side ``block_m``, aligned on the data's lower-left
    corner) that holds each point."""
    x, y = np.asarray(x_m, float), np.asarray(y_m, float)
    if x.size == 0:
        return np.empty(0, dtype=int)
    i = np.floor((x - x.min()) / block_m).astype(np.int64)
    j = np.floor((y - y.min()) / block_m).astype(np.int64)
    _, lab = np.unique(i * (j.max() + 1) + j, return_inverse=True)
    return lab.ravel()


@dataclass(frozen=True)
class BlockCrossValidation:
    """Held-out probabilities at the holes and their scores, per event.

    Attributes:
        name: the event (``"window"``, ``"thin"``).
        threshold_m: its thickness threshold (m).
        block_m: side of the held-out blocks (m).
        n_blocks: blocks, held out fold by fold.
        p: held-out probability per scored hole.
        event: whether the hole shows the event.
        brier: Brier score of ``p``.
        brier_reference: Brier score of the constant share of holes showing the event.
        table: reliability table of ``p``.
    """

    name: str
    threshold_m: float
    block_m: float
    n_blocks: int
    p: np.ndarray
    event: np.ndarray
    brier: float
    brier_reference: float
    table: Reliability

    @property
    def skill_score(self) -> float:
        """Brier skill score ``1 − brier / brier_reference`` (0 no better than the constant
        share; 1 perfect); NaN when the reference is 0."""
        if not self.brier_reference > 0:
            return float("nan")
        return 1.0 - self.brier / self.brier_reference

    def as_dict(self) -> dict[str, object]:
        def num(v: float) -> float | None:
            return None if not np.isfinite(v) else round(float(v), 4)

        return {"threshold_m": self.threshold_m, "block_m": round(self.block_m, 1),
                "n_blocks": self.n_blocks, "n_holes": int(self.p.size),
                "n_event": int(self.event.sum()),
                "mean_p": num(float(self.p.mean()) if self.p.size else float("nan")),
                "brier": num(self.brier), "brier_reference": num(self.brier_reference),
                "brier_skill_score": num(self.skill_score),
                "reliability": self.table.as_rows()}


#: ``predict(train, test) -> {name: p at the test holes}`` with boolean masks of the holes.
Predictor = Callable[[np.ndarray, np.ndarray], dict[str, np.ndarray]]


def block_cross_validation(x_m: np.ndarray, y_m: np.ndarray,
                           events: dict[str, tuple[float, np.ndarray, np.ndarray]],
                           predict: Predictor, block_m: float, *, n_folds: int = 10
                           ) -> dict[str, BlockCrossValidation]:
    """Spatial cross-validation of probabilities at the holes (module docstring).

    Args:
        x_m, y_m: hole locations (m).
        events: ``{name: (threshold_m, scored, event)}``: which holes can be scored for the
            event (their indicator is known) and whether each shows it (boolean arrays
            over all holes).
        predict: gives, from the holes of the ``train`` mask, the probabilities at the
            holes of the ``test`` mask, for every event name.
        block_m: side of the held-out blocks (m).
        n_folds: the blocks are dealt at random (seed 0) into this many folds, and each
            fold's blocks are held out together: the cost is ``n_folds`` predictions
            whatever the number of holes.
    """
    labels = block_labels(x_m, y_m, block_m)
    n = labels.size
    held = {name: np.full(n, np.nan) for name in events}
    blocks = np.unique(labels)
    # blocks dealt into at most n_folds folds, at random but reproducibly (blocked k-fold)
    fold_of_block = np.random.default_rng(0).permutation(blocks.size) % max(1, n_folds)
    folds = fold_of_block[np.searchsorted(blocks, labels)]
    for b in np.unique(folds):
        test = folds == b
        train = ~test
        if not train.any():
            continue
        got = predict(train, test)
        for name in events:
            held[name][test] = got[name]
    out = {}
    for name, (threshold, scored, event) in events.items():
        ok = np.asarray(scored, bool) & np.isfinite(held[name])
        p, ev = held[name][ok], np.asarray(event, bool)[ok]
        share = float(ev.mean()) if ev.size else float("nan")
        out[name] = BlockCrossValidation(name, float(threshold), float(block_m),
                                         int(blocks.size), p, ev, brier_score(p, ev),
                                         brier_score(np.full(ev.size, share), ev),
                                         reliability(p, ev))
    return out
