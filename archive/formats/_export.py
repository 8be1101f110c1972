"""Line-oriented exports (text, positions, the two CSV layouts): a header that carries the
metadata, then the lines of every chunk of the run, replica after replica."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import numpy as np

from ..progress import Progress
from ..reader import Run
from ._lines import META_PREFIX
from ._metadata import meta_dict

__all__ = ["LinesOf", "export_lines", "header_lines", "meta_comment"]

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
) -> None:
    """Write ``header``, then every chunk of ``run`` as ``lines_of(replica, times, mass)``
    (preceded by ``# replica N`` at the start of each replica when ``replica_lines``)."""
    times = run.times
    total = run.n_replicas * run.n_snapshots
    done = 0
    with open(path, "w", encoding="utf-8", newline="\n") as f:
        f.write(header)
        for chunk in run.chunks():
            if replica_lines and chunk.start == 0:
                f.write(f"# replica {chunk.replica}\n")
            f.write(lines_of(chunk.replica, times[chunk.start : chunk.stop], chunk.mass))
            done += chunk.stop - chunk.start
            if progress is not None:
                progress(done, total, "snapshots")
