"""Cost of the statistics behind the ``drift`` and ``independence`` checks, as a ratio to
plain decoding of the same chunks, measured in the same process.

    nice -n 10 .venv/bin/python bench/bench_drift_independence.py            # L = 5000 run
    nice -n 10 .venv/bin/python bench/bench_drift_independence.py --quick    # L = 1000, small
    nice -n 10 .venv/bin/python bench/bench_drift_independence.py --gib 1    # + a 1 GiB run

Data: a driven ZRP (u(k) = 1 + 4/k, rho = 0.4, fluid) on a ring of ``--sites`` sites
(default 5000), 4 replicas, ``--snapshots`` snapshots (default 16000) one hop time apart,
from the exact steady state; written once by ``massarc.simulate`` (uint8 or uint16,
default codecs) and cached under ``bench/out/drift-independence-data/``. ``--gib`` adds
the 1 GiB condensed ZRP run of ``bench/bench_check.py`` (built there if missing).

Passes, alternating, ``--repeat`` times (the fastest of each is reported):

* ``read``: the single pass with no statistic (chunk files read and decoded): the baseline;
* ``snapshots``: the ``snapshots`` statistic alone (every default audit runs it);
* ``spacetime``, ``profiles``: each new statistic alone;
* ``fingerprints``: with ``snapshots`` (it takes the largest mass from that loop, as in
  an audit), reported as the increment over ``snapshots`` alone;
* ``audit-before`` / ``audit-after``: the single pass of a default audit without and with
  the ``drift`` and ``independence`` checks (the statistics of every registered check);
* ``zarr``: the baseline of ``bench_check.py`` (zarr-python decodes every chunk);
* ``check-before`` / ``check-after``: the whole default audit (``audit`` with every
  registered check, the pass and every check's own analysis) without and with the two
  checks, and the seconds of each new check's own analysis.

Ratios: (pass - read) / read is the statistic's cost in units of decoding; the audit
passes are also given as a ratio to ``read``, the whole audits as a ratio to ``zarr``
(``bench_check.py``'s "all"). Writes ``bench/out/drift_independence.json``.
"""

from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

import numpy as np
from _common import reusable

OUT = Path(__file__).parent / "out"
DATA = OUT / "drift-independence-data"
NEW = ("drift", "independence")


def build(sites: int, snapshots: int) -> Path:
    from massarc.schema import parse_metadata
    from massarc.simulate import simulate

    path = DATA / f"zrp-{sites}-{snapshots}.zarr"
    if reusable(path, snapshots):
        return path
    meta = parse_metadata(
        {
            "model": {"family": "zrp", "b": 4.0, "drift": "asymmetric", "right_probability": 0.8},
            "lattice": {"sites": [sites], "boundary": "periodic"},
            "run": {"regime": "stationary"},
        }
    )
    print(f"building {path.name} ...", flush=True)
    t0 = time.perf_counter()
    simulate(
        meta,
        np.arange(snapshots, dtype=np.float64),
        replicas=4,
        seed=77,
        mass=int(0.4 * sites),
        initial="steady-state",
        location=path,
        overwrite=True,
    )
    print(f"  built in {time.perf_counter() - t0:.0f} s", flush=True)
    return path


def _statistic_classes() -> dict[str, type]:
    """Every statistic a registered check reads, by name: the built-ins and those the
    checks bring themselves (``spacetime``, ``fingerprints``)."""
    from massarc.validators import available_checks

    out: dict[str, type] = {}
    for cls in available_checks().values():
        for name in cls.needs:
            out.setdefault(name, cls.statistic(name))
    return out


def _stats(run, names: list[str]) -> dict:
    classes = _statistic_classes()
    return {n: classes[n](run) for n in names}


def _pass(path: Path, names: list[str]) -> float:
    from massarc.archive import open_run
    from massarc.archive.scan import scan

    run = open_run(path)
    stats = _stats(run, names)
    t0 = time.perf_counter()
    res = scan(run, stats)
    dt = time.perf_counter() - t0
    assert not res.errors, res.errors
    return dt


def _before_checks() -> list[str]:
    """Every registered check but the two new ones: the default audit before them."""
    from massarc.validators import available_checks

    return [cid for cid in available_checks() if cid not in NEW]


def _audit_names(with_new: bool) -> list[str]:
    from massarc.validators import available_checks

    names: list[str] = []
    for cid, cls in available_checks().items():
        if not with_new and cid in NEW:
            continue
        for name in cls.needs:
            if name not in names:
                names.append(name)
    return names


def _zarr(path: Path) -> float:
    """The baseline of ``bench_check.py``: zarr-python decodes every chunk-aligned slab."""
    from bench_check import zarr_pass

    from massarc.archive.scan import default_workers

    t0 = time.perf_counter()
    zarr_pass(path, default_workers())
    return time.perf_counter() - t0


def _audit(path: Path, checks: list[str] | None) -> tuple[float, dict[str, float]]:
    """Seconds of a whole audit (``checks`` None: every registered check) and the seconds of
    each check's own analysis."""
    from massarc.validators import audit

    t0 = time.perf_counter()
    report = audit([path], checks=checks)
    seconds = time.perf_counter() - t0
    return seconds, dict(report.runs[0].check_seconds)


def measure(path: Path, repeat: int) -> dict:
    passes = {
        "read": [],
        "snapshots": ["snapshots"],
        "spacetime": ["spacetime"],
        "profiles": ["profiles"],
        "snapshots+fingerprints": ["snapshots", "fingerprints"],
        "audit-before": _audit_names(False),
        "audit-after": _audit_names(True),
    }
    audits = {"check-before": _before_checks(), "check-after": None}
    for names in passes.values():  # warm: page cache, numba, imports
        _pass(path, names)
    _audit(path, None)
    times: dict[str, list[float]] = {k: [] for k in (*passes, "zarr", *audits)}
    analysis: dict[str, list[float]] = {cid: [] for cid in NEW}
    for _ in range(repeat):
        for key, names in passes.items():
            times[key].append(_pass(path, names))
        times["zarr"].append(_zarr(path))
        for key, checks in audits.items():
            seconds, per_check = _audit(path, checks)
            times[key].append(seconds)
            if checks is None:
                for cid in NEW:
                    analysis[cid].append(per_check[cid])
    best = {k: min(v) for k, v in times.items()}
    read = best["read"]
    cost = {
        "snapshots": (best["snapshots"] - read) / read,
        "spacetime": (best["spacetime"] - read) / read,
        "profiles": (best["profiles"] - read) / read,
        "fingerprints": (best["snapshots+fingerprints"] - best["snapshots"]) / read,
        "audit-before": best["audit-before"] / read,
        "audit-after": best["audit-after"] / read,
    }
    ratio = {k: best[k] / best["zarr"] for k in audits}
    checks = {cid: min(v) for cid, v in analysis.items()}
    return {
        "seconds": best,
        "all_seconds": times,
        "cost_over_read": cost,
        "check_over_zarr": ratio,
        "analysis_seconds": checks,
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sites", type=int, default=5000)
    ap.add_argument("--snapshots", type=int, default=16000)
    ap.add_argument("--quick", action="store_true", help="1000 sites, 4000 snapshots")
    ap.add_argument("--gib", type=float, default=0.0, help="also the bench_check run of this size")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    sites, snaps = (1000, 4000) if args.quick else (args.sites, args.snapshots)
    runs = {f"zrp L={sites} T={snaps}": build(sites, snaps)}
    if args.gib:
        from bench_check import build as build_check  # its condensed ZRP run

        runs[f"bench_check {args.gib:g} GiB"] = build_check(args.gib)
    rows = {}
    for name, path in runs.items():
        from massarc.archive import open_run

        run = open_run(path)
        row = measure(path, args.repeat)
        row.update({"bytes": run.nbytes, "chunks": len(run.chunk_refs())})
        rows[name] = row
        read = row["seconds"]["read"]
        print(f"\n{name}: {run.nbytes / 2**20:.0f} MiB decoded, read {read:.3f} s")
        for k, v in row["cost_over_read"].items():
            unit = "x read" if k.startswith("audit") else "of read"
            text = f"{v:.3f}" if unit == "x read" else f"{100 * v:+.1f} %"
            print(f"  {k:14s} {text} {unit}")
        print(f"  zarr decode    {row['seconds']['zarr']:.3f} s")
        for k, v in row["check_over_zarr"].items():
            print(f"  {k:14s} {v:.3f} x zarr ({row['seconds'][k]:.3f} s)")
        for k, v in row["analysis_seconds"].items():
            print(f"  {k + ' analysis':26s} {v:.3f} s")
    OUT.mkdir(parents=True, exist_ok=True)
    (OUT / "drift_independence.json").write_text(json.dumps(rows, indent=2) + "\n")
    print(f"wrote {OUT / 'drift_independence.json'}")


if __name__ == "__main__":
    main()
