"""64-bit fingerprints of every snapshot, for finding repeated snapshots: ``fingerprints``.

The statistic of the ``independence`` check, which brings it itself
(``IndependenceCheck.provides``).

Per (replica, snapshot) four 64-bit numbers, all of the form mix(sum_j k_j m_j mod 2^64)
with fixed pseudo-random odd keys k_j and the splitmix64 finaliser ``mix``:

``sparse``
    over up to ``markers`` (default 64) fixed sites spread over the lattice: equal for
    identical snapshots, different for different ones unless they agree at every marker;
``anchored``
    the same at sites placed relative to the *anchor*, the first site holding the
    largest mass: a copy of a snapshot rolled along the lattice (a cyclic shift along
    each axis) gets the same value as the original whenever the largest mass sits at a
    single site (the anchor then moves with the roll);
``full`` and ``full_anchored``
    over every site, with keys indexed from the origin and from the anchor (two
    different snapshots collide with probability about 2^-64), computed only at a
    pseudo-random subset of the snapshot indices, the same in every replica (see
    :func:`massarc.archive.stats.sampling.hashed_subset`): the exact confirmation of
    the matches the sparse hashes propose.

Cost: two marker sums touch ``2 * markers`` values per snapshot; the anchor is the position
of the largest mass the ``snapshots`` statistic computes anyway (its reduction of the
chunk is shared when both run in one pass: :meth:`SnapshotStatistic.reduction`); the full
hashes touch every site of the subset, whose density is
``fraction`` (default 1/64) or more on small runs (``floor``, default 2**23 site visits).
One compiled loop does it all (numba); without numba, or with ``MASSARC_PURE=1``, NumPy
gives the same numbers (wrapping uint64 arithmetic on both paths).

>>> import numpy as np
>>> from types import SimpleNamespace
>>> run = SimpleNamespace(n_replicas=2, n_snapshots=1, sites=(6,), dtype=np.dtype("uint8"))
>>> from massarc.archive import Chunk
>>> stat = FingerprintStatistic(run)
>>> for r, row in enumerate([[0, 5, 1, 0, 2, 0], [0, 2, 0, 0, 5, 1]]):  # a roll by 3
...     c = Chunk(r, 0, 1, np.array([row], np.uint8)); stat.merge(c, stat.chunk(c))
>>> fp = stat.finish([])
>>> bool(fp.anchored[0, 0] == fp.anchored[1, 0]), bool(fp.sparse[0, 0] == fp.sparse[1, 0])
(True, False)
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from massarc.archive._jit import backend_for, use_numba
from massarc.archive.reader import Chunk, ChunkRef
from massarc.archive.scan import ChunkFault, Statistic
from massarc.archive.stats import SnapshotStatistic
from massarc.archive.stats.sampling import hashed_subset, sample_count

__all__ = ["FingerprintStatistic", "FingerprintStats", "marker_offsets", "mix64"]

_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_S30, _S27, _S31 = np.uint64(30), np.uint64(27), np.uint64(31)


def mix64(x: np.ndarray, *, inplace: bool = False) -> np.ndarray:
    """The splitmix64 finaliser, element-wise on uint64 (wrapping arithmetic).

    ``inplace=True`` overwrites ``x`` (a uint64 array) and needs one temporary of its size,
    not five: the independence check mixes arrays of every (replica, snapshot)."""
    x = np.asarray(x, dtype=np.uint64) if inplace else np.array(x, dtype=np.uint64)
    t = x >> _S30
    x ^= t
    x *= _M1
    np.right_shift(x, _S27, out=t)
    x ^= t
    x *= _M2
    np.right_shift(x, _S31, out=t)
    x ^= t
    return x


def _keys(n: int, salt: int) -> np.ndarray:
    """``n`` fixed pseudo-random odd 64-bit keys."""
    return mix64(np.arange(n, dtype=np.uint64) + np.uint64(salt)) | np.uint64(1)


def marker_offsets(sites: tuple[int, ...], markers: int) -> np.ndarray:
    """Up to ``markers`` offsets ``(marker, axis)`` spread evenly over the lattice."""
    if len(sites) == 1:
        k = min(markers, sites[0])
        return np.unique(np.linspace(0, sites[0] - 1, k).round().astype(np.int64))[:, None]
    per = max(1, math.isqrt(markers))
    ys = np.unique(np.linspace(0, sites[0] - 1, min(per, sites[0])).round().astype(np.int64))
    xs = np.unique(np.linspace(0, sites[1] - 1, min(per, sites[1])).round().astype(np.int64))
    return np.stack(np.meshgrid(ys, xs, indexing="ij"), axis=-1).reshape(-1, 2)


@dataclass(frozen=True)
class FingerprintStats:
    """Arrays ``(replica, snapshot)``; ``valid`` is False where the chunk was unreadable.
    ``full`` and ``full_anchored`` are ``(replica, sampled snapshot)``: snapshot t is
    column ``slot[t]`` where ``sampled[t]`` (``slot`` is -1 elsewhere), so that the hashes
    of a long run cost a sixty-fourth of a (replica, snapshot) array, not two.
    ``anchor`` is the flat (C-order) index of the first largest mass (meaningless where
    ``valid`` is False)."""

    sparse: np.ndarray
    anchored: np.ndarray
    anchor: np.ndarray
    full: np.ndarray
    full_anchored: np.ndarray
    sampled: np.ndarray
    valid: np.ndarray
    sites: tuple[int, ...]
    slot: np.ndarray


class FingerprintStatistic(Statistic):
    """The ``fingerprints`` statistic (see the module docstring)."""

    name = "fingerprints"

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        self.sites = tuple(int(s) for s in run.sites)
        n_rep, n_snap = int(run.n_replicas), int(run.n_snapshots)
        volume = math.prod(self.sites) if self.sites else 0
        markers = int(options.get("markers", 64))
        if markers < 1:
            raise ValueError(f"fingerprints: expected markers >= 1; got {markers}")
        self.offsets = marker_offsets(self.sites, markers) if volume else np.zeros((0, 1), int)
        self.marker_keys = _keys(len(self.offsets), 0x5EED)
        self.site_keys = _keys(volume, 0xF011).reshape(self.sites) if volume else np.zeros(0)
        # the kernels see every lattice as 2D: (1, L) in 1D
        self.sites2 = np.array((1, *self.sites) if len(self.sites) == 1 else self.sites, np.int64)
        off = self.offsets if self.offsets.shape[1] == 2 else np.c_[0 * self.offsets, self.offsets]
        self.offsets2 = np.ascontiguousarray(off, dtype=np.int64)
        count = sample_count(
            n_snap,
            n_rep,
            volume,
            fraction=float(options.get("fraction", 1 / 64)),
            floor_values=int(options.get("floor", 2**23)),
            cap_total=2**62,
        )
        self.fraction = count / n_snap if n_snap else 1.0
        self.sampled = hashed_subset(np.arange(n_snap), self.fraction, salt=0xC0DE)
        self.slot = np.full(n_snap, -1, np.int64)
        self.slot[self.sampled] = np.arange(int(np.count_nonzero(self.sampled)))
        shape2, picked = (n_rep, n_snap), (n_rep, int(np.count_nonzero(self.sampled)))
        self._out = {k: np.zeros(shape2, np.uint64) for k in ("sparse", "anchored")}
        self._out.update({k: np.zeros(picked, np.uint64) for k in ("full", "full_anchored")})
        # the anchors and the readable snapshots: the ``snapshots`` statistic's ``argmax``
        # and ``valid`` when it runs in the same pass (:meth:`prepare`), else kept here
        self._anchor: np.ndarray | None = None
        self._valid: np.ndarray | None = None
        self._shape = shape2
        self.moments = SnapshotStatistic(run)  # gives the anchors; replaced by a peer's
        self._own = True
        self.backend = backend_for(run)

    def prepare(self, peers: list[Statistic]) -> None:
        """Take the anchors from the ``snapshots`` statistic when it runs too: its reduction
        of every chunk, and at the end its arrays of positions and readable snapshots
        (long runs keep one copy of each, not two)."""
        for peer in peers:
            if isinstance(peer, SnapshotStatistic):
                self.moments, self._own = peer, False
                return

    def _own_arrays(self) -> tuple[np.ndarray, np.ndarray]:
        if self._anchor is None or self._valid is None:
            # a flat site index fits 32 bits on any lattice below 2^31 sites
            site = np.int32 if math.prod(self.sites or (0,)) < 2**31 else np.int64
            self._anchor = np.full(self._shape, -1, site)
            self._valid = np.zeros(self._shape, bool)
        return self._anchor, self._valid

    def chunk(self, chunk: Chunk) -> Any:
        mass = np.asarray(chunk.mass)
        n = len(mass)
        if n == 0 or not self.sites:
            return None
        rows = mass.reshape(n, -1)
        if rows.dtype.kind == "f":
            rows = np.nan_to_num(rows).astype(np.int64)
        elif rows.dtype.kind == "b":
            rows = rows.astype(np.uint8)
        anchor = np.ascontiguousarray(self.moments.reduction(chunk).argmax, dtype=np.int64)
        sampled = np.ascontiguousarray(self.sampled[chunk.start : chunk.stop])
        args = (
            np.ascontiguousarray(rows),
            anchor,
            sampled,
            self.offsets2,
            self.sites2,
            self.marker_keys,
            self.site_keys.reshape(-1),
        )
        hashes = _hash_numba(*args) if self.backend == "numba" else _hash_numpy(*args)
        return (*hashes, anchor)

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        if partial is None:
            return
        sl = (ref.replica, slice(ref.start, ref.stop))
        sparse, anchored, full, full_anchored, anchor = partial
        self._out["sparse"][sl] = sparse
        self._out["anchored"][sl] = anchored
        pick = self.sampled[ref.start : ref.stop]
        cols = (ref.replica, self.slot[ref.start : ref.stop][pick])
        self._out["full"][cols] = full[pick]
        self._out["full_anchored"][cols] = full_anchored[pick]
        if self._own:
            own_anchor, own_valid = self._own_arrays()
            own_anchor[sl] = anchor
            own_valid[sl] = True

    def finish(self, faults: list[ChunkFault]) -> FingerprintStats:
        o = self._out
        if self._own:
            anchor, valid = self._own_arrays()
        else:  # the peer's arrays (no copies), filled chunk by chunk in the same pass
            moments = self.moments.finish(faults)
            anchor, valid = moments.argmax, moments.valid
        return FingerprintStats(
            o["sparse"],
            o["anchored"],
            anchor,
            o["full"],
            o["full_anchored"],
            self.sampled,
            valid,
            self.sites,
            self.slot,
        )


def _use_numba() -> bool:
    """The compiled kernel (:mod:`._compiled`), unless numba is missing or
    ``MASSARC_PURE=1``."""
    return use_numba()


def _hash_numba(*args: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The four hashes of every row, compiled (numba is imported on first use)."""
    from ._compiled import hash_rows

    return hash_rows(*args)


def _as_u64(v: np.ndarray) -> np.ndarray:
    return v.astype(np.int64).view(np.uint64)


def _hash_numpy(
    rows: np.ndarray,
    anchor: np.ndarray,
    sampled: np.ndarray,
    offsets: np.ndarray,
    sites: np.ndarray,
    marker_keys: np.ndarray,
    site_keys: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The four hashes of every row (module docstring), NumPy only."""
    ly, lx = int(sites[0]), int(sites[1])
    n = len(rows)
    sparse_at = offsets[:, 0] * lx + offsets[:, 1]
    sparse = mix64((_as_u64(rows[:, sparse_at]) * marker_keys).sum(axis=1, dtype=np.uint64))
    ay, ax = anchor // lx, anchor % lx
    py = (ay[:, None] + offsets[None, :, 0]) % ly
    px = (ax[:, None] + offsets[None, :, 1]) % lx
    markers = np.take_along_axis(rows, py * lx + px, axis=1)
    anchored = mix64((_as_u64(markers) * marker_keys).sum(axis=1, dtype=np.uint64))
    full = np.zeros(n, np.uint64)
    full_anchored = np.zeros(n, np.uint64)
    picked = np.flatnonzero(sampled)
    if len(picked):
        v = _as_u64(rows[picked])
        full[picked] = mix64((v * site_keys).sum(axis=1, dtype=np.uint64))
        yy, xx = np.divmod(np.arange(ly * lx), lx)
        ky = (yy[None, :] - ay[picked, None]) % ly
        kx = (xx[None, :] - ax[picked, None]) % lx
        rolled = site_keys[ky * lx + kx]
        full_anchored[picked] = mix64((v * rolled).sum(axis=1, dtype=np.uint64))
    return sparse, anchored, full, full_anchored
