"""The audit's speed and memory against plain zarr-python decoding of the same chunks.

    .venv/bin/python bench/bench_check.py            # 0.25 and 1 GiB runs (first call builds them)
    .venv/bin/python bench/bench_check.py --quick    # 16 and 64 MiB, for a smoke test

Data: a condensed totally asymmetric ZRP (u(k) = 1 + b/k, b = 4, so rho_c = 0.5) on a ring
of 2000 sites holding 1200 units (rho = 0.6: a condensate of about 200), 4 replicas started
from the exact steady state, one snapshot per unit time; written by ``massarc.simulate``
(uint16, default codecs) once and cached under ``bench/out/check-data/``.

Measured in one process, alternating, ``--repeat`` times; the fastest of the repeats is
reported (the least disturbed by other load on the machine; medians are in the JSON):

* ``zarr``: the baseline. zarr-python decodes every chunk, one chunk-aligned slab
  ``mass[r, start:stop]`` per call, from a pool of as many threads as the audit uses;
* ``read``: the audit's own pass with no statistic (reading and decoding only);
* ``basic``: ``audit`` with the basic checks (schema, integrity, time-order, nonnegative,
  conservation);
* ``all``: ``audit`` with every registered check (the default of ``massarc check``);
* ``all-pass``: the single pass inside ``all`` (its time less the checks' own analyses):
  the statistics every registered check needs, from one read of each chunk.

Peak memory: each pass again in a fresh subprocess: the peak resident set (``VmHWM``) and
the resident set after the imports (psutil). Writes ``bench/out/check.json``.
"""

from __future__ import annotations

import argparse
import json
import resource
import statistics
import subprocess
import sys
import time
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
from _common import reusable

OUT = Path(__file__).parent / "out"
DATA = OUT / "check-data"
SITES, MASS, REPLICAS, B = 2000, 1200, 4, 4.0
BASIC = ["schema", "integrity", "time-order", "nonnegative", "conservation"]


def build(gib: float, mass: int | None = None, sites: tuple[int, ...] = (SITES,)) -> Path:
    """The cached run of ``gib`` GiB of uncompressed masses (built on first use); ``mass``
    other than the condensed default (density 0.6; a fluid run at mass 600, say) and a
    lattice other than the 2000-site ring (``sites``: one length per axis, each axis a
    ring) are named in the file."""
    from massarc.schema import parse_metadata
    from massarc.simulate import simulate, snapshot_times

    volume = int(np.prod(sites))
    per_snapshot = volume * 2 * REPLICAS  # uint16
    n = round(gib * 2**30 / per_snapshot)
    name = "x".join(str(s) for s in sites)
    default_mass = MASS * volume // SITES  # the condensed density, 0.6
    mass = default_mass if mass is None else mass
    tail = "" if mass == default_mass else f"-m{mass}"
    path = DATA / f"zrp-{name}-{n}{tail}.zarr"
    if reusable(path, n):
        return path
    meta = parse_metadata(
        {
            "model": {"family": "zrp", "b": B, "drift": "asymmetric"},
            "lattice": {"sites": list(sites), "boundary": "periodic"},
            "run": {"regime": "stationary", "total_mass": mass},
        }
    )
    print(f"building {path.name} ({gib:g} GiB, {n} snapshots x {REPLICAS} replicas) ...")
    t0 = time.perf_counter()
    simulate(
        meta,
        snapshot_times(float(n - 1), n),
        replicas=REPLICAS,
        seed=2024,
        initial="steady-state",
        location=path,
        overwrite=True,
    )
    print(f"  built in {time.perf_counter() - t0:.0f} s")
    return path


def zarr_pass(path: Path, workers: int) -> int:
    """Baseline: zarr-python decodes every chunk-aligned slab from a thread pool."""
    from massarc.archive import open_run

    run = open_run(path)
    arr = run.mass
    slabs = [(r.replica, r.start, r.stop) for r in run.chunk_refs()]

    def read(s: tuple[int, int, int]) -> int:
        return int(np.asarray(arr[s[0], s[1] : s[2]]).nbytes)

    with ThreadPoolExecutor(workers) as pool:
        return sum(pool.map(read, slabs))


def read_pass(path: Path, workers: int) -> int:
    from massarc.archive import open_run
    from massarc.archive.scan import scan

    res = scan(open_run(path), {}, workers=workers)
    assert not res.faults, res.faults
    return res.bytes_decoded


def audit_pass(path: Path, workers: int, checks: list[str] | None) -> tuple[str, float]:
    """Verdicts, and the seconds of the single pass (the audit less its checks' analyses)."""
    from massarc.validators import audit

    report = audit([path], checks=checks, workers=workers)
    run = report.runs[0]
    verdicts = ", ".join(f"{c.id}={c.status}" for c in run.checks)
    return verdicts, run.seconds - sum(run.check_seconds.values())


def _warm(path: Path, workers: int) -> None:
    """Page cache, numba's compiled kernels and imports: outside the timings."""
    for f in path.rglob("*"):
        if f.is_file():
            f.read_bytes()
    audit_pass(path, workers, None)


def report_child(work: Callable[[], object]) -> None:
    """Time ``work()`` in this (fresh) process, after the caller's imports; print seconds,
    the resident set after the imports and the peak as JSON."""
    import psutil

    base = psutil.Process().memory_info().rss
    t0 = time.perf_counter()
    work()
    seconds = time.perf_counter() - t0
    print(json.dumps({"seconds": seconds, "rss_after_imports": base, "peak_rss": _peak_rss()}))


def child(kind: str, path: Path, workers: int) -> None:
    """One audit in this (fresh) process; print seconds and peak memory as JSON."""
    import massarc.validators  # noqa: F401 - the imports' share of memory

    if kind == "zarr":
        report_child(lambda: zarr_pass(path, workers))
    else:
        report_child(lambda: audit_pass(path, workers, BASIC if kind == "basic" else None))


def _peak_rss() -> int:
    """Peak resident set of this process: VmHWM (reset by exec, unlike ru_maxrss, which
    Linux carries over from the parent that forked us)."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) * 1024
    except OSError:  # pragma: no cover - not Linux
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def _memory(kind: str, path: Path, workers: int, script: str = __file__) -> dict:
    """Seconds and peak memory of pass ``kind`` run by ``script --child`` in a fresh process."""
    out = subprocess.run(
        [sys.executable, script, "--child", kind, str(path), "--workers", str(workers)],
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="16 and 64 MiB instead of 0.25, 1 GiB")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--workers", type=int, default=None)
    ap.add_argument("--child", nargs=2, metavar=("KIND", "PATH"), help=argparse.SUPPRESS)
    args = ap.parse_args()
    from massarc.archive.scan import default_workers

    workers = args.workers or default_workers()
    if args.child:
        child(args.child[0], Path(args.child[1]), workers)
        return
    sizes = [1 / 64, 1 / 16] if args.quick else [0.25, 1.0]
    rows = []
    for gib in sizes:
        path = build(gib)
        from massarc.archive import open_run

        run = open_run(path)
        nbytes = run.nbytes
        _warm(path, workers)
        times: dict[str, list[float]] = {k: [] for k in ("zarr", "read", "basic", "all")}
        times["all-pass"] = []
        verdicts = ""
        for _ in range(args.repeat):
            for kind in ("zarr", "read", "basic", "all"):
                t0 = time.perf_counter()
                if kind == "zarr":
                    assert zarr_pass(path, workers) == nbytes
                elif kind == "read":
                    assert read_pass(path, workers) == nbytes
                else:
                    v, pass_seconds = audit_pass(path, workers, BASIC if kind == "basic" else None)
                    if kind == "all":
                        verdicts = v
                        times["all-pass"].append(pass_seconds)
                times[kind].append(time.perf_counter() - t0)
        best = {k: min(v) for k, v in times.items()}
        med = {k: statistics.median(v) for k, v in times.items()}
        mem = {k: _memory(k, path, workers) for k in ("zarr", "basic", "all")}
        rows.append(
            {
                "gib": gib,
                "bytes": nbytes,
                "stored_bytes": run.stored_bytes(),
                "chunks": len(run.chunk_refs()),
                "workers": workers,
                "seconds": best,
                "median_seconds": med,
                "all_seconds": times,
                "mb_per_s": {k: nbytes / v / 1e6 for k, v in best.items()},
                "ratio_to_zarr": {k: v / best["zarr"] for k, v in best.items()},
                "median_ratio_to_zarr": {k: v / med["zarr"] for k, v in med.items()},
                "memory": mem,
                "verdicts": verdicts,
            }
        )
    OUT.mkdir(parents=True, exist_ok=True)
    (OUT / "check.json").write_text(json.dumps({"runs": rows}, indent=2) + "\n")
    print(f"\nworkers: {workers}; best of {args.repeat}; ratio = time / zarr baseline time")
    print(
        f"{'size':>8} {'pass':>6} {'MB/s':>7} {'ratio':>6} {'median':>7} "
        f"{'peak RSS MB':>12} {'imports MB':>11}"
    )
    for row in rows:
        for kind in ("zarr", "read", "basic", "all", "all-pass"):
            m = row["memory"].get(kind)
            peak = f"{m['peak_rss'] / 1e6:12.0f}" if m else f"{'':>12}"
            base = f"{m['rss_after_imports'] / 1e6:11.0f}" if m else f"{'':>11}"
            print(
                f"{row['gib']:>7.3g}G {kind:>6} {row['mb_per_s'][kind]:7.0f} "
                f"{row['ratio_to_zarr'][kind]:6.2f} {row['median_ratio_to_zarr'][kind]:7.2f} "
                f"{peak} {base}"
            )
        print(f"  verdicts: {row['verdicts']}")
    print(f"wrote {OUT / 'check.json'}")


if __name__ == "__main__":
    main()
