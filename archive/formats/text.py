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

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np

from massarc.schema import RunMeta

from ..reader import Run
from ._export import export_lines, header_lines
from ._lines import LineParser, LineReader, magic_of, read_preamble
from ._options import guard_options
from ._text_rows import TEXT_MAGIC, rows_to_batch
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["TextFormat"]


class TextSource(Source):
    unit = "bytes"

    def __init__(self, path: Path) -> None:
        self.path = path
        self.name = str(path)
        self.total = path.stat().st_size if path.is_file() else None

    def hints(self) -> dict[str, Any]:
        return read_preamble(self.path, self.name)

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        parser = LineParser(self.name, TEXT_MAGIC)
        state: dict[str, int] = {}
        with open(self.path, "rb") as f:
            reader = LineReader(f, self.name)
            for buf, first, _ in reader:
                for rows in parser.parse(buf, first):
                    yield rows_to_batch(rows, meta, self.name, reader.bytes_done, state=state)


def _text_lines(replica: int, times: np.ndarray, mass: np.ndarray) -> str:
    """Lines ``time m0 m1 ...`` of ``mass`` ``(n, *lattice)`` (times by ``repr``: exact)."""
    flat = mass.reshape(len(times), -1).tolist()
    return "".join(
        f"{t!r} " + " ".join(map(str, row)) + "\n"
        for t, row in zip(times.tolist(), flat, strict=True)
    )


def _looks_numeric(head: bytes, comma: bool = False) -> bool:
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
    masks = True

    def sniff(self, head: bytes, path: Path) -> bool:
        magic = magic_of(head)
        if magic is not None:
            return magic == TEXT_MAGIC
        return _looks_numeric(head)

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading text")
        return TextSource(Path(path))

    def write(
        self,
        run: Run,
        path: Path,
        *,
        progress: Progress | None = None,
        allow_missing: bool = False,
        **options: str,
    ) -> list[str]:
        guard_options(options, self.write_options, "writing text")
        notes = export_lines(
            run,
            path,
            header_lines(TEXT_MAGIC, run),
            _text_lines,
            progress,
            allow_missing=allow_missing,
        )
        if run.series("inflow") is not None or run.series("outflow") is not None:
            notes.append("text does not carry inflow/outflow; use .npz, .h5 or .nc for them")
        return notes
