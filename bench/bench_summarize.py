"""``massarc summarize`` against plain zarr-python decoding of the same chunks.

    .venv/bin/python bench/bench_summarize.py            # 0.25, 1 and 4 GiB runs (built on
                                                         # first use; shared with bench_check)
    .venv/bin/python bench/bench_summarize.py --quick    # 16 and 64 MiB, for a smoke test
    .venv/bin/python bench/bench_summarize.py --sizes 1  # chosen sizes, in GiB

Data: the runs of ``bench_check.py`` (condensed totally asymmetric ZRP, b = 4, 2000 sites,
density 0.6, 4 replicas from the exact steady state, uint16), cached under
``bench/out/check-data/``.

Measured in one process, alternating, ``--repeat`` times, fastest kept (medians in the
JSON):

* ``zarr``: the baseline, zarr-python decoding every chunk-aligned slab from as many
  threads as the pass uses (``bench_check.zarr_pass``);
* ``summarize``: ``massarc.summarize(run, force=True)`` with every default: the single
  pass (snapshots, histogram, condensates, correlation at 64 probes), the stationary
  window, replica statistics and bootstrap intervals, growth exponents, extreme-value
  fits, the condensate against theory, and the atomic write of the group;
* ``pass``: the single pass inside ``summarize`` alone;
* ``audit``: ``massarc check``'s default audit of the same run (``bench_check.audit_pass``),
  for context: on a loaded machine every ratio to zarr grows, and summarize against the
  audit says how it compares with what the audit's own target was measured on.

Peak memory (VmHWM) of ``zarr`` and ``summarize`` in fresh subprocesses, next to the
resident set after the imports. Writes ``bench/out/summarize.json``.
"""

from __future__ import annotations

import argparse
import json
import statistics
import time
from pathlib import Path

from bench_check import OUT, _memory, audit_pass, build, report_child, zarr_pass


def summarize_once(path: Path, workers: int) -> float:
    """One full default summarize; returns the seconds of its single pass."""
    from massarc.archive import open_run
    from massarc.summaries import summarize_run

    done = summarize_run(open_run(path), force=True, workers=workers)
    assert done.pass_seconds is not None
    return done.pass_seconds


def child(kind: str, path: Path, workers: int) -> None:
    """One pass in this (fresh) process; print seconds and peak memory as JSON."""
    from massarc import summaries, validators  # noqa: F401 - the imports' share of memory

    if kind == "zarr":
        report_child(lambda: zarr_pass(path, workers))
    else:
        report_child(lambda: summarize_once(path, workers))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="16 and 64 MiB instead of 0.25, 1, 4 GiB")
    ap.add_argument("--sizes", type=str, default="0.25,1,4", help="run sizes in GiB")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--workers", type=int, default=None)
    ap.add_argument("--child", nargs=2, metavar=("KIND", "PATH"), help=argparse.SUPPRESS)
    args = ap.parse_args()
    from massarc.archive import open_run
    from massarc.archive.scan import default_workers

    workers = args.workers or default_workers()
    if args.child:
        child(args.child[0], Path(args.child[1]), workers)
        return
    rows = []
    sizes = [1 / 64, 1 / 16] if args.quick else [float(x) for x in args.sizes.split(",")]
    for gib in sizes:
        path = build(gib)
        run = open_run(path)
        for f in path.rglob("*"):  # page cache, numba kernels, imports: outside the timings
            if f.is_file():
                f.read_bytes()
        summarize_once(path, workers)
        times: dict[str, list[float]] = {"zarr": [], "summarize": [], "pass": [], "audit": []}
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            assert zarr_pass(path, workers) == run.nbytes
            times["zarr"].append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            audit_pass(path, workers, None)
            times["audit"].append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            times["pass"].append(summarize_once(path, workers))
            times["summarize"].append(time.perf_counter() - t0)
        best = {k: min(v) for k, v in times.items()}
        med = {k: statistics.median(v) for k, v in times.items()}
        s = open_run(path).summaries
        rows.append(
            {
                "gib": gib,
                "bytes": run.nbytes,
                "snapshots": run.n_snapshots,
                "workers": workers,
                "seconds": best,
                "median_seconds": med,
                "all_seconds": times,
                "ratio_to_zarr": {k: v / best["zarr"] for k, v in best.items()},
                "median_ratio_to_zarr": {k: v / med["zarr"] for k, v in med.items()},
                "memory": {k: _memory(k, path, workers, __file__) for k in ("zarr", "summarize")},
                "window": s.provenance["window"],
                "extremes_best": s.provenance["extremes"]["best"],
            }
        )
    OUT.mkdir(parents=True, exist_ok=True)
    (OUT / "summarize.json").write_text(json.dumps({"runs": rows}, indent=2) + "\n")
    print(f"\nworkers: {workers}; best of {args.repeat}; ratio = time / zarr baseline time")
    print(f"{'size':>8} {'what':>10} {'seconds':>8} {'ratio':>6} {'median':>7} {'peak RSS MB':>12}")
    for row in rows:
        for kind in ("zarr", "pass", "summarize", "audit"):
            m = row["memory"].get(kind)
            peak = f"{m['peak_rss'] / 1e6:12.0f}" if m else f"{'':>12}"
            print(
                f"{row['gib']:>7.3g}G {kind:>10} {row['seconds'][kind]:8.2f} "
                f"{row['ratio_to_zarr'][kind]:6.2f} {row['median_ratio_to_zarr'][kind]:7.2f} {peak}"
            )
        imports = row["memory"]["summarize"]["rss_after_imports"] / 1e6
        versus = row["seconds"]["summarize"] / row["seconds"]["audit"]
        print(
            f"  summarize / audit: {versus:.2f}; after imports: {imports:.0f} MB; "
            f"window: {row['window']['reason']}"
        )
    print(f"wrote {OUT / 'summarize.json'}")


if __name__ == "__main__":
    main()
