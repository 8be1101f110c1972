"""Plain text: one snapshot per line, as simulators print them.

Layout::

    # massarc-text 1
    # massarc-meta: {"model": {...}, "lattice": {...}, "run": {...}}
    # replica 0
    0.0 3 0 2 1 ...
    0.5 2 1 2 1 ...
    # replica 1
    0.0 1 1 4 0 ...

* a data line is the time (any float Python reads, written with ``repr`` so it reads back
  bit-exactly) then the mass of every site, separated by blanks or tabs; a 2-D lattice is
  written row-major (``y`` slow, ``x`` fast) with the shape from ``lattice.sites``;
* ``#`` starts a comment; the first line ``# massarc-text 1`` names the format (optional);
  ``# massarc-meta: {json}`` carries the metadata (read back on import, so ``--meta`` is
  not needed for a file massarc wrote);
* ``# replica N`` starts replica N; a blank line also ends a replica (the next data line
  starts the next one). Replicas come in order and repeat the times of replica 0.

A final line without a newline is accepted in a file (and refused on a live pipe, see
:mod:`.ingest`). Every line must hold the same number of masses.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np

from massarc.schema import RunMeta

from ..errors import DataError
from ..reader import Run
from ._lines import META_PREFIX, LineParser, LineReader, Rows, magic_of, read_preamble
from ._options import guard_options
from .registry import Batch, Events, Format, Progress, Source
from .zarr_run import meta_dict

__all__ = [
    "TextFormat",
    "export_lines",
    "header_lines",
    "meta_comment",
    "rows_to_block",
    "text_lines",
]

MAGIC = "massarc-text"


def rows_to_block(
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


class TextSource(Source):
    unit = "bytes"

    def __init__(self, path: Path) -> None:
        self.path = path
        self.name = str(path)
        self.total = path.stat().st_size if path.is_file() else None

    def hints(self) -> dict[str, Any]:
        return read_preamble(self.path, self.name)

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        parser = LineParser(self.name, MAGIC)
        state: dict[str, int] = {}
        with open(self.path, "rb") as f:
            reader = LineReader(f, self.name)
            for buf, first, _ in reader:
                for rows in parser.parse(buf, first):
                    yield rows_to_block(rows, meta, self.name, reader.bytes_done, state=state)


def text_lines(replica: int, times: np.ndarray, mass: np.ndarray) -> str:
    """Lines ``time m0 m1 ...`` of a block ``(n, *lattice)`` (times by ``repr``: exact)."""
    flat = mass.reshape(len(times), -1).tolist()
    return "".join(
        f"{t!r} " + " ".join(map(str, row)) + "\n"
        for t, row in zip(times.tolist(), flat, strict=True)
    )


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
    fmt: Any,
    progress: Progress | None,
    replica_lines: bool = True,
) -> None:
    """Write ``header``, then every block of ``run`` as ``fmt(replica, times, mass) -> str``
    (preceded by ``# replica N`` at the start of each replica when ``replica_lines``)."""
    times = run.times
    total = run.n_replicas * run.n_snapshots
    done = 0
    with open(path, "w", encoding="utf-8", newline="\n") as f:
        f.write(header)
        for block in run.chunks():
            if replica_lines and block.start == 0:
                f.write(f"# replica {block.replica}\n")
            f.write(fmt(block.replica, times[block.start : block.stop], block.mass))
            done += block.stop - block.start
            if progress is not None:
                progress(done, total, "snapshots")


def looks_numeric(head: bytes, comma: bool = False) -> bool:
    """True when the first data line of ``head`` is whitespace-separated numbers."""
    for raw in head.split(b"\n")[:-1] or head.split(b"\n"):
        text = raw.strip()
        if not text or text.startswith(b"#"):
            continue
        if b"," in text and not comma:
            return False
        toks = text.split()
        if len(toks) < 2:
            return False
        try:
            float(toks[0])
            for t in toks[1:]:
                int(t)
        except ValueError:
            return False
        return True
    return False


class TextFormat(Format):
    name = "text"
    suffixes = (".txt", ".dat", ".text")
    description = "plain text: a line per snapshot (time, then the site masses), '# replica N'"
    writable = True

    def sniff(self, head: bytes, path: Path) -> bool:
        magic = magic_of(head)
        if magic is not None:
            return magic == MAGIC
        return looks_numeric(head)

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading text")
        return TextSource(Path(path))

    def write(
        self, run: Run, path: Path, *, progress: Progress | None = None, **options: str
    ) -> list[str]:
        guard_options(options, self.write_options, "writing text")
        export_lines(run, path, header_lines(MAGIC, run), text_lines, progress)
        notes = []
        if run.series("inflow") is not None or run.series("outflow") is not None:
            notes.append("text does not carry inflow/outflow; use .npz, .h5 or .nc for them")
        return notes
