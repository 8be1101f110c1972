"""massarc.summaries.compare: are two runs of the same model and parameters compatible?

:func:`compare_runs` diffs the metadata of two runs (``massarc compare A B``) and tests the
stationary observables of their windows against each other: the occupation law P(m), the
largest-mass distribution and G(r), with sample sizes corrected for autocorrelation and
p-values corrected for multiplicity (Holm). It returns a frozen :class:`Comparison`;
:func:`render_comparison` prints it as a table or JSON.

Layout: :mod:`.observed` (what is read of a run: stored summaries, else computed in
memory, and the effective sizes), :mod:`.agreement` (the tests and Holm's correction),
:mod:`.result` (the result models), :mod:`.api`, :mod:`.render`.
"""

from .api import DEFAULT_LEVEL, CompareRefused, compare_runs, metadata_differences
from .render import COMPARE_RENDERINGS, render_comparison
from .result import Comparison, Difference, ObservableComparison

__all__ = [
    "COMPARE_RENDERINGS",
    "DEFAULT_LEVEL",
    "CompareRefused",
    "Comparison",
    "Difference",
    "ObservableComparison",
    "compare_runs",
    "metadata_differences",
    "render_comparison",
]
