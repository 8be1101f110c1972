"""massarc.simulate: reference samplers for the ZRP and the CMAM.

* :func:`simulate`: continuous-time dynamics, exact at the snapshot times, on 1D or 2D
  lattices with periodic, reflecting or open axes, many seeded replicas, streamed into an
  archive; or independent exact steady-state samples (``exact=True``, ZRP); with
  ``transfers=True`` also the net mass moved across every bond between snapshots
  (:class:`Trajectory`);
* :func:`sample_steady_state`: exact samples of the canonical ZRP steady state;
* :func:`snapshot_times`, :func:`replica_seeds`: the times and the per-replica seeds.

The event loop is compiled with numba when it is installed (the ``fast`` extra); otherwise,
or with ``MASSARC_PURE=1``, the same code runs in pure Python with identical results.

>>> from massarc.schema import parse_metadata
>>> meta = parse_metadata({"model": {"family": "cmam", "diffusion": 1.0, "chipping": 0.5},
...     "lattice": {"sites": [8, 8], "boundary": "periodic"}, "run": {"regime": "transient"}})
>>> x = simulate(meta, snapshot_times(5.0, 3), replicas=1, seed=3, mass=64)
>>> x.shape
(1, 3, 8, 8)
"""

from .driver import SIMULATOR_NAME, Trajectory, simulate
from .errors import SamplerError
from .exact import SteadyStateSampler, sample_steady_state
from .initial import INITIAL_KINDS
from .times import replica_seeds, snapshot_times

__all__ = [
    "INITIAL_KINDS",
    "SIMULATOR_NAME",
    "SamplerError",
    "SteadyStateSampler",
    "Trajectory",
    "replica_seeds",
    "sample_steady_state",
    "simulate",
    "snapshot_times",
]
