"""Calibration of ``massarc compare``: false disagreement on honest pairs, power against a
5 % parameter change.

Each case is a ring of 64 sites, 4 replicas, observed every 100 hop times after an
unobserved burn-in from a random start, and stored as groups store runs: no declared
start (the metadata are rewritten without ``run.initial``). Per case and run length:

* honest pair: runs A and B of the same model with different seeds; ``compare`` saying
  ``fail`` is a false disagreement (Clopper-Pearson 95 % interval, ``_common.interval``);
* shifted pair: the same run A against a run B' simulated with the parameter raised by 5 %
  (ZRP b, CMAM chipping w) but claiming the base value; ``fail`` is a detection.

Cases: ZRP u(k) = 1 + b/k, b = 4 (rho_c = 1/2; 4.2 gives rho_c = 0.45), asymmetric,
fluid at rho = 0.4 and condensed at rho = 1.5; CMAM with D = 1, w = 1, symmetric, fluid at
rho = 0.3 and condensed at rho = 2. Each run's summaries are stored once in memory (the
bootstrap and extreme-value fits, which ``compare`` does not read, made cheap), then
compared at the default level and at 0.05; the p-values of each observable are kept.
Writes ``bench/out/calibrate_compare.json`` and prints a Markdown table::

    nice -n 10 .venv/bin/python bench/calibrate_compare.py                  # 50 pairs
    nice -n 10 .venv/bin/python bench/calibrate_compare.py --pairs 5 --snapshots 128
"""

from __future__ import annotations

import argparse
import json
import time
import uuid
from pathlib import Path
from typing import Any

import numpy as np
from _common import interval

from massarc.archive import Run, create_run, open_run
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import simulate
from massarc.summaries import summarize
from massarc.summaries.compare import DEFAULT_LEVEL, compare_runs

OUT = Path(__file__).resolve().parent / "out" / "calibrate_compare.json"
SITES, REPLICAS, SPACING = 64, 4, 100.0
#: Options of the stored summaries: what compare reads at its defaults, the rest cheap.
CHEAP = {"resamples": 9, "extreme_max": 20}

#: name: (family, base parameters, parameter shifted, density, drift, burn-in)
_ZRP, _CMAM = {"b": 4.0}, {"diffusion": 1.0, "chipping": 1.0}
CASES: dict[str, tuple[str, dict[str, float], str, float, str, float]] = {
    "ZRP fluid": ("zrp", _ZRP, "b", 0.4, "asymmetric", 2e4),
    "ZRP condensed": ("zrp", _ZRP, "b", 1.5, "asymmetric", 2e4),
    "CMAM fluid": ("cmam", _CMAM, "chipping", 0.3, "symmetric", 2e4),
    "CMAM condensed": ("cmam", _CMAM, "chipping", 2.0, "symmetric", 5e4),
}


def _meta(family: str, params: dict[str, float], drift: str) -> RunMeta:
    return parse_metadata(
        {
            "model": {"family": family, "drift": drift, **params},
            "lattice": {"sites": [SITES], "boundary": "periodic"},
            "run": {"regime": "stationary"},
        }
    )


def _stored_as_groups_do(run: Run, meta: RunMeta) -> Run:
    """The run rewritten with ``meta`` (no declared start, the claimed parameters)."""
    claimed = meta.model_copy(
        update={"run": meta.run.model_copy(update={"total_mass": run.meta.run.total_mass})}
    )
    loc = f"memory://compare-calibrate-{uuid.uuid4().hex}"
    with create_run(loc, claimed) as w:
        w.append(run.times, np.stack([run.read(r) for r in range(run.n_replicas)]))
    out = open_run(loc)
    summarize(out, CHEAP)
    return out


def _one(case: tuple, snapshots: int, seed: int, shift: float) -> Run:
    family, params, key, rho, drift, burn = case
    simulated = dict(params, **{key: params[key] * shift})
    times = burn + SPACING * np.arange(1, snapshots + 1)
    run = simulate(
        _meta(family, simulated, drift), times, replicas=REPLICAS, seed=seed,
        mass=round(rho * SITES), initial="random",
        location=f"memory://compare-sim-{uuid.uuid4().hex}",
    )  # fmt: skip
    return _stored_as_groups_do(run, _meta(family, params, drift))


def _verdict(a: Run, b: Run) -> dict[str, Any]:
    res = compare_runs(a, b, level=DEFAULT_LEVEL)
    ps = [o.adjusted_p for o in res.observables if o.adjusted_p is not None]
    return {
        "status": res.status,
        "fail_at_0.05": bool(ps) and min(ps) < 0.05,
        "p": {o.observable: o.p_value for o in res.observables},
        "skipped": [o.observable for o in res.observables if o.status == "skip"],
    }


def _rate(k: int, n: int) -> str:
    lo, hi = interval(k, n)
    return f"{k}/{n} ({lo:.3f}-{hi:.3f})"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--pairs", type=int, default=50, help="pairs per case (default 50)")
    ap.add_argument("--snapshots", default="256,1024",
                    help="run lengths in snapshots per replica (default 256,1024)")  # fmt: skip
    ap.add_argument("--cases", default=",".join(CASES), help="cases, comma-separated")
    args = ap.parse_args()
    lengths = [int(s) for s in args.snapshots.split(",")]
    rows: list[dict[str, Any]] = []
    started = time.perf_counter()
    print("| case | snapshots | false disagreement (0.01) | at 0.05 | detection of +5 % "
          "(0.01) | at 0.05 | skipped |")  # fmt: skip
    print("| --- | ---: | --- | --- | --- | --- | --- |")
    for name in args.cases.split(","):
        case = CASES[name]
        for n in lengths:
            honest, shifted = [], []
            for i in range(args.pairs):
                seed = 1000 * n + 10 * i
                a, b = _one(case, n, seed, 1.0), _one(case, n, seed + 1, 1.0)
                b_shift = _one(case, n, seed + 2, 1.05)
                honest.append(_verdict(a, b))
                shifted.append(_verdict(a, b_shift))
            k0 = sum(v["status"] == "fail" for v in honest)
            k5 = sum(v["fail_at_0.05"] for v in honest)
            d0 = sum(v["status"] == "fail" for v in shifted)
            d5 = sum(v["fail_at_0.05"] for v in shifted)
            skipped = sum(bool(v["skipped"]) for v in honest + shifted)
            row = {"case": name, "snapshots": n, "pairs": args.pairs, "honest": honest,
                   "shifted": shifted, "false_0.01": k0, "false_0.05": k5,
                   "detected_0.01": d0, "detected_0.05": d5, "skipped": skipped}  # fmt: skip
            rows.append(row)
            print(f"| {name} | {n} | {_rate(k0, args.pairs)} | {_rate(k5, args.pairs)} | "
                  f"{_rate(d0, args.pairs)} | {_rate(d5, args.pairs)} | {skipped} |",
                  flush=True)  # fmt: skip
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps({"rows": rows, "seconds": time.perf_counter() - started}))
    _per_observable(rows)


def _per_observable(rows: list[dict[str, Any]]) -> None:
    """Fraction of honest p-values below 0.01 and of shifted ones below 0.01, per test."""
    print("\n| case | snapshots | observable | honest p < 0.01 | shifted p < 0.01 |")
    print("| --- | ---: | --- | ---: | ---: |")
    for row in rows:
        for obs in ("occupation", "largest-mass", "correlation"):
            fr = []
            for group in ("honest", "shifted"):
                ps = [v["p"][obs] for v in row[group] if v["p"][obs] is not None]
                fr.append(f"{np.mean(np.array(ps) < 0.01):.2f}" if ps else "-")
            print(f"| {row['case']} | {row['snapshots']} | {obs} | {fr[0]} | {fr[1]} |")


if __name__ == "__main__":
    main()
