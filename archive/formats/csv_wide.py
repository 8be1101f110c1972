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
from pathlib import Path

import numpy as np

from massarc.schema import RunMeta

from ..errors import DataError
from ..reader import Run
from ._csv import CsvSource, csv_columns, guard_row_width, replica_runs
from ._export import export_lines, meta_comment
from ._options import guard_options
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["CsvWideFormat"]


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


class CsvWideSource(CsvSource):
    def __init__(self, path: Path) -> None:
        super().__init__(path)
        self.lead = _columns(self.head.columns, self.name, self.head.line)
        self.width = len(self.head.columns) - self.lead

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        if self.width != meta.lattice.volume:
            raise DataError(
                f"{self.name}: line {self.head.line}: metadata contradicts the data: "
                f"lattice.sites is {list(meta.lattice.sites)} ({meta.lattice.volume} sites) "
                f"but the header has {self.width} mass columns"
            )
        state: dict[str, int] = {}
        for rows, reps in self.rows():
            guard_row_width(rows, self.lead, self.width, self.name)
            mass = rows.values.reshape(len(rows.counts), self.width)
            for r, a, b in replica_runs(reps, rows.lines, self.name, state):
                yield Batch(
                    rows.lead[a:b, self.lead - 1],
                    mass[a:b],
                    replica=r,
                    lines=rows.lines[a:b],
                    done=self.bytes_done,
                )


def _row_lines(replica: int, times: np.ndarray, mass: np.ndarray) -> str:
    """Rows ``replica,time,m0,m1,...`` of ``mass`` ``(n, *lattice)``."""
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
    masks = True

    def sniff(self, head: bytes, path: Path) -> bool:
        cols = csv_columns(head)
        return cols[:3] == [b"replica", b"time", b"m0"] or cols[:2] == [b"time", b"m0"]

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading csv-wide")
        return CsvWideSource(Path(path))

    def write(
        self,
        run: Run,
        path: Path,
        *,
        progress: Progress | None = None,
        allow_missing: bool = False,
        **options: str,
    ) -> list[str]:
        guard_options(options, self.write_options, "writing csv-wide")
        volume = int(np.prod(run.sites))
        header = "replica,time," + ",".join(f"m{k}" for k in range(volume)) + "\n"
        return export_lines(
            run,
            path,
            meta_comment(run) + header,
            _row_lines,
            progress,
            replica_lines=False,
            allow_missing=allow_missing,
        )
