"""Continuous-time dynamics of one replica, exact at the snapshot times.

Between two snapshots ``dt`` apart the number of attempts is drawn as
``n ~ Poisson(N * r_max * dt)`` (N sites, r_max = sup u for the ZRP, D + w for the CMAM);
each attempt picks a site uniformly and is accepted with the right probability (see
:mod:`.kernels`). This uniformisation gives the continuous-time Markov process observed
exactly at the snapshot times.

Open axes add reservoir attempts (see :mod:`.kernels`): a unit enters each site at position
0 of an open axis at rate alpha (``lattice.open.injection``) and leaves each non-empty site
at its last position at rate beta (``extraction``); hops across the ends are suppressed.
The attempt rate becomes ``N * (r_max + n_open * (alpha + beta))``; on closed lattices it is
unchanged, and so is the random stream.

Random numbers are drawn in batches from the replica's own :class:`numpy.random.Generator`:
first the Poisson counts of a stretch of snapshots, then, batch after batch, the site
indices and the uniforms. The stream depends only on the seed, the times and the stretches,
so a replica is reproduced alone from its seed.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field, replace

import numpy as np

from massarc.schema import CMAMModel, MetadataError, RunMeta, ZRPModel
from massarc.schema.laws import hop_rates, max_hop_rate

from .kernels import CMAM, ZRP, event_loop, neighbour_table

__all__ = ["BATCH", "Dynamics", "Replica", "guard_dynamics"]

#: Attempts drawn and performed per call of the event loop.
BATCH = 1 << 16


def guard_dynamics(meta: RunMeta) -> None:
    """Raise :class:`MetadataError` unless the reference dynamics can run ``meta``."""
    if not isinstance(meta.model, ZRPModel | CMAMModel):
        raise MetadataError(
            [
                f"model.family: expected zrp or cmam for the reference sampler; got "
                f"{meta.model.family}"
            ]
        )
    if "open" in meta.lattice.boundary and meta.lattice.open is None:
        raise MetadataError(
            ["lattice.open: expected injection and extraction rates for the open axes; got none"]
        )


@dataclass(frozen=True)
class Dynamics:
    """The fixed inputs of the event loop for one model, lattice and total mass."""

    volume: int
    nbr: np.ndarray
    ndim: int
    right_probability: float
    family: int
    rates: np.ndarray
    rate_max: float
    diffusion: float
    chipping: float
    hop_max: float = 0.0
    alpha: float = 0.0
    beta: float = 0.0
    open_axes: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    strides: np.ndarray = field(default_factory=lambda: np.ones(1, np.int64))
    lengths: np.ndarray = field(default_factory=lambda: np.ones(1, np.int64))

    @classmethod
    def from_meta(cls, meta: RunMeta, mass: int) -> Dynamics:
        """Build from validated metadata (see :func:`guard_dynamics`) and the total mass."""
        guard_dynamics(meta)
        hops = cls._hops(meta, mass)
        lattice = meta.lattice
        shape = tuple(lattice.sites)
        open_axes = np.array([a for a, b in enumerate(lattice.boundary) if b == "open"], np.int64)
        strides = np.array([int(np.prod(shape[a + 1 :])) for a in range(len(shape))], np.int64)
        alpha = beta = 0.0
        if len(open_axes):
            assert lattice.open is not None
            alpha, beta = float(lattice.open.injection), float(lattice.open.extraction)
        return replace(
            hops,
            hop_max=hops.rate_max,
            rate_max=hops.rate_max + len(open_axes) * (alpha + beta),
            alpha=alpha,
            beta=beta,
            open_axes=open_axes,
            strides=strides,
            lengths=np.array(shape, np.int64),
        )

    @classmethod
    def _hops(cls, meta: RunMeta, mass: int) -> Dynamics:
        """The site-to-site part of the dynamics (no reservoirs yet)."""
        model = meta.model
        lattice = meta.lattice
        nbr = neighbour_table(list(lattice.sites), list(lattice.boundary))
        common = {
            "volume": lattice.volume,
            "nbr": nbr,
            "ndim": lattice.ndim,
            "right_probability": float(model.right_probability),
        }
        if isinstance(model, ZRPModel):
            # u(k) is constant beyond the table for `rate` and `rates`; for b it is not
            kmax = len(model.rates or [1.0])
            if model.b is not None:
                kmax = max(mass, 1)
            return cls(
                **common,
                family=ZRP,
                rates=np.ascontiguousarray(hop_rates(model, kmax)),
                rate_max=float(max_hop_rate(model)),
                diffusion=0.0,
                chipping=0.0,
            )
        assert isinstance(model, CMAMModel)
        d, w = float(model.diffusion), float(model.chipping)
        return cls(
            **common,
            family=CMAM,
            rates=np.zeros(2),
            rate_max=d + w,
            diffusion=d,
            chipping=w,
        )

    @property
    def attempt_rate(self) -> float:
        """Attempts per unit time on the whole lattice: N * r_max."""
        return self.volume * self.rate_max


class Replica:
    """One replica: its masses (flat, int64), its generator and the event loop.

    It also keeps the net transfer across every bond since the last recorded snapshot
    (``flow``, ``(ndim * volume,)``) and the units injected and extracted so far (``io``);
    :meth:`advance` hands them out when asked.

    >>> from massarc.schema import parse_metadata
    >>> meta = parse_metadata({"model": {"family": "zrp", "rate": 1.0},
    ...     "lattice": {"sites": [4], "boundary": "periodic"}, "run": {"regime": "transient"}})
    >>> rep = Replica(Dynamics.from_meta(meta, 3), np.array([3, 0, 0, 0]),
    ...               np.random.default_rng(0))
    >>> out = np.empty((2, 4), dtype=np.int64)
    >>> rep.advance(np.array([0.0, 5.0]), out)
    >>> out.sum(axis=1).tolist()
    [3, 3]
    """

    def __init__(
        self,
        dynamics: Dynamics,
        mass: np.ndarray,
        rng: np.random.Generator,
        *,
        pure: bool | None = None,
    ) -> None:
        self.dynamics = dynamics
        self.mass = np.ascontiguousarray(mass, dtype=np.int64).reshape(-1)
        self.rng = rng
        self.attempts = 0
        self.flow = np.zeros(dynamics.ndim * dynamics.volume, np.int64)
        self.io = np.zeros(2, np.int64)
        self._loop: Callable[..., None] = event_loop(pure)

    def advance(
        self,
        dts: np.ndarray,
        out: np.ndarray,
        flows: np.ndarray | None = None,
        io_out: np.ndarray | None = None,
    ) -> None:
        """Run on through the time steps ``dts`` (>= 0), recording the masses after each
        step in the rows of ``out`` (``(len(dts), volume)``, int64).

        With ``flows`` (``(len(dts), ndim * volume)``, int64) and ``io_out``
        (``(len(dts), 2)``), also record the net transfer across every bond during each
        step and the cumulative units injected and extracted after it.
        """
        d = self.dynamics
        track = flows is not None
        if track and io_out is None:
            raise ValueError("expected io_out together with flows; got flows alone")
        no_rows = np.zeros((0, 0), np.int64)
        flow_rows = flows if track else no_rows
        io_rows = io_out if track else no_rows
        counts = self.rng.poisson(d.attempt_rate * np.asarray(dts, dtype=np.float64))
        cum = np.cumsum(counts, dtype=np.int64)
        total = int(cum[-1]) if len(cum) else 0
        done = 0
        k = 0
        while done < total:
            b = min(BATCH, total - done)
            picks = self.rng.integers(0, d.volume, size=b, dtype=np.int64)
            unif = self.rng.random(b)
            end = done + b
            k1 = int(np.searchsorted(cum, end, side="right"))  # records due by attempt `end`
            self._loop(
                self.mass,
                out[k:k1],
                d.nbr,
                d.ndim,
                d.right_probability,
                d.family,
                d.rates,
                d.rate_max,
                d.diffusion,
                d.chipping,
                picks,
                unif,
                cum[k:k1] - done,
                d.hop_max,
                d.alpha,
                d.beta,
                d.open_axes,
                d.strides,
                d.lengths,
                track,
                self.flow,
                flow_rows[k:k1],
                self.io,
                io_rows[k:k1],
            )
            k, done = k1, end
        out[k:] = self.mass
        if track and k < len(out):  # records after the last attempt (none when any)
            assert flows is not None and io_out is not None
            flows[k] = self.flow
            flows[k + 1 :] = 0
            self.flow[:] = 0
            io_out[k:] = self.io
        self.attempts += total
