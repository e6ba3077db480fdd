"""How well the probabilities held up at the holes: the block cross-validation of
P(window) and P(thin) read back from the run's summary, with its scores, reliability table
and plain words (the same in the report and on the map).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from aquitardmap.outputs.formatting import (
    finite_float,
    fmt_percent,
    fmt_sig,
    fmt_threshold,
    section,
)

#: Heading of the calibration check of the probabilities (report and map alike).
CALIBRATION_HEADING = "How well the probabilities held up at the holes"
#: The events the calibration check scores, in order, with plain words.
CALIBRATION_EVENTS = (("window", "P(window)"), ("thin", "P(thin)"))
#: Shown for an empty bin of a reliability table.
EMPTY_BIN = "–"


@dataclass(frozen=True)
class ReliabilityBin:
    """One bin of a reliability table read back from the summary (None where empty)."""

    p_from: float
    p_to: float
    n: int
    mean_p: float | None
    observed: float | None

    @property
    def label(self) -> str:
        """The bin's range of chances, e.g. ``"10–30 %"``."""
        return f"{100 * self.p_from:.0f}–{100 * self.p_to:.0f} %"


@dataclass(frozen=True)
class CalibrationCheck:
    """Block cross-validation of one probability at the holes, read back from
    ``summary["probability"]["cross_validation"][event]`` (None where missing)."""

    event: str
    label: str
    threshold_m: float | None
    block_m: float | None
    n_blocks: int | None
    n_holes: int | None
    n_event: int | None
    brier: float | None
    brier_reference: float | None
    skill_score: float | None
    bins: tuple[ReliabilityBin, ...]


def _count(value: Any) -> int | None:
    v = finite_float(value)
    return None if v is None else int(v)


def calibration_checks(summary: dict[str, Any]) -> list[CalibrationCheck]:
    """The calibration checks of the run, P(window) then P(thin); [] when the summary has
    none (the latent Gaussian method, or a run from before the check)."""
    cv = section(section(summary, "probability"), "cross_validation")
    out = []
    for event, label in CALIBRATION_EVENTS:
        c = section(cv, event)
        if not c:
            continue
        bins = []
        for b in c.get("reliability") or []:
            if not isinstance(b, dict):
                continue
            lo, hi = finite_float(b.get("p_from")), finite_float(b.get("p_to"))
            if lo is None or hi is None:
                continue
            n = _count(b.get("n")) or 0
            bins.append(ReliabilityBin(lo, hi, n,
                                       finite_float(b.get("mean_p")) if n else None,
                                       finite_float(b.get("observed")) if n else None))
        out.append(CalibrationCheck(
            event, label, finite_float(c.get("threshold_m")), finite_float(c.get("block_m")),
            _count(c.get("n_blocks")), _count(c.get("n_holes")), _count(c.get("n_event")),
            finite_float(c.get("brier")), finite_float(c.get("brier_reference")),
            finite_float(c.get("brier_skill_score")), tuple(bins)))
    return out


def fmt_brier(value: float | None) -> str:
    """A Brier score (or skill score) to four decimals, as summary.json stores it."""
    return "n/a" if value is None else f"{value:.4f}"


def fmt_bin_share(value: float | None) -> str:
    """A mean chance or observed share of a reliability bin; :data:`EMPTY_BIN` when the bin
    is empty."""
    return EMPTY_BIN if value is None else fmt_percent(value)


def reliability_table(checks: list[CalibrationCheck]) -> list[list[str]]:
    """The reliability tables of ``checks`` side by side, one row a bin of chances: its
    label, then for each check the holes given a chance in the bin, their mean chance and
    the share that showed the event (:data:`EMPTY_BIN` three times where a check has no
    such bin). Bins in the order the checks list them; [] when no check has a bin."""
    labels: list[str] = []
    for c in checks:
        labels += [b.label for b in c.bins if b.label not in labels]
    rows = []
    for label in labels:
        row = [label]
        for c in checks:
            b = next((b for b in c.bins if b.label == label), None)
            row += ([EMPTY_BIN] * 3 if b is None else
                    [str(b.n), fmt_bin_share(b.mean_p), fmt_bin_share(b.observed)])
        rows.append(row)
    return rows


def _event_words(check: CalibrationCheck) -> str:
    if check.threshold_m is None:
        return "the clay was " + ("absent" if check.event == "window" else "thin")
    t = f" {fmt_threshold(check.threshold_m)} m"
    if check.event == "window":
        return f"the clay was absent (under{t})"
    return f"the clay was thinner than{t}"


def calibration_reading(summary: dict[str, Any]) -> str:
    """How to read the calibration check, in plain words, with an example from the run's own
    reliability table ("" without a check)."""
    checks = calibration_checks(summary)
    if not checks:
        return ""
    block = next((c.block_m for c in checks if c.block_m is not None), None)
    size = f" of {fmt_sig(block, 3)} m" if block is not None else ""
    text = (f"The study area is cut into square blocks{size}; each block's holes are held out "
            "together and their chances predicted from the holes outside it, then compared "
            "with what the holes logged. Brier score: the mean of (chance − outcome)², 0 is "
            "perfect (Brier 1950); the constant share is the score of giving every hole the "
            "share of holes that show it; skill = 1 − Brier / constant share (above 0: better "
            "than the constant share). Reliability: a map means what it says when, in each "
            "bin, the observed share is close to the mean chance.")
    example = None
    for check in sorted(checks, key=lambda c: c.event != "thin"):
        filled = [b for b in check.bins if b.n and b.mean_p is not None
                  and b.observed is not None and b.mean_p >= 0.1]
        if filled:
            example = (check, max(filled, key=lambda b: b.n))
            break
    if example is not None:
        check, b = example
        text += (f" For example, in the {b.n} holes given about {fmt_percent(b.mean_p)} for "
                 f"{check.label}, {_event_words(check)} in {fmt_percent(b.observed)}.")
    return text + (" Block cross-validation is a pessimistic check: each hole is predicted "
                   "without its neighbours, whereas the maps use every hole.")



__all__ = ["CALIBRATION_EVENTS", "CALIBRATION_HEADING", "EMPTY_BIN", "CalibrationCheck",
           "ReliabilityBin", "calibration_checks", "calibration_reading", "fmt_bin_share",
           "fmt_brier", "reliability_table"]
