"""The shared streaming path: a :class:`~.registry.Source` into a run archive.

Every importer ends here. :func:`resolve_metadata` merges what the file carries with the
user's metadata file and ``--set`` overrides; :class:`BatchFeeder` validates each batch (naming
the input, line and (replica, snapshot, site) in its errors), cuts the stream into
chunk-aligned appends so that every chunk is encoded once, and commits when a live source
goes idle. Memory: one batch of the source plus at most one chunk per replica.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Iterator, Mapping
from pathlib import Path
from typing import Any

import numpy as np

from massarc.schema import MetadataError, RunMeta, apply_overrides, read_metadata_file
from massarc.schema import parse_metadata as _parse

from ..errors import DataError
from ..layout import chunk_snapshots, mass_dtype, sentinel
from ..store import Location
from ..writer import RunWriter, create_run
from ._guard import BatchGuard
from .registry import Batch, Events, Progress, Source

__all__ = ["BatchFeeder", "archive_dtype", "merge_dicts", "resolve_metadata", "write_source"]


def merge_dicts(base: Mapping[str, Any], top: Mapping[str, Any]) -> dict[str, Any]:
    """Deep merge; ``top`` wins. A ``model`` table of another family replaces the old one.

    >>> merge_dicts({"run": {"regime": "stationary", "seeds": [1]}}, {"run": {"seeds": [2]}})
    {'run': {'regime': 'stationary', 'seeds': [2]}}
    """
    out: dict[str, Any] = dict(base)
    for key, value in top.items():
        old = out.get(key)
        if isinstance(value, Mapping) and isinstance(old, Mapping):
            if key == "model" and value.get("family", old.get("family")) != old.get("family"):
                out[key] = dict(value)
            else:
                out[key] = merge_dicts(old, value)
        else:
            out[key] = value
    return out


def resolve_metadata(
    hints: Mapping[str, Any],
    meta_file: str | Path | None,
    overrides: Iterable[str],
    source_name: str,
    mapped: Mapping[str, Any] | None = None,
) -> RunMeta:
    """Metadata of a conversion: the file's own hints, then ``--meta``, then what the user
    mapped from the file (``attrs.NAME=key``), then ``--set``.

    A missing required key is named with how to supply it.
    """
    data: dict[str, Any] = json.loads(json.dumps(dict(hints), default=str))
    origin = [source_name] if hints else []
    if meta_file is not None:
        data = merge_dicts(data, read_metadata_file(meta_file))
        origin.append(str(meta_file))
    if mapped:
        data = merge_dicts(data, mapped)
        origin.append("attrs options")
    overrides = list(overrides)
    data = apply_overrides(data, overrides)
    if overrides:
        origin.append("--set")
    try:
        return _parse(data, source=None)
    except MetadataError as exc:
        problems = []
        for p in exc.problems:
            key, _, reason = p.partition(": ")
            if reason == "required key is missing":
                how = "required key is missing; give it in a --meta FILE (TOML or JSON)"
                p = f"{key}: {how} or with --set {key}=VALUE"
            problems.append(p)
        where = " + ".join(origin) if origin else "no metadata given"
        raise MetadataError(problems, f"metadata for {source_name} ({where})") from None


def archive_dtype(
    meta: RunMeta, source_dtype: np.dtype | None, max_mass: int | None, first: Batch | None
) -> np.dtype:
    """The archive's mass dtype, chosen up front so that chunk boundaries are known.

    ``max_mass`` wins; else the larger of the source's unsigned dtype and the declared
    total mass; else, for a closed lattice, the largest total of the first snapshots;
    else uint32.
    """
    if max_mass is not None:
        return mass_dtype(max_mass)
    total = meta.run.total_mass
    if source_dtype is not None and np.dtype(source_dtype).kind == "u":
        dt = np.dtype(source_dtype)
        if total is not None and mass_dtype(total).itemsize > dt.itemsize:
            dt = mass_dtype(total)
        return dt
    if total is not None:
        return mass_dtype(total)
    if meta.lattice.closed and first is not None and np.asarray(first.mass).size:
        m = np.asarray(first.mass)
        snap0 = m[0][None] if first.replica is not None else m[:, 0]
        totals = snap0.reshape(len(snap0), -1).sum(axis=1, dtype=np.int64)
        return mass_dtype(max(int(totals.max()), 0))
    return mass_dtype(int(np.iinfo(np.uint32).max) - 1)


class BatchFeeder:
    """Feed checked, chunk-aligned batches into a writer.

    ``skip_committed``: drop input snapshots the (resumed) archive already holds, matching
    them by replica index and time, so that re-feeding a whole stream neither loses nor
    duplicates a snapshot.
    """

    def __init__(
        self,
        writer: RunWriter,
        source_name: str,
        chunk: int,
        *,
        skip_committed: bool = False,
        progress: Progress | None = None,
        source: Source | None = None,
        unit: str = "snapshots",
    ) -> None:
        self.writer = writer
        self.name = source_name
        self.chunk = max(1, int(chunk))
        st = writer.state
        committed_times = writer.times if skip_committed else None
        self._state = st
        self._skip = skip_committed
        limit = sentinel(writer.dtype) if writer.dtype is not None else None
        self.guard = BatchGuard(
            source_name,
            writer.meta,
            limit,
            ref_times=committed_times if st.snapshots else None,
            first_replica=st.replicas if skip_committed else 0,
            growable=not skip_committed or (st.replicas <= 1 and st.open_replica is None),
        )
        self._key: int | str | None = "none"
        self._pending: list[tuple[np.ndarray, np.ndarray, dict[str, np.ndarray]]] = []
        self._pending_n = 0
        self._pos = 0
        self.skipped = 0
        self.appended = 0
        self.progress = progress
        self.source = source
        self.unit = source.unit if source is not None else unit

    # -- resume --------------------------------------------------------------------------

    def _committed(self, replica: int) -> int:
        st = self._state
        if replica < st.replicas:
            return st.snapshots
        if replica == st.replicas and st.open_replica is not None:
            return st.open_replica
        return 0

    def _drop_committed(self, batch: Batch, start: int, n: int) -> int:
        """How many of the batch's snapshots the archive holds already (their times were
        checked against the archive's by the guard)."""
        rep = 0 if batch.replica is None else batch.replica
        n_old = max(0, min(n, self._committed(rep) - start))
        self.skipped += n_old * (np.shape(batch.mass)[0] if batch.replica is None else 1)
        return n_old

    def _written(self, replica: int | None) -> int:
        """Snapshots the writer holds for ``replica`` (None: the lockstep time axis)."""
        st = self.writer.state
        if replica is None or replica < st.replicas:
            return st.snapshots
        if replica == st.replicas and st.open_replica is not None:
            return st.open_replica
        return 0

    # -- feeding -------------------------------------------------------------------------

    def feed(self, item: Batch | Events) -> None:
        if isinstance(item, Events):
            self._drain()
            self.writer.append_events(
                item.time, item.replica, item.source, item.target, item.amount
            )
            return
        rep = item.replica
        start = self.guard.counts.get(0 if rep is None else rep, 0)
        t, m = self.guard.check(item)
        series = {k: np.asarray(v) for k, v in (item.series or {}).items()}
        if self._skip:
            n_old = self._drop_committed(item, start, len(t))
            if n_old:
                axis = 0 if rep is not None else 1
                t = t[n_old:]
                m = m[n_old:] if axis == 0 else m[:, n_old:]
                series = {k: (v[n_old:] if axis == 0 else v[:, n_old:]) for k, v in series.items()}
        if len(t):
            key: int | str | None = rep
            if key != self._key:
                self._drain()
                self._key = key
                self._pos = self._written(rep)
            self._pending.append((t, m, series))
            self._pending_n += len(t)
            self._push_aligned()
        if item.commit:
            self.commit()
        if self.progress is not None and item.done is not None:
            total = self.source.total if self.source is not None else None
            self.progress(item.done, total, self.unit)

    def _take(self, n: int) -> tuple[np.ndarray, np.ndarray, dict[str, np.ndarray]]:
        lockstep = self._key is None
        ts, ms, ss = [], [], []
        need = n
        while need:
            t, m, s = self._pending[0]
            k = min(need, len(t))
            if k == len(t):
                self._pending.pop(0)
            else:
                cut = (
                    (lambda a, lo, hi: a[lo:hi])
                    if not lockstep
                    else (lambda a, lo, hi: a[:, lo:hi])
                )
                self._pending[0] = (
                    t[k:],
                    cut(m, k, None),
                    {x: cut(v, k, None) for x, v in s.items()},
                )
                t, m, s = t[:k], cut(m, 0, k), {x: cut(v, 0, k) for x, v in s.items()}
            ts.append(t)
            ms.append(m)
            ss.append(s)
            need -= k
        self._pending_n -= n
        axis = 1 if lockstep else 0
        if len(ts) == 1:
            return ts[0], ms[0], ss[0]
        keys = ss[0].keys()
        return (
            np.concatenate(ts),
            np.concatenate(ms, axis=axis),
            {x: np.concatenate([s[x] for s in ss], axis=axis) for x in keys},
        )

    def _append(self, n: int) -> None:
        t, m, s = self._take(n)
        rep = self._key
        self.writer.append(
            t,
            m,
            replica=None if rep is None else int(rep),  # type: ignore[arg-type]
            inflow=s.get("inflow"),
            outflow=s.get("outflow"),
        )
        self._pos += n
        self.appended += n

    def _push_aligned(self) -> None:
        while self._pending_n:
            need = self.chunk - self._pos % self.chunk
            if self._pending_n < need:
                return
            # several whole chunks at once when they are there: one flush writes them all
            extra = (self._pending_n - need) // self.chunk * self.chunk
            self._append(need + extra)

    def _drain(self) -> None:
        if self._pending_n:
            self._append(self._pending_n)

    def commit(self) -> None:
        """Append what is pending and commit it (live input went idle)."""
        self._drain()
        self.writer.flush()

    def finish(self, *, whole: bool = True) -> None:
        """Commit what is pending and check the seeds against the replicas; with ``whole``,
        a last replica shorter than replica 0 is an error naming the input."""
        self.commit()
        st = self.writer.state
        if whole and st.open_replica:
            raise DataError(
                f"{self.name}: replica {st.replicas} ends after {st.open_replica} of "
                f"{st.snapshots} snapshots (replica 0 has {st.snapshots})"
            )
        seeds = self.writer.meta.run.seeds
        replicas = st.replicas + (1 if st.open_replica is not None else 0)
        if seeds is not None and len(seeds) != replicas:
            raise DataError(
                f"{self.name}: metadata contradicts the data: run.seeds has {len(seeds)} "
                f"entries but the data hold {replicas} replicas"
            )


def _peek(it: Iterator[Batch | Events]) -> tuple[Batch | None, Iterator[Batch | Events]]:
    head: list[Batch | Events] = []
    first: Batch | None = None
    for item in it:
        head.append(item)
        if isinstance(item, Batch):
            first = item
            break

    def chained() -> Iterator[Batch | Events]:
        yield from head
        yield from it

    return first, chained()


def write_source(
    source: Source,
    location: Location,
    meta: RunMeta,
    *,
    overwrite: bool = False,
    max_mass: int | None = None,
    clevel: int = 5,
    name: str | None = None,
    progress: Progress | None = None,
) -> RunWriter:
    """Stream ``source`` into a new archive at ``location`` and close it (complete).

    ``name`` is how messages call the archive (the final path when ``location`` is a
    temporary sibling). Raises :class:`DataError` / :class:`MetadataError` naming the
    input on bad data; the archive then stays incomplete.
    """
    lattice = tuple(meta.lattice.sites)
    hint = source.n_snapshots_for(meta)
    dtype = archive_dtype(meta, source.dtype, max_mass, None)
    items: Iterator[Batch | Events] = iter(
        source.batches(meta, chunk_snapshots(lattice, dtype, hint))
    )
    guessing = max_mass is None and source.dtype is None and meta.run.total_mass is None
    if guessing and meta.lattice.closed:
        first, items = _peek(items)
        if first is not None:
            BatchGuard(source.name, meta, None).check(first)  # report bad data first
        dtype = archive_dtype(meta, None, None, first)
    # strict=False: every batch passes the BatchFeeder's BatchGuard first, which makes the
    # writer's checks with messages naming the input file and line; no second scan
    writer = create_run(
        location,
        meta,
        overwrite=overwrite,
        dtype=dtype,
        snapshots_hint=hint,
        clevel=clevel,
        strict=False,
    )
    writer.name = name or writer.name
    feeder = BatchFeeder(
        writer,
        source.name,
        writer.chunk_snapshots,
        progress=progress,
        source=source,
    )
    with writer:  # on an error the writer stops with the archive incomplete
        for item in items:
            feeder.feed(item)
        feeder.finish()
        if feeder.appended == 0:
            raise DataError(f"{source.name}: expected at least one snapshot; found none")
        writer.close()
    return writer
