"""Particle positions: the site of every particle at each snapshot.

Layout::

    # massarc-positions 1
    # massarc-meta: {"model": {...}, "lattice": {"sites": [200], ...}, ...}
    # replica 0
    0.0 0 0 3 7 7 7 12
    0.5 0 3 3 7 7 8 12
    # replica 1
    ...

A data line is the time, then the flat (C-order; ``y * Lx + x`` on a 2-D lattice) site
index of every particle, ascending when massarc writes it (any order is read). A site
holding m particles appears m times; an empty lattice is a line with the time alone.
Comments, ``# replica N`` and blank-line separators follow the text format. The lattice
shape comes from the metadata (the metadata line of a file massarc wrote).
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np

from massarc.schema import RunMeta

from ..errors import DataError
from ..reader import Run
from ._export import export_lines, header_lines
from ._lines import LineParser, LineReader, Rows, magic_of, read_preamble
from ._options import guard_options
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["PositionsFormat", "occupations", "positions_lines"]

MAGIC = "massarc-positions"


def occupations(rows: Rows, volume: int, name: str) -> np.ndarray:
    """``(n, volume)`` occupation numbers of rows of site indices."""
    n = len(rows.counts)
    sites = rows.values
    out = (sites < 0) | (sites >= volume)
    if out.any():
        k = int(np.argmax(out))
        row = int(np.searchsorted(rows.offsets, k, side="right") - 1)
        raise DataError(
            f"{name}: line {int(rows.lines[row])}: site index {int(sites[k])} is outside the "
            f"lattice of {volume} sites; expected 0..{volume - 1}"
        )
    row_of = np.repeat(np.arange(n, dtype=np.int64), rows.counts)
    return np.bincount(row_of * volume + sites, minlength=n * volume).reshape(n, volume)


def positions_lines(replica: int, times: np.ndarray, mass: np.ndarray) -> str:
    """Lines ``time s1 s2 ...`` (sorted particle sites) of ``mass`` ``(n, *lattice)``."""
    flat = mass.reshape(len(times), -1)
    index = np.arange(flat.shape[1])
    out = []
    for t, row in zip(times.tolist(), flat, strict=True):
        sites = np.repeat(index, row)
        out.append(" ".join([repr(t), *map(str, sites.tolist())]) + "\n")
    return "".join(out)


class PositionsSource(Source):
    unit = "bytes"

    def __init__(self, path: Path) -> None:
        self.path = path
        self.name = str(path)
        self.total = path.stat().st_size

    def hints(self) -> dict[str, Any]:
        return read_preamble(self.path, self.name)

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        parser = LineParser(self.name, MAGIC, value_name="site index", site_of=False)
        volume = meta.lattice.volume
        with open(self.path, "rb") as f:
            reader = LineReader(f, self.name)
            for buf, first, _ in reader:
                for rows in parser.parse(buf, first):
                    yield Batch(
                        rows.lead[:, 0],
                        occupations(rows, volume, self.name),
                        replica=rows.replica,
                        lines=rows.lines,
                        done=reader.bytes_done,
                    )


class PositionsFormat(Format):
    name = "positions"
    suffixes = (".pos", ".positions.txt")
    description = "particle positions: a line per snapshot, the time then each particle's site"
    writable = True
    masks = True

    def sniff(self, head: bytes, path: Path) -> bool:
        return magic_of(head) == MAGIC

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading positions")
        return PositionsSource(Path(path))

    def write(
        self,
        run: Run,
        path: Path,
        *,
        progress: Progress | None = None,
        allow_missing: bool = False,
        **options: str,
    ) -> list[str]:
        guard_options(options, self.write_options, "writing positions")
        return export_lines(
            run,
            path,
            header_lines(MAGIC, run),
            positions_lines,
            progress,
            allow_missing=allow_missing,
        )
