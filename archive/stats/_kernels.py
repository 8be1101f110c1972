"""Fused chunk reductions behind the ``snapshots`` and ``histogram`` statistics.

One pass over the rows (snapshots) of a decoded chunk gives, per row, the total, extrema,
sum of squares, occupied sites and position of the largest mass, counts and first
positions of negative and sentinel values, and (optionally) the occupation histogram of
each block of rows. With numba (the ``fast`` extra) this is one compiled loop
(:mod:`._compiled`, imported on first use); without it, or with ``MASSARC_PURE=1``, a NumPy
sequence gives identical numbers.

Semantics, shared by both paths:

* floating-point masses that are not finite, not integers, or beyond the int64 range are
  *fractional*: they are counted and then treated as 0 everywhere else;
* totals, extrema and ``argmax`` (first position of the maximum) are taken on the values
  cast to int64; ``sum_sq`` is exact for 8- and 16-bit dtypes and a float64 sum otherwise
  (identical on both paths while the partial sums stay below 2**53);
* the histogram puts negative values in bin 0 and values >= ``top`` in bin ``top``.

When the ``snapshots`` and ``histogram`` statistics both run, they share one :class:`Plan`
and the reduction of a chunk is computed once per worker thread (:func:`reduce_chunk`).
"""

from __future__ import annotations

import threading
import weakref
from dataclasses import dataclass

import numpy as np

from .._jit import HAVE_NUMBA, use_numba

__all__ = ["HAVE_NUMBA", "Plan", "Reduction", "reduce_chunk", "reduce_rows", "use_numba"]

_I64_LIMIT = float(2**63)


@dataclass(frozen=True, eq=False)
class Plan:
    """What to reduce: the sentinel value to look for (None: none) and the histogram
    (``bins`` > 0, snapshot block ``edges``; ``bins`` = 0: no histogram)."""

    sentinel: int | None = None
    bins: int = 0
    edges: np.ndarray | None = None
    #: ``"numba"``, ``"numpy"`` or None (:func:`use_numba`), for :func:`reduce_chunk`.
    backend: str | None = None


@dataclass
class Reduction:
    """Per-row results of one chunk; ``first_*`` are flat (row * sites + site) or -1."""

    total: np.ndarray
    maximum: np.ndarray
    minimum: np.ndarray
    sum_sq: np.ndarray
    occupied: np.ndarray
    argmax: np.ndarray
    first_negative: int
    n_negative: int
    first_fractional: int
    n_fractional: int
    first_sentinel: int
    n_sentinel: int
    hist_first: int = 0
    hist: np.ndarray | None = None


def _integer_rows(x: np.ndarray) -> tuple[np.ndarray, int, int]:
    """Integer view of the rows: floats become int64 with fractional values set to 0."""
    if x.dtype.kind in "ui":
        return x, -1, 0
    if x.dtype.kind == "b":
        return x.astype(np.uint8), -1, 0
    xf = x.astype(np.float64, copy=False)
    with np.errstate(invalid="ignore"):
        frac = ~np.isfinite(xf) | (xf != np.floor(xf)) | (np.abs(xf) >= _I64_LIMIT)
    n = int(np.count_nonzero(frac))
    first = int(np.argmax(frac.reshape(-1))) if n else -1
    return np.where(frac, 0.0, xf).astype(np.int64), first, n


def _groups(plan: Plan, start: int, n: int) -> tuple[int, np.ndarray]:
    """First histogram block touched and the local block index of every row."""
    t = np.arange(start, start + n)
    b = np.searchsorted(plan.edges, t, side="right") - 1
    first = int(b[0]) if n else 0
    return first, (b - first).astype(np.int64)


def _first(mask: np.ndarray) -> tuple[int, int]:
    n = int(np.count_nonzero(mask))
    return (int(np.argmax(mask.reshape(-1))) if n else -1), n


def _reduce_numpy(x: np.ndarray, plan: Plan, groups: np.ndarray, nblocks: int) -> tuple:
    xi = x.astype(np.int64, copy=False)
    if x.dtype.itemsize <= 2:
        sq = np.einsum("ij,ij->i", xi, xi).astype(np.float64)
    else:
        xf = xi.astype(np.float64)
        sq = np.einsum("ij,ij->i", xf, xf)
    neg = _first(x < 0) if x.dtype.kind == "i" else (-1, 0)
    sen = _first(x == plan.sentinel) if plan.sentinel is not None else (-1, 0)
    moments = (
        xi.sum(axis=1),
        xi.max(axis=1),
        xi.min(axis=1),
        sq,
        np.count_nonzero(xi, axis=1).astype(np.int64),
        xi.argmax(axis=1).astype(np.int64),
    )
    hist = None
    if plan.bins:
        top = plan.bins - 1
        b = x
        if top < np.iinfo(x.dtype).max:
            b = np.minimum(b, x.dtype.type(top))
        if x.dtype.kind == "i":
            b = np.maximum(b, x.dtype.type(0))
        b = b.astype(np.int64, copy=False)
        if nblocks == 1:
            hist = np.bincount(b.reshape(-1), minlength=plan.bins)[None, :]
        else:
            flat = (b + (groups * plan.bins)[:, None]).reshape(-1)
            hist = np.bincount(flat, minlength=nblocks * plan.bins).reshape(nblocks, plan.bins)
    return moments, neg, sen, hist


def _reduce_numba(x: np.ndarray, plan: Plan, groups: np.ndarray, nblocks: int) -> tuple:
    from ._compiled import reduce_kernel  # numba is imported on first use

    n = x.shape[0]
    out_i = np.zeros((5, n), np.int64)
    sq = np.zeros(n, np.float64)
    flags = np.array([-1, 0, -1, 0], np.int64)
    has_sent = plan.sentinel is not None
    sv = np.array([plan.sentinel if has_sent else 0], dtype=x.dtype)
    top_dtype = np.uint64 if x.dtype == np.uint64 else np.int64
    topv = np.array([max(plan.bins - 1, 0)], dtype=top_dtype)
    hist = np.zeros((nblocks if plan.bins else 0, plan.bins), np.int64)
    wide = x.dtype.itemsize > 2
    signed = x.dtype.kind == "i"
    reduce_kernel(x, wide, signed, sv, has_sent, topv, groups, hist, out_i, sq, flags)
    moments = (out_i[0], out_i[1], out_i[2], sq, out_i[3], out_i[4])
    return (
        moments,
        (int(flags[0]), int(flags[1])),
        (int(flags[2]), int(flags[3])),
        (hist if plan.bins else None),
    )


def reduce_rows(x: np.ndarray, start: int, plan: Plan, *, backend: str | None = None) -> Reduction:
    """Reduce the rows of ``x`` (snapshots ``start, start+1, ...``; shape ``(rows, ...)``).

    ``backend`` is ``"numba"``, ``"numpy"`` or None (numba when available).

    >>> import numpy as np
    >>> r = reduce_rows(np.array([[0, 3, 1], [2, 2, 0]], np.uint8), 0, Plan(bins=4,
    ...     edges=np.array([0, 2])), backend="numpy")
    >>> r.total.tolist(), r.argmax.tolist(), r.hist.tolist()
    ([4, 4], [1, 0], [[2, 1, 2, 1]])
    """
    x2 = np.ascontiguousarray(x.reshape(x.shape[0], -1))
    xi, first_frac, n_frac = _integer_rows(x2)
    sentinel_plan = plan
    if plan.sentinel is not None and x2.dtype.kind != xi.dtype.kind:
        sentinel_plan = Plan(None, plan.bins, plan.edges, plan.backend)  # floats: no sentinel
    if plan.bins:
        hist_first, groups = _groups(plan, start, xi.shape[0])
        nblocks = int(groups[-1]) + 1 if len(groups) else 0
    else:
        hist_first, groups, nblocks = 0, np.zeros(xi.shape[0], np.int64), 0
    fast = use_numba() if backend is None else backend == "numba"
    if fast and not HAVE_NUMBA:
        raise RuntimeError("expected numba to be installed for backend='numba'; it is not")
    if xi.size == 0:
        fast = False
    reduce = _reduce_numba if fast else _reduce_numpy
    moments, neg, sen, hist = reduce(xi, sentinel_plan, groups, nblocks)
    return Reduction(*moments, *neg, first_frac, n_frac, *sen, hist_first, hist)


_MEMO = threading.local()


def reduce_chunk(chunk: object, plan: Plan) -> Reduction:
    """:func:`reduce_rows` of ``chunk.mass``, computed once per (chunk, plan) and thread.

    The scan engine hands one chunk to every statistic in the same worker thread, so two
    statistics sharing ``plan`` cost one pass over the chunk.
    """
    ref = getattr(_MEMO, "chunk", None)
    if ref is not None and ref() is chunk and _MEMO.plan is plan:
        return _MEMO.result
    result = reduce_rows(chunk.mass, chunk.start, plan, backend=plan.backend)
    _MEMO.chunk, _MEMO.plan, _MEMO.result = weakref.ref(chunk), plan, result
    return result
