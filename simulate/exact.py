"""Independent exact samples of the canonical ZRP steady state.

The law of the masses on N sites with total M is the product measure with single-site
weight f(m) = prod_{k<=m} 1/u(k) conditioned on the sum (Evans and Hanney, J. Phys. A 38,
R195, 2005). The sampler splits the lattice recursively into halves: a block of n sites
holding mass a gives its left half (n1 = n // 2 volume) the mass a1 with probability
proportional to Z(n1, a1) Z(n - n1, a - a1), then both halves are split in turn.

Only O(log N) block sizes occur, so only O(log N) partition-function tables are needed,
each one convolution of two smaller ones (about O(M^2 log N) in all, less with FFT). The
weights are tilted to the density first (:func:`~massarc.schema.laws.tilt_to_density`),
which leaves the canonical law unchanged and keeps every table well scaled. All samples and
all blocks of one level are split at once: the candidate values a1 = 0..a of every block
are laid end to end, so a level costs O(size * (M + blocks)).
"""

from __future__ import annotations

import numpy as np
from scipy.signal import convolve

from massarc.schema import ZRPModel
from massarc.schema.laws import site_weights, tilt_to_density

from .errors import SamplerError

__all__ = ["SteadyStateSampler", "sample_steady_state"]

# Candidate values and totals handled per vectorised step: bound the memory (a few tens of
# MiB) and the running sum of probabilities (so its round-off stays below 1e-12).
_MAX_CANDIDATES = 1 << 21
_MAX_TOTALS = 1 << 12


class SteadyStateSampler:
    """Exact sampler of the canonical ZRP steady state on ``sites`` sites with total ``mass``.

    The partition-function tables are built once; :meth:`sample` then draws any number of
    independent configurations.

    >>> s = SteadyStateSampler(ZRPModel(family="zrp", b=3.0), volume=8, mass=6)
    >>> x = s.sample(4, np.random.default_rng(1))
    >>> x.shape, x.sum(axis=1).tolist()
    ((4, 8), [6, 6, 6, 6])
    """

    def __init__(self, model: ZRPModel, volume: int, mass: int) -> None:
        if not isinstance(model, ZRPModel):
            raise SamplerError(
                f"model: expected a ZRP model for exact steady-state samples; got "
                f"{getattr(model, 'family', type(model).__name__)}"
            )
        if volume < 1 or mass < 0:
            raise SamplerError(f"expected volume >= 1 and mass >= 0; got {volume} and {mass}")
        self.model = model
        self.volume = int(volume)
        self.mass = int(mass)
        weights = tilt_to_density(site_weights(model, self.mass), self.mass / self.volume)
        self._z: dict[int, np.ndarray] = {1: weights / weights.max()}
        self._log_z: dict[int, np.ndarray] = {}
        if self.volume > 1:  # the tables of the two halves, and through them all the others
            self._log_table(self.volume // 2)
            self._log_table(self.volume - self.volume // 2)

    def _table(self, n: int) -> np.ndarray:
        """Z(n, 0..mass) scaled to a maximum of 1, memoised: Z(n) = Z(n // 2) * Z(n - n // 2)."""
        if n not in self._z:
            z = convolve(self._table(n // 2), self._table(n - n // 2))[: self.mass + 1]
            z = np.clip(z, 0.0, None)
            self._z[n] = z / z.max()
        return self._z[n]

    def _log_table(self, n: int) -> np.ndarray:
        if n not in self._log_z:
            with np.errstate(divide="ignore"):
                self._log_z[n] = np.log(self._table(n))
        return self._log_z[n]

    def sample(self, size: int, rng: np.random.Generator) -> np.ndarray:
        """``size`` independent configurations, shaped ``(size, volume)``, int64."""
        masses = np.full((size, 1), self.mass, dtype=np.int64)
        blocks = [self.volume]
        while max(blocks) > 1:
            new_blocks: list[int] = []
            keep_src: list[int] = []
            keep_dst: list[int] = []
            split: dict[int, tuple[list[int], list[int]]] = {}
            for b, n in enumerate(blocks):
                if n == 1:
                    keep_src.append(b)
                    keep_dst.append(len(new_blocks))
                    new_blocks.append(1)
                else:
                    src, dst = split.setdefault(n, ([], []))
                    src.append(b)
                    dst.append(len(new_blocks))
                    new_blocks.extend((n // 2, n - n // 2))
            out = np.empty((size, len(new_blocks)), dtype=np.int64)
            out[:, keep_dst] = masses[:, keep_src]
            for n, (src, dst) in split.items():
                a = masses[:, src]
                log_z1, log_z2 = self._log_table(n // 2), self._log_table(n - n // 2)
                left = _draw_split(a.reshape(-1), log_z1, log_z2, rng).reshape(a.shape)
                cols = np.asarray(dst)
                out[:, cols] = left
                out[:, cols + 1] = a - left
            masses, blocks = out, new_blocks
        return masses


def _draw_split(
    a: np.ndarray, log_z1: np.ndarray, log_z2: np.ndarray, rng: np.random.Generator
) -> np.ndarray:
    """For each total ``a[i]``, draw a1 in 0..a[i] with P ∝ Z1(a1) Z2(a[i] - a1)."""
    result = np.empty_like(a)
    ends = np.cumsum(a + 1)
    start = 0
    while start < len(a):
        # as many totals as fit in the budgets (at least one)
        base = int(ends[start - 1]) if start else 0
        fit = int(np.searchsorted(ends, base + _MAX_CANDIDATES, side="right")) - start
        stop = start + min(max(fit, 1), _MAX_TOTALS)
        result[start:stop] = _draw_split_chunk(a[start:stop], log_z1, log_z2, rng)
        start = stop
    return result


def _draw_split_chunk(
    a: np.ndarray, log_z1: np.ndarray, log_z2: np.ndarray, rng: np.random.Generator
) -> np.ndarray:
    lengths = a + 1
    offsets = np.cumsum(lengths) - lengths
    owner = np.repeat(np.arange(len(a)), lengths)
    a1 = np.arange(int(lengths.sum()), dtype=np.int64) - offsets[owner]
    logw = log_z1[a1] + log_z2[a[owner] - a1]
    top = np.maximum.reduceat(logw, offsets)
    top[~np.isfinite(top)] = 0.0  # a block no split can hold (never drawn); keep it finite
    w = np.exp(logw - top[owner])
    total = np.add.reduceat(w, offsets)
    empty = total <= 0
    if empty.any():  # only reachable through round-off: fall back to an even split
        w[empty[owner]] = 1.0
        total = np.add.reduceat(w, offsets)
    # each block's weights sum to 1, so the running sum before block i is about i
    cum = np.cumsum(w / total[owner])
    before = np.concatenate([[0.0], cum[offsets[1:] - 1]])
    target = before + rng.random(len(a)) * (cum[offsets + a] - before)
    pick = np.searchsorted(cum, target, side="right")
    return np.clip(pick, offsets, offsets + a) - offsets


def sample_steady_state(
    model: ZRPModel, volume: int, mass: int, size: int, rng: np.random.Generator
) -> np.ndarray:
    """``size`` independent exact samples of the canonical ZRP steady state.

    Parameters
    ----------
    model
        The ZRP (any hop-rate law).
    volume, mass
        Number of sites N and total mass M.
    size
        Number of independent samples.
    rng
        The random generator (``numpy.random.default_rng(seed)``).

    Returns
    -------
    numpy.ndarray
        ``(size, volume)`` int64 masses, each row summing to ``mass``. The law is the same on
        a ring (any drift) and on a symmetric chain with walls, in 1D or 2D (reshape a row).

    Examples
    --------
    >>> model = ZRPModel(family="zrp", b=4.0)          # condenses above rho_c = 0.5
    >>> x = sample_steady_state(model, 100, 100, 3, np.random.default_rng(5))
    >>> x.sum(axis=1).tolist()
    [100, 100, 100]
    """
    return SteadyStateSampler(model, volume, mass).sample(size, rng)
