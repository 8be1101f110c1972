"""The compiled (numba) kernels of the built-in statistics, imported only when one is first
called (:mod:`massarc.archive._jit`): the fused reduction behind ``snapshots`` and
``histogram`` (:func:`reduce_kernel`, see :mod:`._kernels`) and the count above a threshold
behind ``condensates`` (:func:`count_kernel`). Each has a NumPy twin with identical
results beside the code that calls it."""

import numpy as np

from .._jit import kernel

__all__ = ["count_kernel", "reduce_kernel"]

# Each row is reduced by small inlined helpers: LLVM vectorises the moments loop only
# when it stands alone. The histogram keeps 8 interleaved sub-histograms of 32-bit
# counters, so that runs of equal masses (mostly empty sites) do not chain load-store
# dependencies on one counter (measured on a condensed ZRP chunk, 1048 x 2000 uint16:
# 1.03 ns a value with 4 sub-histograms of 64-bit counters, 0.36 ns with these); they
# are added into the 64-bit block histogram before any counter could reach 2^31.


@kernel(nogil=True, boundscheck=False, inline="always")
def _row_moments(x, i, wide, signed, has_sent, s_val):  # pragma: no cover - compiled
    t = np.int64(0)
    s = np.int64(0)
    sf = 0.0
    o = np.int64(0)
    nn = np.int64(0)
    ns = np.int64(0)
    hi = np.int64(x[i, 0])
    lo = hi
    for j in range(x.shape[1]):
        v = x[i, j]
        a = np.int64(v)
        t += a
        o += a != 0
        hi = max(hi, a)
        lo = min(lo, a)
        if wide:
            f = np.float64(a)
            sf += f * f
        else:
            s += a * a
        if signed:
            nn += v < 0
        if has_sent:
            ns += v == s_val
    return t, (sf if wide else np.float64(s)), o, hi, lo, nn, ns


@kernel(nogil=True, boundscheck=False)
def _row_hist(x, i, loc):  # pragma: no cover - compiled; every mass has its own bin
    m = x.shape[1]
    m8 = m - (m & 7)
    for j in range(0, m8, 8):
        loc[0, x[i, j]] += 1
        loc[1, x[i, j + 1]] += 1
        loc[2, x[i, j + 2]] += 1
        loc[3, x[i, j + 3]] += 1
        loc[4, x[i, j + 4]] += 1
        loc[5, x[i, j + 5]] += 1
        loc[6, x[i, j + 6]] += 1
        loc[7, x[i, j + 7]] += 1
    for j in range(m8, m):
        loc[0, x[i, j]] += 1


@kernel(nogil=True, boundscheck=False)
def _row_hist_clamped(x, i, loc, tv, top, signed):  # pragma: no cover - compiled
    for j in range(x.shape[1]):
        v = x[i, j]
        if v >= tv:
            loc[j & 3, top] += 1
        elif signed and v < 0:
            loc[j & 3, 0] += 1
        else:
            loc[j & 3, np.int64(v)] += 1


@kernel(nogil=True, boundscheck=False)
def _first_equal(x, i, v):  # pragma: no cover - compiled
    for j in range(x.shape[1]):
        if x[i, j] == v:
            return j
    return -1


@kernel(nogil=True, boundscheck=False)
def _first_negative(x, i):  # pragma: no cover - compiled
    for j in range(x.shape[1]):
        if x[i, j] < 0:
            return j
    return -1


#: Values a 32-bit sub-histogram may count before it is added into the block histogram.
_COUNTER_LIMIT = 2**31 - 1


@kernel(nogil=True, boundscheck=False)
def _flush(loc, hist, g):  # pragma: no cover - compiled
    for q in range(loc.shape[0]):
        for c in range(hist.shape[1]):
            hist[g, c] += loc[q, c]
            loc[q, c] = 0


@kernel(nogil=True, boundscheck=False)
def reduce_kernel(
    x, wide, signed, sv, has_sent, topv, groups, hist, out_i, sq, flags
):  # pragma: no cover
    n, m = x.shape
    nb = hist.shape[1]
    top = nb - 1
    s_val = sv[0]
    loc = np.zeros((8, max(nb, 1)), np.int32)
    pending = 0  # values counted in loc since the last flush
    for i in range(n):
        t, s, o, hi, lo, nn, ns = _row_moments(x, i, wide, signed, has_sent, s_val)
        out_i[0, i] = t
        out_i[1, i] = hi
        out_i[2, i] = lo
        out_i[3, i] = o
        out_i[4, i] = _first_equal(x, i, hi)
        sq[i] = s
        if nn:
            if flags[0] < 0:
                flags[0] = i * m + _first_negative(x, i)
            flags[1] += nn
        if ns:
            if flags[2] < 0:
                flags[2] = i * m + _first_equal(x, i, s_val)
            flags[3] += ns
        if nb == 0:
            continue
        if hi < top and lo >= 0:
            _row_hist(x, i, loc)
        else:  # rare rows: masses above the top bin (or negative)
            _row_hist_clamped(x, i, loc, topv[0], top, signed)
        pending += m
        if i == n - 1 or groups[i + 1] != groups[i] or pending + m >= _COUNTER_LIMIT:
            _flush(loc, hist, groups[i])
            pending = 0
    return 0


@kernel(nogil=True, boundscheck=False)
def count_kernel(x, above, count, mass):  # pragma: no cover - compiled
    for i in range(x.shape[0]):
        c = np.int64(0)
        s = np.int64(0)
        for j in range(x.shape[1]):
            v = x[i, j]
            if v > above:
                c += 1
                s += np.int64(v)
        count[i] = c
        mass[i] = s
    return 0
