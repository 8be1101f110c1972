"""The default audit on honest runs stored the way groups store them: every check at once.

    nice -n 10 .venv/bin/python bench/calibrate_practice.py             # about an hour
    nice -n 10 .venv/bin/python bench/calibrate_practice.py --runs 3    # a quick look

Each run: L = 200 sites, 4 replicas, 300 snapshots, one every 10, 100 or 1000 hop times
(hop time 1/u(infinity) = 1 for the ZRP, 1/D = 1 for the CMAM), labelled stationary, and
no `run.initial` declared. Families: the ZRP u(k) = 1 + 4/k at density 1.5 (condensed;
rho_c = 1/2), symmetric on a ring and between walls, and driven (right probability 0.8)
on a ring and between walls; the CMAM D = w = 1 at density 1 (condensed; rho_c = 0.414),
symmetric on a ring and between walls. ZRP runs start from an exact steady-state sample
where the sampler has one (rings of any drift, symmetric walls); the others start from an
even spread and run a warm-up (CMAM 4 L^2 / D; driven ZRP with walls 2 10^4) before the
first snapshot. Every run is audited with `massarc.validators.audit` at its defaults; a
`fail` (or `error`) of any check on these honest runs is a false alarm. Counts per check and
status go to bench/out/practice.json, and the table to docs/calibration-practice.md.
Intervals: Clopper-Pearson 95 % (scipy.stats.beta).
"""

from __future__ import annotations

import argparse
import json
import time
import uuid
from collections import Counter
from pathlib import Path

import numpy as np
from _common import interval

from massarc.schema import RunMeta, parse_metadata
from massarc.schema.laws import relaxation_time
from massarc.simulate import simulate
from massarc.validators import audit

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "bench" / "out" / "practice.json"
DOC = ROOT / "docs" / "calibration-practice.md"
L, REPLICAS, SNAPSHOTS = 200, 4, 300
SPACINGS = (10.0, 100.0, 1000.0)
#: name -> (family, boundary, right probability, density, start, warm-up time)
FAMILIES = {
    "zrp symmetric ring": ("zrp", "periodic", 0.5, 1.5, "steady-state", 0.0),
    "zrp symmetric walls": ("zrp", "reflecting", 0.5, 1.5, "steady-state", 0.0),
    "zrp driven ring": ("zrp", "periodic", 0.8, 1.5, "steady-state", 0.0),
    "zrp driven walls": ("zrp", "reflecting", 0.8, 1.5, "uniform", 2e4),
    "cmam symmetric ring": ("cmam", "periodic", 0.5, 1.0, "uniform", 4.0 * L**2),
    "cmam symmetric walls": ("cmam", "reflecting", 0.5, 1.0, "uniform", 4.0 * L**2),
}


def meta_for(family: str, boundary: str, p: float) -> RunMeta:
    drift = {"drift": "symmetric"} if p == 0.5 else {"drift": "asymmetric", "right_probability": p}
    model = {"family": "zrp", "b": 4.0} if family == "zrp" else {
        "family": "cmam", "diffusion": 1.0, "chipping": 1.0,
    }  # fmt: skip
    return parse_metadata(
        {
            "model": {**model, **drift},
            "lattice": {"sites": [L], "boundary": boundary},
            "run": {"regime": "stationary"},  # no run.initial: groups rarely declare it
        }
    )


def one_run(name: str, spacing: float, seed: int) -> tuple[dict[str, str], float]:
    """Statuses by check id, and the run's length in relaxation times."""
    family, boundary, p, rho, start, warm = FAMILIES[name]
    meta = meta_for(family, boundary, p)
    times = warm + spacing * np.arange(SNAPSHOTS)
    run = simulate(
        meta, times, replicas=REPLICAS, seed=seed, mass=round(rho * L), initial=start,
        location=f"memory://practice-{uuid.uuid4().hex}",
    )  # fmt: skip
    # the sampler records its start; groups do not: audit the run as they store it
    stored = run.meta.model_copy(update={"run": meta.run})
    run.header = run.header.model_copy(update={"metadata": stored})  # type: ignore[union-attr]
    report = audit([run])
    tau = relaxation_time(meta) or float("nan")
    return {c.id: c.status for c in report.runs[0].checks}, float(times[-1]) / tau


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=30, help="runs per cell")
    ap.add_argument("--seed", type=int, default=7)
    args = ap.parse_args()
    started = time.perf_counter()
    cells = []
    for spacing in SPACINGS:
        for k, name in enumerate(FAMILIES):
            counts: dict[str, Counter[str]] = {}
            lengths = []
            t0 = time.perf_counter()
            for i in range(args.runs):
                seed = args.seed * 1_000_000 + int(spacing) * 1000 + 100 * k + i
                statuses, length = one_run(name, spacing, seed)
                lengths.append(length)
                for cid, status in statuses.items():
                    counts.setdefault(cid, Counter())[status] += 1
            cell = {
                "family": name,
                "spacing": spacing,
                "runs": args.runs,
                "relaxation_times": float(np.median(lengths)),
                "counts": {cid: dict(c) for cid, c in counts.items()},
                "seconds": time.perf_counter() - t0,
            }
            cells.append(cell)
            print(json.dumps(cell), flush=True)
    result = {
        "lattice": L,
        "replicas": REPLICAS,
        "snapshots": SNAPSHOTS,
        "seed": args.seed,
        "cells": cells,
        "seconds": time.perf_counter() - started,
    }
    OUT.parent.mkdir(exist_ok=True)
    OUT.write_text(json.dumps(result, indent=1))
    write_doc(result)
    print(f"wrote {DOC} in {result['seconds'] / 60:.0f} min")


def _rate(count: int, n: int) -> str:
    if not count:
        return f"0 (<= {interval(0, n)[1]:.2f})"
    lo, hi = interval(count, n)
    return f"{count} ({lo:.2f}-{hi:.2f})"


def write_doc(r: dict) -> None:
    checks = list(r["cells"][0]["counts"])
    lines = [
        "# The default audit on runs as groups store them",
        "",
        f"Measured by `bench/calibrate_practice.py` (seed {r['seed']}, "
        f"{r['seconds'] / 60:.0f} minutes on 2 busy cores): L = {r['lattice']} sites, "
        f"{r['replicas']} replicas, {r['snapshots']} snapshots one every 10, 100 or 1000 hop "
        "times, labelled stationary, no declared start; every check at its defaults. Each "
        "cell counts runs; `fail` counts failures and errors (false alarms: these runs are "
        "honest), with the Clopper-Pearson 95 % interval of the rate. The run length is the "
        "median over the cell, in relaxation times L^z (z = 3 for the symmetric ZRP, 2 "
        "otherwise), counted from the sampler's start (warm-ups included).",
        "",
        "    nice -n 10 .venv/bin/python bench/calibrate_practice.py",
        "",
        "| family | every | length / L^z | check | pass | warn | skip | fail |",
        "| --- | --- | --- | --- | --- | --- | --- | --- |",
    ]
    for cell in r["cells"]:
        n = cell["runs"]
        first = True
        for cid in checks:
            c = cell["counts"].get(cid, {})
            fails = c.get("fail", 0) + c.get("error", 0)
            head = (
                f"| {cell['family']} | {cell['spacing']:g} | {cell['relaxation_times']:.3g} "
                if first
                else "| | | "
            )
            lines.append(
                f"{head}| {cid} | {c.get('pass', 0)} | {c.get('warn', 0)} | "
                f"{c.get('skip', 0)} | {_rate(fails, n)} |"
            )
            first = False
    DOC.write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
