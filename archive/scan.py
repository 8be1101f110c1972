"""The single pass over a run: read every chunk once, feed every statistic.

Reading and decoding chunks is the cost of an audit, so every statistic any enabled check
(or summary) needs is computed in one pass. A :class:`Statistic` declares how to reduce
one decoded chunk, and, when it needs consecutive snapshot pairs, how to handle the pair
that straddles two chunks; the engine carries the last snapshot of each chunk across the
edge so that no chunk is read twice.

Contract of a statistic
-----------------------
``chunk(block)`` runs in worker threads: it must not mutate shared state and returns a
partial result. ``merge(ref, partial)`` and ``pair(...)`` run in the calling thread, in
any order of chunks. ``finish(faults)`` returns the reduced result; ``faults`` lists the
chunks that could not be read, which the statistic must treat as missing data.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np

from .reader import Block, ChunkRef, Run

__all__ = [
    "ChunkFault",
    "ScanResult",
    "Statistic",
    "available_statistics",
    "register_statistic",
    "scan",
]


@dataclass(frozen=True)
class ChunkFault:
    """A chunk that could not be used: ``kind`` is ``"missing"`` or ``"corrupt"``."""

    ref: ChunkRef
    kind: str
    message: str


class Statistic(ABC):
    """A reduction computed in the single pass. Subclass, set ``name``, register."""

    #: Stable name checks use to ask for it.
    name: ClassVar[str]
    #: True when the statistic needs consecutive-snapshot pairs across chunk edges.
    pairs: ClassVar[bool] = False

    def __init__(self, run: Run, **options: Any) -> None:
        self.run = run
        self.options = options

    @abstractmethod
    def chunk(self, block: Block) -> Any:
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


_REGISTRY: dict[str, type[Statistic]] = {}


def register_statistic(cls: type[Statistic]) -> type[Statistic]:
    """Register a statistic class under its ``name`` (usable as a decorator)."""
    name = getattr(cls, "name", None)
    if not isinstance(name, str) or not name:
        raise TypeError(f"expected {cls.__name__}.name to be a non-empty string; got {name!r}")
    if name in _REGISTRY and _REGISTRY[name] is not cls:
        raise ValueError(f"statistic {name!r} is already registered by {_REGISTRY[name]}")
    _REGISTRY[name] = cls
    return cls


def available_statistics() -> dict[str, type[Statistic]]:
    """Registered statistics by name."""
    return dict(_REGISTRY)


@dataclass
class ScanResult:
    """Results by statistic name, the chunks that could not be read, and counters."""

    results: dict[str, Any]
    faults: list[ChunkFault] = field(default_factory=list)
    chunks_read: int = 0
    bytes_decoded: int = 0


def scan(
    run: Run,
    statistics: Iterable[Statistic],
    *,
    progress: Callable[[int, int], None] | None = None,
) -> ScanResult:
    """Read every committed chunk of ``run`` once and feed it to every statistic.

    ``progress(done, total)`` is called after each chunk. A chunk that fails to decode
    (checksum mismatch, truncated file) or is missing from the store becomes a
    :class:`ChunkFault`; the pass goes on without it.
    """
    stats = list(statistics)
    refs = run.chunk_refs()
    faults: list[ChunkFault] = []
    need_pairs = any(s.pairs for s in stats)
    edges: dict[tuple[int, int], np.ndarray] = {}  # (replica, snapshot) -> first/last row
    read = 0
    nbytes = 0
    for i, ref in enumerate(refs):
        try:
            block = run.read_chunk(ref)
        except Exception as exc:  # any decode failure is a fault of this chunk only
            faults.append(ChunkFault(ref, "corrupt", f"{type(exc).__name__}: {exc}"))
            if progress:
                progress(i + 1, len(refs))
            continue
        read += 1
        nbytes += block.mass.nbytes
        for s in stats:
            s.merge(ref, s.chunk(block))
        if need_pairs and len(block.mass):
            edges[(ref.replica, ref.start)] = block.mass[0]
            edges[(ref.replica, ref.stop - 1)] = block.mass[-1]
            before = edges.get((ref.replica, ref.start - 1))
            if before is not None:
                for s in stats:
                    if s.pairs:
                        s.pair(ref.replica, ref.start, before, block.mass[0])
            after = edges.get((ref.replica, ref.stop))
            if after is not None:
                for s in stats:
                    if s.pairs:
                        s.pair(ref.replica, ref.stop, block.mass[-1], after)
        if progress:
            progress(i + 1, len(refs))
    results = {s.name: s.finish(faults) for s in stats}
    return ScanResult(results, faults, read, nbytes)
