"""Cost of the ``transfers`` statistic against decoding the same chunks, in the same run.

    nice -n 10 .venv/bin/python bench/bench_transfers.py             # L = 5000, 16000 snapshots
    nice -n 10 .venv/bin/python bench/bench_transfers.py --quick     # 2000 snapshots

Data: a symmetric ZRP (u(k) = 1 + 4/k, density 1.5: condensed) on a ring of 5000 sites,
4 replicas from the exact steady state, a snapshot every hop time; written once by
``massarc.simulate`` (uint16, default codecs) and cached under ``bench/out/transfers-data/``.

Measured in one process, alternating, best of ``--repeat`` (the least disturbed by other
load; medians are in the JSON):

* ``decode``: the single pass with no statistic (reading and decoding every chunk): the
  baseline;
* ``transfers``: the same pass with the ``transfers`` statistic;
* per chunk, in one thread: ``TransferStatistic.chunk`` against decoding that chunk.

Ratios are to ``decode`` measured in the same run. Writes ``bench/out/transfers.json``.
The whole audit against zarr-python on a 1 GiB run is ``bench/bench_check.py``.
"""

from __future__ import annotations

import argparse
import json
import statistics
import time
import timeit
from pathlib import Path

from _common import reusable

from massarc.archive import open_run
from massarc.archive.scan import default_workers, scan
from massarc.schema import parse_metadata
from massarc.simulate import simulate, snapshot_times
from massarc.validators.checks.boundary.transfers import TransferStatistic

OUT = Path(__file__).resolve().parent / "out"
DATA = OUT / "transfers-data"
SITES, REPLICAS = 5000, 4


def build(snapshots: int) -> Path:
    path = DATA / f"zrp-{SITES}-{snapshots}.zarr"
    if reusable(path, snapshots):
        return path
    meta = parse_metadata(
        {
            "model": {"family": "zrp", "b": 4.0},
            "lattice": {"sites": [SITES], "boundary": "periodic"},
            "run": {"regime": "stationary"},
        }
    )
    print(f"building {path.name} ...", flush=True)
    t0 = time.perf_counter()
    simulate(
        meta,
        snapshot_times(float(snapshots - 1), snapshots),
        replicas=REPLICAS,
        seed=7,
        mass=SITES * 3 // 2,
        initial="steady-state",
        location=path,
        overwrite=True,
    )
    print(f"  built in {time.perf_counter() - t0:.0f} s", flush=True)
    return path


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="2000 snapshots instead of 16000")
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    snapshots = 2000 if args.quick else 16000
    path = build(snapshots)
    run = open_run(path)
    workers = default_workers()
    passes = {
        "decode": lambda: {},
        "transfers": lambda: {"transfers": TransferStatistic(run)},
    }
    for make in passes.values():  # page cache, compiled kernels: outside the timings
        scan(run, make())
    times: dict[str, list[float]] = {k: [] for k in passes}
    for _ in range(args.repeat):
        for name, make in passes.items():
            stats = make()
            t0 = time.perf_counter()
            res = scan(run, stats)
            times[name].append(time.perf_counter() - t0)
            assert not res.errors and not res.faults, (res.errors, res.faults)
    best = {k: min(v) for k, v in times.items()}
    median = {k: statistics.median(v) for k, v in times.items()}

    # one chunk at a time, in this thread: the kernel against decoding
    refs = run.chunk_refs()[:: max(1, len(run.chunk_refs()) // 8)]
    stat = TransferStatistic(run)
    decode_s = kernel_s = 0.0
    for ref in refs:
        decode_s += min(timeit.repeat(lambda ref=ref: run.read_chunk(ref), number=1, repeat=3))
        block = run.read_chunk(ref)
        kernel_s += min(timeit.repeat(lambda b=block: stat.chunk(b), number=1, repeat=3))

    result = {
        "sites": SITES,
        "snapshots": snapshots,
        "replicas": REPLICAS,
        "uncompressed_mib": run.nbytes / 2**20,
        "chunk_snapshots": run.chunk_snapshots,
        "stride": stat.stride,
        "workers": workers,
        "best_seconds": best,
        "median_seconds": median,
        "ratio_best": {k: v / best["decode"] for k, v in best.items()},
        "ratio_median": {k: v / median["decode"] for k, v in median.items()},
        "chunk_kernel_over_decode": kernel_s / decode_s,
    }
    OUT.mkdir(exist_ok=True)
    (OUT / "transfers.json").write_text(json.dumps(result, indent=2))
    print(f"{run.nbytes / 2**20:.0f} MiB, {snapshots} snapshots x {REPLICAS} replicas of "
          f"{SITES} sites, {workers} workers, every {stat.stride}th interval used")  # fmt: skip
    for k in passes:
        print(
            f"  {k:10s} best {best[k]:6.2f} s  ratio {best[k] / best['decode']:.3f}  "
            f"(median ratio {median[k] / median['decode']:.3f})"
        )
    print(f"  chunk(): {kernel_s / decode_s:.3f} of decoding the same chunks (one thread)")


if __name__ == "__main__":
    main()
