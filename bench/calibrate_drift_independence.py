"""False alarms and detections of the ``drift`` and ``independence`` checks.

    nice -n 10 .venv/bin/python bench/calibrate_drift_independence.py             # 50 runs/cell
    nice -n 10 .venv/bin/python bench/calibrate_drift_independence.py --runs 5    # quick look
    ... --redo "driven walls"   # recompute some cells, keep the others from the last run

Honest runs as groups store them: L = 200 sites, 4 replicas, no declared start (the
metadata keep neither ``run.initial`` nor ``run.seeds``), a snapshot every 10, 100 or
1000 hop times (hop time 1/u(inf) = 1 for the ZRP, 1/D = 1 for the CMAM), for
``--snapshots`` snapshots (500, 300 and 100 by spacing: the widest spacing is the costly
one to simulate, and its drift verdicts are skips whatever the length). Every family
(ZRP u(k) = 1 + 4/k at rho = 0.4, fluid, from the exact steady state where the sampler
has one: rings and symmetric walls; CMAM D = w = 1 at rho = 0.3, fluid, from a random
start), drift (symmetric, or right_probability 0.8) and boundary (ring, walls). Each
honest run is audited as declared: a ``fail`` is a false alarm.

Planted faults reuse the same data, so that every cell compares like with like:

* drift: a symmetric run declared driven (right_probability 0.8); a driven run declared
  symmetric; a driven run declared driven the other way (right_probability 0.2);
* independence: a reused seed (replica 3 replaced by replica 1: the sampler reproduces a
  replica exactly from its seed, so this is what two replicas simulated with one seed
  store); replica 3 replaced by replica 0 shifted by k snapshots (k uniform in 1..T/4;
  its last k snapshots keep their own data, as after a restart from a copied
  checkpoint); replica 3 replaced by replica 0 rolled by s sites (s uniform in 1..L-1);
  duplicate declared seeds (``run.seeds`` = [a, b, c, b]).

A fault is detected when its check returns ``fail``; the drift faults also record whether
the check skipped (the data cannot decide) and the kind of failure. Rates come with
Clopper-Pearson 95% intervals (scipy.stats.beta). Writes
``bench/out/calibrate_drift_independence.json`` and the tables of
``docs/calibration-drift-independence.md``.
"""

from __future__ import annotations

import argparse
import json
import time
import uuid
from collections import Counter
from pathlib import Path
from typing import Any

import numpy as np
from _common import interval

from massarc.archive import Run, create_run, open_run
from massarc.archive.scan import scan
from massarc.archive.stats import HistogramStatistic, ProfileStatistic, SnapshotStatistic
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import replica_seeds, simulate
from massarc.validators import CheckContext
from massarc.validators.checks.drift import DriftCheck
from massarc.validators.checks.drift.spacetime import SpacetimeStatistic
from massarc.validators.checks.independence import IndependenceCheck
from massarc.validators.checks.independence.fingerprints import FingerprintStatistic

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "bench" / "out" / "calibrate_drift_independence.json"
DOC = ROOT / "docs" / "calibration-drift-independence.md"
L = 200
REPLICAS = 4
P_DRIVEN = 0.8
SNAPSHOTS = {10.0: 500, 100.0: 300, 1000.0: 100}
FAMILIES = {"zrp": ({"b": 4.0}, 0.4), "cmam": ({"diffusion": 1.0, "chipping": 1.0}, 0.3)}
DRIFT_FAULTS = {
    "symmetric": {"declared driven": P_DRIVEN},
    "driven": {"declared symmetric": 0.5, "declared the other way": 1.0 - P_DRIVEN},
}
INDEPENDENCE_FAULTS = ("reused seed", "time-shifted copy", "rolled copy", "duplicate seeds")


def meta_for(family: str, boundary: str, p: float) -> RunMeta:
    model: dict[str, Any] = {"family": family, **FAMILIES[family][0]}
    if p != 0.5:
        model.update({"drift": "asymmetric", "right_probability": p})
    regime = "stationary" if family == "zrp" else "transient"
    return parse_metadata(
        {
            "model": model,
            "lattice": {"sites": [L], "boundary": boundary},
            "run": {"regime": regime},
        }
    )


def store(meta: RunMeta, x: np.ndarray, times: np.ndarray, **run: Any) -> Run:
    """An in-memory archive of ``x`` under ``meta`` (plus ``run`` keys)."""
    d = meta.model_dump(mode="json", exclude_none=True)
    d["run"].update(run)
    loc = f"memory://calibrate-{uuid.uuid4().hex}"
    with create_run(loc, parse_metadata(d), strict=False) as w:
        w.append(times, x)
    return open_run(loc)


def drift_verdicts(run: Run, declared: dict[str, float]) -> dict[str, Any]:
    """The drift check on ``run`` under several declared right-hop probabilities (the
    statistics do not depend on the declared drift: one pass serves them all)."""
    stats = {
        "spacetime": SpacetimeStatistic(run),
        "profiles": ProfileStatistic(run),
        "snapshots": SnapshotStatistic(run),
    }
    res = scan(run, stats)
    assert not res.errors, res.errors
    out = {}
    for name, p in declared.items():
        meta = run.meta
        model = meta.model.model_dump(mode="json", exclude_none=True)
        model.pop("right_probability", None)
        model["drift"] = "symmetric"
        if p != 0.5:
            model.update({"drift": "asymmetric", "right_probability": p})
        d = meta.model_dump(mode="json", exclude_none=True)
        d["model"] = model
        ctx = CheckContext(run, parse_metadata(d), res.results, DriftCheck.option_values())
        r = DriftCheck().run(ctx)
        kinds = [a.get("status") for a in r.values.get("axes", [])]
        out[name] = {"status": r.status, "message": r.message, "axes": kinds}
    return out


def independence_verdict(run: Run) -> dict[str, Any]:
    stats = {
        "snapshots": SnapshotStatistic(run),
        "histogram": HistogramStatistic(run),
        "fingerprints": FingerprintStatistic(run),
        "profiles": ProfileStatistic(run),
    }
    res = scan(run, stats)
    assert not res.errors, res.errors
    options = IndependenceCheck.option_values()
    r = IndependenceCheck().run(CheckContext(run, run.meta, res.results, options))
    where = r.where.model_dump(exclude_none=True) if r.where else {}
    return {"status": r.status, "message": r.message, "where": where}


def one_run(family: str, drift: str, boundary: str, spacing: float, seed: int) -> dict:
    p = P_DRIVEN if drift == "driven" else 0.5
    truth = meta_for(family, boundary, p)
    n = SNAPSHOTS[spacing]
    times = np.arange(n, dtype=np.float64) * spacing
    steady = family == "zrp" and not (boundary == "reflecting" and drift == "driven")
    x = np.asarray(
        simulate(
            truth,
            times,
            replicas=REPLICAS,
            seed=seed,
            mass=round(FAMILIES[family][1] * L),
            initial="steady-state" if steady else "random",
        )
    )
    clean = store(truth, x, times)
    declared = {"as declared": p, **DRIFT_FAULTS[drift]}
    out: dict[str, Any] = {"drift": drift_verdicts(clean, declared)}
    rng = np.random.default_rng(seed)
    faults: dict[str, Any] = {"clean": independence_verdict(clean)}
    y = x.copy()
    y[3] = x[1]
    faults["reused seed"] = independence_verdict(store(truth, y, times))
    k = int(rng.integers(1, n // 4 + 1))
    y = x.copy()
    y[3, : n - k] = x[0, k:]
    faults["time-shifted copy"] = independence_verdict(store(truth, y, times))
    s = int(rng.integers(1, L))
    y = x.copy()
    y[3] = np.roll(x[0], s, axis=-1)
    faults["rolled copy"] = independence_verdict(store(truth, y, times))
    seeds = replica_seeds(seed, REPLICAS)
    seeds[3] = seeds[1]
    faults["duplicate seeds"] = independence_verdict(store(truth, x, times, seeds=seeds))
    faults["planted"] = {"shift": k, "roll": s}
    out["independence"] = faults
    return out


def _located(fault: str, v: dict[str, Any]) -> bool:
    """Whether a failing independence verdict points at the planted replica."""
    return v["status"] == "fail" and v["where"].get("replica") == 3


def summarise(cells: dict[str, list[dict]]) -> dict[str, Any]:
    table: dict[str, Any] = {}
    for name, runs in cells.items():
        row: dict[str, Any] = {"runs": len(runs)}
        for declared in runs[0]["drift"]:
            row[f"drift: {declared}"] = dict(Counter(r["drift"][declared]["status"] for r in runs))
        for fault in ("clean", *INDEPENDENCE_FAULTS):
            verdicts = [r["independence"][fault] for r in runs]
            row[f"independence: {fault}"] = dict(Counter(v["status"] for v in verdicts))
            if fault != "clean":
                row[f"independence: {fault}"]["located"] = sum(_located(fault, v) for v in verdicts)
        table[name] = row
    return table


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=50, help="runs per cell (default 50)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--spacings", type=float, nargs="*", default=sorted(SNAPSHOTS))
    ap.add_argument("--families", nargs="*", default=list(FAMILIES))
    ap.add_argument("--doc", action="store_true", help="write the tables into docs/")
    ap.add_argument(
        "--redo", nargs="*", default=[], help="recompute the kept cells whose name has these"
    )
    ap.add_argument(
        "--tables", action="store_true", help="only rewrite the doc from the saved results"
    )
    args = ap.parse_args()
    if args.tables:
        saved = json.loads(OUT.read_text())
        write_doc(summarise(saved["cells"]))
        return
    started = time.perf_counter()
    previous = json.loads(OUT.read_text()) if OUT.exists() else {}
    # cells of other spacings or families stay as measured (whatever their number of runs);
    # a cell of this call is kept when it has --runs runs and is not named by --redo
    kept = previous.get("cells", {})
    cells: dict[str, list[dict]] = dict(kept)
    for spacing in args.spacings:
        for family in args.families:
            for drift in ("symmetric", "driven"):
                for boundary in ("periodic", "reflecting"):
                    name = f"{family} {drift} {'ring' if boundary == 'periodic' else 'walls'}"
                    name += f", every {spacing:g}"
                    redo = any(r in name for r in args.redo)
                    if name in kept and len(kept[name]) == args.runs and not redo:
                        continue
                    t0 = time.perf_counter()
                    runs = []
                    for i in range(args.runs):
                        seed = args.seed * 1_000_000 + int(spacing) * 1000 + i
                        runs.append(one_run(family, drift, boundary, spacing, seed))
                    cells[name] = runs
                    row = summarise({name: runs})[name]
                    print(f"{name} ({time.perf_counter() - t0:.0f} s): {row}", flush=True)
                    OUT.parent.mkdir(parents=True, exist_ok=True)
                    OUT.write_text(json.dumps({"runs": args.runs, "cells": cells}, indent=1))
    summary = summarise(cells)
    result = {
        "runs": args.runs,
        "cells": cells,
        "summary": summary,
        "seconds": time.perf_counter() - started,
    }
    OUT.write_text(json.dumps(result, indent=1))
    if args.doc:
        write_doc(summary)
    print(f"done in {time.perf_counter() - started:.0f} s; wrote {OUT}")


def _rate(counts: dict[str, int], n: int, key: str = "fail") -> str:
    k = int(counts.get(key, 0))
    lo, hi = interval(k, n)
    return f"{k}/{n} ({lo:.2f}-{hi:.2f})"


def _runs_per_spacing(summary: dict[str, Any]) -> str:
    """The run counts for the header: 50 runs per cell, or 50 (20 at every 1000)."""
    by: dict[str, set[int]] = {}
    for name, row in summary.items():
        by.setdefault(name.rsplit("every ", 1)[-1], set()).add(row["runs"])
    counts = Counter(n for ns in by.values() for n in ns)
    common = counts.most_common(1)[0][0] if counts else 0
    other = [f"{'/'.join(map(str, sorted(ns)))} at every {sp}" for sp, ns in by.items()
             if ns != {common}]  # fmt: skip
    return f"{common} runs per cell" + (f" ({', '.join(other)})" if other else "")


def write_doc(summary: dict[str, Any]) -> None:
    # by spacing (cells kept from an earlier call come first in the saved results)
    summary = dict(sorted(summary.items(), key=lambda kv: float(kv[0].rsplit("every ", 1)[1])))
    lines = [
        "# Calibration of the `drift` and `independence` checks",
        "",
        "Measured by `bench/calibrate_drift_independence.py` (see its docstring for the "
        "runs and the planted faults): L = 200 sites, 4 replicas, no declared start, a "
        f"snapshot every 10, 100 or 1000 hop times, {_runs_per_spacing(summary)}. Counts are "
        "`fail` (with the Clopper-Pearson 95% interval of the rate) unless stated; "
        "`skip` is the check saying the data cannot decide.",
        "",
        "    nice -n 10 .venv/bin/python bench/calibrate_drift_independence.py --doc",
        "",
        "## drift",
        "",
        "| cell | honest: fail | honest: skip | fault | fault: fail | fault: skip |",
        "| --- | --- | --- | --- | --- | --- |",
    ]
    for name, row in summary.items():
        n = row["runs"]
        honest = row["drift: as declared"]
        for key, counts in row.items():
            if not key.startswith("drift: ") or key == "drift: as declared":
                continue
            lines.append(
                f"| {name} | {_rate(honest, n)} | {honest.get('skip', 0)} | "
                f"{key[7:]} | {_rate(counts, n)} | {counts.get('skip', 0)} |"
            )
    lines += [
        "",
        "## independence",
        "",
        "Each fault column: runs failed (interval), failures that name replica 3 (the planted "
        "copy; for duplicate seeds, the later of the two), and skips.",
        "",
        "| cell | honest: fail | " + " | ".join(INDEPENDENCE_FAULTS) + " |",
        "| --- | --- | " + " | ".join("---" for _ in INDEPENDENCE_FAULTS) + " |",
    ]
    for name, row in summary.items():
        n = row["runs"]
        cols = [_rate(row["independence: clean"], n)]
        clean = row["independence: clean"]
        if clean.get("skip"):
            cols[0] += f", skip {clean['skip']}"
        for fault in INDEPENDENCE_FAULTS:
            c = row[f"independence: {fault}"]
            text = f"{_rate(c, n)}, located {c['located']}"
            if c.get("skip"):
                text += f", skip {c['skip']}"
            cols.append(text)
        lines.append(f"| {name} | " + " | ".join(cols) + " |")
    lines.append("")
    DOC.write_text("\n".join(lines))


if __name__ == "__main__":
    main()
