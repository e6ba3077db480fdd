"""Variogram reuse between runs: keep the last run's model while a fresh fit agrees with it.

Why. Every run fits each surface's variogram to the experimental variogram of its holes.
After a few holes are added the fit moves a little (least squares on slightly different lag
classes), and with a new model every kriging system changes: every cell of every grid
moves a little for no reason but the refit, the tile cache (:mod:`aquitardmap.geostat.cache.tiles`,
keyed by the model) can reuse nothing, and a planner comparing two runs sees change
everywhere instead of around the new holes.

Policy, per kriged surface (``"aquitard"`` and each unit code):

1. A manual ``[variograms.<surface>]`` of ``project.toml`` is used as given; it is never
   kept nor compared.
2. A fallback model (too few holes to fit one, or all holes equal;
   :func:`aquitardmap.geostat.surfaces.choose_variogram`) is used as chosen and not kept.
3. Otherwise the variogram is fitted afresh and compared with the model the previous
   successful run used for that surface (kept in ``variograms.json`` beside the tile cache).
   The kept model is **reused** when both have the same structure families and every
   relative difference of :func:`model_difference` — nugget and partial sills against the
   kept total sill, total sill, ranges, anisotropy ratio — is below ``[kriging]
   reuse_variogram_within`` (default 0.1), and, when either model is anisotropic (ratio
   above ``1 + within``), the major axes differ by at most ``reuse_variogram_angle_deg``
   (default 10°). Otherwise the fresh fit is used, and kept for the next run.
4. ``aquitardmap run --refit-variograms`` (``run(..., refit_variograms=True)``), or
   ``reuse_variogram_within = 0``, always use the fresh fit.

What this guarantees: the model a run uses is always within the tolerance of a fit to the
data of that run — the comparison is with this run's fit, never with an older kept model
only, so small moves cannot add up from run to run unnoticed. Kriging estimates do not
depend on the level of the sill at all (ordinary kriging weights are unchanged when the
variogram is multiplied by a constant; Isaaks & Srivastava 1989, ch. 12) but only on its
shape (nugget share, ranges, anisotropy); the kriging variance scales with the sill, and
the probability stage re-levels it by cross-validation (:func:`aquitardmap.geostat.probability.
cv_variance_scale`) with the very model the grid used. The default tolerance is a screening
choice of ours (a least-squares fit of a variogram to a few hundred holes is rarely
determined better than that), not a published rule. The leave-one-out cross-validation and
the probability stage use the same model as the grid, reused or not, because they take it
from the surface.

``summary.json`` records, for every surface, the decision (``reused``, ``refit``,
``manual``, ``fallback``), its reason in words, both models and their differences.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field, fields
from datetime import UTC, datetime
from pathlib import Path

from aquitardmap.files import remove_leftovers, write_text_atomically
from aquitardmap.geostat.variogram import VariogramModel

#: File of the kept models, beside the tile cache folder.
KEPT_FILE = "variograms.json"
#: Version of its format.
KEPT_FORMAT = "kept-variograms-v1"
#: Default of ``[kriging] reuse_variogram_within`` (relative).
DEFAULT_WITHIN = 0.1
#: Default of ``[kriging] reuse_variogram_angle_deg`` (degrees).
DEFAULT_ANGLE_DEG = 10.0

def _relative(new: float, old: float, scale: float) -> float:
    """|new − old| / scale (0 when both are equal, infinite when the scale is 0)."""
    if new == old:
        return 0.0
    return abs(new - old) / scale if scale > 0 else math.inf


def _angle_difference_deg(a_deg: float, b_deg: float) -> float:
    """Difference of two axis directions (degrees, modulo 180°), 0 to 90."""
    d = abs(a_deg - b_deg) % 180.0
    return min(d, 180.0 - d)


def model_difference(kept: VariogramModel, fresh: VariogramModel) -> dict[str, float] | None:
    """Relative differences of a fresh fit from a kept model; None when their structure
    families differ (nothing to compare).

    Keys: ``nugget`` (|Δ nugget| / kept total sill), ``psill`` and ``psill2`` (|Δ partial
    sill| / kept total sill), ``sill`` (|Δ total sill| / kept total sill), ``range`` and
    ``range2`` (|Δ practical range| / kept range), ``anisotropy_ratio`` (|Δ ratio| / kept
    ratio), and ``anisotropy_angle_deg``: the difference of the major axes in degrees
    (0 to 90), not relative.
    """
    if kept.model != fresh.model or kept.model2 != fresh.model2:
        return None
    sill = kept.sill
    out = {
        "nugget": _relative(fresh.nugget, kept.nugget, sill),
        "psill": _relative(fresh.psill, kept.psill, sill),
        "sill": _relative(fresh.sill, sill, sill),
        "range": _relative(fresh.range_m, kept.range_m, kept.range_m),
        "anisotropy_ratio": _relative(fresh.anisotropy_ratio, kept.anisotropy_ratio,
                                      kept.anisotropy_ratio),
        "anisotropy_angle_deg": _angle_difference_deg(fresh.anisotropy_angle_deg,
                                                      kept.anisotropy_angle_deg),
    }
    if kept.model2:
        out["psill2"] = _relative(fresh.psill2, kept.psill2, sill)
        out["range2"] = _relative(fresh.range2_m, kept.range2_m, kept.range2_m)
    return out


def largest_relative(diff: dict[str, float]) -> float:
    """The largest relative difference of :func:`model_difference` (angle left out)."""
    return max(v for k, v in diff.items() if k != "anisotropy_angle_deg")


@dataclass(frozen=True)
class ReuseDecision:
    """Which model a surface used, and why.

    Attributes:
        surface: ``"aquitard"`` or a unit code.
        decision: ``"reused"`` (the kept model), ``"refit"`` (this run's fit),
            ``"manual"`` (``[variograms.<surface>]``) or ``"fallback"`` (too few holes or
            all equal: :func:`aquitardmap.geostat.surfaces.choose_variogram`).
        reason: the decision in plain words.
        used: the model the surface was kriged with.
        refit: this run's fit (None for manual and fallback models).
        kept: the model kept from the previous run (None when there was none).
        difference: :func:`model_difference` of ``refit`` from ``kept`` (None when either is
            missing or their families differ).
    """

    surface: str
    decision: str
    reason: str
    used: VariogramModel
    refit: VariogramModel | None = None
    kept: VariogramModel | None = None
    difference: dict[str, float] | None = None

    def as_dict(self) -> dict[str, object]:
        return {"decision": self.decision, "reason": self.reason,
                "used": self.used.as_dict(),
                "refit": self.refit.as_dict() if self.refit is not None else None,
                "kept": self.kept.as_dict() if self.kept is not None else None,
                "difference": self.difference,
                "largest_relative_difference": (largest_relative(self.difference)
                                                if self.difference else None)}


def _model_from(d: object) -> VariogramModel | None:
    """A model from its ``as_dict`` form, None when it is not one."""
    if not isinstance(d, dict):
        return None
    names = {f.name for f in fields(VariogramModel)}
    try:
        m = VariogramModel(**{k: v for k, v in d.items() if k in names})
        values = (m.nugget, m.psill, m.range_m, m.anisotropy_ratio, m.anisotropy_angle_deg,
                  m.psill2, m.range2_m)
        if not all(isinstance(v, int | float) and math.isfinite(v) for v in values):
            return None
    except TypeError:
        return None
    return m


def read_kept(path: str | Path) -> dict[str, VariogramModel]:
    """Models kept by the last successful run, by surface; empty when the file is missing,
    unreadable or of another format (the run then fits afresh)."""
    try:
        doc = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    if not isinstance(doc, dict) or doc.get("format") != KEPT_FORMAT:
        return {}
    out = {}
    for name, rec in (doc.get("surfaces") or {}).items():
        m = _model_from(rec.get("model") if isinstance(rec, dict) else None)
        if m is not None:
            out[str(name)] = m
    return out


@dataclass
class VariogramBook:
    """The kept models of a project and the decisions of one run (module docstring).

    Attributes:
        path: the ``variograms.json`` file; None without a project cache (every surface is
            then fitted afresh and nothing is kept).
        within: largest relative difference for reuse (0: never reuse).
        angle_deg: largest difference of major axes for reuse (degrees).
        refit: True to always use the fresh fit (``--refit-variograms``).
        kept: models read from ``path`` when the book was opened.
        decisions: what each surface of this run used, by surface name.
    """

    path: Path | None
    within: float = DEFAULT_WITHIN
    angle_deg: float = DEFAULT_ANGLE_DEG
    refit: bool = False
    kept: dict[str, VariogramModel] = field(default_factory=dict)
    decisions: dict[str, ReuseDecision] = field(default_factory=dict)

    def settle(self, name: str, model: VariogramModel, source: str
               ) -> tuple[VariogramModel, str]:
        """The model surface ``name`` uses, given the one chosen for it this run and its
        ``source`` (``"fitted"``, ``"manual"``, ``"default"``, ``"constant"``); returns
        (model, source), the source ``"reused"`` when the kept model was reused."""
        if source == "manual":
            self.decisions[name] = ReuseDecision(
                name, "manual", f"[variograms.{name}] of project.toml always wins", model)
            return model, source
        if source != "fitted":
            self.decisions[name] = ReuseDecision(
                name, "fallback", "too few holes to fit a variogram, or all holes equal: "
                "the fallback model is used and not kept", model)
            return model, source
        kept = self.kept.get(name)
        diff = model_difference(kept, model) if kept is not None else None
        reuse = False
        if self.refit:
            reason = "refit forced (--refit-variograms)"
        elif self.path is None:
            reason = "no project cache (a project without a store, or the cache turned off)"
        elif kept is None:
            reason = "no model kept from a previous run"
        elif diff is None:
            reason = (f"the kept model's structures ({_families(kept)}) differ from this "
                      f"fit's ({_families(model)})")
        elif self.within <= 0:
            reason = "reuse is off ([kriging] reuse_variogram_within = 0)"
        else:
            worst = max((k for k in diff if k != "anisotropy_angle_deg"), key=diff.get)
            aniso = max(kept.anisotropy_ratio, model.anisotropy_ratio) > 1.0 + self.within
            angle = diff["anisotropy_angle_deg"]
            if diff[worst] >= self.within:
                reason = (f"this run's fit differs from the kept model by "
                          f"{diff[worst]:.1%} in {worst}, not less than "
                          f"reuse_variogram_within = {self.within:g}")
            elif aniso and angle > self.angle_deg:
                reason = (f"the major axis of this run's fit turned by {angle:.1f}° from the "
                          f"kept model's, more than reuse_variogram_angle_deg = "
                          f"{self.angle_deg:g}")
            else:
                reuse = True
                reason = (f"this run's fit differs from the kept model by at most "
                          f"{diff[worst]:.1%} ({worst})"
                          + (f" and {angle:.1f}° in direction" if aniso else "")
                          + f", less than reuse_variogram_within = {self.within:g}: the "
                          "kept model is used")
        used = kept if reuse and kept is not None else model
        self.decisions[name] = ReuseDecision(name, "reused" if reuse else "refit", reason,
                                             used, refit=model, kept=kept, difference=diff)
        return used, ("reused" if reuse else source)

    def save(self) -> Path | None:
        """Keep the fitted (reused or refit) models of this run for the next one: write
        ``path`` under a temporary name and rename it into place (nothing without a path).
        Surfaces with a manual or fallback model are dropped from it."""
        if self.path is None:
            return None
        now = datetime.now(UTC).isoformat(timespec="seconds")
        doc = {"format": KEPT_FORMAT, "written_utc": now, "within": self.within,
               "angle_deg": self.angle_deg,
               "surfaces": {name: {"model": d.used.as_dict(), "decision": d.decision}
                            for name, d in sorted(self.decisions.items())
                            if d.decision in ("reused", "refit")}}
        self.path.parent.mkdir(parents=True, exist_ok=True)
        write_text_atomically(self.path, json.dumps(doc, indent=2) + "\n")
        remove_leftovers(self.path)  # temporary files of killed runs
        return self.path

    def summary(self) -> dict[str, object]:
        """What ``summary.json`` records under ``variogram_reuse``."""
        by = {d: sorted(n for n, r in self.decisions.items() if r.decision == d)
              for d in ("reused", "refit", "manual", "fallback")}
        return {"file": str(self.path) if self.path is not None else None,
                "within": self.within,
                "angle_deg": self.angle_deg, "forced_refit": self.refit, **by}


def _families(m: VariogramModel) -> str:
    return m.model + (f" + {m.model2}" if m.model2 else "")


def settle_variogram(name: str, model: VariogramModel, source: str,
                     book: VariogramBook | None) -> tuple[VariogramModel, str]:
    """:meth:`VariogramBook.settle` with ``book``; (model, source) unchanged without one
    (a call outside a run with a project cache uses its fresh fit)."""
    if book is None:
        return model, source
    return book.settle(name, model, source)


def open_variogram_book(path: str | Path | None, *, within: float = DEFAULT_WITHIN,
                        angle_deg: float = DEFAULT_ANGLE_DEG, refit: bool = False
                        ) -> VariogramBook:
    """The book that reuses the models kept in ``path`` and records each surface's decision
    (nothing is written: call :meth:`VariogramBook.save` after a successful run). With
    ``path=None`` nothing is kept or reused; the decisions are still recorded."""
    kept = read_kept(path) if path is not None else {}
    return VariogramBook(Path(path) if path is not None else None, within, angle_deg, refit,
                         kept)


__all__ = ["KEPT_FILE", "ReuseDecision", "VariogramBook", "largest_relative",
           "model_difference", "open_variogram_book", "read_kept", "settle_variogram"]
