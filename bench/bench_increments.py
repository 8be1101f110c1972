"""Cost of the ``increments`` statistic against decoding, in the same run.

A run of about ``--mb`` MiB of masses is written to a temporary directory (a random walk
of small occupations, which compresses like real data), once on a ring of 1000 sites and
once on a 128 x 128 torus, uint8. Then single passes (:func:`massarc.archive.scan.scan`)
are timed, best of ``--repeats``:

* ``decode``: no statistic (reading and decoding every chunk: the baseline);
* ``basic``: the ``snapshots`` and ``histogram`` statistics;
* ``basic+increments``: the same plus ``increments``.

Ratios are to ``decode`` measured in the same run; the increments column is the extra
cost of the statistic on top of ``basic``. Per chunk, the kernel alone is also timed
against decoding one chunk. Written to ``bench/out/increments.json``::

    .venv/bin/python bench/bench_increments.py            # 1 GiB per lattice, minutes
    .venv/bin/python bench/bench_increments.py --mb 128   # quick
"""

from __future__ import annotations

import argparse
import json
import shutil
import tempfile
import timeit
from pathlib import Path
from typing import Any

import numpy as np

from massarc.archive import create_run, open_run
from massarc.archive.scan import scan
from massarc.archive.stats import HistogramStatistic, SnapshotStatistic
from massarc.schema import parse_metadata
from massarc.validators.checks.boundary.increments import IncrementStatistic

OUT = Path(__file__).resolve().parent / "out" / "increments.json"
LATTICES = {"ring-1000": (1000,), "torus-128x128": (128, 128)}


def _write(path: Path, sites: tuple[int, ...], mib: int) -> None:
    meta = parse_metadata(
        {
            "model": {"family": "zrp", "b": 4.0},
            "lattice": {"sites": list(sites), "boundary": "periodic"},
            "run": {"regime": "stationary"},
        }
    )
    per = int(np.prod(sites))
    replicas = 8
    snapshots = max(2, mib * 2**20 // (per * replicas))
    rng = np.random.default_rng(0)
    with create_run(path, meta, dtype=np.uint8, snapshots_hint=snapshots) as w:
        for r in range(replicas):
            steps = rng.integers(-1, 2, size=(snapshots, *sites), dtype=np.int8)
            data = (np.cumsum(steps, axis=0, dtype=np.int16) % 7).astype(np.uint8)
            w.append(np.arange(snapshots, dtype=float), data, replica=r)


def _best(fn: Any, repeats: int) -> float:
    """Smallest wall time of ``repeats`` calls (timeit's advice for benchmarks)."""
    return min(timeit.repeat(fn, number=1, repeat=repeats))


def measure(path: Path, repeats: int) -> dict[str, float]:
    run = open_run(path)
    passes = {
        "decode": lambda: {},
        "basic": lambda: {
            "snapshots": SnapshotStatistic(run),
            "histogram": HistogramStatistic(run),
        },
        "basic+increments": lambda: {
            "snapshots": SnapshotStatistic(run),
            "histogram": HistogramStatistic(run),
            "increments": IncrementStatistic(run),
        },
    }
    out = {
        name: _best(lambda make=make: scan(run, make()), repeats) for name, make in passes.items()
    }
    ref = run.chunk_refs()[0]
    block = run.read_chunk(ref)
    stat = IncrementStatistic(run)
    stat.chunk(block)  # compile outside the timing
    out["chunk_decode"] = _best(lambda: run.read_chunk(ref), 5 * repeats)
    out["chunk_increments"] = _best(lambda: stat.chunk(block), 5 * repeats)
    out["gib"] = run.nbytes / 2**30
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--mb", type=int, default=1024, help="MiB of masses per lattice")
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    tmp = Path(tempfile.mkdtemp(prefix="massarc-bench-increments-"))
    results = {}
    try:
        for name, sites in LATTICES.items():
            path = tmp / f"{name}.zarr"
            _write(path, sites, args.mb)
            r = measure(path, args.repeats)
            shutil.rmtree(path)
            results[name] = r
            d = r["decode"]
            print(
                f"{name:14s} {r['gib']:.2f} GiB  decode {d:.2f} s  basic x{r['basic'] / d:.2f}  "
                f"basic+increments x{r['basic+increments'] / d:.2f}  "
                f"(increments adds x{(r['basic+increments'] - r['basic']) / d:.2f}); per chunk: "
                f"kernel / decode = {r['chunk_increments'] / r['chunk_decode']:.2f}",
                flush=True,
            )
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps(results, indent=2))


if __name__ == "__main__":
    main()
