"""Attempted moves per second of the event loop: numba kernel against the pure-Python path.

Both paths run the same attempts (same pre-drawn uniforms, same start) on a ring of
L = 1000 sites, for the ZRP (u(k) = 1 + 3/k, density 1) and the CMAM (D = w = 1, density
1). Two numbers per path:

* ``loop``: the event loop alone on pre-drawn arrays;
* ``advance``: one replica advanced through snapshot intervals, random draws included.

The ratio numba / pure is measured in the same run. Results are printed and written to
``bench/out/sampler.json``::

    .venv/bin/python bench/bench_sampler.py            # about half a minute
    .venv/bin/python bench/bench_sampler.py --quick    # a few seconds, smaller counts
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import time
from pathlib import Path
from typing import Any

import numpy as np

from massarc.schema import RunMeta, parse_metadata
from massarc.simulate import dynamics, kernels

OUT = Path(__file__).resolve().parent / "out" / "sampler.json"
SITES = 1000
MODELS = {
    "zrp": {"family": "zrp", "b": 3.0},
    "cmam": {"family": "cmam", "diffusion": 1.0, "chipping": 1.0},
}


def _meta(model: dict[str, Any]) -> RunMeta:
    return parse_metadata(
        {
            "model": model,
            "lattice": {"sites": [SITES], "boundary": "periodic"},
            "run": {"regime": "stationary"},
        }
    )


def _best(fn: Any, repeats: int) -> float:
    """Smallest wall time of ``repeats`` calls (common practice for micro-benchmarks)."""
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def _loop_rate(dyn: dynamics.Dynamics, start: np.ndarray, n: int, pure: bool, rep: int) -> float:
    rng = np.random.default_rng(1)
    sites = rng.integers(0, dyn.sites, size=n, dtype=np.int64)
    unif = rng.random(n)
    loop = kernels.event_loop(pure)
    out = np.empty((1, dyn.sites), dtype=np.int64)
    stops = np.array([n], dtype=np.int64)

    def run() -> None:
        loop(start.copy(), out, dyn.nbr, dyn.ndim, dyn.right_probability, dyn.family, dyn.rates,
             dyn.rate_max, dyn.diffusion, dyn.chipping, sites, unif, stops)  # fmt: skip

    return n / _best(run, rep)


def _advance_rate(dyn: dynamics.Dynamics, start: np.ndarray, n: int, pure: bool, rep: int) -> float:
    intervals = 100
    dts = np.full(intervals, n / dyn.attempt_rate / intervals)
    out = np.empty((intervals, dyn.sites), dtype=np.int64)
    attempts = []

    def run() -> None:
        r = dynamics.Replica(dyn, start, np.random.default_rng(2), pure=pure)
        r.advance(dts, out)
        attempts.append(r.attempts)

    wall = _best(run, rep)
    return float(np.mean(attempts)) / wall


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="smaller counts, fewer repeats")
    args = parser.parse_args()
    if not kernels.HAVE_NUMBA:
        raise SystemExit("bench_sampler: numba is not installed; nothing to compare")
    fast_n, pure_n, rep = (2_000_000, 50_000, 2) if args.quick else (20_000_000, 400_000, 5)

    rows = []
    for name, model in MODELS.items():
        meta = _meta(model)
        dyn = dynamics.Dynamics.from_meta(meta, SITES)
        start = np.random.default_rng(0).multinomial(SITES, np.full(SITES, 1.0 / SITES))
        t0 = time.perf_counter()
        _loop_rate(dyn, start, 10, pure=False, rep=1)  # compile (or load the cache)
        compile_s = time.perf_counter() - t0
        row = {"model": name, "sites": SITES, "first_call_seconds": compile_s}
        for what, fn in (("loop", _loop_rate), ("advance", _advance_rate)):
            fast = fn(dyn, start, fast_n, False, rep)
            pure = fn(dyn, start, pure_n, True, rep)
            row[f"{what}_numba_per_s"] = fast
            row[f"{what}_pure_per_s"] = pure
            row[f"{what}_ratio"] = fast / pure
        rows.append(row)

    print(f"attempted moves per second, ring of {SITES} sites, density 1")
    print(f"{'model':<6} {'path':<8} {'numba':>12} {'pure':>12} {'ratio':>8}")
    for row in rows:
        for what in ("loop", "advance"):
            print(
                f"{row['model']:<6} {what:<8} {row[f'{what}_numba_per_s']:>12.3e} "
                f"{row[f'{what}_pure_per_s']:>12.3e} {row[f'{what}_ratio']:>8.1f}"
            )
    import numba

    report = {
        "benchmark": "sampler event loop",
        "quick": args.quick,
        "attempts": {"numba": fast_n, "pure": pure_n, "repeats": rep},
        "machine": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "numba": numba.__version__,
            "cpus": os.cpu_count(),
            "processor": platform.processor() or platform.machine(),
        },
        "rows": rows,
    }
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps(report, indent=2) + "\n")
    print(f"written to {OUT}")


if __name__ == "__main__":
    main()
