"""Compression of the default codec chain on a condensed ZRP run, against int32 and against
two entropy estimates of the data, and the cost of each Blosc/zstd level.

    .venv/bin/python bench/bench_compression.py [--sites 1000] [--snapshots 4000]

Writes bench/out/compression.json. The entropy bounds are empirical: H0 is the entropy of
the single-site mass distribution (no context), H1 the entropy of a mass given the same
site's mass at the previous snapshot (a first-order Markov context along time). A coder
that knows only these contexts needs at least H bits per site and snapshot.
"""

from __future__ import annotations

import argparse
import json
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np
import zarr

from massarc.archive import create_run, open_run
from massarc.archive.layout import codecs
from massarc.schema import parse_metadata
from massarc.simulate import simulate, snapshot_times

OUT = Path(__file__).parent / "out"


def entropy_bits(counts: np.ndarray) -> float:
    p = counts[counts > 0] / counts.sum()
    return float(-(p * np.log2(p)).sum())


def conditional_entropy_bits(x: np.ndarray) -> float:
    """H(m_t | m_{t-1}) per site, pooled over sites and replicas (x: replica, time, site)."""
    prev = x[:, :-1].reshape(-1).astype(np.int64)
    cur = x[:, 1:].reshape(-1).astype(np.int64)
    k = int(max(prev.max(), cur.max())) + 1
    joint = np.bincount(prev * k + cur, minlength=k * k).reshape(k, k)
    return entropy_bits(joint.reshape(-1)) - entropy_bits(joint.sum(axis=1))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sites", type=int, default=1000)
    ap.add_argument("--snapshots", type=int, default=4000)
    ap.add_argument("--replicas", type=int, default=2)
    args = ap.parse_args()
    meta = parse_metadata(
        {
            "model": {"family": "zrp", "b": 4.0, "drift": "asymmetric"},
            "lattice": {"sites": [args.sites], "boundary": "periodic"},
            "run": {"regime": "stationary"},
        }
    )
    mass = int(1.5 * args.sites)  # rho = 1.5 > rho_c = 0.5: a condensate holds ~1000
    x = simulate(
        meta,
        snapshot_times(float(args.snapshots), args.snapshots),
        replicas=args.replicas,
        seed=5,
        mass=mass,
        initial="steady-state",
    )
    raw_int32 = x.size * 4
    h0 = entropy_bits(np.bincount(x.reshape(-1)))
    h1 = conditional_entropy_bits(x)
    rows = []
    tmp = Path(tempfile.mkdtemp())
    try:
        for clevel in (1, 3, 5, 9):
            path = tmp / f"c{clevel}.zarr"
            t0 = time.perf_counter()
            with create_run(path, meta, clevel=clevel) as w:
                w.append(np.arange(args.snapshots, dtype=float), x)
            t_write = time.perf_counter() - t0
            run = open_run(path)
            stored = run.stored_bytes()
            t0 = time.perf_counter()
            decoded = sum(block.mass.nbytes for block in run.chunks())
            t_read = time.perf_counter() - t0
            rows.append(
                {
                    "clevel": clevel,
                    "dtype": str(run.dtype),
                    "stored_bytes": stored,
                    "ratio_vs_int32": raw_int32 / stored,
                    "ratio_vs_stored_dtype": run.nbytes / stored,
                    "bits_per_value": 8 * stored / x.size,
                    "write_MB_s": run.nbytes / t_write / 1e6,
                    "decode_MB_s": decoded / t_read / 1e6,
                }
            )
        # the same data through a plain int32 zarr array with the same codecs, for reference
        g = zarr.open_group(tmp / "int32.zarr", mode="w")
        a = g.create_array(
            "m",
            shape=x.shape,
            dtype="int32",
            chunks=(1, 1024, args.sites),
            compressors=codecs(np.dtype("int32")),
        )
        a[:] = x.astype(np.int32)
        int32_stored = a.nbytes_stored()
    finally:
        shutil.rmtree(tmp)
    result = {
        "run": {
            "sites": args.sites,
            "snapshots": args.snapshots,
            "replicas": args.replicas,
            "mass": mass,
            "model": "TASEP-like asymmetric ZRP, u = 1 + 4/k, rho = 1.5",
        },
        "entropy_bits_per_value": {"H0": h0, "H1_time_context": h1},
        "entropy_bound_ratio_vs_int32": {"H0": 32 / h0, "H1": 32 / h1},
        "levels": rows,
        "int32_same_codecs_ratio": raw_int32 / int32_stored,
    }
    OUT.mkdir(exist_ok=True)
    (OUT / "compression.json").write_text(json.dumps(result, indent=2))
    print(f"condensed ZRP, {args.replicas} x {args.snapshots} x {args.sites}, M = {mass}")
    print(
        f"entropy: H0 = {h0:.3f} bits/value (bound {32 / h0:.1f}x vs int32), "
        f"H1 = {h1:.3f} bits/value (bound {32 / h1:.1f}x)"
    )
    print(
        f"{'clevel':>6} {'bits/value':>10} {'vs int32':>9} {'write MB/s':>11} {'decode MB/s':>12}"
    )
    for r in rows:
        print(
            f"{r['clevel']:>6} {r['bits_per_value']:>10.3f} {r['ratio_vs_int32']:>8.1f}x "
            f"{r['write_MB_s']:>11.0f} {r['decode_MB_s']:>12.0f}"
        )
    print(f"int32 array, same codecs: {result['int32_same_codecs_ratio']:.1f}x")


if __name__ == "__main__":
    main()
