"""False alarms and power of the ``boundary`` check on runs of the reference samplers.

For every family (ZRP u(k) = 1 + 4/k, CMAM D = w = 1), drift (symmetric, totally
asymmetric) and true boundary, ``--runs`` runs are simulated from random starts (four
replicas, 300 snapshots 0.5 apart, density 1; L = 32 in 1D, 16 x 24 in 2D with one
periodic and one reflecting axis). Each is audited twice at the default settings:

* as declared (clean): a ``fail`` is a false alarm;
* with the boundaries swapped (the planted fault): a ``fail`` is a detection.

The table gives, per case, the counts of pass / warn / fail for both, and the largest
p-value among the planted faults. Results are printed and written to
``bench/out/calibrate_boundary.json``::

    .venv/bin/python bench/calibrate_boundary.py              # 30 runs per case, minutes
    .venv/bin/python bench/calibrate_boundary.py --runs 5     # quick look
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
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import simulate
from massarc.validators import CheckContext
from massarc.validators.checks.boundary import BoundaryCheck
from massarc.validators.checks.boundary.increments import IncrementStatistic

OUT = Path(__file__).resolve().parent / "out" / "calibrate_boundary.json"
TIMES = np.arange(300) * 0.5
LATTICES = {
    "1d": ((32,), [["periodic"], ["reflecting"]]),
    "2d": ((16, 24), [["periodic", "reflecting"], ["reflecting", "periodic"]]),
}


def _meta(family: str, sites: tuple[int, ...], boundary: list[str], drift: str) -> RunMeta:
    model: dict = {"family": family, "drift": drift}
    model.update({"b": 4.0} if family == "zrp" else {"diffusion": 1.0, "chipping": 1.0})
    return parse_metadata(
        {
            "model": model,
            "lattice": {"sites": list(sites), "boundary": boundary},
            "run": {"regime": "transient"},
        }
    )


def _redeclare(run: Run, boundary: list[str]) -> Run:
    d = run.meta.model_dump(mode="json", exclude_none=True)
    d["lattice"]["boundary"] = boundary
    loc = f"memory://calibrate-{uuid.uuid4().hex}"
    with create_run(loc, parse_metadata(d)) as w:
        w.append(run.times, np.stack([run.read(r) for r in range(run.n_replicas)]))
    return open_run(loc)


def _check(run: Run) -> tuple[str, float | None]:
    stats = scan(run, {"increments": IncrementStatistic(run)}).results
    res = BoundaryCheck().run(CheckContext(run, run.meta, stats, BoundaryCheck.option_values()))
    return res.status, res.values.get("p_value")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=30, help="runs per case (default 30)")
    args = ap.parse_args()
    rows = []
    started = time.perf_counter()
    for lattice, (sites, truths) in LATTICES.items():
        for family in ("zrp", "cmam"):
            for drift in ("symmetric", "asymmetric"):
                for truth, other in (truths, truths[::-1]):
                    clean, fault, p_fault = Counter(), Counter(), []
                    for seed in range(args.runs):
                        m = _meta(family, sites, truth, drift)
                        mass = int(np.prod(sites))
                        loc = f"memory://calibrate-{uuid.uuid4().hex}"
                        run = simulate(m, TIMES, replicas=4, seed=seed, mass=mass, location=loc)
                        clean[_check(run)[0]] += 1
                        status, p = _check(_redeclare(run, other))
                        fault[status] += 1
                        p_fault.append(np.nan if p is None else p)
                    rows.append(
                        {
                            "lattice": lattice,
                            "family": family,
                            "drift": drift,
                            "truth": "/".join(truth),
                            "declared_fault": "/".join(other),
                            "runs": args.runs,
                            "clean": dict(clean),
                            "fault": dict(fault),
                            "max_p_fault": float(np.nanmax(p_fault)),
                        }
                    )
                    r = rows[-1]
                    print(
                        f"{lattice} {family:4s} {drift:10s} truth {r['truth']:19s} "
                        f"clean {_counts(clean)}  planted {_counts(fault)}  "
                        f"max p planted {r['max_p_fault']:.2g}",
                        flush=True,
                    )
    total = {k: sum(r["clean"].get(k, 0) for r in rows) for k in ("pass", "warn", "fail")}
    caught = sum(r["fault"].get("fail", 0) for r in rows)
    planted = sum(r["runs"] for r in rows)
    print(f"clean runs: {total}; planted faults caught: {caught} of {planted}")
    OUT.parent.mkdir(parents=True, exist_ok=True)
    summary = {"clean": total, "caught": caught, "planted": planted}
    summary["seconds"] = time.perf_counter() - started
    OUT.write_text(json.dumps({"rows": rows, **summary}, indent=2))


def _counts(c: Counter) -> str:
    return "/".join(str(c.get(k, 0)) for k in ("pass", "warn", "fail"))


if __name__ == "__main__":
    main()
