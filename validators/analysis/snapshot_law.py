"""Is one snapshot of every replica a draw of the model's steady state?

The ``steady-state`` check uses this model knowledge where the data alone cannot decide (a
run of twenty snapshots whose largest mass grows 25-fold has no autocorrelation estimate
worth the name). It is asked about two snapshots: the first one (did the run start far
from the steady state, whatever it declares?) and the latest admissible start of the
stationary window (is the run still far from the steady state half-way through?).

ZRP, exact (a product measure: periodic axes with any drift, or symmetric moves with
reflecting walls). The canonical steady state of N sites holding M units gives the law of
the largest mass exactly, P(max <= K) = Z_K(N, M) / Z(N, M)
(:func:`massarc.schema.laws.largest_mass_cdf`).

* H0: at snapshot s the configuration of every replica r is a draw of the canonical
  steady state with that replica's total mass M_r, independently over replicas.
* Statistic: the largest mass K_r of each replica; its two-sided exact p-value
  p_r = min(1, 2 min(P(max <= K_r), P(max >= K_r))), combined over replicas by Fisher's
  method, X = -2 sum_r log p_r.
* p-value: the chi-square tail with 2R degrees of freedom at X. The discrete p_r are
  super-uniform under H0, so the combined p-value is conservative (its size is at most
  the nominal level). ``far`` when p < ``alpha``.

CMAM in the condensed phase (rho > rho_c = sqrt(w/D + 1) - 1, mean field, Majumdar,
Krishnamurthy and Barma, PRL 81, 3691, 1998). No exact finite-size law is known; the
steady state holds a condensate of about c = (rho - rho_c) N units
(:func:`massarc.schema.laws.condensate_mass`). A snapshot where every replica's largest
mass is below ``fraction`` x c is ``far``: a decision rule, not a test (no p-value); its
false-alarm rate is measured in ``bench/calibrate_steady_state.py``.

Other families, the fluid CMAM, and ZRP lattices without a product measure: no model
evidence (None); the check then judges from the data alone.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from massarc.schema import CMAMModel, RunMeta, ZRPModel
from massarc.schema.laws import (
    condensate_mass,
    critical_density,
    largest_mass_cdf,
    largest_mass_quantile,
    log_partition,
)

__all__ = ["ExactLargestMass", "SnapshotLaw", "law_method", "snapshot_law"]

#: Above this total mass the exact law is not computed (each evaluation is an O(M log M)
#: convolution power; far beyond this the check judges from the data alone).
MAX_EXACT_MASS = 50_000

Method = Literal["exact", "condensate"]


def law_method(meta: RunMeta | None) -> tuple[Method | None, str]:
    """Which model evidence applies to the declared model and lattice, and if none, why."""
    if meta is None:
        return None, "no valid metadata"
    model, bounds = meta.model, meta.lattice.boundary
    if isinstance(model, ZRPModel):
        if "open" in bounds:
            return None, "open boundaries: the canonical law does not hold"
        if "reflecting" in bounds and model.right_probability != 0.5:
            return None, "driven moves between walls: the steady state is not a product measure"
        return "exact", ""
    if isinstance(model, CMAMModel):
        return "condensate", ""
    return None, f"no steady-state law is known for family {model.family}"


@dataclass(frozen=True)
class SnapshotLaw:
    """Outcome of :func:`snapshot_law` at one snapshot (all replicas).

    Attributes
    ----------
    snapshot, time
        Where the replicas were looked at.
    method
        ``"exact"`` (ZRP, exact law) or ``"condensate"`` (CMAM, condensate scale).
    largest
        The largest mass of every replica there.
    far
        True when the snapshot is judged not to be a draw of the steady state.
    p_value
        Fisher-combined exact p-value (``"exact"``); None for ``"condensate"``.
    reference
        What the steady state holds, in words (median and central 99.9 % of the largest
        mass, or the condensate size).
    """

    snapshot: int
    time: float
    method: Method
    largest: tuple[int, ...]
    far: bool
    p_value: float | None
    reference: str

    def describe(self) -> str:
        """One phrase: the largest masses against the steady state."""
        masses = ", ".join(str(k) for k in self.largest)
        p = f"; p = {self.p_value:.2g}" if self.p_value is not None else ""
        return f"largest mass {masses} against {self.reference}{p}"

    def values(self) -> dict[str, Any]:
        """Plain numbers for a check result."""
        return {
            "snapshot": self.snapshot,
            "time": self.time,
            "method": self.method,
            "largest": list(self.largest),
            "far": self.far,
            "p_value": self.p_value,
        }


class ExactLargestMass:
    """Exact largest-mass law of the canonical ZRP steady state on ``sites`` sites, with a
    cache per total mass (a run's replicas share it)."""

    def __init__(self, model: ZRPModel, sites: int) -> None:
        self.model = model
        self.sites = sites
        self._cdf: dict[tuple[int, int], float] = {}
        self._log_z: dict[int, float] = {}

    def cdf(self, mass: int, k: int) -> float:
        """P(max <= k) at total ``mass``."""
        key = (mass, k)
        if key not in self._cdf:
            if mass not in self._log_z:
                self._log_z[mass] = log_partition(self.model, self.sites, mass)
            log_z = self._log_z[mass]
            self._cdf[key] = largest_mass_cdf(self.model, self.sites, mass, k, log_z)
        return self._cdf[key]

    def p_two_sided(self, mass: int, k: int) -> float:
        """min(1, 2 min(P(max <= k), P(max >= k)))."""
        low = self.cdf(mass, k)
        high = 1.0 - self.cdf(mass, k - 1) if k > 0 else 1.0
        return min(1.0, 2.0 * min(low, high))

    def reference(self, mass: int) -> str:
        """Median and central 99.9 % range of the largest mass, in words."""
        q = [largest_mass_quantile(self.model, self.sites, mass, p) for p in (5e-4, 0.5, 1 - 5e-4)]
        return (
            f"the exact steady state of {self.sites} sites holding {mass} units "
            f"(median {q[1]}, 99.9 % within {q[0]}..{q[2]})"
        )


def fisher(p: list[float]) -> float:
    """Fisher's combination of independent p-values: chi2_{2R} tail of -2 sum log p."""
    x = -2.0 * sum(math.log(max(v, 1e-300)) for v in p)
    from .tails import chi2_sf  # scipy.special, imported on first use

    return chi2_sf(x, 2 * len(p))


def snapshot_law(
    meta: RunMeta,
    total: np.ndarray,
    largest: np.ndarray,
    snapshot: int,
    time: float,
    *,
    alpha: float,
    fraction: float,
    exact: ExactLargestMass | None = None,
) -> SnapshotLaw | None:
    """Judge snapshot ``snapshot`` of every replica against the model's steady state.

    ZRP: H0 "every replica's configuration here is a draw of the canonical steady state";
    statistic: each replica's largest mass, two-sided exact p-value, Fisher-combined;
    ``far`` when the combined p-value is below ``alpha``. CMAM: ``far`` when every largest
    mass is below ``fraction`` x (rho - rho_c) N (no p-value). See the module docstring.

    ``total`` and ``largest`` are the (replica,) total and largest mass there. Returns None
    when no model evidence applies (see :func:`law_method`; also a CMAM at or below rho_c,
    a ZRP total beyond :data:`MAX_EXACT_MASS`, and data no configuration can give: an
    empty lattice, or a largest mass above the total).
    """
    method, _ = law_method(meta)
    sites = meta.lattice.volume
    ks = tuple(int(k) for k in largest)
    ms = [int(m) for m in total]
    if any(k < 0 or k > m for k, m in zip(ks, ms, strict=True)) or max(ms) <= 0:
        return None  # not a configuration of the model: the integrity checks report it
    if method == "exact":
        assert isinstance(meta.model, ZRPModel)
        if max(ms) > MAX_EXACT_MASS:
            return None
        law = exact or ExactLargestMass(meta.model, sites)
        p = fisher([law.p_two_sided(m, k) for m, k in zip(ms, ks, strict=True)])
        far = p < alpha
        ref = law.reference(ms[0]) if far else "the exact steady state"
        if far and len(set(ms)) > 1:
            ref += f" (replica totals {min(ms)}..{max(ms)})"
        return SnapshotLaw(snapshot, time, "exact", ks, far, p, ref)
    if method == "condensate":
        c = condensate_mass(meta.model, sites, float(np.mean(ms)))
        if c <= 0:
            return None
        rho_c = critical_density(meta.model)
        far = all(k < fraction * c for k in ks)
        ref = (
            f"a condensate of about (rho - rho_c) N = {c:.0f} units (rho_c = {rho_c:.3g}); "
            f"every replica below {fraction:g} of it"
            if far
            else f"a condensate of about {c:.0f} units"
        )
        return SnapshotLaw(snapshot, time, "condensate", ks, far, None, ref)
    return None
