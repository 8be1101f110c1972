"""CSV, wide: one row per snapshot.

Layout::

    # massarc-meta: {"model": {...}, ...}        (optional comment lines first)
    replica,time,m0,m1,m2,...,m199
    0,0.0,3,0,2,...
    0,0.5,2,1,2,...
    1,0.0,...

``replica`` may be left out (a single replica). There is one ``mK`` column per site, in
flat order (row-major, ``y`` slow, for 2-D lattices). Rows are grouped by replica, in
order 0, 1, 2, ..., and by increasing time within a replica, so that the file streams.
"""

from __future__ import annotations

from collections.abc import Iterator
from itertools import pairwise
from pathlib import Path
from typing import Any

import numpy as np

from massarc.schema import RunMeta

from ..errors import DataError
from ..reader import Run
from ._lines import LineParser, LineReader, csv_columns, read_csv_head
from ._options import guard_options
from .registry import Batch, Events, Format, Progress, Source
from .text import export_lines, meta_comment

__all__ = ["CsvWideFormat", "replica_runs"]


def replica_runs(
    reps: np.ndarray, lines: np.ndarray, name: str, state: dict[str, int]
) -> Iterator[tuple[int, int, int]]:
    """Split rows into runs of one replica: ``(replica, start, stop)``. ``reps`` must be
    non-negative integers, grouped and in order (``state`` carries the current replica)."""
    bad = (reps != np.floor(reps)) | (reps < 0) | ~np.isfinite(reps)
    if bad.any():
        i = int(np.argmax(bad))
        raise DataError(
            f"{name}: line {int(lines[i])}: expected a replica index >= 0; got {float(reps[i])!r}"
        )
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


def _columns(columns: list[str], name: str, line: int) -> int:
    """Number of leading columns (1: time; 2: replica, time) after checking the header."""
    lead = 2 if columns[:1] == ["replica"] else 1
    if columns[lead - 1 : lead] != ["time"]:
        raise DataError(
            f"{name}: line {line}: expected the header to start with replica,time "
            f"or time; got {','.join(columns[:2])!r}"
        )
    for k, col in enumerate(columns[lead:]):
        if col != f"m{k}":
            raise DataError(
                f"{name}: line {line}: unknown column {col!r}; expected m{k} "
                "(one mK column per site, in order)"
            )
    return lead


class CsvWideSource(Source):
    unit = "bytes"

    def __init__(self, path: Path) -> None:
        self.path = path
        self.name = str(path)
        self.head = read_csv_head(path, self.name)
        self.lead = _columns(self.head.columns, self.name, self.head.line)
        self.width = len(self.head.columns) - self.lead
        self.total = path.stat().st_size

    def hints(self) -> dict[str, Any]:
        return self.head.meta

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        if self.width != meta.lattice.volume:
            raise DataError(
                f"{self.name}: line {self.head.line}: metadata contradicts the data: "
                f"lattice.sites is {list(meta.lattice.sites)} ({meta.lattice.volume} sites) "
                f"but the header has {self.width} mass columns"
            )
        names = ("replica", "time") if self.lead == 2 else ("time",)
        parser = LineParser(
            self.name, "", lead=self.lead, comma=True, lead_names=names, replicas=False
        )
        state: dict[str, int] = {}
        with open(self.path, "rb") as f:
            f.seek(self.head.offset)
            reader = LineReader(f, self.name)
            reader.line = self.head.line + 1
            for buf, first, _ in reader:
                for rows in parser.parse(buf, first):
                    bad = np.flatnonzero(rows.counts != self.width)
                    if len(bad):
                        i = int(bad[0])
                        raise DataError(
                            f"{self.name}: line {int(rows.lines[i])}: expected "
                            f"{self.lead + self.width} fields (as in the header); got "
                            f"{self.lead + int(rows.counts[i])} (a ragged or truncated row)"
                        )
                    mass = rows.values.reshape(len(rows.counts), self.width)
                    reps = rows.lead[:, 0] if self.lead == 2 else np.zeros(len(rows.counts))
                    for r, a, b in replica_runs(reps, rows.lines, self.name, state):
                        yield Batch(
                            rows.lead[a:b, self.lead - 1],
                            mass[a:b],
                            replica=r,
                            lines=rows.lines[a:b],
                            done=reader.bytes_done,
                        )


def _rows(replica: int, times: np.ndarray, mass: np.ndarray) -> str:
    """Rows ``replica,time,m0,m1,...`` of a block."""
    flat = mass.reshape(len(mass), -1).tolist()
    return "".join(
        f"{replica},{t!r}," + ",".join(map(str, row)) + "\n"
        for t, row in zip(times.tolist(), flat, strict=True)
    )


class CsvWideFormat(Format):
    name = "csv-wide"
    suffixes = (".wide.csv",)
    description = "CSV, a row per snapshot: replica,time,m0,m1,... (one column per site)"
    writable = True

    def sniff(self, head: bytes, path: Path) -> bool:
        cols = csv_columns(head)
        return cols[:3] == [b"replica", b"time", b"m0"] or cols[:2] == [b"time", b"m0"]

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading csv-wide")
        return CsvWideSource(Path(path))

    def write(
        self, run: Run, path: Path, *, progress: Progress | None = None, **options: str
    ) -> list[str]:
        guard_options(options, self.write_options, "writing csv-wide")
        volume = int(np.prod(run.sites))
        header = "replica,time," + ",".join(f"m{k}" for k in range(volume)) + "\n"
        export_lines(run, path, meta_comment(run) + header, _rows, progress, replica_lines=False)
        return []
