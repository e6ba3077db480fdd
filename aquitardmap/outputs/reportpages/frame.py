"""The frame of every report page: A4 portrait with a header (project, run) and the caution
and page number in the footer, and a flow that writes headings, paragraphs and tables down a
page, each sized to its content. Drawn with matplotlib figures only (no pyplot).
"""

from __future__ import annotations

import textwrap
from pathlib import Path
from typing import Any

from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Rectangle

from aquitardmap._version import __version__
from aquitardmap.outputs import names as outputs
from aquitardmap.outputs.formatting import run_date, section
from aquitardmap.outputs.wording import caution_text

#: A4 portrait (inches).
A4_IN = (8.27, 11.69)


def plain_text(value: Any) -> str:
    """User text safe for matplotlib: ``$`` would start mathtext."""
    return ("" if value is None else str(value)).replace("$", r"\$")


def wrap_text(text: str, width: int) -> str:
    """``text`` wrapped to ``width`` characters a line, paragraph by paragraph (at its
    newlines)."""
    return "\n".join(textwrap.fill(p, width) if p else "" for p in text.split("\n"))


class Pages:
    """A4 pages with a header (project, run) and the caution and page number in the
    footer; numbered once all pages are known."""

    def __init__(self, summary: dict[str, Any]) -> None:
        self.summary = summary
        self.figures: list[Figure] = []
        project = section(summary, "project")
        run = section(summary, "run")
        self.name = plain_text(str(project.get("name") or "").strip() or "Aquitard screening")
        started = str(run.get("started_utc") or "").strip()
        self.when = run_date(started) if started else ""
        self.caution = caution_text(summary)

    def new(self, heading: str) -> Figure:
        """A new page with ``heading``, header and caution footer drawn."""
        fig = Figure(figsize=A4_IN)  # no pyplot: nothing global is touched
        fig.text(0.06, 0.965, f"{self.name} — aquitard screening report", fontsize=8,
                 color="#555555")
        if self.when:
            fig.text(0.94, 0.965, f"run {self.when}", fontsize=8, color="#555555",
                     ha="right")
        fig.add_artist(Line2D([0.06, 0.94], [0.958, 0.958], color="#999999", lw=0.6))
        fig.text(0.06, 0.93, heading, fontsize=14, weight="bold", va="top")
        fig.text(0.06, 0.045, wrap_text("Caution. " + self.caution, 150), fontsize=6.3,
                 color="#6b4e00", va="top")
        self.figures.append(fig)
        return fig

    def save(self, path: Path) -> None:
        """Number the pages and write them all to the PDF file ``path``."""
        n = len(self.figures)
        meta = {"Title": f"Aquitard screening report — {self.name}",
                "Subject": "Screening-level estimate: " + outputs.CAUTION,
                "Creator": f"aquitardmap {__version__}"}
        with PdfPages(path, metadata=meta) as pdf:
            for i, fig in enumerate(self.figures, start=1):
                fig.text(0.94, 0.012, f"page {i} of {n}", fontsize=7, ha="right",
                         color="#555555")
                pdf.savefig(fig)


class Flow:
    """Writes headings, paragraphs and tables down a page from ``y`` (figure fraction),
    each sized to its content."""

    LEFT, WIDTH = 0.06, 0.88

    def __init__(self, fig: Figure, y: float) -> None:
        self.fig = fig
        self.y = y

    @staticmethod
    def _line_h(fontsize: float, spacing: float = 1.35) -> float:
        return fontsize * spacing / 72 / A4_IN[1]

    def heading(self, text: str, size: float = 11) -> None:
        """A bold heading of ``size`` points."""
        self.y -= self._line_h(size, 0.5)
        self.fig.text(self.LEFT, self.y, text, fontsize=size, weight="bold", va="top")
        self.y -= self._line_h(size, 1.6)

    def para(self, text: str, size: float = 8.5, width: int = 120, colour: str = "#222222"
             ) -> None:
        """A paragraph wrapped to ``width`` characters a line (nothing for empty text)."""
        if not text:
            return
        wrapped = wrap_text(text, width)
        self.fig.text(self.LEFT, self.y, wrapped, fontsize=size, va="top", color=colour,
                      linespacing=1.35)
        self.y -= self._line_h(size) * (wrapped.count("\n") + 1) + self._line_h(size, 0.6)

    def space(self, size: float = 8) -> None:
        """Blank space of one line of ``size`` points."""
        self.y -= self._line_h(size)

    def table(self, rows: list[list[str]], header: list[str], widths: list[float], *,
              fontsize: float = 7.5, wrap: list[int] | None = None) -> None:
        """A table as wide as the text, rows as tall as their wrapped lines.

        Drawn as one text per cell, one collection of rules and one header band (not with
        ``matplotlib.table``, whose per-cell layout made a long zone table cost most of a
        regional run's outputs stage); columns take ``widths`` (fractions of the text
        width, scaled to fill it).
        """
        if wrap:
            rows = [[wrap_text(c, w) if w else c for c, w in zip(r, wrap, strict=True)]
                    for r in rows]
        body = rows or [["—"] + [""] * (len(header) - 1)]
        lines = [1] + [max(str(c).count("\n") + 1 for c in r) for r in body]
        line_h = self._line_h(fontsize, 1.3)
        pad = self._line_h(fontsize, 0.45)
        heights = [n * line_h + pad for n in lines]
        total = sum(heights)
        scale = self.WIDTH / sum(widths)
        xs = [self.LEFT]
        for w in widths:
            xs.append(xs[-1] + w * scale)
        edges = [self.y]
        for h in heights:
            edges.append(edges[-1] - h)
        self.fig.add_artist(Rectangle((xs[0], edges[1]), xs[-1] - xs[0], heights[0],
                                      facecolor="#e8ecef", edgecolor="none", zorder=0,
                                      transform=self.fig.transFigure))
        rules = [[(xs[0], e), (xs[-1], e)] for e in edges]
        rules += [[(x, edges[0]), (x, edges[-1])] for x in xs]
        self.fig.add_artist(LineCollection(rules, colors="#bbbbbb", linewidths=0.4,
                                           transform=self.fig.transFigure))
        inset = max(0.02 * min(w * scale for w in widths), 0.004)
        for r, cells in enumerate([header, *body]):
            y = edges[r] - pad / 2  # the text's first line starts half the padding down
            for c, text in enumerate(cells):
                if str(text) == "":
                    continue
                self.fig.text(xs[c] + inset, y, str(text), fontsize=fontsize,
                              va="top", ha="left", linespacing=1.3,
                              weight="bold" if r == 0 else "normal")
        self.y -= total + self._line_h(fontsize, 0.9)


__all__ = ["A4_IN", "Flow", "Pages", "plain_text", "wrap_text"]
