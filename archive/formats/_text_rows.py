"""Data lines of the plain-text layout as snapshot batches: shared by the ``text`` format
and live ingestion (:mod:`.ingest`), which read the same lines from a file or a pipe."""

from __future__ import annotations

import numpy as np

from massarc.schema import RunMeta

from ..errors import DataError
from ._lines import Rows
from .registry import Batch

__all__ = ["TEXT_MAGIC", "rows_to_batch"]

#: The format line of the plain-text layout: ``# massarc-text 1``.
TEXT_MAGIC = "massarc-text"


def rows_to_batch(
    rows: Rows,
    meta: RunMeta,
    name: str,
    done: int | None = None,
    commit: bool = False,
    state: dict[str, int] | None = None,
) -> Batch:
    """Masses ``(n, sites)`` of rows of the text format; ragged lines are errors.

    ``state`` remembers the width and the line that set it across calls.
    """
    state = state if state is not None else {}
    counts = rows.counts
    if "width" not in state:
        state["width"], state["line"] = int(counts[0]), int(rows.lines[0])
        if state["width"] != meta.lattice.volume:
            raise DataError(
                f"{name}: line {state['line']}: metadata contradicts the data: lattice.sites "
                f"is {list(meta.lattice.sites)} ({meta.lattice.volume} sites) but the line "
                f"holds {state['width']} masses"
            )
    width = state["width"]
    bad = np.flatnonzero(counts != width)
    if len(bad):
        i = int(bad[0])
        raise DataError(
            f"{name}: line {int(rows.lines[i])}: expected {width} masses after the time (as on "
            f"line {state['line']}); got {int(counts[i])} (a ragged or truncated line)"
        )
    mass = rows.values.reshape(len(counts), width)
    return Batch(
        rows.lead[:, 0], mass, replica=rows.replica, lines=rows.lines, done=done, commit=commit
    )
