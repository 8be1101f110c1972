"""Condensates per (replica, snapshot): the ``condensates`` statistic.

A condensate is a site holding more than ``above`` units of mass (the option; see
:func:`condensate_threshold` for the default rule). Each snapshot is reduced to the number
of such sites and the mass they hold. With numba (the ``fast`` extra) the reduction is one
compiled loop per chunk; without it, or with ``MASSARC_PURE=1``, NumPy gives the same
integers. Fractional or non-finite masses (other tools' float archives) count as 0, as in
the ``snapshots`` statistic.

>>> import numpy as np
>>> from massarc.archive import Chunk
>>> from types import SimpleNamespace
>>> run = SimpleNamespace(n_replicas=1, n_snapshots=2, meta=None)
>>> stat = CondensateStatistic(run, above=2)
>>> block = Chunk(0, 0, 2, np.array([[1, 0, 3, 7], [2, 2, 0, 8]], np.uint8))
>>> stat.merge(block, stat.chunk(block))
>>> res = stat.finish([])
>>> res.count.tolist(), res.mass.tolist()
([[2, 1]], [[10, 8]])
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from massarc.schema.laws import critical_density

from .._jit import backend_for
from ..reader import Chunk, ChunkRef
from ..scan import ChunkFault, Statistic
from ._kernels import HAVE_NUMBA, _integer_rows, use_numba

__all__ = [
    "DEFAULT_FACTOR",
    "CondensateStatistic",
    "CondensateStats",
    "condensate_threshold",
    "count_above",
]

#: Default multiple of the reference density (rho_c, else the mean density).
DEFAULT_FACTOR = 20.0


@dataclass(frozen=True)
class CondensateStats:
    """Arrays shaped (replica, snapshot): ``count`` sites above ``above``, the ``mass``
    they hold; ``valid`` is False where the chunk was unreadable (count and mass are -1)."""

    count: np.ndarray
    mass: np.ndarray
    valid: np.ndarray
    above: float


def condensate_threshold(meta: Any, factor: float = DEFAULT_FACTOR) -> tuple[float, str]:
    """The default threshold and the rule that gave it, in words.

    ``factor`` times the fluid's critical density where the model has one (ZRP with
    u(k) = 1 + b/k and b > 2, CMAM), else ``factor`` times the mean density of the run.

    >>> from massarc.schema import CMAMModel
    >>> from types import SimpleNamespace
    >>> meta = SimpleNamespace(model=CMAMModel(family="cmam", diffusion=1.0, chipping=3.0))
    >>> condensate_threshold(meta, 10.0)
    (10.0, 'mass > 10 x rho_c (rho_c = 1)')
    """
    rho_c = critical_density(meta.model)
    if rho_c is not None and rho_c > 0:
        return factor * rho_c, f"mass > {factor:g} x rho_c (rho_c = {rho_c:.6g})"
    density = meta.run.density
    if density is None and meta.run.total_mass is not None:
        density = meta.run.total_mass / meta.lattice.volume
    if density is None or density <= 0:
        raise ValueError(
            "condensates: expected a model with a critical density or a run with a positive "
            "density (run.density or run.total_mass); got neither: pass above="
        )
    return factor * density, f"mass > {factor:g} x the mean density ({density:.6g})"


def _count_numpy(x: np.ndarray, above: float) -> tuple[np.ndarray, np.ndarray]:
    big = x > above
    return (
        np.count_nonzero(big, axis=1).astype(np.int64),
        np.where(big, x, 0).sum(axis=1, dtype=np.int64),
    )


def count_above(x: np.ndarray, above: float, *, backend: str | None = None) -> tuple:
    """Per row of ``x`` (shape ``(rows, ...)``): sites with mass > ``above``, their mass.

    ``backend`` is ``"numba"``, ``"numpy"`` or None (numba when available).

    >>> count_above(np.array([[5, 0, 9], [1, 1, 1]]), 4, backend="numpy")
    (array([2, 0]), array([14,  0]))
    """
    x2 = np.ascontiguousarray(x.reshape(x.shape[0], -1))
    xi, _first, _n = _integer_rows(x2)
    fast = use_numba() if backend is None else backend == "numba"
    if fast and not HAVE_NUMBA:
        raise RuntimeError("expected numba to be installed for backend='numba'; it is not")
    if not fast or xi.size == 0:
        return _count_numpy(xi, above)
    from ._compiled import count_kernel  # numba is imported on first use

    count = np.zeros(xi.shape[0], np.int64)
    mass = np.zeros(xi.shape[0], np.int64)
    count_kernel(xi, float(above), count, mass)
    return count, mass


class CondensateStatistic(Statistic):
    """Options: ``above`` (default from :func:`condensate_threshold` with ``factor``,
    itself defaulting to :data:`DEFAULT_FACTOR`). Memory: two arrays of (R, T)."""

    name = "condensates"

    def __init__(self, run: Any, **options: Any) -> None:
        super().__init__(run, **options)
        above = options.get("above")
        if above is None:
            if run.meta is None:
                raise ValueError("condensates: the run has no valid metadata: pass above=")
            above, _rule = condensate_threshold(
                run.meta, float(options.get("factor", DEFAULT_FACTOR))
            )
        self.above = float(above)
        if not np.isfinite(self.above) or self.above < 0:
            raise ValueError(f"condensates: expected above >= 0; got {above!r}")
        shape = (run.n_replicas, run.n_snapshots)
        self._count = np.full(shape, -1, np.int64)
        self._mass = np.full(shape, -1, np.int64)
        self._valid = np.zeros(shape, bool)
        self.backend = backend_for(run)

    def chunk(self, block: Chunk) -> Any:
        return count_above(block.mass, self.above, backend=self.backend)

    def merge(self, ref: ChunkRef, partial: Any) -> None:
        sl = (ref.replica, slice(ref.start, ref.stop))
        self._count[sl], self._mass[sl] = partial
        self._valid[sl] = True

    def finish(self, faults: list[ChunkFault]) -> CondensateStats:
        return CondensateStats(self._count, self._mass, self._valid, self.above)
