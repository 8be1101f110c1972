"""Repeated snapshots between replicas, judged against chance: pure functions on the
``fingerprints``, ``snapshots`` and ``histogram`` statistics (the ``independence`` check).

Repeated snapshots
    Every (replica, snapshot) gets two keys: the ``fingerprints`` statistic's sparse hash
    (or its anchored, roll-invariant hash) mixed with the snapshot's total, extrema, sum of
    squares and occupied sites (the ``snapshots`` statistic: whole-snapshot, roll-invariant
    information). Runs of equal consecutive keys within a replica are collapsed into
    segments; segments of different replicas sharing a key are candidate matches. A
    *relation* is (later replica q, earlier replica r, shift k, roll): q at snapshot t
    equals r at snapshot t + k, rolled along the lattice. A match is *verified* where both
    snapshots carry a full-content hash (a pseudo-random subset of the indices, the same
    in every replica) and these agree (two different snapshots collide with probability
    about 2^-64).

Chance matches
    Independent replicas can repeat a snapshot by chance when the snapshot law is
    concentrated (small lattices at low density). One snapshot pair coincides with
    probability sum_x P(x)^2, bounded here by the product of single-site collision
    probabilities, (sum_m p(m)^2)^N, times max(1, 2 pi N var): the product measure
    conditioned on its sum (the canonical law) is more concentrated by at most
    1 / P(sum = M)^2, which the local central limit theorem puts at 2 pi N var (from
    memory). p(m) is the occupation law of the snapshot's histogram block, pooled over
    replicas; the geometric mean of the two snapshots' bounds bounds their coincidence
    (Cauchy-Schwarz). Along one relation, verified matches of different configurations at
    least ``gap`` snapshots apart (gap: the statistical inefficiency of the snapshot
    observables, so that such events are nearly independent) are counted: under
    independence their number is at most Poisson with mean lambda = sum of the bounds
    over the positions that could have been verified, thinned by the gap (Le Cam). The
    p-value of a relation is H * P(Poisson(lambda) >= n), H the number of relations that
    could have been tried (replica pairs x shifts x rolls x two kinds of key):
    Bonferroni. A declared deterministic start (``uniform``, ``condensed``) makes
    replicas identical at first by design: at shift 0, snapshots before every replica has
    left its start configuration, and one gap after, are not counted.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ...analysis.diagnostics.autocorr import chains_autocorr_time
from .fingerprints import FingerprintStats, mix64

__all__ = [
    "Relation",
    "collision_bounds",
    "copy_power",
    "decorrelation_gap",
    "duplicate_seeds",
    "find_relations",
    "judge_relation",
    "snapshot_keys",
    "verify",
    "window_keys",
]

#: Candidate pairs enumerated per group of equal keys; larger groups are configurations
#: that recur so often (a frozen or tiny system) that a match among them says nothing.
MAX_GROUP_PAIRS = 256
#: Relations examined in detail (the ones with the most matched configurations).
MAX_RELATIONS = 64


def duplicate_seeds(seeds: list[int] | None) -> tuple[int, int, int] | None:
    """The first replica whose declared seed repeats an earlier one: (replica, earlier
    replica, seed), or None.

    >>> duplicate_seeds([5, 7, 9, 7, 5])
    (3, 1, 7)
    """
    if not seeds:
        return None
    seen: dict[int, int] = {}
    for i, s in enumerate(seeds):
        if s in seen:
            return i, seen[s], int(s)
        seen[s] = i
    return None


def snapshot_keys(fp: FingerprintStats, snap: Any, kind: str) -> np.ndarray:
    """64-bit keys ``(replica, snapshot)``: a fingerprint mixed with whole-snapshot moments.

    ``kind`` is ``"exact"`` (the sparse hash) or ``"roll"`` (the anchored hash).
    """
    key = (fp.sparse if kind == "exact" else fp.anchored).copy()
    if snap is None:
        return key
    for r in range(key.shape[0]):  # a replica at a time: temporaries of one row
        row = key[r]
        for arr in (snap.total, snap.maximum, snap.minimum, snap.occupied):
            row ^= np.asarray(arr[r], dtype=np.int64).view(np.uint64)
            mix64(row, inplace=True)
        row ^= np.ascontiguousarray(snap.sum_sq[r], dtype=np.float64).view(np.uint64)
        mix64(row, inplace=True)
    return key


def window_keys(keys: np.ndarray, valid: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray]:
    """Keys of ``width`` consecutive snapshots (a window starting at each snapshot), valid
    where every snapshot of the window is: far more specific than one snapshot's key on a
    small lattice whose configurations recur."""
    n = keys.shape[1]
    out = np.zeros_like(keys)
    ok = np.zeros_like(valid)
    if n < width:
        return out, ok
    span = n - width + 1
    for r in range(keys.shape[0]):  # a replica at a time: temporaries of one row
        acc, good = out[r, :span], ok[r, :span]  # views: mixed in place
        good[...] = True
        for d in range(width):
            acc ^= keys[r, d : d + span]
            mix64(acc, inplace=True)
            good &= valid[r, d : d + span]
    return out, ok


@dataclass
class Relation:
    """Replica ``later`` at snapshot t equals replica ``earlier`` at t + ``shift``, rolled
    by ``roll`` (sites per axis; zeros for an exact repeat). ``matches`` lists (t, key)
    of the candidate matches, ``verified`` the t whose full hashes agree."""

    kind: str
    later: int
    earlier: int
    shift: int
    roll: tuple[int, ...]
    matches: list[tuple[int, int]] = field(default_factory=list)
    verified: list[int] = field(default_factory=list)
    witnesses: int = 0
    expected: float = 0.0
    log10_p: float = 0.0

    @property
    def configurations(self) -> int:
        return len({k for _, k in self.matches})

    def values(self) -> dict[str, Any]:
        first = min(self.verified) if self.verified else min(t for t, _ in self.matches)
        return {
            "kind": self.kind,
            "replica": self.later,
            "repeats_replica": self.earlier,
            "snapshot": first,
            "repeats_snapshot": first + self.shift,
            "shift": self.shift,
            "roll": list(self.roll),
            "matched_snapshots": len(self.matches),
            "matched_configurations": self.configurations,
            "verified_snapshots": len(self.verified),
            "witnesses": self.witnesses,
            "expected_by_chance": self.expected,
            "log10_p": self.log10_p,
        }


#: Entries compared per step when marking the repeated keys (bounds the temporaries).
_BLOCK = 1 << 20


def _repeated(keys: np.ndarray, valid: np.ndarray) -> np.ndarray:
    """Flat (replica-major) indices, ascending, of the valid entries whose key another
    valid entry shares. Only these can belong to a segment another segment shares a key
    with, and on a long run they are few: the search holds one sorted copy of the keys and
    a mask, not index arrays over every (replica, snapshot)."""
    flat, ok = keys.reshape(-1), valid.reshape(-1)
    ordered = flat[ok]
    ordered.sort()
    dup = ordered[1:][ordered[1:] == ordered[:-1]]
    del ordered
    if not len(dup):
        return np.zeros(0, np.int64)
    dup = np.unique(dup)
    mask = np.zeros(flat.size, bool)
    for lo in range(0, flat.size, _BLOCK):
        part = flat[lo : lo + _BLOCK]
        pos = np.minimum(np.searchsorted(dup, part), len(dup) - 1)
        mask[lo : lo + _BLOCK] = dup[pos] == part
    mask &= ok
    return np.flatnonzero(mask)


def _segments(keys: np.ndarray, valid: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Flat (replica-major) index of the first snapshot, length and key of the runs of
    equal consecutive valid keys, in replica then time order (one array each), leaving out
    the runs no other run can share a key with. A run's entries all carry its key, so
    either every entry of a run is repeated (:func:`_repeated`) or the run is a single
    entry with a key of its own."""
    idx = _repeated(keys, valid)
    flat = keys.reshape(-1)
    width = keys.shape[1]
    cont = np.zeros(len(idx), bool)  # the entry continues the run of the one before it
    cont[1:] = (idx[1:] == idx[:-1] + 1) & (idx[1:] % width != 0)
    cont[1:] &= flat[idx[1:]] == flat[idx[:-1]]
    first = idx[~cont]
    length = np.diff(np.append(np.flatnonzero(~cont), len(idx)))
    return first, length, flat[first]


def _shared(key: np.ndarray) -> np.ndarray:
    """Indices of the entries of ``key`` whose value another entry shares, ordered by key
    and, within a key, by index (the order of a stable sort). Only these can match."""
    order = np.argsort(key, kind="stable")
    ordered = key[order]
    same = ordered[1:] == ordered[:-1]
    del ordered
    keep = np.zeros(len(order), bool)
    keep[1:] |= same
    keep[:-1] |= same
    return order[keep]


def _roll_of(fp: FingerprintStats, r: int, t: int, q: int, u: int) -> tuple[int, ...]:
    """The roll taking replica q at u onto replica r at t (from their anchors)."""
    a = np.unravel_index(int(fp.anchor[r, t]), fp.sites)
    b = np.unravel_index(int(fp.anchor[q, u]), fp.sites)
    return tuple(int((x - y) % n) for x, y, n in zip(a, b, fp.sites, strict=True))


def find_relations(
    fp: FingerprintStats, keys: np.ndarray, valid: np.ndarray, kind: str, width: int = 8
) -> tuple[list[Relation], int]:
    """Candidate relations of one kind of key, most matched configurations first, and the
    number of recurring configurations left out (groups above :data:`MAX_GROUP_PAIRS`).

    Matches are proposed by single snapshots and by windows of ``width`` consecutive
    snapshots (whose keys stay unique on small lattices where single configurations
    recur); both feed the same relations."""
    relations: dict[tuple[Any, ...], Relation] = {}
    recurring = _collect(fp, keys, keys, valid, kind, 1, relations)
    wkeys, wvalid = window_keys(keys, valid, width)
    _collect(fp, wkeys, keys, wvalid, kind, width, relations)
    for rel in relations.values():
        rel.matches = sorted(set(rel.matches))
    out = sorted(relations.values(), key=lambda x: (-x.configurations, x.later, x.earlier))
    return out[:MAX_RELATIONS], recurring


def _collect(
    fp: FingerprintStats,
    keys: np.ndarray,
    snapshot_keys: np.ndarray,
    valid: np.ndarray,
    kind: str,
    width: int,
    relations: dict[tuple[Any, ...], Relation],
) -> int:
    """Add the matches proposed by equal ``keys`` (of windows of ``width`` snapshots) to
    ``relations``; return the number of recurring groups left out."""
    flat, length, key = _segments(keys, valid)
    if not len(key):
        return 0
    sel = _shared(key)
    flat, length, key = flat[sel], length[sel], key[sel]
    replica, start = np.divmod(flat, keys.shape[1])
    cuts = np.flatnonzero(np.diff(key)) + 1
    first = np.concatenate([[0], cuts])
    last = np.concatenate([cuts, [len(key)]])
    recurring = 0
    for lo, hi in zip(first[last - first >= 2], last[last - first >= 2], strict=True):
        g = range(lo, hi)  # segments sharing one key: only these can match
        members = [(int(replica[i]), int(start[i]), int(length[i]), int(key[i])) for i in g]
        per = np.bincount([m[0] for m in members])
        if np.count_nonzero(per) < 2:
            continue
        pairs = (int(per.sum()) ** 2 - int((per**2).sum())) // 2
        if pairs > MAX_GROUP_PAIRS:
            recurring += 1
            continue
        for a in members:  # a: earlier replica r
            for b in members:  # b: later replica q
                if a[0] >= b[0]:
                    continue
                r, ta, la, _ = a
                q, tb, lb, _ = b
                roll = _roll_of(fp, r, ta, q, tb) if kind == "roll" else (0,) * len(fp.sites)
                if kind == "roll" and not any(roll):
                    continue  # an exact repeat: the exact key reports it
                rel_key = (q, r, ta - tb, roll)
                rel = relations.get(rel_key)
                if rel is None:
                    rel = relations[rel_key] = Relation(kind, q, r, ta - tb, roll)
                for d in range(min(la, lb) + width - 1):
                    rel.matches.append((tb + d, int(snapshot_keys[q, tb + d])))
    return recurring


def verify(rel: Relation, fp: FingerprintStats) -> None:
    """Fill ``rel.verified``: matches whose two snapshots both carry equal full hashes."""
    full = fp.full if rel.kind == "exact" else fp.full_anchored
    for t, _ in rel.matches:
        u = t + rel.shift
        at, au = fp.slot[t], fp.slot[u]
        if at >= 0 and au >= 0 and full[rel.later, at] == full[rel.earlier, au]:
            rel.verified.append(t)


def collision_bounds(hist: Any, snap: Any, volume: int) -> np.ndarray:
    """log of the chance-coincidence bound of every (replica, snapshot) (module docstring).

    ``hist`` is the ``histogram`` statistic, ``snap`` the ``snapshots`` statistic.
    """
    counts = hist.counts.sum(axis=0).astype(np.float64)  # (block, mass) pooled
    tot = counts.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        p = np.where(tot > 0, counts / tot, 0.0)
    c = np.clip((p**2).sum(axis=1), 1e-300, 1.0)
    n_snap = snap.total.shape[1]
    block = np.searchsorted(hist.edges, np.arange(n_snap), side="right") - 1
    block = np.clip(block, 0, len(c) - 1)
    log_site = volume * np.log(c[block])  # (snapshot,)
    # in place: one (replica, snapshot) array at a time
    var = snap.total / volume
    np.square(var, out=var)
    for r in range(var.shape[0]):  # a replica at a time: no second full-size temporary
        np.subtract(snap.sum_sq[r] / volume, var[r], out=var[r])
    np.clip(var, 0.0, None, out=var)
    var *= 2.0 * math.pi * volume
    np.maximum(var, 1.0, out=var)
    canon = np.log(var, out=var)
    canon += log_site[None, :]
    return np.minimum(canon, 0.0, out=canon)


def _centred(arr: np.ndarray) -> Iterator[np.ndarray]:
    """Each replica's series as float64, less the replica mean at each snapshot when there
    are three replicas or more, one at a time: long runs hold one float64 chain and its
    transforms, not a copy of the (replica, snapshot) array and its spectra."""
    mean = np.mean(arr, axis=0, dtype=np.float64) if arr.shape[0] >= 3 else None
    for row in arr:
        a = np.asarray(row, dtype=np.float64)
        yield a - mean if mean is not None else a


def decorrelation_gap(snap: Any) -> int:
    """Snapshots between nearly independent coincidences: the largest statistical
    inefficiency of the largest mass, the sum of squares and the occupied sites (Sokal's
    window, chains pooled; with three replicas or more, of their deviations from the
    replica mean, so that a relaxation shared by every replica does not pass for memory),
    at least 1 and at most a quarter of the run. A constant chain has no finite
    inefficiency and adds nothing."""
    n = snap.total.shape[1]
    gaps = [1.0]
    if n >= 8:
        for arr in (snap.maximum, snap.sum_sq, snap.occupied):
            g = chains_autocorr_time(_centred(arr)).g
            if math.isfinite(g):
                gaps.append(g)
    return int(min(max(1, math.ceil(max(gaps))), max(1, n // 4)))


def judge_relation(
    rel: Relation,
    log_q: np.ndarray,
    sampled: np.ndarray,
    valid: np.ndarray,
    gap: int,
    hypotheses: float,
    excluded_before: int = 0,
) -> None:
    """Fill ``witnesses``, ``expected`` and ``log10_p`` of a verified relation.

    ``excluded_before``: at shift 0, snapshots before this index do not count (a declared
    deterministic start).
    """
    n = log_q.shape[1]
    lo = max(0, -rel.shift)
    hi = min(n, n - rel.shift)
    if rel.shift == 0:
        lo = max(lo, excluded_before)
    t = np.arange(lo, hi)
    u = t + rel.shift
    ok = sampled[t] & sampled[u] & valid[rel.later, t] & valid[rel.earlier, u]
    t, u = t[ok], u[ok]
    keys = dict(rel.matches)
    witnesses: list[int] = []
    last_key = None
    for s in sorted(rel.verified):
        if s < lo or s >= hi:
            continue
        if witnesses and (s < witnesses[-1] + gap or keys.get(s) == last_key):
            continue
        witnesses.append(s)
        last_key = keys.get(s)
    rel.witnesses = len(witnesses)
    if not len(t) or not witnesses:
        rel.expected, rel.log10_p = 0.0, 0.0
        return
    lq = 0.5 * (log_q[rel.later, t] + log_q[rel.earlier, u])
    span = int(t[-1] - t[0]) + 1
    thinned = min(len(t), max(1, span // gap))
    mean_q = float(np.exp(lq).mean())
    lam = max(thinned * mean_q, 1e-300)
    rel.expected = lam
    from ...analysis.tails import poisson_logsf  # scipy.special, imported on first use

    log_sf = poisson_logsf(rel.witnesses - 1, lam)
    if not math.isfinite(log_sf):  # far beyond the float range: the leading term
        log_sf = rel.witnesses * math.log(lam) - math.lgamma(rel.witnesses + 1)
    rel.log10_p = min(0.0, (math.log(hypotheses) + log_sf) / math.log(10.0))


def copy_power(
    keys: np.ndarray,
    valid: np.ndarray,
    log_q: np.ndarray,
    sampled: np.ndarray,
    gap: int,
    hypotheses: float,
    excluded_before: int = 0,
) -> float:
    """log10 p-value a replica repeated whole by another (a reused seed) would get: the
    median over replicas. Near 0 when the replicas barely change (a frozen or tiny
    system): such copies cannot be told from chance, and the data cannot decide."""
    out = []
    for r in range(keys.shape[0]):
        rel = Relation("exact", r, r, 0, ())
        seen = np.flatnonzero(valid[r] & sampled)  # judge_relation reads only these
        rel.matches = list(zip(seen.tolist(), keys[r, seen].tolist(), strict=True))
        rel.verified = seen.tolist()
        judge_relation(rel, log_q, sampled, valid, gap, hypotheses, excluded_before)
        out.append(rel.log10_p)
    return float(np.median(out)) if out else 0.0
