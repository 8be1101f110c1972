"""Physics behind the drift judgement (drift/transport.py): wave speed, reach, walls' steady state.

Outside truth:
* the ZRP's grand-canonical law P(m) ~ z^m prod_{k<=m} 1/u(k) (Evans and Hanney, J. Phys.
  A 38, R195, 2005), solved for z with scipy.optimize.brentq: the kinematic wave speed
  per unit drift is z'(rho) = z / var(m);
* the driven ZRP between walls, simulated by the reference sampler for a long time: its
  time-averaged centre of mass against the product-measure prediction.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import make_meta
from scipy.optimize import brentq

from massarc.schema import CMAMModel, ZRPModel
from massarc.simulate import simulate
from massarc.validators.analysis.transport import (
    Transport,
    dt_for,
    influence,
    profile_centre,
    transport_of,
    walls_centre,
)


def _grand_canonical(b: float, rho: float, mmax: int = 3000) -> tuple[float, float]:
    """(z, var m) of u(k) = 1 + b/k at density rho, by direct sums."""
    k = np.arange(1, mmax + 1)
    logf = np.concatenate([[0.0], -np.cumsum(np.log1p(b / k))])
    m = np.arange(mmax + 1)

    def density(logz: float) -> float:
        w = np.exp(logf + logz * m - np.max(logf + logz * m))
        return float(w @ m / w.sum())

    logz = brentq(lambda lz: density(lz) - rho, -40.0, -1e-12)
    w = np.exp(logf + logz * m - np.max(logf + logz * m))
    w /= w.sum()
    mean = float(w @ m)
    return math.exp(logz), float(w @ (m - mean) ** 2)


@pytest.mark.parametrize(("b", "rho"), [(4.0, 0.1), (4.0, 0.4), (0.5, 2.0)])
def test_zrp_wave_speed_is_z_prime(b, rho):
    z, var = _grand_canonical(b, rho)
    got = transport_of(ZRPModel(family="zrp", b=b), rho)
    assert got.c1 == pytest.approx(z / var, rel=1e-3)
    assert got.r_max == 1 + b


def test_condensed_zrp_uses_the_fluid_density_and_cmam_its_rates():
    fluid = transport_of(ZRPModel(family="zrp", b=4.0), 0.4999)
    condensed = transport_of(ZRPModel(family="zrp", b=4.0), 3.0)
    assert condensed.c1 == pytest.approx(fluid.c1, rel=1e-2)
    cmam = transport_of(CMAMModel(family="cmam", diffusion=1.0, chipping=2.0), 0.5)
    assert (cmam.c1, cmam.r_max) == (3.0, 3.0)


def test_reach_grows_with_time_and_inverts():
    t = Transport(1.0, 5.0)
    reach = [influence(dt, 1.0, t, 1) for dt in (0.1, 1.0, 10.0, 100.0)]
    assert reach == sorted(reach)
    assert influence(10.0, 1.0, t, 2) < influence(10.0, 1.0, t, 1)
    dt = dt_for(50.0, 1.0, t, 1)
    assert influence(dt, 1.0, t, 1) == pytest.approx(50.0, abs=1e-6)


def test_profile_centre_of_a_pile():
    edges = np.array([0, 5, 10, 15, 20])
    pile = np.array([[[0.0, 0.0, 0.0, 7.0], [7.0, 0.0, 0.0, 0.0]]])
    np.testing.assert_allclose(profile_centre(pile, edges), [[7.5, -7.5]])


def test_walls_centre_matches_the_driven_dynamics():
    meta = make_meta("zrp", sites=(20,), boundary="reflecting", b=1.0, drift="asymmetric",
                     right_probability=0.6)  # fmt: skip
    x = simulate(meta, np.arange(400) * 20.0 + 2000.0, replicas=4, seed=9, mass=20)
    pos = np.arange(20) - 9.5
    measured = float((x.astype(float) @ pos).mean() / 20)
    predicted, variance = walls_centre(meta.model, (20,), 0, 20.0, 0.6)
    assert measured == pytest.approx(predicted, abs=0.4)  # ~ 4 sd of the time average
    assert 0 < variance < 25
    assert walls_centre(meta.model, (20,), 0, 20.0, 1.0) == (9.5, 0.0)
    assert walls_centre(meta.model, (20,), 0, 20.0, 0.4)[0] == pytest.approx(-predicted)
