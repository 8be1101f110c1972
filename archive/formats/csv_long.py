"""CSV, long (sparse): one row per occupied site and snapshot.

Layout::

    # massarc-meta: {"model": {...}, ...}        (optional comment lines first)
    replica,time,site,mass                       (2-D lattices: replica,time,y,x,mass)
    0,0.0,3,2
    0,0.0,17,1
    0,0.5,3,1
    ...

``replica`` may be left out (a single replica). Sites missing from a snapshot hold zero;
a snapshot whose sites are all empty is written as one row of mass 0 at site 0. Rows are
grouped by (replica, time): all rows of one snapshot together, times increasing within a
replica, replicas in order 0, 1, 2, ... That is what lets a file larger than memory
stream, and a file that is not grouped so is refused with a message that says so.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from functools import partial
from pathlib import Path
from typing import Any

import numpy as np

from massarc.schema import RunMeta

from ..errors import DataError
from ..reader import Run
from ._csv import CsvSource, csv_columns, guard_replica_index, guard_row_width, replica_runs
from ._export import export_lines, meta_comment
from ._lines import Rows
from ._options import guard_options
from .registry import Batch, Events, Format, Progress, Source

__all__ = ["CsvLongFormat"]

#: Dense cells materialised at once while grouping rows into snapshots.
_CELLS = 1 << 22


@dataclass
class _OpenSnapshot:
    """The snapshot whose rows may continue in the next batch of lines."""

    replica: int
    time: float
    line: int
    dense: np.ndarray
    seen: np.ndarray


def _layout(columns: list[str], name: str, line: int) -> tuple[int, int]:
    """(lead columns, site columns) after checking the header."""
    lead = 2 if columns[:1] == ["replica"] else 1
    if len(columns) < lead:  # an empty header line (found by fuzzing, docs/fuzzing.md)
        raise DataError(
            f"{name}:{line}: expected a header naming time, site and mass columns; got {columns!r}"
        )
    rest = columns[lead:]
    want = [["time", "site", "mass"], ["time", "y", "x", "mass"]]
    for w in want:
        if [columns[lead - 1], *rest] == w:
            return lead, len(w) - 2
    for col in columns:
        if col not in {"replica", "time", "site", "y", "x", "mass"}:
            raise DataError(
                f"{name}: line {line}: unknown column {col!r}; expected "
                "replica,time,site,mass (or replica,time,y,x,mass)"
            )
    raise DataError(
        f"{name}: line {line}: expected the columns replica,time,site,mass (or "
        f"replica,time,y,x,mass) in this order; got {','.join(columns)!r}"
    )


class CsvLongSource(CsvSource):
    named_columns = True

    def __init__(self, path: Path) -> None:
        super().__init__(path)
        self.lead, self.site_columns = _layout(self.head.columns, self.name, self.head.line)

    def _site_mass(self, rows: Rows, lattice: tuple[int, ...], reps: np.ndarray) -> np.ndarray:
        ints = self.site_columns + 1
        guard_row_width(rows, self.lead, ints, self.name)
        vals = rows.values.reshape(len(rows.counts), ints)
        guard_replica_index(reps, rows.lines, self.name)
        if self.site_columns != len(lattice):
            raise DataError(
                f"{self.name}: line {self.head.line}: metadata contradicts the data: "
                f"lattice.sites is {list(lattice)} but the header has "
                f"{self.site_columns} site column(s)"
            )
        coords = vals[:, : self.site_columns]
        out = (coords < 0) | (coords >= np.asarray(lattice))
        if out.any():
            i, k = (int(x) for x in np.argwhere(out)[0])
            axis = "site" if self.site_columns == 1 else ("y", "x")[k]
            raise DataError(
                f"{self.name}: line {int(rows.lines[i])}: {axis} {int(coords[i, k])} "
                f"is outside the lattice {list(lattice)}"
            )
        mass = vals[:, -1]
        if (mass < 0).any():
            i = int(np.argmax(mass < 0))
            raise DataError(
                f"{self.name}: line {int(rows.lines[i])}: replica {int(reps[i])}, "
                f"time {float(rows.lead[i, self.lead - 1])!r}: mass {int(mass[i])} is "
                "negative; expected a non-negative integer"
            )
        flat = coords[:, 0] if self.site_columns == 1 else coords[:, 0] * lattice[1] + coords[:, 1]
        return np.stack([flat, mass], axis=1)

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        lattice = tuple(meta.lattice.sites)
        state: dict[str, int] = {}
        carry: _OpenSnapshot | None = None
        for rows, reps in self.rows():
            site_mass = self._site_mass(rows, lattice, reps)
            carry, finished = self._group(rows, reps, site_mass, carry, meta.lattice.volume)
            for snap in finished:
                yield from self._emit(snap, state, self.bytes_done)
        if carry is not None:
            last = ([carry.replica], [carry.time], [carry.line], carry.dense[None])
            yield from self._emit(last, state, self.bytes_done)

    def _group(
        self,
        rows: Rows,
        reps: np.ndarray,
        site_mass: np.ndarray,
        carry: _OpenSnapshot | None,
        volume: int,
    ) -> tuple[_OpenSnapshot | None, list[Any]]:
        t = rows.lead[:, self.lead - 1]
        prev_r = np.concatenate([[carry.replica if carry else np.nan], reps[:-1]])
        prev_t = np.concatenate([[carry.time if carry else np.nan], t[:-1]])
        new = (reps != prev_r) | (t != prev_t)
        back = new & (reps == prev_r) & (t < prev_t)
        if back.any():
            i = int(np.argmax(back))
            raise DataError(
                f"{self.name}: line {int(rows.lines[i])}: rows must be grouped by (replica, "
                f"time) with times increasing (for streaming); got time {float(t[i])!r} after "
                f"{float(prev_t[i])!r} in replica {int(reps[i])}"
            )
        ids = np.cumsum(new) - (0 if carry is not None else 1)
        starts = np.flatnonzero(new)
        g_rep = ([carry.replica] if carry else []) + reps[starts].astype(np.int64).tolist()
        g_time = ([carry.time] if carry else []) + t[starts].tolist()
        g_line = ([carry.line] if carry else []) + rows.lines[starts].tolist()
        n_groups = len(g_rep)
        key = ids * volume + site_mass[:, 0]
        order = np.argsort(key, kind="stable")
        dup = key[order][1:] == key[order][:-1]
        if carry is not None:
            first = ids == 0
            dup_carry = first & carry.seen[np.where(first, site_mass[:, 0], 0)]
        else:
            dup_carry = np.zeros(len(ids), bool)
        if dup.any() or dup_carry.any():
            cands = list(order[1:][dup]) + list(np.flatnonzero(dup_carry))
            i = int(min(cands, key=lambda j: rows.lines[j]))
            raise DataError(
                f"{self.name}: line {int(rows.lines[i])}: site {int(site_mass[i, 0])} "
                "appears twice in one snapshot (rows grouped by (replica, time))"
            )
        finished = []
        step = max(1, _CELLS // max(volume, 1))
        for a in range(0, n_groups, step):
            b = min(a + step, n_groups)
            dense = np.zeros((b - a, volume), np.int64)
            if carry is not None and a == 0:
                dense[0] = carry.dense
            sel = (ids >= a) & (ids < b)
            np.add.at(dense, (ids[sel] - a, site_mass[sel, 0]), site_mass[sel, 1])
            finished.append((g_rep[a:b], g_time[a:b], g_line[a:b], dense))
        last_rep, last_t, last_line, last_dense = finished[-1]
        seen = np.zeros(volume, bool)
        seen[site_mass[ids == n_groups - 1, 0]] = True
        if carry is not None and n_groups == 1:
            seen |= carry.seen
        new_carry = _OpenSnapshot(
            last_rep[-1], last_t[-1], last_line[-1], last_dense[-1].copy(), seen
        )
        finished[-1] = (last_rep[:-1], last_t[:-1], last_line[:-1], last_dense[:-1])
        return new_carry, finished

    def _emit(self, snap: Any, state: dict[str, int], done: int) -> Iterator[Batch]:
        g_rep, g_time, g_line, dense = snap
        if not len(g_rep):
            return
        lines = np.asarray(g_line)
        for r, a, b in replica_runs(np.asarray(g_rep, float), lines, self.name, state):
            yield Batch(np.asarray(g_time[a:b]), dense[a:b], replica=r, lines=lines[a:b], done=done)


def _row_lines(lattice: tuple[int, ...], replica: int, times: np.ndarray, mass: np.ndarray) -> str:
    """Rows ``replica,time,site,mass`` of the occupied sites (site 0 of an empty snapshot)."""
    flat = mass.reshape(len(mass), -1)
    out = []
    for t, row in zip(times.tolist(), flat, strict=True):
        sites = np.flatnonzero(row)
        if not len(sites):
            sites = np.zeros(1, np.int64)
        head = f"{replica},{t!r},"
        if len(lattice) == 1:
            coords = [str(s) for s in sites.tolist()]
        else:
            coords = [f"{y},{x}" for y, x in zip(*np.divmod(sites, lattice[1]), strict=True)]
        out.extend(f"{head}{c},{m}\n" for c, m in zip(coords, row[sites].tolist(), strict=True))
    return "".join(out)


class CsvLongFormat(Format):
    name = "csv-long"
    suffixes = (".csv", ".long.csv")
    description = "CSV, a row per occupied site: replica,time,site,mass (2-D: y,x for site)"
    writable = True
    masks = True

    def sniff(self, head: bytes, path: Path) -> bool:
        cols = csv_columns(head)
        return cols[-1:] == [b"mass"] and b"time" in cols and (b"site" in cols or b"x" in cols)

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading csv-long")
        return CsvLongSource(Path(path))

    def write(
        self,
        run: Run,
        path: Path,
        *,
        progress: Progress | None = None,
        allow_missing: bool = False,
        **options: str,
    ) -> list[str]:
        guard_options(options, self.write_options, "writing csv-long")
        lattice = run.sites
        header = "replica,time," + ("site" if len(lattice) == 1 else "y,x") + ",mass\n"
        return export_lines(
            run,
            path,
            meta_comment(run) + header,
            partial(_row_lines, lattice),
            progress,
            replica_lines=False,
            allow_missing=allow_missing,
        )
