"""The ``schema`` check: the metadata are valid and agree with the arrays.

Checked: the header validates (a lenient open lists its problems); ``mass`` has the
dimension names of format v1, the lattice shape of ``lattice.sites`` and an integer dtype;
``time`` is 1-D with one entry per snapshot; the declared total mass (or density) is the
mass of the first snapshot of every replica (that it stays so is ``conservation``'s job);
``run.seeds`` has one seed per replica (at least one per committed replica while the run
is incomplete: it declares the replicas still to come); the commit marker ``state`` does
not run ahead of the arrays, and a complete run commits at least one snapshot. An archive
whose writer did not finish (``state.complete`` false) is a warning that names the
committed extent.
"""

from __future__ import annotations

from typing import Any, ClassVar

import numpy as np

from massarc.schema import WriteState, mass_dimensions
from massarc.schema.spec import MASS, TIME

from ..engine.registry import Check, CheckContext
from ..engine.result import CheckResult

__all__ = ["SchemaCheck"]


def _array_problems(ctx: CheckContext) -> list[tuple[str, dict[str, Any]]]:
    """(message, where) for every disagreement between the metadata and the arrays."""
    run, meta = ctx.run, ctx.meta
    assert meta is not None
    out: list[tuple[str, dict[str, Any]]] = []
    mass = run.array(MASS)
    if mass is None:
        return [(run.unreadable.get(MASS, f"no '{MASS}' array in the run"), {})]
    sites = tuple(meta.lattice.sites)
    dims = tuple(mass.metadata.dimension_names or ())
    want = mass_dimensions(len(sites))
    if dims != want:
        out.append((f"mass dimension names: expected {list(want)}; got {list(dims)}", {}))
    if tuple(mass.shape[2:]) != sites:
        out.append((f"mass lattice shape: expected {list(sites)}; got {list(mass.shape[2:])}", {}))
    if np.dtype(mass.dtype).kind not in "ui":
        out.append((f"mass dtype: expected an integer dtype; got {mass.dtype}", {}))
    out.extend((text, {}) for text in _marker_problems(run.state, tuple(mass.shape)))
    time = run.array(TIME)
    if time is None:
        out.append((run.unreadable.get(TIME, f"no '{TIME}' array in the run"), {}))
    elif time.ndim != 1 or time.shape[0] != mass.shape[1]:
        out.append(
            (
                f"time shape: expected [{mass.shape[1]}] (one time per snapshot); "
                f"got {list(time.shape)}",
                {},
            )
        )
    seeds = meta.run.seeds
    if seeds is not None and run.complete and len(seeds) != run.n_replicas:
        out.append(
            (f"run.seeds: expected {run.n_replicas} seeds (one per replica); got {len(seeds)}", {})
        )
    elif seeds is not None and len(seeds) < run.n_replicas:  # a partial run declares them all
        out.append(
            (
                f"run.seeds: expected at least {run.n_replicas} seeds (one per committed "
                f"replica); got {len(seeds)}",
                {},
            )
        )
    out.extend(_total_problems(ctx))
    return out


def _marker_problems(state: WriteState, shape: tuple[int, ...]) -> list[str]:
    """Disagreements between the commit marker and the ``mass`` array: the marker may lag
    the arrays (a writer grows them first), never run ahead of them; a complete run
    commits at least one snapshot of one replica."""
    out = []
    if state.snapshots > shape[1]:
        out.append(
            f"state.snapshots: expected at most {shape[1]} (the length of mass); "
            f"got {state.snapshots}"
        )
    if state.replicas > shape[0]:
        out.append(
            f"state.replicas: expected at most {shape[0]} (the replicas of mass); "
            f"got {state.replicas}"
        )
    if state.complete and (state.snapshots == 0 or state.replicas == 0):
        out.append(
            f"state: complete is true but {state.snapshots} snapshots are committed "
            f"({state.replicas} replicas); expected at least one"
        )
    return out


def _total_problems(ctx: CheckContext) -> list[tuple[str, dict[str, Any]]]:
    meta = ctx.meta
    snap = ctx.stats.get("snapshots")
    if meta is None or snap is None or snap.total.shape[1] == 0:
        return []
    declared, density = meta.run.total_mass, meta.run.density
    first, ok = snap.total[:, 0], snap.valid[:, 0]
    volume = meta.lattice.volume
    if declared is not None:
        bad = ok & (first != declared)
        what = f"run.total_mass is {declared}"
    elif density is not None:
        bad = ok & (np.abs(first - density * volume) > 0.5)
        what = f"run.density is {density:g} ({density * volume:g} on {volume} sites)"
    else:
        return []
    if not bad.any():
        return []
    r = int(np.argmax(bad))
    n = int(np.count_nonzero(bad))
    more = f" ({n} replicas differ)" if n > 1 else ""
    text = f"{what} but replica {r}, snapshot 0 holds {int(first[r])}{more}"
    return [(text, {"replica": r, "snapshot": 0})]


class SchemaCheck(Check):
    """Metadata valid, consistent with the arrays; archive complete.

    Null hypothesis
    ---------------
    The run is what its header says: the header validates, the arrays have the declared
    dimension names, lattice shape, dtype and extent, the declared total mass is the mass
    of every replica's first snapshot, there is one seed per replica, and the writer
    finished (an unfinished archive warns). Judged exactly.

    Where
    -----
    ``replica`` and ``snapshot`` 0 of the first replica whose first snapshot does not hold
    the declared total mass; no location for the other findings (the message names the
    key).
    """

    id = "schema"
    description = "metadata valid and consistent with the arrays; archive complete"
    needs: ClassVar = {"snapshots": {}}
    requires: ClassVar = ()

    def run(self, ctx: CheckContext) -> CheckResult:
        run = ctx.run
        if ctx.meta is None:
            problems = list(run.problems) or ["the header is missing or invalid"]
            more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
            return self.result(
                "fail", f"metadata invalid: {problems[0]}{more}", values={"problems": problems}
            )
        found = _array_problems(ctx)
        st = run.state
        extent = f"{st.replicas} replicas x {st.snapshots} snapshots committed"
        if st.open_replica is not None:
            extent += f", replica {st.replicas} partly written ({st.open_replica} snapshots)"
        values: dict[str, Any] = {
            "complete": st.complete,
            "replicas": st.replicas,
            "snapshots": st.snapshots,
        }
        if found:
            values["problems"] = [text for text, _ in found]
            text = found[0][0]
            where = next((w for _, w in found if w), None)
            more = f" (and {len(found) - 1} more)" if len(found) > 1 else ""
            if not st.complete:
                more += f"; archive incomplete: {extent}"
            return self.result("fail", text + more, values=values, where=where)
        if not st.complete:
            return self.result(
                "warn", f"archive incomplete (writer did not finish): {extent}", values=values
            )
        return self.result("pass", f"metadata valid and consistent; {extent}", values=values)
