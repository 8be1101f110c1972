"""What every figure shares: opening the run, reading the stored summaries it needs, the
empty figure, axis labels with units, and the caption line.

matplotlib is imported here only when a figure is made (:func:`new_figure`), so importing
:mod:`massarc.summaries.figures` costs nothing and the command line stays light. Figures
are :class:`matplotlib.figure.Figure` objects built with the object-oriented API: no
pyplot state, no window; ``fig.savefig(path)`` writes PNG, SVG or PDF.

Every artist that carries data has a ``gid`` (``mean``, ``band``, ``exact-law``,
``pdf-gumbel``, ...), so that scripts and tests find it without parsing legend text; the
caption is the figure text with gid ``caption``.
"""

from __future__ import annotations

import math
import os
import textwrap
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from massarc.archive import ArchiveError, Run, open_run
from massarc.archive.summaries import Summaries

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = [
    "MASS_UNITS",
    "PLOT_EXTRA",
    "FigureError",
    "Stored",
    "caption_line",
    "finish",
    "fmt",
    "new_figure",
    "open_target",
    "read_stored",
    "set_caption",
    "stored_of",
    "time_label",
    "window_words",
]

#: How the axes name the run's mass unit (masses are counts of units: particles, grains).
MASS_UNITS = "mass units"

#: What to install when matplotlib is missing.
PLOT_EXTRA = 'pip install "massarc[plot]"'

#: Width of one panel and height of a figure, inches.
_PANEL = (5.0, 4.0)
_CAPTION_POINTS = 7.5


class FigureError(ArchiveError):
    """A figure that cannot be drawn from this run: a missing summary (the message names
    it and says that ``massarc summarize RUN`` makes it), a bad option, or matplotlib
    missing."""


def open_target(run: Run | str | os.PathLike[str]) -> Run:
    """The run itself, or the run at a location (opened read-only)."""
    return run if isinstance(run, Run) else open_run(run)


class Stored:
    """The stored summaries a figure reads: arrays by name (NumPy), their attributes, and
    the group's provenance (window, options, findings)."""

    def __init__(self, run: Run, summaries: Summaries) -> None:
        self.run = run
        self.summaries = summaries
        self.provenance: dict[str, Any] = summaries.provenance

    def __getitem__(self, name: str) -> np.ndarray:
        return self.summaries.array(name)

    def __contains__(self, name: object) -> bool:
        return name in self.summaries

    def attrs(self, name: str) -> dict[str, Any]:
        """The attributes of one stored array."""
        return self.summaries.attrs(name)

    @property
    def window(self) -> dict[str, Any]:
        """The window the stationary observables were taken over (group attribute)."""
        window = self.provenance.get("window")
        return window if isinstance(window, dict) else {}

    @property
    def options(self) -> dict[str, Any]:
        """The options the summaries were made with."""
        options = self.provenance.get("options")
        return options if isinstance(options, dict) else {}


def _missing(run: Run, name: str, why: str) -> FigureError:
    return FigureError(
        f"{run.name}: no stored summary {name!r} ({why}); `massarc summarize {run.name}` makes it"
    )


def read_stored(run: Run, needs: Sequence[str]) -> Stored:
    """The run's stored summaries, after checking that every array in ``needs`` is there.

    Raises :class:`FigureError` naming the first missing array.
    """
    summaries = run.summaries
    if summaries is None:
        raise _missing(run, needs[0], "the run has no summaries group")
    for name in needs:
        if name not in summaries:
            raise _missing(run, name, "the stored summaries lack it")
    return Stored(run, summaries)


def stored_of(run: Run | str | os.PathLike[str], needs: Sequence[str]) -> tuple[Run, Stored]:
    """The run (opened read-only when a location is given) and its stored summaries, after
    checking that every array in ``needs`` is there (:func:`read_stored`)."""
    opened = open_target(run)
    return opened, read_stored(opened, needs)


def time_label(run: Run) -> str:
    """``time t (<the run's time units>)``."""
    units = run.meta.run.time_units if run.meta is not None else "model time"
    return f"time t ({units})"


def window_words(stored: Stored | None, time_units: str) -> str:
    """The window in words, from the summaries' attributes."""
    if stored is None:
        return "window unknown (no stored summaries)"
    window = stored.window
    rule, start, start_time = window.get("rule"), window.get("start"), window.get("start_time")
    when = "" if start_time is None else f" (t = {start_time:.4g} {time_units})"
    if rule == "stationary":
        return f"stationary window from snapshot {start}{when}"
    if rule == "last-half":
        return f"window: last half, from snapshot {start}{when}"
    if rule == "all":
        return "window: the whole run"
    return "window not recorded in the summaries"


def caption_line(run: Run, stored: Stored | None, details: Sequence[str] = ()) -> str:
    """``run <name>; <window>; <details>``: the caption every figure carries."""
    units = run.meta.run.time_units if run.meta is not None else "model time"
    name = Path(str(run.name)).name or str(run.name)
    parts = [f"run {name}", window_words(stored, units), *(d for d in details if d)]
    return "; ".join(parts)


def _matplotlib() -> Any:
    try:
        import matplotlib
    except ImportError:
        raise FigureError(f"figures need matplotlib: {PLOT_EXTRA}") from None
    return matplotlib


def new_figure(panels: int = 1, *, rows: int = 1) -> tuple[Figure, list[Axes]]:
    """An empty figure of ``rows`` x ``panels`` axes (constrained layout), and its axes in
    reading order."""
    _matplotlib()
    from matplotlib.figure import Figure

    fig = Figure(figsize=(_PANEL[0] * panels, _PANEL[1] * rows), layout="constrained")
    axes = fig.subplots(rows, panels, squeeze=False)
    return fig, [ax for row in axes for ax in row]


def set_caption(fig: Figure, text: str) -> None:
    """Put ``text`` under the axes, wrapped to the figure's width, and keep the layout
    clear of it."""
    width_in, height_in = fig.get_size_inches()
    per_line = max(40, int(width_in * 72 / (_CAPTION_POINTS * 0.52)))
    wrapped = textwrap.fill(text, per_line)
    lines = wrapped.count("\n") + 1
    share = min(0.4, (lines * _CAPTION_POINTS * 1.35 + 6) / 72 / height_in)
    fig.text(0.01, share / 2, wrapped, ha="left", va="center", fontsize=_CAPTION_POINTS,
             gid="caption")  # fmt: skip
    engine = fig.get_layout_engine()
    if engine is not None:
        engine.set(rect=(0.0, share, 1.0, 1.0 - share))


def fmt(value: Any, digits: int = 3) -> str:
    """A number for a label; ``-`` for None or non-finite."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "-"
    return f"{value:.{digits}g}"


def finish(fig: Figure, run: Run, stored: Stored | None, details: Sequence[str]) -> Figure:
    """Add the caption line (run, window, ``details``) under the axes; return the figure."""
    set_caption(fig, caption_line(run, stored, details))
    return fig
