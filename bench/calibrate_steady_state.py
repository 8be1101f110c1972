"""False-alarm and detection rates of the ``steady-state`` check.

Two families of runs, each judged by the check with its default options:

* synthetic observables (no lattice): stationary AR(1) series, unit variance, for a grid
  of correlation (phi), length and replica count, under a custom model (judged from the
  data alone); and the same plus a common power-law drift a (k/n)^(1/3) (the coarsening
  law l ~ t^(1/z) with z = 3). The check reads only per-snapshot observables, so these
  are fed to it directly;
* sampler runs (massarc.simulate, ring of 32 sites, 4 replicas, density 2): clean runs
  (independent exact ZRP samples; ZRP from an exact steady-state start, asymmetric over
  4 L^2 and symmetric over L^3) and planted faults (symmetric ZRP and CMAM coarsening
  from a random start over 0.01 L^3 and 0.03 L^2, labelled stationary).

A false alarm is a ``fail`` on a clean run; a detection is a ``fail`` on a faulty one.
Rates are printed with a 95 % Clopper-Pearson upper bound when no event was seen, and
written to ``bench/out/steady_state.json``::

    .venv/bin/python bench/calibrate_steady_state.py           # about 20 minutes
    .venv/bin/python bench/calibrate_steady_state.py --quick   # about 2 minutes
"""

from __future__ import annotations

import argparse
import collections
import itertools
import json
import time
import uuid
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import numpy as np
from scipy.signal import lfilter
from scipy.stats import beta

from massarc.archive.scan import scan
from massarc.archive.stats import SnapshotStatistic, SnapshotStats
from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import simulate
from massarc.validators import CheckContext
from massarc.validators.checks.steady_state import SteadyStateCheck

OUT = Path(__file__).resolve().parent / "out" / "steady_state.json"
CHECK = SteadyStateCheck()


def _meta(family: str, regime: str = "stationary", sites: int = 32, **model: Any) -> RunMeta:
    return parse_metadata(
        {
            "model": {"family": family, **model},
            "lattice": {"sites": [sites], "boundary": "periodic"},
            "run": {"regime": regime},
        }
    )


CUSTOM = _meta("custom", description="synthetic observables")


def _synthetic(rng: np.random.Generator, reps: int, n: int, phi: float, drift: float) -> str:
    e = rng.standard_normal((3, reps, n))
    e[..., 0] /= np.sqrt(1 - phi**2)
    x = lfilter([1.0], [1.0, -phi], e, axis=-1) * np.sqrt(1 - phi**2)
    x += drift * (np.arange(1, n + 1) / n) ** (1 / 3)
    zero = np.zeros((reps, n), np.int64)
    stats = SnapshotStats(
        zero, 50 + 5 * x[0], zero, 4000 + 300 * x[1], 30 - 3 * x[2], zero,
        np.ones((reps, n), bool), None, 0, None, 0, None, 0,
    )  # fmt: skip
    run = SimpleNamespace(times=np.arange(n, dtype=float))
    options = CHECK.option_values()
    ctx = CheckContext(run, CUSTOM, {"snapshots": stats}, options)  # type: ignore[arg-type]
    return CHECK.run(ctx).status


def _sampled(meta: RunMeta, times: np.ndarray, seed: int, initial: str, exact: bool) -> str:
    run = simulate(
        meta, times, replicas=4, seed=seed, mass=64, initial=initial, exact=exact,
        location=f"memory://calibrate-{uuid.uuid4().hex}",
    )  # fmt: skip
    stats = scan(run, {"snapshots": SnapshotStatistic(run)}).results
    return CHECK.run(CheckContext(run, run.meta, stats, CHECK.option_values())).status


def _upper(k: int, n: int) -> float:
    """95 % Clopper-Pearson upper bound of a rate seen k times in n (scipy.stats.beta)."""
    return 1.0 if k == n else float(beta.ppf(0.95, k + 1, n - k))


def _row(name: str, counts: collections.Counter, n: int, fault: bool) -> dict[str, Any]:
    fails = counts.get("fail", 0)
    row = {"case": name, "runs": n, "fault": fault, **{k: counts.get(k, 0) for k in
           ("pass", "warn", "fail")}, "fail_rate": fails / n}  # fmt: skip
    if not fault:
        row["fail_rate_upper95"] = _upper(fails, n)
    label = "detection" if fault else "false alarms"
    extra = "" if fault else f" (95 % upper bound {row['fail_rate_upper95']:.3g})"
    print(f"{name:46s} {label:12s} {fails:4d}/{n:<4d}{extra}  {dict(counts)}", flush=True)
    return row


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer runs per case")
    ap.add_argument("--seed", type=int, default=2024)
    args = ap.parse_args()
    n_syn, n_run = (20, 10) if args.quick else (200, 100)
    rng = np.random.default_rng(args.seed)
    rows = []
    t0 = time.perf_counter()
    for phi, n, reps in itertools.product((0.0, 0.5, 0.9, 0.98), (200, 2000), (1, 2, 4, 8)):
        c = collections.Counter(_synthetic(rng, reps, n, phi, 0.0) for _ in range(n_syn))
        rows.append(_row(f"AR(1) phi={phi} n={n} R={reps}", c, n_syn, fault=False))
    for phi, size in itertools.product((0.5, 0.9), (2.0, 4.0)):
        c = collections.Counter(_synthetic(rng, 4, 2000, phi, size) for _ in range(n_syn))
        rows.append(_row(f"AR(1) phi={phi} + {size} (k/n)^(1/3), n=2000 R=4", c, n_syn, True))
    length = 32
    runs = {
        "ZRP exact samples": (_meta("zrp", b=4.0), np.linspace(0, 100, 200), "random", True,
                              False),
        "ZRP asym., exact start, 4 L^2": (_meta("zrp", b=4.0, drift="asymmetric"),
                                          np.linspace(0, 4 * length**2, 300), "steady-state",
                                          False, False),
        "ZRP sym., exact start, L^3": (_meta("zrp", b=4.0), np.linspace(0, length**3, 300),
                                       "steady-state", False, False),
        "ZRP sym., random start, 0.01 L^3": (_meta("zrp", b=4.0),
                                             np.linspace(0, 0.01 * length**3, 300), "random",
                                             False, True),
        "CMAM, random start, 0.03 L^2": (_meta("cmam", diffusion=1.0, chipping=1.0),
                                         np.linspace(0, 0.03 * length**2, 300), "random",
                                         False, True),
    }  # fmt: skip
    for name, (meta, times, initial, exact, fault) in runs.items():
        c = collections.Counter(
            _sampled(meta, times, 10_000 + s, initial, exact) for s in range(n_run)
        )
        rows.append(_row(name, c, n_run, fault))
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps({"seconds": time.perf_counter() - t0, "rows": rows}, indent=1))
    print(f"wrote {OUT} in {time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
