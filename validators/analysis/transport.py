"""How far a fluctuation can travel, and where a driven ZRP piles its mass between walls.

The physics the ``drift`` check's axis test and the ``boundary`` check's wall test lean on,
as pure functions of the declared model:

* :func:`transport_of`: the kinematic wave speed per unit drift, c1 (before the 1/d share
  of moves along an axis), and the largest hop rate r_max. A fluctuation moves at most as
  fast as the model's kinematic wave, c = |2p-1| c1 / d (d the dimension; c1 = z'(rho) for
  the ZRP, from its exact product measure at the fluid density, and D + w for the CMAM,
  whose moves carry a whole mass at rate D), and spreads at most like a random walk at
  r_max;
* :func:`influence`: the sites s = c dt + 3 sqrt(r_max dt / d) + 1 a fluctuation can
  reach in the time dt of a lag; :func:`dt_for` inverts it; :func:`carried`: the sites
  c dt a drift carries a fluctuation in dt;
* :func:`walls_centre`: the centre of mass of a ZRP's steady state between walls under a
  drift (exact for its product measure), and :func:`profile_centre`, the centre of mass
  the ``profiles`` statistic measures.

>>> t = Transport(c1=1.0, r_max=4.0)
>>> influence(0.0, 1.0, t, 1)
1.0
>>> round(dt_for(influence(9.0, 1.0, t, 1), 1.0, t, 1), 6)
9.0
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from massarc.schema import CMAMModel, ZRPModel
from massarc.schema.laws import (
    critical_density,
    hop_rates,
    max_hop_rate,
    site_weights,
    tilt_to_density,
)

__all__ = [
    "Transport",
    "carried",
    "dt_for",
    "influence",
    "profile_centre",
    "run_density",
    "transport_of",
    "walls_centre",
]


@dataclass(frozen=True)
class Transport:
    """How fast a fluctuation can move: wave speed per unit drift ``c1`` (before the 1/d
    share of moves along an axis) and the largest hop rate ``r_max``."""

    c1: float
    r_max: float


def transport_of(model: Any, density: float) -> Transport | None:
    """:class:`Transport` of a ZRP or CMAM at ``density``; None for other models.

    ZRP: c1 = z'(rho) = z / var(m) in the grand-canonical product measure at the fluid
    density min(rho, rho_c) (Evans and Hanney, J. Phys. A 38, R195, 2005: the current of a
    driven ZRP is (p - q) z(rho), so density waves travel at (p - q) z'(rho)).
    CMAM: c1 = D + w (moves carry a whole mass at rate D or one unit at rate w; the wave
    speed (p - q)(D + w s'(rho)), s the occupied fraction, is at most this).
    """
    if isinstance(model, CMAMModel):
        rate = float(model.diffusion + model.chipping)
        return Transport(rate, rate)
    if not isinstance(model, ZRPModel):
        return None
    rho_c = critical_density(model)
    rho = max(float(density), 1e-6)
    if rho_c is not None:
        rho = min(rho, rho_c * (1.0 - 1e-6))
    mmax = int(max(256, 64 * rho + 64))
    p = tilt_to_density(site_weights(model, mmax), rho)
    m = np.arange(mmax + 1, dtype=np.float64)
    mean = float(p @ m)
    var = float(p @ (m - mean) ** 2)
    z = float(p @ hop_rates(model, mmax))
    r_max = float(max_hop_rate(model))
    c1 = z / var if var > 0 else r_max
    return Transport(min(c1, r_max), r_max)


def influence(dt: float, drift: float, transport: Transport, ndim: int) -> float:
    """Sites a fluctuation can reach in ``dt`` under a drift |2p - 1| = ``drift``."""
    if not math.isfinite(dt) or dt < 0:
        return math.inf
    share = transport.r_max * dt / ndim
    return drift * transport.c1 * dt / ndim + 3.0 * math.sqrt(share) + 1.0


def run_density(snapshots: Any, meta: Any, volume: int) -> float | None:
    """The density the transport is evaluated at: the mean total mass per site of the
    ``snapshots`` statistic when there is one, else the declared density (or total mass
    over ``volume``); None when nothing tells it."""
    volume = max(1, int(volume))
    if snapshots is not None and snapshots.valid.any():
        return float(snapshots.total[snapshots.valid].mean()) / volume
    if meta is not None and meta.run.density is not None:
        return float(meta.run.density)
    if meta is not None and meta.run.total_mass is not None:
        return float(meta.run.total_mass) / volume
    return None


def carried(dt: float, drift: float, transport: Transport | None, ndim: int) -> float:
    """Sites a drift |2p - 1| = ``drift`` carries a fluctuation in ``dt``, at most: c dt with
    c = drift c1 / d (0 without a known transport, or without drift).

    >>> carried(100.0, 0.6, Transport(c1=2.0, r_max=2.0), 1)
    120.0
    """
    if transport is None or not drift > 0:
        return 0.0
    if not math.isfinite(dt) or dt < 0:
        return math.inf
    return drift * transport.c1 * dt / ndim


def profile_centre(profile: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Centre of mass of bin profiles ``(replica, snapshot, bin)`` relative to the middle
    of the axis, in sites (NaN where a profile holds no mass)."""
    length = edges[-1]
    centres = (edges[:-1] + edges[1:] - 1) / 2.0 - (length - 1) / 2.0
    total = profile.sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(total > 0, profile @ centres / total, np.nan)


def walls_centre(
    model: Any, sites: tuple[int, ...], axis: int, mass: float, p: float
) -> tuple[float, float]:
    """Centre of mass along ``axis`` (sites from the middle) of the steady state of a ZRP
    between walls with right-hop probability ``p`` on every axis, and the variance of one
    snapshot's centre (independent sites; a condensate takes up the others' fluctuations).

    The stationary measure is a product with fugacity z_x proportional to (p/q)^(x_1 + ...
    + x_d) (zero mean current across every bond: p z_b = q z_{b+1}; Evans and Hanney,
    J. Phys. A 38, R195, 2005, for the product form); the densities follow from the
    grand-canonical law at each site, and mass beyond what the largest fugacity below
    z_c can hold condenses at the site of largest fugacity.
    """
    length = sites[axis]
    if p in (0.0, 1.0):
        return (length - 1) / 2.0 * (1.0 if p == 1.0 else -1.0), 0.0
    r = math.log(p / (1.0 - p))
    grids = np.indices(sites).sum(axis=0).astype(np.float64)
    k = (grids - grids.max()) * r if r > 0 else (grids - grids.min()) * r  # log z / z_top
    mmax = int(max(512, 8 * mass / max(1, math.prod(sites)) + 64))
    f = site_weights(model, mmax)
    m = np.arange(mmax + 1, dtype=np.float64)
    logf = np.log(np.maximum(f, 1e-300))
    u = hop_rates(model, mmax + 1)
    log_zc = float(np.log(u[-1]))  # u(k) settles to u(infinity) = z_c for these laws

    def moments(log_top: float) -> tuple[np.ndarray, np.ndarray]:
        a = logf[None, :] + (log_top + k.reshape(-1, 1)) * m[None, :]
        a = np.exp(a - a.max(axis=1, keepdims=True))
        a /= a.sum(axis=1, keepdims=True)
        mean = a @ m
        return mean.reshape(sites), (a @ m**2 - mean**2).reshape(sites)

    lo, hi = log_zc - 60.0, log_zc - 1e-9
    rho, var = moments(hi)
    top = np.unravel_index(int(np.argmax(k)), sites)
    condensed = rho.sum() < mass
    if not condensed:
        for _ in range(100):
            mid = 0.5 * (lo + hi)
            if moments(mid)[0].sum() < mass:
                lo = mid
            else:
                hi = mid
        rho, var = moments(0.5 * (lo + hi))
    else:  # the excess condenses where the fugacity is largest
        rho = rho.copy()
        rho[top] += mass - rho.sum()
    pos = np.indices(sites)[axis].astype(np.float64) - (length - 1) / 2.0
    centre = float((rho * pos).sum() / mass)
    spread = float((var * (pos - centre) ** 2).sum())
    if condensed:
        spread += float(var.sum()) * float(pos[top] - centre) ** 2
    return centre, spread / mass**2


def dt_for(reach: float, drift: float, transport: Transport, ndim: int) -> float:
    """Largest dt whose reach is at most ``reach`` (bisection)."""
    lo, hi = 0.0, max(1.0, reach)
    while influence(hi, drift, transport, ndim) <= reach:
        hi *= 2.0
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if influence(mid, drift, transport, ndim) <= reach:
            lo = mid
        else:
            hi = mid
    return lo
