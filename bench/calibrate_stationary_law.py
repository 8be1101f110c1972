"""False alarms and power of the ``stationary-law`` check on runs of the reference samplers.

Each case is a ZRP with u(k) = 1 + 4/k (rho_c = 1/2) run ``--runs`` times: dynamics
started from an exact canonical sample (``initial="steady-state"``) or from a random start
in the fluid phase (the window must drop the short transient), or independent exact
samples (``exact=True``). Each run is audited twice at the default settings:

* as simulated (clean): a ``fail`` is a false alarm;
* declared with b = 3.5 (rho_c = 2/3), the same data otherwise: a ``fail`` is a detection.

The table gives the counts of pass / warn / fail for both, and the fraction of clean
p-values below 0.05 and 0.01 (which should be near those values when the design effect is
well estimated). Written to ``bench/out/calibrate_stationary_law.json``::

    .venv/bin/python bench/calibrate_stationary_law.py            # 40 runs per case
    .venv/bin/python bench/calibrate_stationary_law.py --runs 5   # quick look
"""

from __future__ import annotations

import argparse
import json
import time
import uuid
from collections import Counter
from pathlib import Path

import numpy as np

from massarc.archive import Run, create_run, open_run
from massarc.archive.scan import scan
from massarc.archive.stats import HistogramStatistic, SnapshotStatistic
from massarc.schema import parse_metadata
from massarc.simulate import simulate
from massarc.validators import CheckContext
from massarc.validators.checks.stationary_law import StationaryLawCheck

OUT = Path(__file__).resolve().parent / "out" / "calibrate_stationary_law.json"

#: name: (sites, boundary, drift, mass, replicas, snapshots, spacing, initial)
CASES = {
    "ring fluid, 16 replicas": ((32,), "periodic", "symmetric", 8, 16, 200, 2.0, "steady"),
    "ring condensed, 16 replicas": ((32,), "periodic", "symmetric", 64, 16, 200, 2.0, "steady"),
    "ring fluid, 4 replicas": ((32,), "periodic", "symmetric", 8, 4, 400, 1.0, "steady"),
    "ring condensed, 4 replicas": ((32,), "periodic", "symmetric", 64, 4, 400, 1.0, "steady"),
    "asymmetric ring condensed": ((32,), "periodic", "asymmetric", 64, 16, 200, 2.0, "steady"),
    "chain with walls, fluid": ((32,), "reflecting", "symmetric", 8, 16, 200, 2.0, "steady"),
    "torus 8x8 condensed": ((8, 8), "periodic", "symmetric", 128, 16, 200, 2.0, "steady"),
    "ring fluid, random start": ((32,), "periodic", "symmetric", 8, 16, 300, 2.0, "random"),
    "exact samples, fluid": ((64,), "periodic", "symmetric", 26, 16, 1000, 1.0, "exact"),
    "exact samples, condensed": ((32,), "periodic", "symmetric", 64, 16, 200, 1.0, "exact"),
}


def _meta(sites: tuple[int, ...], boundary: str, drift: str, b: float):
    return parse_metadata(
        {
            "model": {"family": "zrp", "b": b, "drift": drift},
            "lattice": {"sites": list(sites), "boundary": boundary},
            "run": {"regime": "stationary"},
        }
    )


def _check(run: Run) -> tuple[str, float]:
    stats = {"histogram": HistogramStatistic(run), "snapshots": SnapshotStatistic(run)}
    options = StationaryLawCheck.option_values()
    res = StationaryLawCheck().run(CheckContext(run, run.meta, scan(run, stats).results, options))
    p = res.values.get("p_value")
    return res.status, float("nan") if p is None else float(p)


def _as(run: Run, meta) -> Run:
    loc = f"memory://law-calibrate-{uuid.uuid4().hex}"
    with create_run(loc, meta) as w:
        w.append(run.times, np.stack([run.read(r) for r in range(run.n_replicas)]))
    return open_run(loc)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=40, help="runs per case (default 40)")
    args = ap.parse_args()
    rows = []
    started = time.perf_counter()
    for name, (sites, bound, drift, mass, reps, snaps, dt, start) in CASES.items():
        clean, wrong, ps = Counter(), Counter(), []
        for seed in range(args.runs):
            run = simulate(
                _meta(sites, bound, drift, 4.0), np.arange(snaps) * dt, replicas=reps,
                seed=100 + seed, mass=mass, initial="random" if start == "random" else
                "steady-state", exact=start == "exact",
                location=f"memory://law-calibrate-{uuid.uuid4().hex}",
            )  # fmt: skip
            status, p = _check(run)
            clean[status] += 1
            ps.append(p)
            wrong[_check(_as(run, _meta(sites, bound, drift, 3.5)))[0]] += 1
        ps_a = np.array(ps)
        row = {
            "case": name,
            "runs": args.runs,
            "clean": dict(clean),
            "wrong_b": dict(wrong),
            "clean_p_below_0.05": float(np.mean(ps_a < 0.05)),
            "clean_p_below_0.01": float(np.mean(ps_a < 0.01)),
        }
        rows.append(row)
        print(
            f"{name:28s} clean {_counts(clean)}  wrong b {_counts(wrong)}  clean p<0.05 "
            f"{row['clean_p_below_0.05']:.3f}  p<0.01 {row['clean_p_below_0.01']:.3f}",
            flush=True,
        )
    OUT.parent.mkdir(parents=True, exist_ok=True)
    summary = {"rows": rows, "seconds": time.perf_counter() - started}
    OUT.write_text(json.dumps(summary, indent=2))


def _counts(c: Counter) -> str:
    return "/".join(str(c.get(k, 0)) for k in ("pass", "warn", "fail"))


if __name__ == "__main__":
    main()
