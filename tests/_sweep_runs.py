"""A small parameter sweep written with the reference sampler, for the Dask and sweep tests.

Each point is a ZRP with u(k) = 1 + b/k on a ring of ``sites`` sites, 4 replicas of exact
steady-state samples (independent draws, so stationary from the first snapshot), written
with chunks of ``chunk`` snapshots so that every replica spans several chunks.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from massarc.archive import create_run
from massarc.schema import parse_metadata
from massarc.simulate import simulate

__all__ = ["POINTS", "write_sweep"]

#: (run name, b, total mass) on 40 sites: rho_c = 1/(b - 2) = 0.5 for b = 4, so the first
#: point is fluid (rho = 0.25) and the second condensed (rho = 1.5); b = 1.5 never condenses.
POINTS = (("b4-fluid", 4.0, 10), ("b4-condensed", 4.0, 60), ("b1.5-fluid", 1.5, 60))


def write_sweep(
    root: Path,
    *,
    sites: int = 40,
    snapshots: int = 240,
    chunk: int = 50,
    unconserved: str | None = None,
) -> Path:
    """Write the collection ``root`` (a directory of runs) and return it. The run named
    ``unconserved`` gets one extra unit at site 3 of snapshot 100 of replica 1 (a planted
    fault: its mass is not conserved)."""
    root.mkdir(parents=True)
    times = np.arange(snapshots, dtype=np.float64)
    for k, (name, b, mass) in enumerate(POINTS):
        meta = parse_metadata(
            {
                "model": {"family": "zrp", "b": b, "drift": "symmetric"},
                "lattice": {"sites": [sites], "boundary": "periodic"},
                "run": {"regime": "stationary", "total_mass": mass},
            }
        )
        data = np.asarray(simulate(meta, times, replicas=4, seed=100 + k, mass=mass, exact=True))
        if name == unconserved:
            data[1, 100, 3] += 1
        writer = create_run(root / f"{name}.zarr", meta, snapshots_hint=chunk)
        writer.append(times, data)
        writer.close()
    return root
