"""The compiled (numba) kernels of the ``transfers`` statistic (:mod:`.transfers`), imported
only when first called (:mod:`massarc.archive._jit`): prefix sums of chosen rows at cut
positions, and rows of a 2D lattice projected on one axis. The NumPy twin is
``transfers._prefix_numpy``."""

import numpy as np

from massarc.archive._jit import kernel

__all__ = ["prefix_rows", "project_rows"]


@kernel(nogil=True)
def prefix_rows(mass, rows, positions, out):  # pragma: no cover - compiled
    for j in range(rows.shape[0]):
        r = rows[j]
        acc = np.int64(0)
        start = 0
        for p in range(positions.shape[0]):
            stop = positions[p] + 1
            s = np.int64(0)
            for i in range(start, stop):
                s += np.int64(mass[r, i])
            acc += s
            out[j, p] = acc
            start = stop


@kernel(nogil=True)
def project_rows(mass, rows, axis, out):  # pragma: no cover - compiled
    ny, nx = mass.shape[1], mass.shape[2]
    for j in range(rows.shape[0]):
        r = rows[j]
        for i in range(out.shape[1]):
            out[j, i] = 0
        for y in range(ny):
            if axis == 1:
                for x in range(nx):
                    out[j, x] += np.int64(mass[r, y, x])
            else:
                s = np.int64(0)
                for x in range(nx):
                    s += np.int64(mass[r, y, x])
                out[j, y] = s
