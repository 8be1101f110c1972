"""``massarc compare A B``: are two runs that claim the same model and parameters compatible?

Prints the metadata of both runs side by side and, for the stationary observables (the
occupation law, the largest-mass distribution, G(r)), a two-sample test with sizes
corrected for autocorrelation and p-values corrected by Holm's method
(:func:`massarc.summaries.compare.compare_runs`). The runs are only read.

Exit status: 0 when the runs agree at ``--level``, 1 when an observable disagrees, 2 for
bad input (one line ``massarc compare: error: ...`` on stderr): a run that cannot be read,
runs claiming different models or parameters without ``--force``, a level outside (0, 1),
or runs of which no observable can be compared (no stationary window, a transient regime).
"""

from __future__ import annotations

import sys

import click

from massarc.archive import open_run
from massarc.summaries.compare import (
    COMPARE_RENDERINGS,
    DEFAULT_LEVEL,
    CompareRefused,
    compare_runs,
    render_comparison,
)

from ._common import bad_input, command_class, die, rendering_option

__all__ = ["command"]

_NAME = "compare"


@click.command(_NAME, cls=command_class(_NAME))
@click.argument("a", metavar="A")
@click.argument("b", metavar="B")
@rendering_option(COMPARE_RENDERINGS, "How to print (the house option is --as, not --format). "
                  "table: for people; json: one document for scripts.")  # fmt: skip
@click.option("--level", type=float, default=DEFAULT_LEVEL, show_default=True,
              help="Family-wise level: the runs disagree when an observable's Holm-adjusted "
              "p-value is below it.")  # fmt: skip
@click.option("--force", is_flag=True,
              help="Compare runs that claim different models or parameters.")  # fmt: skip
def command(a: str, b: str, rendering: str, level: float, force: bool) -> None:
    """Compare runs A and B of the same model: metadata, occupation law P(m), largest-mass
    distribution and G(r) in their stationary windows. Exit 1 when they disagree."""
    if not (0.0 < level < 1.0):
        die(_NAME, f"--level: expected a number in (0, 1); got {level!r}")
    with bad_input(_NAME):
        run_a, run_b = open_run(a), open_run(b)
        try:
            result = compare_runs(run_a, run_b, level=level, force=force)
        except CompareRefused as exc:
            die(_NAME, str(exc))
    if result.status == "skip":
        reasons = {o.reason for o in result.observables}
        die(_NAME, f"nothing to compare: {'; '.join(sorted(reasons))}")
    render_comparison(result, rendering, sys.stdout)
    sys.exit(1 if result.status == "fail" else 0)
