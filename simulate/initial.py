"""Initial conditions of the dynamics, and which lattices admit an exact steady-state start."""

from __future__ import annotations

import numpy as np

from massarc.schema import MetadataError, RunMeta, ZRPModel

from .errors import SamplerError
from .exact import SteadyStateSampler

__all__ = ["INITIAL_KINDS", "guard_product_measure", "initial_masses"]

#: The starts the dynamics offers (values of ``run.initial.kind``).
INITIAL_KINDS = ("random", "uniform", "condensed", "steady-state")


def guard_product_measure(meta: RunMeta) -> None:
    """Raise :class:`MetadataError` unless the canonical product measure is stationary.

    It is for a ZRP on a periodic lattice with any drift, and for a symmetric ZRP whatever
    mix of periodic axes and reflecting walls (the one-particle walk is then doubly
    stochastic; moves into a wall are suppressed).
    """
    model, lattice = meta.model, meta.lattice
    if not isinstance(model, ZRPModel):
        raise MetadataError(
            [f"model.family: expected zrp for an exact steady state; got {model.family}"]
        )
    if "open" in lattice.boundary:
        raise MetadataError(
            ["lattice.boundary: expected no open axis for an exact steady state; got open"]
        )
    walls = "reflecting" in lattice.boundary
    if walls and model.right_probability != 0.5:
        raise MetadataError(
            [
                "lattice.boundary: expected periodic axes for a steady-state start of a "
                f"driven ZRP (right_probability {model.right_probability}); got reflecting walls"
            ]
        )


def initial_masses(
    kind: str,
    meta: RunMeta,
    mass: int,
    rng: np.random.Generator,
    sampler: SteadyStateSampler | None = None,
) -> np.ndarray:
    """One initial configuration, flat (array order) int64, summing to ``mass``.

    * ``random``: each unit on a uniformly random site (multinomial);
    * ``uniform``: ``mass // N`` everywhere, the remainder one unit each on evenly spaced
      sites;
    * ``condensed``: all mass on site 0;
    * ``steady-state``: an exact canonical ZRP sample (``sampler``, built when not given).

    >>> from massarc.schema import parse_metadata
    >>> meta = parse_metadata({"model": {"family": "zrp", "rate": 1.0},
    ...     "lattice": {"sites": [5], "boundary": "periodic"}, "run": {"regime": "transient"}})
    >>> initial_masses("uniform", meta, 7, np.random.default_rng(0)).tolist()
    [2, 1, 2, 1, 1]
    """
    n = meta.lattice.volume
    if kind == "random":
        return rng.multinomial(mass, np.full(n, 1.0 / n)).astype(np.int64)
    if kind == "uniform":
        out = np.full(n, mass // n, dtype=np.int64)
        extra = mass % n
        if extra:
            out[(np.arange(extra) * n) // extra] += 1
        return out
    if kind == "condensed":
        out = np.zeros(n, dtype=np.int64)
        out[0] = mass
        return out
    if kind == "steady-state":
        guard_product_measure(meta)
        if sampler is None:
            assert isinstance(meta.model, ZRPModel)
            sampler = SteadyStateSampler(meta.model, n, mass)
        return sampler.sample(1, rng)[0]
    raise SamplerError(f"initial: expected one of {', '.join(INITIAL_KINDS)}; got {kind!r}")
