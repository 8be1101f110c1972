"""Event logs (read only): initial snapshots plus every move, reconstructed into snapshots.

Layout::

    # massarc-events 1
    # massarc-meta: {"model": {...}, "lattice": {...}, "run": {...}}
    # initial
    0.0 3 0 2 1 ...                 (one line per replica, in replica order: time, masses)
    0.0 1 1 4 0 ...
    # events
    0.013 0 4 5 1                   (time replica source target amount)
    0.027 0 5 6 2
    0.004 1 9 8 1
    ...

Every replica starts at the same time. Sites are flat C-order indices (``y * Lx + x``);
``-1`` is the reservoir of an open boundary (injection when it is the source, extraction
when it is the target). Events are sorted by (replica, time); a replica without events
keeps its initial configuration.

Snapshots are taken at ``--option every=DT`` (from the initial time up to ``--option
until=T``, default the last event) or at ``--option times=...``; a snapshot at time t
includes every event at times <= t. Each move is checked exactly, in order: a site never
holds negative mass. ``--option keep-events=true`` also archives the moves in the run's
``events`` group (FORMAT.md section 5).
"""

from __future__ import annotations

from collections.abc import Iterator
from itertools import pairwise
from pathlib import Path
from typing import Any, ClassVar

import numpy as np

from massarc.schema import RunMeta

from ..errors import ArchiveError, DataError
from ._lines import LineParser, LineReader, Rows, magic_of, read_preamble
from ._options import as_bool, as_float, guard_options, parse_times
from .registry import Batch, Events, Format, Source

__all__ = ["EventsFormat"]

MAGIC = "massarc-events"


class _Replay:
    """Configurations of one replica moved event by event, sampled on the time grid."""

    def __init__(self, name: str, grid: np.ndarray, volume: int, chunk: int) -> None:
        self.name, self.grid, self.volume, self.chunk = name, grid, volume, chunk
        self.replica = -1
        self.state = np.zeros(volume, np.int64)
        self.k = 0
        self.out: list[np.ndarray] = []

    def start(self, replica: int, initial: np.ndarray) -> Iterator[Batch]:
        yield from self.finish()
        self.replica, self.state, self.k = replica, initial.astype(np.int64).copy(), 0

    def _snap(self) -> Iterator[Batch]:
        self.out.append(self.state.copy())
        self.k += 1
        if len(self.out) >= self.chunk:
            yield from self._flush()

    def _flush(self) -> Iterator[Batch]:
        if self.out:
            b = self.k
            a = b - len(self.out)
            yield Batch(self.grid[a:b], np.stack(self.out), replica=self.replica)
            self.out = []

    def finish(self) -> Iterator[Batch]:
        if self.replica >= 0:
            while self.k < len(self.grid):
                yield from self._snap()
            yield from self._flush()

    def apply(
        self, t: np.ndarray, src: np.ndarray, tgt: np.ndarray, amt: np.ndarray, lines: np.ndarray
    ) -> Iterator[Batch]:
        upto = np.searchsorted(t, self.grid[self.k :], side="right")
        prev = 0
        for j in upto.tolist():
            if j >= len(t):
                break
            self._exact(t[prev:j], src[prev:j], tgt[prev:j], amt[prev:j], lines[prev:j])
            prev = j
            yield from self._snap()
        self._exact(t[prev:], src[prev:], tgt[prev:], amt[prev:], lines[prev:])

    def _exact(
        self, t: np.ndarray, src: np.ndarray, tgt: np.ndarray, amt: np.ndarray, lines: np.ndarray
    ) -> None:
        """Apply moves in order, checking after each one that no site goes negative."""
        if not len(t):
            return
        n = len(t)
        sites = np.concatenate([src, tgt])
        delta = np.concatenate([-amt, amt])
        order = np.concatenate([2 * np.arange(n), 2 * np.arange(n) + 1])
        keep = sites >= 0
        sites, delta, order = sites[keep], delta[keep], order[keep]
        o = np.lexsort((order, sites))
        s, d = sites[o], delta[o]
        cs = np.cumsum(d)
        first = np.r_[True, s[1:] != s[:-1]]
        base = np.maximum.accumulate(np.where(first, np.arange(len(s)), 0))
        bal = self.state[s] + cs - (cs - d)[base]
        neg = bal < 0
        if neg.any():
            i = int(order[o][neg].min() // 2)
            raise DataError(
                f"{self.name}: line {int(lines[i])}: replica {self.replica}, time {float(t[i])!r}: "
                f"moving {int(amt[i])} from site {int(src[i])} leaves it negative; expected "
                "the source to hold the amount moved"
            )
        np.add.at(self.state, s, d)


class EventsSource(Source):
    unit = "bytes"

    def __init__(self, path: Path, options: dict[str, str]) -> None:
        self.path, self.name, self.options = path, str(path), options
        self.total = path.stat().st_size
        self.keep = as_bool(options.get("keep-events", "false"), "keep-events")
        if ("every" in options) == ("times" in options):
            raise ArchiveError(
                f"{self.name}: choose the snapshot times of an event log with "
                "--option every=DT or --option times=... (one of them)"
            )

    def hints(self) -> dict[str, Any]:
        return read_preamble(self.path, self.name)

    def _sections(self) -> Iterator[tuple[str, Rows, LineReader]]:
        parser = LineParser(self.name, MAGIC, replicas=False)
        marks: list[tuple[int, str]] = []
        with open(self.path, "rb") as f:
            reader = LineReader(f, self.name)
            for buf, first, _ in reader:
                rows_list = parser.parse(buf, first)
                for line, text in parser.comments:
                    word = text.lstrip(b"#").strip().lower()
                    if word in (b"initial", b"events"):
                        marks.append((line, word.decode()))
                parser.comments.clear()
                for rows in rows_list:
                    before = [s for line, s in marks if line < rows.lines[0]]
                    if not before:
                        raise DataError(
                            f"{self.name}: line {int(rows.lines[0])}: expected a "
                            "'# initial' or '# events' line before the data"
                        )
                    yield before[-1], rows, reader

    def _grid(self, t0: float) -> np.ndarray:
        if "times" in self.options:
            grid = parse_times(self.options["times"], None)
        else:
            dt = as_float(self.options["every"], "every", positive=True)
            until = self.options.get("until")
            end = as_float(until, "until") if until is not None else self._last_time(t0)
            grid = t0 + dt * np.arange(int(np.floor((end - t0) / dt * (1 + 1e-12))) + 1)
        if not len(grid) or grid[0] < t0 or (np.diff(grid) <= 0).any():
            raise ArchiveError(
                f"{self.name}: expected increasing snapshot times from the "
                f"initial time {t0!r} on; got {grid[:3].tolist()}..."
            )
        return grid

    def _last_time(self, t0: float) -> float:
        last = t0
        for section, rows, _ in self._sections():
            if section == "events" and len(rows.lead):
                last = max(last, float(rows.lead[:, 0].max()))
        return last

    def batches(self, meta: RunMeta, chunk: int) -> Iterator[Batch | Events]:
        volume = meta.lattice.volume
        initial: list[np.ndarray] = []
        t0: float | None = None
        replay: _Replay | None = None
        last = (0, -np.inf)
        for section, rows, reader in self._sections():
            if section == "initial":
                if replay is not None:
                    raise DataError(
                        f"{self.name}: line {int(rows.lines[0])}: expected the "
                        "'# initial' section before '# events'"
                    )
                bad = np.flatnonzero(rows.counts != volume)
                if len(bad):
                    i = int(bad[0])
                    raise DataError(
                        f"{self.name}: line {int(rows.lines[i])}: expected {volume} masses "
                        f"(lattice.sites {list(meta.lattice.sites)}); got {int(rows.counts[i])}"
                    )
                t0 = float(rows.lead[0, 0]) if t0 is None else t0
                off = np.flatnonzero(rows.lead[:, 0] != t0)
                if len(off):
                    i = int(off[0])
                    raise DataError(
                        f"{self.name}: line {int(rows.lines[i])}: initial time "
                        f"{float(rows.lead[i, 0])!r} differs from the first one ({t0!r})"
                    )
                m = rows.values.reshape(-1, volume)
                if (m < 0).any():
                    i, site = (int(x) for x in np.argwhere(m < 0)[0])
                    raise DataError(
                        f"{self.name}: line {int(rows.lines[i])}: replica "
                        f"{len(initial) + i}, snapshot 0, site {site}: mass "
                        f"{int(m[i, site])} is negative; expected >= 0"
                    )
                initial.extend(m)
                continue
            if replay is None:
                if t0 is None:
                    raise DataError(f"{self.name}: expected a '# initial' section first")
                replay = _Replay(self.name, self._grid(t0), volume, chunk)
                yield from replay.start(0, initial[0])
            t, rep, src, tgt, amt = self._events(rows, len(initial), volume, t0, last)
            last = (int(rep[-1]), float(t[-1]))
            if self.keep:
                yield Events(t, rep.astype(np.int32), src, tgt, amt)
            cuts = [0, *(np.flatnonzero(np.diff(rep)) + 1).tolist(), len(rep)]
            for a, b in pairwise(cuts):
                while replay.replica < int(rep[a]):
                    nxt = replay.replica + 1
                    yield from replay.start(nxt, initial[nxt])
                yield from replay.apply(t[a:b], src[a:b], tgt[a:b], amt[a:b], rows.lines[a:b])
            self.total = reader.bytes_done
        if t0 is None:
            raise DataError(f"{self.name}: expected a '# initial' section; found none")
        if replay is None:
            replay = _Replay(self.name, self._grid(t0), volume, chunk)
            yield from replay.start(0, initial[0])
        while replay.replica < len(initial) - 1:
            nxt = replay.replica + 1
            yield from replay.start(nxt, initial[nxt])
        yield from replay.finish()

    def _events(
        self, rows: Rows, n_rep: int, volume: int, t0: float, last: tuple[int, float]
    ) -> tuple[np.ndarray, ...]:
        bad = np.flatnonzero(rows.counts != 4)
        if len(bad):
            i = int(bad[0])
            raise DataError(
                f"{self.name}: line {int(rows.lines[i])}: expected 'time replica "
                f"source target amount'; got {1 + int(rows.counts[i])} fields"
            )
        v = rows.values.reshape(-1, 4)
        t, rep, src, tgt, amt = rows.lead[:, 0], v[:, 0], v[:, 1], v[:, 2], v[:, 3]
        prev_r = np.r_[last[0], rep[:-1]]
        prev_t = np.r_[last[1], t[:-1]]
        checks = [
            (~np.isfinite(t) | (t < t0), f"expected a finite time >= the initial time {t0!r}"),
            ((rep < 0) | (rep >= n_rep), f"expected a replica in 0..{n_rep - 1}"),
            (
                (rep < prev_r) | ((rep == prev_r) & (t < prev_t)),
                "expected events sorted by (replica, time)",
            ),
            (
                (src < -1) | (src >= volume) | (tgt < -1) | (tgt >= volume),
                f"expected sites in 0..{volume - 1} (or -1, the reservoir)",
            ),
            ((src == tgt), "expected source and target to differ"),
            (amt <= 0, "expected a positive amount"),
        ]
        for bad_mask, text in checks:
            if bad_mask.any():
                i = int(np.argmax(bad_mask))
                raise DataError(
                    f"{self.name}: line {int(rows.lines[i])}: {text}; got "
                    f"{float(rows.lead[i, 0])!r} {' '.join(map(str, v[i].tolist()))}"
                )
        return t, rep, src, tgt, amt


class EventsFormat(Format):
    name = "events"
    suffixes = (".events", ".events.txt")
    description = (
        "event log (read only): initial snapshots, then 'time replica source target amount'"
    )
    read_options: ClassVar[dict[str, str]] = {
        "every": "take a snapshot every DT from the initial time",
        "until": "last snapshot time with every= (default: the last event)",
        "times": "snapshot times: start:stop:step, a comma list or a file",
        "keep-events": "also archive the moves in the run's events group (default false)",
    }

    def sniff(self, head: bytes, path: Path) -> bool:
        return magic_of(head) == MAGIC

    def read(self, path: Path | str, **options: str) -> Source:
        guard_options(options, self.read_options, "reading events")
        return EventsSource(Path(path), dict(options))
