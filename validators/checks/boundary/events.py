"""The exact part of the ``boundary`` check: every logged move joins declared neighbours.

Two sites are neighbours when their coordinates differ by one along exactly one axis;
only a periodic axis joins its last site to site 0. A negative index stands for the
reservoir of an open axis; it may only meet a site at the first or last position of an
open axis. The log is read in steps of about a million events (bounded memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import zarr

from massarc.schema import Lattice

__all__ = ["EVENT_ARRAYS", "BadEvent", "EventAudit", "audit_events"]

#: Arrays of the event-log subgroup that the audit reads (format v1, section 5).
EVENT_ARRAYS = ("time", "replica", "source", "target")
#: Events read per step.
_EVENT_STEP = 1 << 20


@dataclass(frozen=True)
class BadEvent:
    """The first logged move that does not join declared neighbours."""

    index: int
    replica: int
    time: float
    source: int
    target: int
    reason: str


@dataclass(frozen=True)
class EventAudit:
    """``problem`` is set when the log itself is malformed (missing arrays, lengths)."""

    events: int
    bad: BadEvent | None
    n_bad: int
    problem: str | None = None


def _edge_of_open_axis(coords: list[np.ndarray], lattice: Lattice) -> np.ndarray:
    ok = np.zeros(len(coords[0]), bool)
    for c, length, kind in zip(coords, lattice.sites, lattice.boundary, strict=True):
        if kind == "open":
            ok |= (c == 0) | (c == length - 1)
    return ok


def _classify(
    source: np.ndarray, target: np.ndarray, replica: np.ndarray, lattice: Lattice, n_rep: int
) -> np.ndarray:
    """Reason code per event: 0 fine, 1 not a site, 2 not neighbours, 3 bad replica,
    4 reservoir move away from an open edge."""
    shape = tuple(lattice.sites)
    volume = lattice.volume
    code = np.zeros(len(source), np.int8)
    src_res, tgt_res = source < 0, target < 0
    reservoir = src_res | tgt_res
    out_of_range = (source >= volume) | (target >= volume)
    if not any(b == "open" for b in lattice.boundary):
        out_of_range |= reservoir
        reservoir = np.zeros_like(reservoir)
    out_of_range |= src_res & tgt_res
    code[out_of_range] = 1
    inner = ~out_of_range & ~reservoir
    cs = np.unravel_index(np.where(inner, source, 0), shape)
    ct = np.unravel_index(np.where(inner, target, 0), shape)
    steps = np.zeros(len(source), np.int64)
    for a_s, a_t, length, kind in zip(cs, ct, shape, lattice.boundary, strict=True):
        delta = np.abs(a_s - a_t)
        if kind == "periodic":
            delta = np.minimum(delta, length - delta)
        steps += np.where(delta <= 1, delta, 2)
    code[inner & (steps != 1)] = 2
    site = np.where(src_res, target, source)
    res = reservoir & ~out_of_range
    if res.any():
        coords = list(np.unravel_index(np.where(res, site, 0), shape))
        code[res & ~_edge_of_open_axis(coords, lattice)] = 4
    code[(code == 0) & ((replica < 0) | (replica >= n_rep))] = 3
    return code


_REASONS = {
    1: "an index is not a site of the lattice",
    2: "the sites are not neighbours under the declared boundaries",
    3: "the replica is not in the run",
    4: "a reservoir move meets a site that is not at an open edge",
}


def audit_events(group: zarr.Group, lattice: Lattice, n_replicas: int) -> EventAudit:
    """Check every move of an event-log group, reading it in steps of about 10^6 events."""
    arrays = {}
    for key in EVENT_ARRAYS:
        arr = group.get(key)
        if not isinstance(arr, zarr.Array) or arr.ndim != 1:
            return EventAudit(0, None, 0, f"events/{key}: expected a 1-D array; got none")
        arrays[key] = arr
    lengths = {k: int(a.shape[0]) for k, a in arrays.items()}
    if len(set(lengths.values())) != 1:
        got = ", ".join(f"{k}={n}" for k, n in lengths.items())
        return EventAudit(0, None, 0, f"events: expected arrays of equal length; got {got}")
    total = lengths["time"]
    first: BadEvent | None = None
    n_bad = 0
    for lo in range(0, total, _EVENT_STEP):
        hi = min(lo + _EVENT_STEP, total)
        part = {k: np.asarray(a[lo:hi]) for k, a in arrays.items()}
        code = _classify(
            part["source"].astype(np.int64),
            part["target"].astype(np.int64),
            part["replica"].astype(np.int64),
            lattice,
            n_replicas,
        )
        bad = np.flatnonzero(code)
        n_bad += len(bad)
        if len(bad) and first is None:
            i = int(bad[0])
            first = BadEvent(
                index=lo + i,
                replica=int(part["replica"][i]),
                time=float(part["time"][i]),
                source=int(part["source"][i]),
                target=int(part["target"][i]),
                reason=_REASONS[int(code[i])],
            )
    return EventAudit(total, first, n_bad)
