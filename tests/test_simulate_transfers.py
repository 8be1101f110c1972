"""Bond transfers counted by the event loop, and open axes with reservoirs.

Outside truth:

* continuity: the mass change of every site is what its bonds carried in minus what they
  carried out (a conservation law, exact for every snapshot interval);
* one particle hopping at rate 1, to the right with probability p, has after time t a net
  displacement (the sum of its transfers over all bonds) distributed as
  Skellam(p t, (1 - p) t) (a difference of two Poisson counts; scipy.stats.skellam);
* an open chain of constant-rate ZRP sites (u = 1, symmetric hops, injection alpha at site 0,
  extraction beta at the last site) has a product stationary measure with geometric site
  laws of fugacity z_i = alpha / beta + 2 alpha (L - 1 - i), mean z / (1 - z) (the open
  ZRP has product form, Levine, Mukamel and Schuetz, J. Stat. Phys. 120, 759, 2005; the
  profile from the stationary current alpha = (z_i - z_{i+1}) / 2 = beta z_{L-1}, from
  memory).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from scipy import stats

from massarc.archive import open_run
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import Trajectory, kernels, simulate, snapshot_times


def _meta(model: dict[str, Any], sites: list[int], boundary: Any, **lattice: Any) -> RunMeta:
    return parse_metadata(
        {
            "model": model,
            "lattice": {"sites": sites, "boundary": boundary, **lattice},
            "run": {"regime": "transient"},
        }
    )


def divergence(transfers: np.ndarray) -> np.ndarray:
    """Mass change of every site implied by the transfers (time, axis, *lattice)."""
    out = np.zeros(transfers.shape[:1] + transfers.shape[2:], np.int64)
    for axis in range(transfers.shape[1]):
        j = transfers[:, axis]
        out += np.roll(j, 1, axis=1 + axis) - j
    return out


DRIVEN = {"drift": "asymmetric", "right_probability": 0.7}
CASES = [
    ({"family": "zrp", "b": 3.0, **DRIVEN}, [30], "periodic"),
    ({"family": "cmam", "diffusion": 1.0, "chipping": 0.5}, [30], "reflecting"),
    ({"family": "zrp", "b": 3.0}, [6, 7], ["periodic", "reflecting"]),
    ({"family": "cmam", "diffusion": 1.0, "chipping": 1.0, "drift": "asymmetric"}, [5, 6],
     ["reflecting", "periodic"]),
]  # fmt: skip


@pytest.mark.parametrize(("model", "sites", "boundary"), CASES)
def test_transfers_obey_continuity_and_walls_carry_nothing(model, sites, boundary) -> None:
    meta = _meta(model, sites, boundary)
    t = np.array([0.0, 0.5, 1.0, 50.0, 50.25, 300.0])
    out = simulate(meta, t, replicas=2, seed=3, mass=40, transfers=True)
    assert isinstance(out, Trajectory)
    x = out.mass.astype(np.int64)
    assert out.transfers.shape == (2, len(t), len(sites), *sites)
    for r in range(2):
        assert np.array_equal(np.diff(x[r], axis=0), divergence(out.transfers[r, 1:]))
    assert np.all(out.transfers[:, 0] == 0)  # the first snapshot is the start
    bounds = [boundary] * len(sites) if isinstance(boundary, str) else boundary
    for axis, kind in enumerate(bounds):
        last = np.take(out.transfers[:, :, axis], sites[axis] - 1, axis=2 + axis)
        if kind == "reflecting":
            assert np.all(last == 0)
    assert np.abs(out.transfers).sum() > 0
    # asking for transfers does not change the trajectory
    assert np.array_equal(simulate(meta, t, replicas=2, seed=3, mass=40), out.mass)


@pytest.mark.skipif(not kernels.HAVE_NUMBA, reason="numba is not installed")
@pytest.mark.parametrize(("model", "sites", "boundary"), CASES[::3])
def test_compiled_and_pure_transfers_are_bit_identical(model, sites, boundary) -> None:
    meta = _meta(model, sites, boundary)
    t = np.array([0.0, 0.5, 1.0, 2000.0, 2000.25])  # one interval spans several batches
    args = {"replicas": 2, "seed": 13, "mass": 45, "transfers": True}
    fast, slow = simulate(meta, t, pure=False, **args), simulate(meta, t, pure=True, **args)
    assert np.array_equal(fast.mass, slow.mass)
    assert np.array_equal(fast.transfers, slow.transfers)


def test_one_particle_moves_a_skellam_distance() -> None:
    meta = _meta({"family": "zrp", "rate": 1.0, "drift": "asymmetric", "right_probability": 0.7},
                 [16], "periodic")  # fmt: skip
    t = snapshot_times(3.0, 2)  # 0 and 3
    out = simulate(meta, t, replicas=400, seed=8, mass=1, transfers=True)
    moved = out.transfers[:, 1].sum(axis=(1, 2))  # each hop adds +-1 to one bond
    values, counts = np.unique(moved, return_counts=True)
    law = stats.skellam(0.7 * 3.0, 0.3 * 3.0)
    expected = law.pmf(values) * len(moved)
    inner = expected >= 5  # pool the tails where the expected counts are small
    obs = np.append(counts[inner], counts[~inner].sum())
    exp = np.append(expected[inner], len(moved) - expected[inner].sum())
    assert stats.chisquare(obs, exp).pvalue > 1e-4
    assert moved.mean() == pytest.approx(0.4 * 3.0, abs=4 * np.sqrt(3.0 / 400))


def test_an_open_chain_reaches_its_product_measure_and_books_its_flows(tmp_path) -> None:
    alpha, beta, n = 0.02, 0.5, 10
    meta = _meta({"family": "zrp", "rate": 1.0}, [n], "open",
                 open={"injection": alpha, "extraction": beta})  # fmt: skip
    t = np.arange(0.0, 12001.0, 2.0)
    out = simulate(meta, t, replicas=4, seed=1, mass=0, transfers=True)
    x = out.mass.astype(np.int64)
    z = alpha / beta + 2 * alpha * (n - 1 - np.arange(n))
    mean = x[:, 1000:].mean(axis=(0, 1))
    assert np.allclose(mean, z / (1 - z), rtol=0.12, atol=0.01), (mean, z / (1 - z))
    total = x.sum(axis=2)
    assert np.array_equal(total - total[:, :1], out.inflow - out.outflow)
    # the bond transfers follow from the mass changes and the inflow, the outflow closes
    gain = np.diff(out.inflow, axis=1)[..., None] - np.cumsum(np.diff(x, axis=1), axis=2)
    assert np.array_equal(gain[..., :-1], out.transfers[:, 1:, 0, :-1])
    assert np.array_equal(gain[..., -1], np.diff(out.outflow, axis=1))
    # an archive keeps the flows, and the declared total mass is left out
    run = simulate(meta, t[:200], replicas=2, seed=1, mass=3, location=tmp_path / "o.zarr")
    again = open_run(tmp_path / "o.zarr")
    assert run.meta.run.total_mass is None and again.series("inflow") is not None
    total = np.stack([again.read(r).astype(np.int64).sum(axis=1) for r in range(2)])
    assert np.array_equal(total - 3, again.series("inflow") - again.series("outflow"))
