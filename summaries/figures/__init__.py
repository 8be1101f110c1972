"""massarc.summaries.figures: figures of a run drawn from its stored summaries.

Each figure is a function returning a :class:`matplotlib.figure.Figure` (object-oriented
API, no pyplot state); :data:`FIGURES` maps the figure names of ``massarc plot RUN FIGURE``
to them. The figures read the stored summaries only, never the masses; the space-time
picture is the exception and reads only the stretch it shows. matplotlib (the ``plot``
extra) is imported when a figure is drawn, not when this package is imported.

* ``largest-mass``: :func:`largest_mass_figure`, mean and variance over replicas against
  time with the bootstrap intervals;
* ``occupation``: :func:`occupation_figure`, P(m) with the exact ZRP law and the
  power-law guide;
* ``correlation``: :func:`correlation_figure`, G(r, t) against r and r / l(t);
* ``coarsening``: :func:`coarsening_figure`, typical mass and l(t) with the growth fits;
* ``extremes``: :func:`extremes_figure`, the largest masses with the fitted laws;
* ``space-time``: :func:`space_time_figure`, one replica's masses over a stretch.

Every figure has axis labels with units, a legend (a colour bar for the space-time
picture) and a caption line naming the run and the window. Missing summaries raise
:class:`FigureError` naming the array and ``massarc summarize RUN``.

>>> import shutil, tempfile
>>> from massarc.summaries import summarize
>>> copy = shutil.copytree("samples/dune-strip.zarr", tempfile.mkdtemp() + "/d.zarr")
>>> _ = summarize(copy, {"probes": 8, "resamples": 99})
>>> fig = FIGURES["coarsening"](copy)
>>> [ax.get_xlabel() for ax in fig.axes]
['time t (days)', 'time t (days)']
>>> fig.savefig(tempfile.mkdtemp() + "/coarsening.svg")
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from .coarsening import coarsening_figure
from .correlation import correlation_figure
from .extremes import extremes_figure
from .largest_mass import largest_mass_figure
from .occupation import occupation_figure
from .shared import PLOT_EXTRA, FigureError
from .space_time import space_time_figure

__all__ = [
    "FIGURES",
    "PLOT_EXTRA",
    "FigureError",
    "coarsening_figure",
    "correlation_figure",
    "extremes_figure",
    "largest_mass_figure",
    "occupation_figure",
    "space_time_figure",
]

#: Figure name (``massarc plot RUN FIGURE``) -> the function drawing it.
FIGURES: dict[str, Callable[..., Any]] = {
    "largest-mass": largest_mass_figure,
    "occupation": occupation_figure,
    "correlation": correlation_figure,
    "coarsening": coarsening_figure,
    "extremes": extremes_figure,
    "space-time": space_time_figure,
}
