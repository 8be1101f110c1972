"""The condensate against theory: its mass next to (rho - rho_c) L, its width.

Facts used (see :mod:`massarc.schema.laws` for the critical densities):

* above rho_c the steady state holds a condensate of mass (rho - rho_c) L (L sites) on
  top of a critical fluid: rho_c = 1/(b - 2) for the ZRP with u(k) = 1 + b/k (Evans and
  Hanney, J. Phys. A 38, R195, 2005), sqrt(w/D + 1) - 1 for the CMAM (mean field; Majumdar,
  Krishnamurthy and Barma, PRL 81, 3691, 1998); other families have none here;
* condensate fluctuations (Majumdar, Evans and Zia, PRL 94, 180601, 2005): for b > 3 they
  are Gaussian, width ~ L^(1/2); for 2 < b < 3 the width grows as L^(1/(b - 1)) and the
  variance does not converge, so quantile widths are given next to it.

Measured in the window over replicas and snapshots: the largest mass (mean, variance,
median, half-widths of the central 68 % and 95 %), the mean fraction of the mass held by
condensates (sites above the threshold) and by the largest site.

>>> from massarc.schema import parse_metadata
>>> meta = parse_metadata({"model": {"family": "zrp", "b": 4.0},
...     "lattice": {"sites": [100], "boundary": "periodic"},
...     "run": {"regime": "stationary", "total_mass": 150}})
>>> expected_condensate(meta)["mass"]            # (1.5 - 0.5) x 100
100.0
"""

from __future__ import annotations

from typing import Any

import numpy as np

from massarc.schema import CMAMModel, RunMeta, ZRPModel
from massarc.schema.laws import critical_density

__all__ = ["condensate_report", "expected_condensate", "regime"]


def _density(meta: RunMeta) -> float | None:
    if meta.run.density is not None:
        return float(meta.run.density)
    if meta.run.total_mass is not None:
        return meta.run.total_mass / meta.lattice.volume
    return None


def regime(meta: RunMeta) -> str:
    """What theory says of the condensate of this model, in one sentence."""
    model = meta.model
    if isinstance(model, ZRPModel):
        b = model.b
        if b is None or b <= 2:
            return "no condensation for this ZRP (u(k) = 1 + b/k with b > 2 is needed)"
        if b > 3:
            return "b > 3: Gaussian condensate fluctuations, width ~ L^(1/2)"
        if b == 3:
            return "b = 3: the marginal case between anomalous and Gaussian fluctuations"
        return (
            f"2 < b < 3: anomalous fluctuations, width ~ L^(1/(b-1)) = L^{1 / (b - 1):.3g}; the "
            "variance does not converge: read the quantile widths"
        )
    if isinstance(model, CMAMModel):
        return "CMAM: rho_c from mean-field theory"
    return "no critical density for this family"


def expected_condensate(meta: RunMeta) -> dict[str, Any]:
    """rho, rho_c, the expected condensate mass (rho - rho_c) L and mass fraction
    1 - rho_c / rho (0 in the fluid phase; None without rho_c or rho)."""
    rho = _density(meta)
    rho_c = critical_density(meta.model)
    out: dict[str, Any] = {"rho": rho, "rho_c": rho_c, "mass": None, "fraction": None}
    if rho is not None and rho_c is not None:
        excess = max(rho - rho_c, 0.0)
        out["mass"] = excess * meta.lattice.volume
        out["fraction"] = excess / rho if rho > 0 else 0.0
    out["regime"] = regime(meta)
    return out


def _spread(x: np.ndarray) -> dict[str, Any]:
    if x.size == 0:
        return {"draws": 0}
    q = np.quantile(x, [0.025, 0.16, 0.5, 0.84, 0.975])
    return {
        "draws": int(x.size),
        "mean": float(x.mean()),
        "var": float(x.var(ddof=1)) if x.size > 1 else None,
        "median": float(q[2]),
        "half_width_68": float((q[3] - q[1]) / 2),
        "half_width_95": float((q[4] - q[0]) / 2),
    }


def condensate_report(
    meta: RunMeta, largest: np.ndarray, held: np.ndarray, total: np.ndarray
) -> dict[str, Any]:
    """The condensate in the window against theory (arrays over (replica, snapshot) of
    the window: largest mass, mass held by condensates, total mass)."""
    out = expected_condensate(meta)
    # one ratio at a time, divided in place: long runs hold two float copies, not five
    tot = np.asarray(total, dtype=np.float64).reshape(-1)
    frac = np.array(held, dtype=np.float64).reshape(-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        np.divide(frac, tot, out=frac)
    held_fraction = float(np.nanmean(frac)) if np.isfinite(frac).any() else None
    del frac
    big = np.array(largest, dtype=np.float64).reshape(-1)
    out["largest_mass"] = _spread(big)
    out["condensate_fraction"] = held_fraction
    with np.errstate(invalid="ignore", divide="ignore"):
        top = np.divide(big, tot, out=big)
    out["largest_fraction"] = float(np.nanmean(top)) if np.isfinite(top).any() else None
    return out
