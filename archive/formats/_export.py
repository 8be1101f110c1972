"""Line-oriented exports (text, positions, the two CSV layouts): a header that carries the
metadata, then the lines of every chunk of the run, replica after replica.

With ``allow_missing`` (``massarc convert --allow-missing``) a chunk that is missing or
corrupt is written as one comment line in place of its snapshots::

    # massarc-missing: replica 1 snapshots 40..59: <why>

and no data line; massarc refuses to import a file holding such a line (an archive holds
only whole runs). :class:`MissingMask` records the same for the array formats (a ``mask``
array, True where a snapshot is not data)."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import DataError
from ..progress import Progress
from ..reader import Chunk, Run
from ._lines import META_PREFIX, MISSING_PREFIX
from ._metadata import meta_dict

__all__ = [
    "MASK",
    "LinesOf",
    "MissingMask",
    "export_lines",
    "guard_mask",
    "header_lines",
    "meta_comment",
]

#: Name of the array (npz member, HDF5 dataset, NetCDF variable) an export with
#: ``--allow-missing`` writes: ``(replica, time)``, True where a snapshot is not data.
MASK = "mask"


def guard_mask(mask: Any, name: str) -> None:
    """Refuse to import a file whose ``mask`` marks snapshots as not data: an archive holds
    only whole runs (the zeros under the mask would pass for masses)."""
    if mask is None:
        return
    marked = int(np.count_nonzero(np.asarray(mask)))
    if marked:
        raise DataError(
            f"{name}: its {MASK!r} array marks {marked} snapshot(s) as not data (an export "
            "made with --allow-missing); an archive holds only whole runs, so it cannot be "
            "imported"
        )


class MissingMask:
    """Which snapshots of which replicas an export could not read: ``mask[replica,
    snapshot]`` is True where the masses written are not data (numpy.ma's convention)."""

    def __init__(self, run: Run) -> None:
        self.mask = np.zeros((run.n_replicas, run.n_snapshots), dtype=bool)
        self.chunks = 0

    def note(self, chunk: Chunk) -> None:
        """Record ``chunk`` if it is missing."""
        if chunk.missing is not None:
            self.mask[chunk.replica, chunk.start : chunk.stop] = True
            self.chunks += 1

    def notes(self, where: str) -> list[str]:
        """What the user must know: how many snapshots are masked, and where the mask is."""
        if not self.chunks:
            return []
        n = int(self.mask.sum())
        return [
            f"{self.chunks} chunk(s) missing or corrupt: {n} snapshot(s) not exported, "
            f"marked in {where}"
        ]


#: ``lines_of(replica, times, mass) -> str``: the text of ``n`` snapshots, ``mass`` shaped
#: ``(n, *lattice)``.
LinesOf = Callable[[int, np.ndarray, np.ndarray], str]


def meta_comment(run: Run) -> str:
    """The ``# massarc-meta: {json}`` line of ``run`` (empty without metadata)."""
    if run.meta is None:
        return ""
    return f"{META_PREFIX} {json.dumps(meta_dict(run.meta), separators=(',', ':'))}\n"


def header_lines(magic: str, run: Run) -> str:
    """The format line and the metadata line."""
    return f"# {magic} 1\n" + meta_comment(run)


def export_lines(
    run: Run,
    path: Path,
    header: str,
    lines_of: LinesOf,
    progress: Progress | None,
    replica_lines: bool = True,
    allow_missing: bool = False,
) -> list[str]:
    """Write ``header``, then every chunk of ``run`` as ``lines_of(replica, times, mass)``
    (preceded by ``# replica N`` at the start of each replica when ``replica_lines``); a
    missing chunk, with ``allow_missing``, as a ``# massarc-missing:`` line. Returns the
    notes for the user."""
    times = run.times
    total = run.n_replicas * run.n_snapshots
    done = 0
    lost = MissingMask(run)
    with open(path, "w", encoding="utf-8", newline="\n") as f:
        f.write(header)
        for chunk in run.chunks(allow_missing=allow_missing):
            if replica_lines and chunk.start == 0:
                f.write(f"# replica {chunk.replica}\n")
            lost.note(chunk)
            if chunk.missing is not None:
                why = " ".join(chunk.missing.split())
                f.write(
                    f"{MISSING_PREFIX} replica {chunk.replica} snapshots "
                    f"{chunk.start}..{chunk.stop - 1}: {why}\n"
                )
            else:
                f.write(lines_of(chunk.replica, times[chunk.start : chunk.stop], chunk.mass))
            done += chunk.stop - chunk.start
            if progress is not None:
                progress(done, total, "snapshots")
    return lost.notes(f"'{MISSING_PREFIX}' lines")
