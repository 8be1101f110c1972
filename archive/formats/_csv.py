"""What the two CSV layouts (``csv-wide``, ``csv-long``) share: the head of the file
(``#`` comment lines with the metadata, then the header of column names), the rows after
it, and rows grouped by replica, in order 0, 1, 2, ..., so that a file streams.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from dataclasses import dataclass
from itertools import pairwise
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import DataError
from ._lines import LineParser, LineReader, Rows, meta_line
from .registry import Source

__all__ = [
    "CsvHead",
    "CsvSource",
    "csv_columns",
    "guard_replica_index",
    "guard_row_width",
    "read_csv_head",
    "replica_runs",
]


@dataclass(frozen=True)
class CsvHead:
    """The top of a CSV file: metadata hints from ``#`` lines, the header's columns and
    line number, and the byte offset where the rows begin."""

    meta: dict[str, Any]
    columns: list[str]
    line: int
    offset: int


def csv_columns(head: bytes) -> list[bytes]:
    """The stripped fields of the first line of ``head`` that is neither blank nor a
    ``#`` comment (for sniffing a CSV header)."""
    for raw in head.split(b"\n"):
        text = raw.strip()
        if text and not text.startswith(b"#"):
            return [c.strip() for c in text.split(b",")]
    return []


def read_csv_head(path: str | os.PathLike[str], name: str) -> CsvHead:
    """Read the comment lines and the header line of a CSV file."""
    meta: dict[str, Any] = {}
    offset = 0
    with open(path, "rb") as f:
        for number, raw in enumerate(f, start=1):
            offset += len(raw)
            text = raw.strip()
            if not text:
                continue
            if text.startswith(b"#"):
                meta = meta_line(text, name, number) or meta
                continue
            columns = [c.strip().decode("utf-8", errors="replace") for c in text.split(b",")]
            return CsvHead(meta, columns, number, offset)
    raise DataError(f"{name}: expected a header line of column names; found none")


def guard_row_width(rows: Rows, lead: int, width: int, name: str) -> None:
    """Every row holds ``lead`` leading fields and ``width`` integers, as the header says."""
    bad = np.flatnonzero(rows.counts != width)
    if len(bad):
        i = int(bad[0])
        raise DataError(
            f"{name}: line {int(rows.lines[i])}: expected {lead + width} fields (as in the "
            f"header); got {lead + int(rows.counts[i])} (a ragged or truncated row)"
        )


def guard_replica_index(reps: np.ndarray, lines: np.ndarray, name: str) -> None:
    """Replica indices (parsed as floats) are integers >= 0."""
    bad = (reps != np.floor(reps)) | (reps < 0) | ~np.isfinite(reps)
    if bad.any():
        i = int(np.argmax(bad))
        raise DataError(
            f"{name}: line {int(lines[i])}: expected a replica index >= 0; got {float(reps[i])!r}"
        )


def replica_runs(
    reps: np.ndarray, lines: np.ndarray, name: str, state: dict[str, int]
) -> Iterator[tuple[int, int, int]]:
    """Split rows into runs of one replica: ``(replica, start, stop)``. ``reps`` must be
    non-negative integers, grouped and in order (``state`` carries the current replica)."""
    guard_replica_index(reps, lines, name)
    r = reps.astype(np.int64)
    prev = np.concatenate([[state.get("replica", int(r[0]))], r[:-1]])
    step = r - prev
    wrong = (step < 0) | (step > 1)
    if wrong.any():
        i = int(np.argmax(wrong))
        raise DataError(
            f"{name}: line {int(lines[i])}: rows must be grouped by replica, in order 0, 1, "
            f"2, ... (for streaming); got replica {int(r[i])} after replica {int(prev[i])}"
        )
    cuts = np.flatnonzero(step).tolist()
    edges = [0, *cuts, len(r)]
    for a, b in pairwise(edges):
        if b > a:
            yield int(r[a]), a, b
    state["replica"] = int(r[-1])


class CsvSource(Source):
    """A CSV file opened for streaming: its head is read now (``lead`` is 2 when the rows
    start with ``replica,time``, 1 when with ``time``); :meth:`rows` streams the rest."""

    unit = "bytes"
    lead: int = 1
    #: Errors in an integer column name the column (long layout: site, y, x, mass) rather
    #: than the site of a mass (wide layout).
    named_columns: bool = False

    def __init__(self, path: Path) -> None:
        self.path = path
        self.name = str(path)
        self.head = read_csv_head(path, self.name)
        self.total = path.stat().st_size
        self.reader: LineReader | None = None

    def hints(self) -> dict[str, Any]:
        return self.head.meta

    def rows(self) -> Iterator[tuple[Rows, np.ndarray]]:
        """Rows after the header with their replica indices (all 0 without a replica
        column); :attr:`bytes_done` is the progress."""
        names = ("replica", "time") if self.lead == 2 else ("time",)
        parser = LineParser(
            self.name,
            "",
            lead=self.lead,
            comma=True,
            lead_names=names,
            replicas=False,
            columns=tuple(self.head.columns[self.lead :]) if self.named_columns else (),
        )
        with open(self.path, "rb") as f:
            f.seek(self.head.offset)
            self.reader = reader = LineReader(f, self.name)
            reader.line = self.head.line + 1
            for buf, first, _ in reader:
                for rows in parser.parse(buf, first):
                    reps = rows.lead[:, 0] if self.lead == 2 else np.zeros(len(rows.counts))
                    yield rows, reps

    @property
    def bytes_done(self) -> int:
        """Bytes of the file read so far."""
        return self.reader.bytes_done if self.reader is not None else 0
