"""Figures of a run for reviewers: one variogram plot per kriged surface (PNG).

Each plot shows the experimental semivariances (point size growing with the number of
pairs, the count written beside each point), the directional variograms when they were
computed, the model used (with its parameters and where it came from) and the
leave-one-out cross-validation statistics of the surface. Drawn with matplotlib's
non-interactive Agg backend, so no display is needed.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from aquitardmap.geostat.probability import ThicknessProbabilities  # noqa: E402
from aquitardmap.geostat.surfaces import Surface  # noqa: E402
from aquitardmap.geostat.variogram import VariogramModel  # noqa: E402

_SOURCE_WORDS = {
    "fitted": "fitted by weighted least squares (Cressie weights)",
    "manual": "given in project.toml",
    "default": "default: too few holes to fit one",
    "constant": "none needed: every hole gives the same value",
    "given": "given by the caller",
    "reused": "kept from the previous run (this run's fit agrees with it)",
}


def model_text(m: VariogramModel) -> str:
    """The model in one line, e.g. ``nugget 0.5 + 60 spherical(1200 m)``."""
    nugget = m.nugget if m.nugget > 1e-9 * m.sill else 0.0
    parts = [f"nugget {nugget:.3g}", f"{m.psill:.3g} {m.model}({m.range_m:.0f} m)"]
    if m.model2:
        parts.append(f"{m.psill2:.3g} {m.model2}({m.range2_m:.0f} m)")
    text = " + ".join(parts)
    if m.anisotropy_ratio != 1.0:
        text += (f"; anisotropy {m.anisotropy_ratio:.2f}:1, major axis "
                 f"{m.anisotropy_angle_deg:.0f}° from east")
    return text


def variogram_figure(surface: Surface, path: str | Path, *, title: str = "",
                     units: str = "m") -> Path:
    """Write the variogram plot of ``surface`` to ``path`` (PNG) and return the path."""
    path = Path(path)
    fig, ax = plt.subplots(figsize=(8.0, 5.2), dpi=100)
    exp = surface.experimental
    m = surface.variogram
    top = m.sill
    if exp.lag_m.size:
        sizes = 12 + 60 * exp.n_pairs / max(exp.n_pairs.max(), 1)
        ax.scatter(exp.lag_m, exp.gamma, s=sizes, color="#1f4e79", zorder=3,
                   label="experimental (all directions)")
        for h, g, n in zip(exp.lag_m, exp.gamma, exp.n_pairs, strict=True):
            ax.annotate(str(int(n)), (h, g), textcoords="offset points", xytext=(4, 4),
                        fontsize=7, color="#1f4e79")
        top = max(top, float(exp.gamma.max()))
        hmax = float(exp.lag_m.max()) * 1.08
    else:
        hmax = max(m.range_m, m.range2_m) * 1.5
    d = surface.directional
    if d is not None:
        colours = plt.cm.viridis(np.linspace(0.15, 0.85, len(d.directions_deg)))
        for az, e, c in zip(d.directions_deg, d.experimental, colours, strict=True):
            if e.lag_m.size:
                ax.plot(e.lag_m, e.gamma, "o--", ms=3, lw=0.8, color=c, alpha=0.7,
                        label=f"{az:.0f}° ± {d.tolerance_deg:.0f}°")
                top = max(top, float(e.gamma.max()))
    h = np.linspace(0.0, hmax, 300)
    ax.plot(h, m.gamma(h), color="#c0392b", lw=2, label="model (along the major axis)")
    if m.anisotropy_ratio != 1.0:
        minor = VariogramModel(m.model, m.nugget, m.psill, m.range_m / m.anisotropy_ratio,
                               1.0, 0.0, m.model2, m.psill2,
                               m.range2_m / m.anisotropy_ratio)
        ax.plot(h, minor.gamma(h), color="#c0392b", lw=1.2, ls=":",
                label="model (along the minor axis)")
    ax.set_xlim(0, hmax)
    ax.set_ylim(0, top * 1.15 if top > 0 else 1.0)
    ax.set_xlabel("separation distance (m)")
    ax.set_ylabel(f"semivariance ({units}²)")
    ax.set_title(title or f"Variogram of {surface.name} thickness")
    cv = surface.cv
    lines = [f"model: {model_text(m)}",
             f"source: {_SOURCE_WORDS.get(surface.variogram_source, surface.variogram_source)}",
             f"{surface.n_full} full holes, {surface.n_lower_bounds} lower bounds "
             f"({surface.n_bounds_active} active)"]
    if cv.get("rmse") is not None and np.isfinite(cv.get("rmse", np.nan)):
        lines.append(f"leave-one-out: mean error {cv['mean_error']:+.2f} {units}, RMSE "
                     f"{cv['rmse']:.2f} {units}, standardised mean "
                     f"{cv['mean_standardised_error']:+.2f}, variance "
                     f"{cv['variance_standardised_error']:.2f}")
    if d is not None:
        lines.append(f"directional fit: ratio {d.ratio:.2f}, major axis {d.angle_deg:.0f}° "
                     "from east")
    ax.text(0.99, 0.02, "\n".join(lines), transform=ax.transAxes, fontsize=7.5,
            va="bottom", ha="right",
            bbox={"facecolor": "white", "alpha": 0.85, "edgecolor": "#cccccc"})
    ax.legend(loc="upper left", fontsize=7.5, ncol=2, framealpha=0.85)
    ax.grid(alpha=0.3)
    fig.tight_layout()
    fig.savefig(path, format="png")
    plt.close(fig)
    return path


def figure_surfaces(surfaces: dict[str, Surface],
                     probabilities: ThicknessProbabilities | None) -> dict[str, Surface]:
    """Surfaces that get a variogram figure: every kriged one, and the residual from the
    external drift when the probabilities used it."""
    out = dict(surfaces)
    if probabilities is not None and probabilities.residual is not None:
        out[probabilities.residual.name] = probabilities.residual
    return out
