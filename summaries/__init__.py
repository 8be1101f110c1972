"""massarc.summaries: the observables groups publish, computed in the single pass and
stored with the run (the ``summaries`` group, format 1.1).

* :func:`summarize` computes and stores them for runs and collections; it returns one
  :class:`SummaryOutcome` per run; :class:`SummaryOptions` lists what can be tuned;
  :func:`summarize_in_memory` computes them for one run without writing into it;
* ``massarc.open_run(p).summaries`` reads them back (NumPy arrays, or xarray objects
  when xarray is installed, with their provenance);
* :func:`sweep_table`, :func:`render_summaries` and :func:`export_summaries` print and
  export them (``massarc summarize``).

Layout: :mod:`.collect` (the single pass, the probes, the window), :mod:`.build` (the
stored arrays), :mod:`.replicas` (over replicas, bootstrap intervals), :mod:`.growth`
(exponents), :mod:`.extremes` (extreme-value laws), :mod:`.theory` (the condensate
against theory), :mod:`.render` (tables, JSON, export), :mod:`.api`.
"""

from .api import (
    SummaryOutcome,
    open_for_summaries,
    summarize,
    summarize_in_memory,
    summarize_run,
)
from .options import SummaryOptions
from .render import RENDERINGS, export_summaries, render_summaries, sweep_table

__all__ = [
    "RENDERINGS",
    "SummaryOptions",
    "SummaryOutcome",
    "export_summaries",
    "open_for_summaries",
    "render_summaries",
    "summarize",
    "summarize_in_memory",
    "summarize_run",
    "sweep_table",
]
