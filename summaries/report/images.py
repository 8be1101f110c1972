"""The figures of one run as inline images: each figure of
:data:`massarc.summaries.figures.FIGURES` drawn from the run's summaries, saved as PNG into
memory and embedded as a ``data:`` URI, so that the page needs no other file.

A figure that cannot be drawn (a summary it needs is missing) becomes a line saying why;
without matplotlib every figure is replaced by one line saying that figures need the
``plot`` extra.
"""

from __future__ import annotations

import base64
import io
from dataclasses import dataclass
from typing import Any

from massarc.archive import Run
from massarc.summaries.figures import FIGURES, PLOT_EXTRA, FigureError

__all__ = [
    "ALT",
    "DPI",
    "Drawn",
    "draw_figures",
    "missing_plot_extra",
    "plotting_available",
]

#: Figure name -> what the picture shows, for its alt text (the caption follows it).
ALT: dict[str, str] = {
    "largest-mass": "Mean and variance over replicas of the largest mass against time, "
    "with bootstrap bands",
    "occupation": "Occupation law P(m) on log-log axes, with the exact law or a guide "
    "where one is known",
    "correlation": "Two-point correlation G(r, t) against distance r at chosen times",
    "coarsening": "Typical condensate mass and coarsening length against time, with "
    "fitted power laws",
    "extremes": "Histogram of the largest mass with the fitted extreme-value laws",
    "space-time": "Space-time picture of one replica's masses, time down and sites across",
}

#: Resolution of the embedded PNG images (screen and print both read them well).
DPI = 110


@dataclass(frozen=True)
class Drawn:
    """One figure of the page: its name, and either the PNG data URI with its alt text and
    caption, or the reason it is not drawn."""

    name: str
    uri: str | None = None
    alt: str = ""
    caption: str = ""
    missing: str | None = None


def plotting_available() -> bool:
    """Whether matplotlib (the ``plot`` extra) can be imported."""
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        return False
    return True


def _caption(fig: Any) -> str:
    return " ".join(t.get_text() for t in fig.texts if t.get_gid() == "caption")


def draw_figures(run: Run) -> list[Drawn]:
    """Every figure of ``run`` (whose ``summaries`` are stored or held in memory)."""
    drawn = []
    for name, draw in FIGURES.items():
        try:
            fig = draw(run)
        except FigureError as exc:
            drawn.append(Drawn(name, missing=str(exc)))
            continue
        buf = io.BytesIO()
        fig.savefig(buf, format="png", dpi=DPI)
        uri = "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")
        caption = _caption(fig)
        drawn.append(Drawn(name, uri, f"{ALT[name]}. {caption}", caption))
    return drawn


def missing_plot_extra() -> str:
    """The line a page shows when matplotlib is missing."""
    return f"Figures need the plot extra (matplotlib): {PLOT_EXTRA}"
