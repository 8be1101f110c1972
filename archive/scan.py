"""The single pass over a run: read every chunk once, feed every statistic.

Reading and decoding chunks is the cost of an audit, so every statistic any enabled check
(or summary) needs is computed in one pass. A :class:`Statistic` declares how to reduce
one decoded chunk, and, when it needs consecutive snapshot pairs, how to handle the pair
that straddles two chunks; the engine carries the last snapshot of each chunk across the
edge so that no chunk is read twice.

Chunks are decoded and reduced in a pool of worker threads (zarr decodes with Blosc's own
threads turned off, and the compiled kernels release the GIL), with a bounded number of
chunks in flight: memory stays at a few chunks whatever the length of the run. Edge rows
are kept only until both neighbours of an edge are done.

Contract of a statistic
-----------------------
``chunk(chunk)`` runs in worker threads: it must not mutate shared state and returns a
partial result. ``merge(ref, partial)`` and ``pair(...)`` run in the calling thread, in
any order of chunks. ``finish(faults)`` returns the reduced result; ``faults`` lists the
chunks that could not be read, which the statistic must treat as missing data.
``prepare(peers)`` (optional) is called once before the pass with every statistic of it,
so that statistics can share work. A statistic that raises is dropped from the pass (its
message is in :attr:`ScanResult.errors`); the others go on.

Registry
--------
Statistics are found by name in :data:`STATISTICS` (see :mod:`massarc.archive.registry`):
the built-ins listed by :func:`massarc.archive.stats.builtin_statistics`, then third-party
statistics from the entry-point group ``massarc.statistics`` or :func:`register_statistic`.
A check may also bring a statistic of its own (``Check.provides``).
"""

from __future__ import annotations

import inspect
import os
import time
from abc import ABC, abstractmethod
from collections.abc import Callable, Hashable, Mapping
from concurrent.futures import FIRST_COMPLETED, Future, ThreadPoolExecutor, wait
from dataclasses import dataclass, field
from typing import Any, ClassVar, Generic, TypeVar

import numpy as np

from ._chunk_read import (
    ChunkReader,
    CorruptChunk,
    MissingChunk,
    missing_chunks,
    missing_time_chunks,
)
from .progress import Progress
from .reader import Chunk, ChunkRef, Run
from .registry import Registry

__all__ = [
    "ENTRY_POINT_GROUP",
    "STATISTICS",
    "ChunkFault",
    "ScanResult",
    "Statistic",
    "available_statistics",
    "default_workers",
    "get_statistic",
    "missing_time_chunks",
    "register_statistic",
    "scan",
]

#: Entry-point group of third-party statistics.
ENTRY_POINT_GROUP = "massarc.statistics"
K = TypeVar("K", bound=Hashable)


@dataclass(frozen=True)
class ChunkFault:
    """A chunk that could not be used: ``kind`` is ``"missing"`` or ``"corrupt"``."""

    ref: ChunkRef
    kind: str
    message: str
    #: The storage key at fault when it is not ``ref.key`` (chunks that split the lattice).
    key: str = ""

    @property
    def chunk(self) -> str:
        """The storage key at fault."""
        return self.key or self.ref.key


class Statistic(ABC):
    """A reduction computed in the single pass. Subclass, set ``name``, register."""

    #: Stable name checks use to ask for it.
    name: ClassVar[str]
    #: True when the statistic needs consecutive-snapshot pairs across chunk edges.
    pairs: ClassVar[bool] = False

    def __init__(self, run: Run, **options: Any) -> None:
        self.run = run
        self.options = options

    def prepare(self, peers: list[Statistic]) -> None:  # noqa: B027 - optional hook
        """Called once before the pass with all statistics of the pass (default: nothing)."""

    @abstractmethod
    def chunk(self, chunk: Chunk) -> Any:
        """Reduce one decoded chunk (thread-safe, no shared state). Return a partial."""

    @abstractmethod
    def merge(self, ref: ChunkRef, partial: Any) -> None:
        """Fold a partial into the running result (called in the scanning thread)."""

    def pair(self, replica: int, index: int, before: np.ndarray, after: np.ndarray) -> None:
        """The pair of snapshots (index - 1, index) that straddles two chunks."""
        if self.pairs:
            raise NotImplementedError(f"{type(self).__name__} sets pairs = True: define pair()")

    @abstractmethod
    def finish(self, faults: list[ChunkFault]) -> Any:
        """The reduced result."""


def _validate_statistic(cls: Any, origin: str) -> None:
    """Refuse a class that breaks the contract of a statistic (``TypeError``)."""
    if not (isinstance(cls, type) and issubclass(cls, Statistic)):
        raise TypeError(
            f"{origin}: expected a subclass of massarc.archive.scan.Statistic; got {cls!r}"
        )
    name = getattr(cls, "name", None)
    if not isinstance(name, str) or not name:
        raise TypeError(
            f"{origin}: expected {cls.__name__}.name to be a non-empty string; got {name!r}"
        )
    if not isinstance(cls.pairs, bool):
        raise TypeError(
            f"{origin}: expected {cls.__name__}.pairs to be true or false; got {cls.pairs!r}"
        )
    if inspect.isabstract(cls):
        missing = ", ".join(sorted(cls.__abstractmethods__))
        raise TypeError(f"{origin}: expected {cls.__name__} to define {missing}")
    if cls.pairs and cls.pair is Statistic.pair:
        raise TypeError(f"{origin}: {cls.__name__}.pairs is true: expected it to define pair()")


def _builtin_statistics() -> tuple[type[Statistic], ...]:
    from .stats import builtin_statistics

    return builtin_statistics()


#: The statistic registry: built-ins from :func:`massarc.archive.stats.builtin_statistics`,
#: plugins from the entry-point group ``massarc.statistics``.
STATISTICS: Registry[Statistic] = Registry(
    "statistic", "name", ENTRY_POINT_GROUP, _validate_statistic, _builtin_statistics
)


def register_statistic(cls: type[Statistic]) -> type[Statistic]:
    """Register a third-party statistic class under its ``name`` (usable as a decorator).

    Third parties also list the class in the entry-point group ``massarc.statistics`` so
    that it is found without importing their module first; both together are fine.
    """
    return STATISTICS.register(cls)


def available_statistics() -> Mapping[str, type[Statistic]]:
    """Registered statistics by name: built-ins, then plugins (read-only)."""
    return STATISTICS.available()


def get_statistic(name: str) -> type[Statistic]:
    """The statistic class registered as ``name``; the error lists the known names."""
    return STATISTICS.get(name)


@dataclass
class ScanResult(Generic[K]):
    """What one pass gives: results and errors by the keys the statistics were passed
    under, the chunks that could not be read, and counters.

    ``results`` holds the result of every statistic that finished; ``errors`` the
    one-line message of every statistic that raised (it has no result).
    """

    results: dict[K, Any]
    errors: dict[K, str] = field(default_factory=dict)
    faults: list[ChunkFault] = field(default_factory=list)
    chunks_read: int = 0
    bytes_decoded: int = 0
    seconds: float = 0.0


def default_workers() -> int:
    """Worker threads used when none are asked for: the CPUs this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


def _one_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return f"{type(exc).__name__}: {text[0]}" if text else type(exc).__name__


@dataclass
class _ChunkOutcome:
    """What a worker thread made of one chunk: its fault, or the statistics' partials
    (by position in the pass) and its edge rows."""

    index: int
    fault: ChunkFault | None = None
    partials: list[Any] = field(default_factory=list)
    first: np.ndarray | None = None
    last: np.ndarray | None = None
    nbytes: int = 0


class _FailedPartial:
    """Stands for the partial of a statistic whose ``chunk`` raised."""

    def __init__(self, exc: BaseException) -> None:
        self.message = _one_line(exc)


def _work(
    reader: ChunkReader,
    index: int,
    ref: ChunkRef,
    stats: list[Statistic],
    broken: dict[int, str],
    edges: bool,
) -> _ChunkOutcome:
    try:
        decoded = reader.read(ref)
    except MissingChunk as exc:
        return _ChunkOutcome(index, fault=ChunkFault(ref, "missing", str(exc)))
    except CorruptChunk as exc:  # a verdict on this chunk only; any other error propagates
        return _ChunkOutcome(index, fault=ChunkFault(ref, "corrupt", _one_line(exc)))
    partials: list[Any] = []
    for k, s in enumerate(stats):
        if k in broken:
            partials.append(None)
            continue
        try:
            partials.append(s.chunk(decoded))
        except Exception as exc:
            partials.append(_FailedPartial(exc))
    done = _ChunkOutcome(index, partials=partials, nbytes=int(decoded.mass.nbytes))
    if edges and len(decoded.mass):
        done.first, done.last = decoded.mass[0].copy(), decoded.mass[-1].copy()
    return done


class _PassState:
    """State of one pass in the calling thread: merging, edge pairs, faults, errors.

    Statistics are addressed by their position in ``stats``; :func:`scan` maps positions
    back to the caller's keys.
    """

    def __init__(self, refs: list[ChunkRef], stats: list[Statistic]) -> None:
        self.refs = refs
        self.stats = stats
        self.pairing = [k for k, s in enumerate(stats) if s.pairs]
        self.broken: dict[int, str] = {}
        self.faults: list[ChunkFault] = []
        self.state: dict[int, bool] = {}  # index -> True (read) / False (fault)
        self.firsts: dict[int, np.ndarray] = {}
        self.lasts: dict[int, np.ndarray] = {}
        self.read = 0
        self.nbytes = 0

    def call(self, k: int, fn: Callable[..., Any], *args: Any) -> None:
        """``fn(*args)`` for statistic ``k``; an exception marks it broken."""
        try:
            fn(*args)
        except Exception as exc:
            self.broken.setdefault(k, _one_line(exc))

    def _neighbour(self, i: int, step: int) -> int | None:
        j = i + step
        if not 0 <= j < len(self.refs):
            return None
        a, b = self.refs[min(i, j)], self.refs[max(i, j)]
        return j if a.replica == b.replica and a.stop == b.start else None

    def _pair(self, later: int, before: np.ndarray, after: np.ndarray) -> None:
        ref = self.refs[later]
        for k in self.pairing:
            if k not in self.broken:
                self.call(k, self.stats[k].pair, ref.replica, ref.start, before, after)

    def resolve(self, done: _ChunkOutcome) -> None:
        i = done.index
        if done.fault is not None:
            self.faults.append(done.fault)
            self.state[i] = False
        else:
            self.read += 1
            self.nbytes += done.nbytes
            ref = self.refs[i]
            for k, (s, part) in enumerate(zip(self.stats, done.partials, strict=True)):
                if k in self.broken:
                    continue
                if isinstance(part, _FailedPartial):
                    self.broken[k] = part.message
                else:
                    self.call(k, s.merge, ref, part)
            self.state[i] = True
        if not self.pairing:
            return
        ok = self.state[i]
        prev, nxt = self._neighbour(i, -1), self._neighbour(i, +1)
        if prev is not None and prev in self.state:
            before = self.lasts.pop(prev, None)
            if ok and before is not None:
                self._pair(i, before, done.first)
        elif prev is not None and ok:
            self.firsts[i] = done.first  # wait for the previous chunk
        if nxt is not None and nxt in self.state:
            after = self.firsts.pop(nxt, None)
            if ok and after is not None:
                self._pair(nxt, done.last, after)
        elif nxt is not None and ok:
            self.lasts[i] = done.last  # wait for the next chunk


def scan(
    run: Run,
    statistics: Mapping[K, Statistic],
    *,
    progress: Progress | None = None,
    workers: int | None = None,
    in_flight: int | None = None,
    direct: bool = True,
    scheduler: Any = None,
) -> ScanResult[K]:
    """Read every committed chunk of ``run`` once and feed it to every statistic.

    ``statistics`` maps keys of the caller's choosing to statistics; the results and the
    errors of the :class:`ScanResult` come back under the same keys.
    ``progress(done, total, "chunks")`` is called (in the calling thread) after each chunk. A chunk
    that fails to decode (checksum mismatch, truncated file) or whose storage object is
    missing (found by listing the store once, before the pass) becomes a
    :class:`ChunkFault`; the pass goes on without it. ``workers`` threads decode and
    reduce chunks (default :func:`default_workers`); at most ``in_flight`` chunks (default
    twice the workers) are decoded or waiting at any time. ``direct=False`` decodes every
    chunk through zarr-python (see :mod:`massarc.archive._chunk_read`). ``scheduler``
    (a :class:`~massarc.archive.distributed.Scheduler` or its name) runs the pass as a Dask
    graph there instead (see :mod:`massarc.archive.distributed`): same results.

    >>> from massarc.archive import open_run
    >>> from massarc.archive.stats import SnapshotStatistic
    >>> run = open_run("samples/dune-strip.zarr")
    >>> res = scan(run, {"snapshots": SnapshotStatistic(run)})
    >>> res.results["snapshots"].total.shape == (run.n_replicas, run.n_snapshots)
    True
    >>> res.faults, res.chunks_read
    ([], 4)
    """
    started = time.perf_counter()
    keys = list(statistics)
    stats = list(statistics.values())
    state = _PassState(run.chunk_refs(), stats)
    for k, s in enumerate(stats):
        state.call(k, s.prepare, stats)
    refs = state.refs
    reader = ChunkReader(run, direct=direct)
    # the direct reader finds absent chunk files as it opens them; zarr would fill them in
    missing = {} if reader.direct else missing_chunks(run, refs)
    n_workers = max(1, workers or default_workers())
    limit = max(1, in_flight or 2 * n_workers)
    edges = bool(state.pairing)
    done_count = 0
    pending: set[Future[_ChunkOutcome]] = set()
    order = iter(range(len(refs)))

    def tick(n: int = 1) -> None:
        nonlocal done_count
        done_count += n
        if progress:
            progress(done_count, len(refs), "chunks")

    if scheduler is not None:  # the pass as a Dask graph; the pool below gets no chunk
        from .distributed import outcomes

        for i, (key, why) in sorted(missing.items()):
            state.resolve(_ChunkOutcome(i, fault=ChunkFault(refs[i], "missing", why, key)))
            tick()
        graph = outcomes(
            scheduler, run, stats, state.broken, missing, edges=edges, direct=direct, tick=tick
        )
        for done in graph:
            state.resolve(done)
        order = iter(())

    pool = ThreadPoolExecutor(max_workers=n_workers, thread_name_prefix="massarc-scan")
    try:
        while True:
            while len(pending) < limit:
                i = next(order, None)
                if i is None:
                    break
                if i in missing:
                    key, why = missing[i]
                    fault = ChunkFault(refs[i], "missing", why, key)
                    state.resolve(_ChunkOutcome(i, fault=fault))
                    tick()
                    continue
                pending.add(pool.submit(_work, reader, i, refs[i], stats, state.broken, edges))
            if not pending:
                break
            finished, pending = wait(pending, return_when=FIRST_COMPLETED)
            for fut in sorted(finished, key=lambda f: f.result().index):
                state.resolve(fut.result())
                tick()
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
    faults = sorted(state.faults, key=lambda f: (f.ref.replica, f.ref.start))
    results: dict[K, Any] = {}
    for k, s in enumerate(stats):
        if k not in state.broken:
            try:
                results[keys[k]] = s.finish(list(faults))
            except Exception as exc:
                state.broken[k] = _one_line(exc)
    return ScanResult(
        results=results,
        errors={keys[k]: message for k, message in sorted(state.broken.items())},
        faults=faults,
        chunks_read=state.read,
        bytes_decoded=state.nbytes,
        seconds=time.perf_counter() - started,
    )
