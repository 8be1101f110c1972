"""The compiled (numba) kernel of the ``fingerprints`` statistic (:mod:`.fingerprints`),
imported only when first called (:mod:`massarc.archive._jit`): the four hashes of every
row. The NumPy twin is ``fingerprints._hash_numpy``."""

import numpy as np

from massarc.archive._jit import kernel

__all__ = ["hash_rows"]


@kernel(nogil=True, inline="always")
def _mix_one(x):  # pragma: no cover - compiled
    x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return x ^ (x >> np.uint64(31))


@kernel(nogil=True, boundscheck=False)
def hash_rows(
    rows, anchor, sampled, offsets, sites, marker_keys, site_keys
):  # pragma: no cover - compiled
    n, volume = rows.shape
    ly, lx = sites[0], sites[1]
    k = offsets.shape[0]
    sparse = np.zeros(n, np.uint64)
    anchored = np.zeros(n, np.uint64)
    full = np.zeros(n, np.uint64)
    full_anchored = np.zeros(n, np.uint64)
    for i in range(n):
        ay, ax = anchor[i] // lx, anchor[i] % lx
        h1 = np.uint64(0)
        h2 = np.uint64(0)
        for j in range(k):
            oy, ox = offsets[j, 0], offsets[j, 1]
            h1 += np.uint64(np.int64(rows[i, oy * lx + ox])) * marker_keys[j]
            py = ay + oy
            if py >= ly:
                py -= ly
            px = ax + ox
            if px >= lx:
                px -= lx
            h2 += np.uint64(np.int64(rows[i, py * lx + px])) * marker_keys[j]
        sparse[i] = _mix_one(h1)
        anchored[i] = _mix_one(h2)
        if sampled[i]:
            f1 = np.uint64(0)
            f2 = np.uint64(0)
            for s in range(volume):
                f1 += np.uint64(np.int64(rows[i, s])) * site_keys[s]
            for y in range(ly):
                ky = y - ay
                if ky < 0:
                    ky += ly
                for x in range(lx):
                    kx = x - ax
                    if kx < 0:
                        kx += lx
                    f2 += np.uint64(np.int64(rows[i, y * lx + x])) * site_keys[ky * lx + kx]
            full[i] = _mix_one(f1)
            full_anchored[i] = _mix_one(f2)
    return sparse, anchored, full, full_anchored
