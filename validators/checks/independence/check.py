"""The ``independence`` check: are the replicas independent?

Statistics: ``fingerprints`` (64-bit hashes of every snapshot, plain and roll-invariant,
and full-content hashes at a subset of the indices; :mod:`.fingerprints`, brought by the
check itself), ``snapshots``, ``histogram`` and ``profiles``. The judgement is
:mod:`.repeats` (repeated snapshots) and :mod:`.correlations` (cross-replica correlation);
their docstrings give every definition.

Three findings fail a run, in this order:

* duplicate declared seeds (``run.seeds``): the metadata say two replicas share a seed;
* a repeated stretch: replica q at snapshot t equals replica r at snapshot t + k (k = 0:
  a reused seed; k != 0: a copy shifted in time), possibly rolled along the lattice
  (each axis in 2D). H0: the replicas are independent. Statistic: the number n of
  verified matches of different configurations, at least a decorrelation time apart,
  along the relation. p-value: H * P(Poisson(lambda) >= n), lambda the bound on the
  number of such matches expected by chance (the single-site collision law of the
  snapshots and the canonical correction), H the number of relations that could have
  been tried. fail when p < ``alpha``. Matches of a declared deterministic start
  (``run.initial.kind`` ``uniform`` or ``condensed``) are not counted while the replicas
  are still in, or one decorrelation time out of, their shared start;
* cross-replica correlation beyond chance: H0 as above. Statistic: per pair of replicas
  and observable (largest mass, sum of squares, occupied sites, coarse profile), the mean
  of d_r.d_q + S/(R-1) over snapshots (d_r: normal scores of the replica's own increments,
  standardised per replica, less their mean over replicas; zero mean under H0 even for a
  relaxing run, and for replicas whose increments are tied at zero unequally often).
  p-value: one-sided tail (Student's t, ESS - 1 degrees of freedom) of its
  autocorrelation-corrected score, Bonferroni over pairs and observables, counted only
  when the effective sample size makes the tail trustworthy. fail when p < ``alpha``.

``where`` gives the first replica that repeats an earlier one (or the later replica of
the most correlated pair), the snapshot of the first verified repeat; the values name the
replica it repeats, the shift and the roll. ``skip``: a run with one replica, and a run
whose snapshots change so little (a frozen or tiny system) that even a whole copied
replica would not stand out from chance in the repeated snapshots: a copy shifted in time
would then go unseen (the message still gives the correlation verdict, and a significant
correlation still fails). A relation that would fail but has no verified snapshot pair
(the full hashes cover a subset of the snapshots on long runs) gives a ``warn``.
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from ...engine.registry import Check, CheckContext, Option
from ...engine.result import CheckResult
from .._common import fault_note
from .correlations import correlation_tests
from .fingerprints import FingerprintStatistic, FingerprintStats
from .repeats import (
    Relation,
    collision_bounds,
    copy_power,
    decorrelation_gap,
    duplicate_seeds,
    find_relations,
    judge_relation,
    snapshot_keys,
    verify,
)

__all__ = ["IndependenceCheck"]

_DETERMINISTIC = ("uniform", "condensed")


class IndependenceCheck(Check):
    """Replicas are independent: no shared seeds, repeated stretches or correlations.

    Null hypothesis
    ---------------
    The replicas are independent realisations: no two declare the same seed, none repeats
    a stretch of another (shifted in time or rolled along the lattice) beyond the matches
    chance allows, and no pair is correlated beyond chance. Statistics and p-values: the
    module docstring.

    Where
    -----
    ``replica``: the first replica that repeats an earlier one (or the later replica of the
    most correlated pair); ``snapshot``: its first verified repeat, when there is one.
    """

    id = "independence"
    description = "replicas are independent (no shared seeds, repeated snapshots or correlation)"
    needs: ClassVar = {"fingerprints": {}, "snapshots": {}, "histogram": {}, "profiles": {}}
    provides: ClassVar = (FingerprintStatistic,)
    options: ClassVar = {
        "alpha": Option(
            1e-4, float, "false-alarm rate of the repeated-snapshot and correlation tests"
        ),
    }

    def run(self, ctx: CheckContext) -> CheckResult:
        alpha = float(ctx.options["alpha"])
        thresholds = {"alpha": alpha}
        meta = ctx.meta
        seeds = meta.run.seeds if meta is not None else None
        dup = duplicate_seeds(seeds)
        if dup is not None:
            later, earlier, seed = dup
            return self.result(
                "fail",
                f"replicas {earlier} and {later} declare the same seed {seed} (run.seeds)",
                values={"replica": later, "repeats_replica": earlier, "seed": seed},
                thresholds=thresholds,
                where={"replica": later},
            )
        n_rep = ctx.run.n_replicas
        if n_rep < 2:
            return self.result("skip", "one replica: nothing to compare", thresholds=thresholds)
        fp: FingerprintStats | None = ctx.stats.get("fingerprints")
        snap, hist = ctx.stats.get("snapshots"), ctx.stats.get("histogram")
        if fp is None or snap is None or hist is None:
            return self.result("skip", "the statistics it needs are not available")
        note = fault_note(ctx)
        repeats = _repeats(ctx, fp, snap, hist, alpha)
        values: dict[str, Any] = repeats["values"]
        failing: list[Relation] = repeats["failing"]
        if failing:
            rel = min(failing, key=lambda x: (x.later, min(x.verified)))
            v = rel.values()
            values.update(v)
            return self.result(
                "fail",
                _repeat_message(v) + note,
                values=values,
                thresholds=thresholds,
                where={"replica": rel.later, "snapshot": v["snapshot"]},
            )
        stationary = meta is None or meta.run.regime == "stationary"
        tests, tried, copy_p = correlation_tests(snap, ctx.stats.get("profiles"), stationary)
        values["correlation_tests"] = tried
        values["p_correlation_of_a_copy"] = min(1.0, max(tried, 1) * copy_p)
        copy_shows = values["p_correlation_of_a_copy"] < alpha
        live = [(name, t) for name, t in tests if t.reliable]
        if live:
            name, worst = min(live, key=lambda x: x[1].p)
            p = min(1.0, tried * worst.p)
            values.update(
                {
                    "most_correlated": [worst.first, worst.second],
                    "observable": name,
                    "correlation": worst.correlation,
                    "z": worst.z,
                    "p_correlation": p,
                }
            )
            if p < alpha:
                return self.result(
                    "fail",
                    f"replicas {worst.first} and {worst.second} are correlated beyond chance: "
                    f"{name} correlation {worst.correlation:.3g} (z = {worst.z:.3g}, p = "
                    f"{p:.2g})" + note,
                    values=values,
                    thresholds=thresholds,
                    where={"replica": worst.second},
                )
        suspect = repeats["unverified"]
        if suspect is not None:
            v = suspect.values()
            return self.result(
                "warn",
                f"fingerprints suggest that {_repeat_message(v, verified=False)}, but no "
                "snapshot pair of the stretch carries the full hash that would confirm it" + note,
                values=values,
                thresholds=thresholds,
                where={"replica": suspect.later, "snapshot": v["snapshot"]},
            )
        corr_text = (
            f"cross-replica correlations within chance (strongest: {values['observable']} of "
            f"replicas {values['most_correlated'][0]} and {values['most_correlated'][1]}, "
            f"p = {values['p_correlation']:.2g})"
            if live
            else "correlations not judged (too few effective samples"
            + (")" if stationary or n_rep > 2 else ", or two replicas of a transient run)")
        )
        if not values["copies_detectable"]:
            shows = "would" if copy_shows else "would not"
            return self.result(
                "skip",
                "cannot decide: the snapshots change too little for a repeated stretch to "
                f"stand out from chance (a whole copy would reach only log10 p = "
                f"{values['log10_p_of_a_copy']:.3g}), so a copy shifted in time would go "
                f"unseen; a copy at the same times {shows} show in the correlations (p = "
                f"{values['p_correlation_of_a_copy']:.2g}): {corr_text}; more snapshots "
                "further apart, or a larger lattice, would decide" + note,
                values=values,
                thresholds=thresholds,
            )
        text = (
            f"no repeated snapshots beyond chance ({values['candidates']} candidate "
            f"relations, {values['verified_relations']} verified); {corr_text}"
        )
        return self.result("pass", text + note, values=values, thresholds=thresholds)


def _excluded_before(ctx: CheckContext, keys: np.ndarray, valid: np.ndarray, gap: int) -> int:
    """At shift 0, snapshots before this index belong to a declared deterministic start."""
    meta = ctx.meta
    init = meta.run.initial if meta is not None else None
    if init is None or init.kind not in _DETERMINISTIC:
        return 0
    n = keys.shape[1]
    left = []
    for r in range(keys.shape[0]):
        moved = np.flatnonzero(valid[r] & (keys[r] != keys[r, 0]))
        left.append(int(moved[0]) if len(moved) else n)
    return min(n, max(left) + gap)


def _repeats(ctx: CheckContext, fp: FingerprintStats, snap: Any, hist: Any, alpha: float) -> dict:
    n_rep, n_snap = fp.sparse.shape
    volume = int(np.prod(fp.sites))
    # Long runs: each step below holds a few (replica, snapshot) arrays of its own, so
    # the steps run one after the other and keep only what later steps read (the gap,
    # the relations): the keys are made again for the power rather than kept.
    gap = decorrelation_gap(snap)
    valid = fp.valid & snap.valid
    pairs = n_rep * (n_rep - 1) // 2
    found: list[Relation] = []
    unverified: list[Relation] = []
    recurring = 0
    excluded = 0
    candidates = {}
    for kind in ("exact", "roll"):
        keys = snapshot_keys(fp, snap, kind)
        if kind == "exact":
            excluded = _excluded_before(ctx, keys, valid, gap)
        candidates[kind], rec = find_relations(fp, keys, valid, kind)
        recurring += rec
        del keys
    log_q = collision_bounds(hist, snap, volume)
    power = 0.0
    for kind, rels in candidates.items():
        hypotheses = 2.0 * pairs * (2 * n_snap - 1) * (volume if kind == "roll" else 1)
        if kind == "exact":
            keys = snapshot_keys(fp, snap, kind)
            power = copy_power(keys, valid, log_q, fp.sampled, gap, hypotheses, excluded)
            del keys
        for rel in rels:
            verify(rel, fp)
            judge_relation(rel, log_q, fp.sampled, valid, gap, hypotheses, excluded)
            found.append(rel)
            if not rel.verified:
                trial = Relation(rel.kind, rel.later, rel.earlier, rel.shift, rel.roll)
                trial.matches = rel.matches
                trial.verified = [t for t, _ in rel.matches]
                everywhere = np.ones_like(fp.sampled)
                judge_relation(trial, log_q, everywhere, valid, gap, hypotheses, excluded)
                if trial.log10_p < math.log10(alpha):
                    unverified.append(rel)
    log_alpha = math.log10(alpha)
    failing = [r for r in found if r.verified and r.log10_p < log_alpha]
    best = min(found, key=lambda r: r.log10_p, default=None)
    values: dict[str, Any] = {
        "candidates": len(found),
        "verified_relations": sum(1 for r in found if r.verified),
        "recurring_configurations": recurring,
        "gap": gap,
        "hashed_fraction": float(fp.sampled.mean()) if len(fp.sampled) else 0.0,
        "excluded_start": excluded,
        "log10_p_repeat": best.log10_p if best is not None else 0.0,
        "log10_p_of_a_copy": power,
        "copies_detectable": power < math.log10(alpha),
    }
    suspect = min(unverified, key=lambda x: (x.later, min(t for t, _ in x.matches)), default=None)
    return {"values": values, "failing": failing, "unverified": suspect}


def _repeat_message(v: dict[str, Any], verified: bool = True) -> str:
    q, r = v["replica"], v["repeats_replica"]
    t, u = v["snapshot"], v["repeats_snapshot"]
    what = f"replica {q} at snapshot {t} equals replica {r} at snapshot {u}"
    if any(v["roll"]):
        what += f" rolled by {v['roll']} sites"
    if not verified:
        return what
    detail = (
        f"{v['matched_snapshots']} matched snapshots ({v['matched_configurations']} "
        f"configurations, {v['verified_snapshots']} verified); {v['witnesses']} independent "
        f"matches where chance allows {v['expected_by_chance']:.2g} (log10 p = "
        f"{v['log10_p']:.3g})"
    )
    kind = "a reused seed?" if v["shift"] == 0 and not any(v["roll"]) else "a copied replica?"
    return f"{what} ({kind}): {detail}"
