"""The ``stationary-law`` check: the occupation law in the stationary window is the exact one.

For a ZRP (any declared u(k)) on a ring, a torus, or with symmetric moves between walls,
the steady state at fixed total mass M on N sites is the canonical product measure, whose
single-site law P(m) = f(m) Z(N-1, M-m) / Z(N, M) is exact at finite size
(:func:`massarc.schema.laws.canonical_site_law`).

H0: the time-averaged single-site occupation law over the stationary window (all sites,
snapshots and replicas pooled) is P. Statistic: Pearson's X^2 on the pooled counts with
merged bins, divided by the trace of the design-effect matrix estimated by batch means
(second-order Rao-Scott correction in F form, :mod:`.law_fit`); p-value
from F(nu, nu (m - 1)) for m batches and Satterthwaite's nu. Batches are whole replicas when
there are at least ``min_batches`` of them, otherwise runs of consecutive histogram blocks
of each replica, each at least ``batch_factor`` times the window's statistical
inefficiency long. Replicas with different total masses are compared with their own laws.

Where the counts start. The window's start is chosen from the same data, where the tail
looks most stationary; a chance excursion of the replica mean then passes for the end of
a transient, and the law counted after it is biased (measured on dynamics started from
an exact sample, 16 replicas: 15% of clean p-values below 0.05 from the detected start,
and one run in 40 below 1e-5). So a run that declares an exact steady-state start
(``run.initial.kind = "steady-state"``) is counted from its first snapshot (if the claim
is false, the transient shows as a misfit, which is right); any other run from
``start_margin`` statistical inefficiencies after the window's start, at most half-way
into the window.

``fail`` when p < ``alpha``; ``warn`` when the effective sample n / design effect is below
``min_effective``, or too few batches or bins are left to judge; ``skip`` for models
without an exact law (CMAM, custom), boundaries under which it does not hold (asymmetric
moves with walls, open axes), runs that declare a transient regime, runs whose stationary
window was not found, and runs whose replicas do not keep their total mass.
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from massarc.schema import ZRPModel
from massarc.schema.laws import canonical_site_law, why_no_canonical_law

from ...analysis.window import stationary_window
from ...engine.registry import Check, CheckContext, Option
from ...engine.result import CheckResult
from .law_fit import LawFit, fit_law

__all__ = ["StationaryLawCheck"]

#: Largest number of distinct total masses among replicas (one exact law each).
_MAX_MASSES = 64


def _why_no_law(meta: Any) -> str | None:
    """Why the exact law does not apply to the declared model, lattice and regime (None: it
    does)."""
    why = why_no_canonical_law(meta)
    if why is None and meta.run.regime == "transient":
        return "the run declares a transient regime"
    return why


def _label(group: tuple[int, int], top: int) -> str:
    a, b = group
    if b >= top:
        return f"m >= {a}"
    return f"m = {a}" if a == b else f"m = {a}..{b}"


class StationaryLawCheck(Check):
    """Exact finite-size occupation law of the ZRP against the stationary window.

    Null hypothesis
    ---------------
    The time-averaged single-site occupation law over the stationary window (all sites,
    snapshots and replicas pooled) is the exact canonical law of the declared ZRP,
    P(m) = f(m) Z(N-1, M-m) / Z(N, M). Statistic: Rao-Scott corrected Pearson X^2, p-value
    from an F law (the module docstring).

    Where
    -----
    ``replica``: a replica that does not keep its total mass in the window (then
    ``skip``); no location otherwise.
    """

    id = "stationary-law"
    description = "single-site occupation law in the stationary window matches the exact ZRP law"
    needs: ClassVar = {"histogram": {}, "snapshots": {}}
    options: ClassVar = {
        "alpha": Option(1e-4, float, "fail when the p-value of the law test is below this"),
        "min_expected": Option(
            5.0, float, "merge bins until each expects at least this effective count"
        ),
        "max_bins": Option(40, int, "at most this many bins after merging"),
        "min_batches": Option(16, int, "batches wanted for the design effect"),
        "batch_factor": Option(
            50.0, float, "a batch spans at least this many statistical inefficiencies"
        ),
        "min_effective": Option(
            1000.0, float, "warn when the effective sample is below this (too small to judge)"
        ),
        "start_margin": Option(
            5.0, float, "count from this many statistical inefficiencies after the window start"
        ),
    }

    def _opt(self, ctx: CheckContext, key: str) -> float:
        return float(ctx.options[key])

    def run(self, ctx: CheckContext) -> CheckResult:
        meta = ctx.meta
        if meta is None:
            return self.result("skip", "no valid metadata: the declared model is unknown")
        why = _why_no_law(meta)
        if why:
            return self.result("skip", why)
        window = stationary_window(ctx)
        if not window.found or window.start is None:
            return self.result("skip", f"no stationary window: {window.reason}")
        hist, snaps = ctx.stats["histogram"], ctx.stats["snapshots"]
        start = self._start(ctx, window, int(np.asarray(snaps.total).shape[1]))
        totals = np.asarray(snaps.total)[:, start:]
        valid = np.asarray(snaps.valid)[:, start:]
        masses: dict[int, int] = {}
        for r in range(totals.shape[0]):
            seen = np.unique(totals[r][valid[r]])
            if len(seen) > 1:
                return self.result(
                    "skip",
                    f"replica {r} does not keep its total mass in the window "
                    f"({int(seen.min())}..{int(seen.max())}): see the conservation check",
                    where={"replica": r},
                )
            if len(seen) == 1:
                masses[r] = int(seen[0])
        if len(set(masses.values())) > _MAX_MASSES:
            return self.result(
                "skip", f"replicas hold {len(set(masses.values()))} different total masses"
            )
        batches, probs = self._batches(ctx, hist, masses, start, window.stride)
        if not batches:
            return self.result("skip", "no complete histogram block inside the window")
        fit = fit_law(
            np.array(batches),
            np.array(probs),
            min_expected=self._opt(ctx, "min_expected"),
            max_bins=int(self._opt(ctx, "max_bins")),
        )
        values = {"window_start": int(window.start), "start": start}
        return self._verdict(ctx, fit, hist.top, values, sorted(set(masses.values())))

    def _start(self, ctx: CheckContext, window: Any, n_snap: int) -> int:
        """First snapshot counted (see the module docstring)."""
        assert ctx.meta is not None
        initial = ctx.meta.run.initial
        if initial is not None and initial.kind == "steady-state":
            return 0
        margin = int(self._opt(ctx, "start_margin") * window.stride)
        return min(int(window.start) + margin, (int(window.start) + n_snap) // 2)

    def _batches(
        self, ctx: CheckContext, hist: Any, masses: dict[int, int], start: int, stride: int
    ) -> tuple[list[np.ndarray], list[np.ndarray]]:
        """Batch counts and their expected laws (bins 0..top-1 exact, top: >= top)."""
        assert ctx.meta is not None and isinstance(ctx.meta.model, ZRPModel)
        sites = ctx.meta.lattice.volume
        top = hist.top
        edges = np.asarray(hist.edges)
        inside = np.flatnonzero(edges[:-1] >= start)
        laws: dict[int, np.ndarray] = {}
        for mass in set(masses.values()):
            law = np.zeros(top + 1)
            exact = canonical_site_law(ctx.meta.model, sites, mass)
            law[: min(top, mass + 1)] = exact[:top]
            law[top] = exact[top:].sum()
            laws[mass] = law
        reps = sorted(masses)
        target = max(1, math.ceil(self._opt(ctx, "min_batches") / max(len(reps), 1)))
        span = int(edges[-1]) - (int(edges[inside[0]]) if len(inside) else 0)
        longest = max(1, int(span // max(self._opt(ctx, "batch_factor") * stride, 1.0)))
        per_replica = max(1, min(target, longest, len(inside)))
        batches, probs = [], []
        for r in reps:
            ok = inside[np.asarray(hist.valid)[r, inside]]
            for part in np.array_split(ok, per_replica):
                if len(part):
                    batches.append(np.asarray(hist.counts)[r, part].sum(axis=0))
                    probs.append(laws[masses[r]])
        return batches, probs

    def _verdict(
        self,
        ctx: CheckContext,
        fit: LawFit,
        top: int,
        where: dict[str, int],
        masses: list[int],
    ) -> CheckResult:
        start = where["start"]
        alpha = self._opt(ctx, "alpha")
        min_eff = self._opt(ctx, "min_effective")
        thresholds = {"alpha": alpha, "min_effective": min_eff}
        values: dict[str, Any] = {
            "p_value": None if math.isnan(fit.p_value) else fit.p_value,
            "chi2": None if math.isnan(fit.chi2) else fit.chi2,
            "dof": fit.dof,
            "design_effect": None if math.isnan(fit.design_effect) else fit.design_effect,
            "effective_n": None if math.isnan(fit.effective_n) else fit.effective_n,
            "n": fit.n,
            "batches": fit.batches,
            **where,
            "total_mass": masses[0] if len(masses) == 1 else masses,
        }
        if fit.dof >= 1:
            j, obs, exp = fit.largest_deviation()
            values["largest_deviation"] = {
                "bin": _label(fit.groups[j], top),
                "observed": obs,
                "expected": exp,
            }
        replicas = ctx.run.n_replicas
        if math.isnan(fit.p_value):
            need = int(self._opt(ctx, "min_batches"))
            return self.result(
                "warn",
                f"too little data to judge the law ({fit.batches} batches, {fit.dof + 1} bins "
                f"after merging, from snapshot {start}): a stationary window holding {need} "
                "batches of uncorrelated snapshots over the replicas together (a longer run, "
                "or more replicas) would allow it",
                values=values,
                thresholds=thresholds,
            )
        dev = values["largest_deviation"]
        detail = (
            f"chi2 {fit.chi2:.4g} on {fit.dof} dof, design effect {fit.design_effect:.3g}, "
            f"effective n {fit.effective_n:.4g}, p = {fit.p_value:.2g}; largest deviation at "
            f"{dev['bin']}: observed {dev['observed']:.4g}, expected {dev['expected']:.4g}"
        )
        if fit.p_value < alpha:
            status, head = "fail", "occupation law differs from the exact law of the declared rates"
        elif fit.effective_n < min_eff:
            # the effective sample grows with the window's length and with the replicas
            factor = min_eff / max(fit.effective_n, 1e-12)
            status, head = (
                "warn",
                (
                    f"effective sample {fit.effective_n:.4g} below {min_eff:g}, too small to "
                    "judge: "
                    f"a stationary window about {factor:.3g}x as long, or about "
                    f"{math.ceil(replicas * factor)} replicas instead of {replicas}, would judge it"
                ),
            )
        else:
            status, head = "pass", "occupation law agrees with the exact law"
        return self.result(
            status,
            f"{head} (from snapshot {start}: {detail})",
            values=values,
            thresholds=thresholds,
        )
