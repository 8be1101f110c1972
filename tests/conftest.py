"""Shared fixtures. Keep this file small: helpers of one test module stay in that module."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from massarc.schema import RunMeta, parse_metadata


def make_meta(
    family: str = "zrp",
    sites: tuple[int, ...] = (16,),
    boundary: str | list[str] = "periodic",
    regime: str = "stationary",
    **model: Any,
) -> RunMeta:
    """Metadata for tests: the minimal contract plus whatever model keys are given."""
    if family == "zrp":
        model = {"b": 3.0, **model}
    elif family == "cmam":
        model = {"diffusion": 1.0, "chipping": 1.0, **model}
    else:
        model = {"description": "test model", **model}
    return parse_metadata(
        {
            "model": {"family": family, **model},
            "lattice": {"sites": list(sites), "boundary": boundary},
            "run": {"regime": regime},
        }
    )


def multinomial_run(
    replicas: int, snapshots: int, sites: tuple[int, ...], mass: int, seed: int = 0
) -> np.ndarray:
    """Random occupations with exactly ``mass`` per snapshot (not a physical trajectory)."""
    rng = np.random.default_rng(seed)
    n = int(np.prod(sites))
    flat = rng.multinomial(mass, np.full(n, 1.0 / n), size=(replicas, snapshots))
    return flat.reshape(replicas, snapshots, *sites)


@pytest.fixture
def meta_factory():
    return make_meta
