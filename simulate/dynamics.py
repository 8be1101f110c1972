"""Continuous-time dynamics of one replica, exact at the snapshot times.

Between two snapshots ``dt`` apart the number of attempts is drawn as
``n ~ Poisson(N * r_max * dt)`` (N sites, r_max = sup u for the ZRP, D + w for the CMAM);
each attempt picks a site uniformly and is accepted with the right probability (see
:mod:`.kernels`). This uniformisation gives the continuous-time Markov process observed
exactly at the snapshot times.

Random numbers are drawn in batches from the replica's own :class:`numpy.random.Generator`:
first the Poisson counts of a stretch of snapshots, then, batch after batch, the site
indices and the uniforms. The stream depends only on the seed, the times and the stretches,
so a replica is reproduced alone from its seed.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

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
    for axis, bound in enumerate(meta.lattice.boundary):
        if bound not in ("periodic", "reflecting"):
            where = "lattice.boundary" if meta.lattice.ndim == 1 else f"lattice.boundary[{axis}]"
            raise MetadataError([f"{where}: expected periodic or reflecting; got {bound}"])


@dataclass(frozen=True)
class Dynamics:
    """The fixed inputs of the event loop for one model, lattice and total mass."""

    sites: int
    nbr: np.ndarray
    ndim: int
    right_probability: float
    family: int
    rates: np.ndarray
    rate_max: float
    diffusion: float
    chipping: float

    @classmethod
    def from_meta(cls, meta: RunMeta, mass: int) -> Dynamics:
        """Build from validated metadata (see :func:`guard_dynamics`) and the total mass."""
        guard_dynamics(meta)
        model = meta.model
        lattice = meta.lattice
        nbr = neighbour_table(list(lattice.sites), list(lattice.boundary))
        common = {
            "sites": lattice.volume,
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
        return self.sites * self.rate_max


class Replica:
    """One replica: its masses (flat, int64), its generator and the event loop.

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
        self._loop: Callable[..., None] = event_loop(pure)

    def advance(self, dts: np.ndarray, out: np.ndarray) -> None:
        """Run on through the time steps ``dts`` (>= 0), recording the masses after each
        step in the rows of ``out`` (``(len(dts), sites)``, int64)."""
        d = self.dynamics
        counts = self.rng.poisson(d.attempt_rate * np.asarray(dts, dtype=np.float64))
        cum = np.cumsum(counts, dtype=np.int64)
        total = int(cum[-1]) if len(cum) else 0
        done = 0
        k = 0
        while done < total:
            b = min(BATCH, total - done)
            sites = self.rng.integers(0, d.sites, size=b, dtype=np.int64)
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
                sites,
                unif,
                cum[k:k1] - done,
            )
            k, done = k1, end
        out[k:] = self.mass
        self.attempts += total
