"""Conversion speed and memory: .npy import against zarr-python, text ingestion, peak RSS.

    .venv/bin/python bench/bench_convert.py            # 512 MiB inputs, 1 GiB for memory
    .venv/bin/python bench/bench_convert.py --quick    # 64 MiB inputs, for a smoke test

Data (our invented scenario): a ring of 1000 sites of a ZRP-like sand pile, 4 replicas,
occupations drawn as Poisson(0.8) with one tall pile per snapshot that wanders, uint16.

(a) ``npy``: ``massarc.archive.formats.convert(run.npy, run.zarr)`` (memory-mapped input,
    validation, chunk-aligned appends, commit marker) against the baseline: zarr-python
    writing the same array into an array with the same codecs, chunks, fill value and
    ``write_empty_chunks``, one chunk-aligned slab ``arr[r, a:b] = npy[r, a:b]`` of the
    same size per call. Alternating, best of ``--repeat``; ratio = baseline time / ours.
(b) ``ingest``: the same masses as text (``time m0 m1 ...``, one line per snapshot) piped
    through ``cat FILE | massarc ingest - DST`` in a subprocess (wall time, process start
    included), and the in-process :func:`~massarc.archive.formats.ingest.ingest` call on
    the file; MB/s of text. Baseline in the same run: ``np.loadtxt`` parsing the file.
(c) ``memory``: peak resident set (``VmHWM``) of a subprocess converting ``.npy`` and
    text inputs of two sizes, the larger several times the peak: the peak must not grow
    with the input. Shown next to the resident set after the imports.

Writes ``bench/out/convert.json``.
"""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

OUT = Path(__file__).parent / "out"
WORK = OUT / "convert-data"
SITES, REPLICAS = 1000, 4
META = {
    "model": {"family": "zrp", "b": 3.5, "drift": "asymmetric"},
    "lattice": {
        "sites": [SITES],
        "boundary": "open",
        "open": {"injection": 0.5, "extraction": 0.5},
    },
    "run": {"regime": "transient"},
}
CHILD = r"""
import json, sys
from massarc.archive.formats import convert
def hwm():  # peak resident set of this process image (VmHWM; ru_maxrss survives exec)
    for line in open("/proc/self/status"):
        if line.startswith("VmHWM:"):
            return int(line.split()[1])
base = hwm()
convert(sys.argv[1], sys.argv[2], meta=sys.argv[3], overwrite=True)
print(json.dumps({"imports_kib": base, "peak_kib": hwm()}))
"""


def make_npy(path: Path, mib: int, seed: int = 0) -> Path:
    """A (replica, time, site) uint16 .npy of about ``mib`` MiB, written slab by slab."""
    if path.exists():
        return path
    snapshots = max(1, mib * 2**20 // (REPLICAS * SITES * 2))
    rng = np.random.default_rng(seed)
    out = np.lib.format.open_memmap(
        path, mode="w+", dtype=np.uint16, shape=(REPLICAS, snapshots, SITES)
    )
    step = 4096
    for r in range(REPLICAS):
        for a in range(0, snapshots, step):
            b = min(a + step, snapshots)
            block = rng.poisson(0.8, (b - a, SITES)).astype(np.uint16)
            pile = (np.arange(a, b) // 50 + 97 * r) % SITES
            block[np.arange(b - a), pile] += 300
            out[r, a:b] = block
    out.flush()
    del out
    return path


def make_text(npy: Path, path: Path) -> Path:
    """The masses of ``npy`` as the text format, replica after replica."""
    if path.exists():
        return path
    arr = np.load(npy, mmap_mode="r")
    with open(path, "w") as f:
        for r in range(arr.shape[0]):
            f.write(f"# replica {r}\n")
            for a in range(0, arr.shape[1], 2048):
                block = np.asarray(arr[r, a : a + 2048])
                f.write(
                    "".join(
                        f"{float(a + i)!r} " + " ".join(map(str, row)) + "\n"
                        for i, row in enumerate(block.tolist())
                    )
                )
    return path


def baseline_zarr(npy: Path, dst: Path) -> float:
    """zarr-python writing the array as massarc lays it out (codecs, chunks, fill)."""
    import zarr

    from massarc.archive.formats._arrays import BATCH_BYTES
    from massarc.archive.layout import chunk_snapshots, codecs, sentinel

    arr = np.load(npy, mmap_mode="r")
    dt = arr.dtype
    _, n, v = arr.shape
    tc = chunk_snapshots((v,), dt, n)
    step = tc * max(1, BATCH_BYTES // (tc * v * dt.itemsize))  # the slab massarc reads
    shutil.rmtree(dst, ignore_errors=True)
    t0 = time.perf_counter()
    z = zarr.create_array(
        str(dst),
        shape=arr.shape,
        chunks=(1, tc, v),
        dtype=dt,
        fill_value=sentinel(dt),
        compressors=codecs(dt),
        dimension_names=("replica", "time", "site"),
        config={"write_empty_chunks": True},
        zarr_format=3,
    )
    for r in range(arr.shape[0]):
        for a in range(0, n, step):
            z[r, a : a + step] = arr[r, a : a + step]
    return time.perf_counter() - t0


def ours(npy: Path, dst: Path, meta: Path) -> float:
    from massarc.archive.formats import convert

    shutil.rmtree(dst, ignore_errors=True)
    t0 = time.perf_counter()
    convert(npy, dst, meta=meta, overwrite=True)
    return time.perf_counter() - t0


def ingest_pipe(text: Path, dst: Path, meta: Path) -> float:
    shutil.rmtree(dst, ignore_errors=True)
    exe = Path(sys.executable).with_name("massarc")
    t0 = time.perf_counter()
    cat = subprocess.Popen(["cat", str(text)], stdout=subprocess.PIPE)
    rc = subprocess.call(
        [str(exe), "ingest", "-", str(dst), "--meta", str(meta), "-q"], stdin=cat.stdout
    )
    cat.stdout.close()
    cat.wait()
    if rc:
        raise SystemExit(f"massarc ingest failed with status {rc}")
    return time.perf_counter() - t0


def ingest_call(text: Path, dst: Path, meta: Path) -> float:
    from massarc.archive.formats.ingest import ingest

    shutil.rmtree(dst, ignore_errors=True)
    t0 = time.perf_counter()
    with open(text, "rb") as f:
        ingest(f, dst, meta=meta)
    return time.perf_counter() - t0


def loadtxt(text: Path) -> float:
    t0 = time.perf_counter()
    np.loadtxt(text, comments="#", dtype=np.float64)
    return time.perf_counter() - t0


def peak(src: Path, dst: Path, meta: Path) -> dict:
    proc = subprocess.run(
        [sys.executable, "-c", CHILD, str(src), str(dst), str(meta)],
        capture_output=True,
        text=True,
        check=True,
    )
    out = json.loads(proc.stdout.strip().splitlines()[-1])
    shutil.rmtree(dst, ignore_errors=True)
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="64 MiB inputs")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    mib = 64 if args.quick else 512
    big_mib = 256 if args.quick else 1024
    WORK.mkdir(parents=True, exist_ok=True)
    meta = WORK / "meta.json"
    meta.write_text(json.dumps(META))
    npy = make_npy(WORK / f"sandpile-{mib}.npy", mib)
    text = make_text(npy, WORK / f"sandpile-{mib}.txt")
    res: dict = {"npy_mib": mib, "text_mib": text.stat().st_size / 2**20}

    base, mine = [], []
    for _ in range(args.repeat):
        base.append(baseline_zarr(npy, WORK / "base.zarr"))
        mine.append(ours(npy, WORK / "ours.zarr", meta))
    res["npy"] = {
        "zarr_s": min(base),
        "massarc_s": min(mine),
        "ratio": min(base) / min(mine),
        "massarc_mib_s": mib / min(mine),
        "zarr_mib_s": mib / min(base),
    }

    size = text.stat().st_size / 1e6
    pipe = min(ingest_pipe(text, WORK / "ing.zarr", meta) for _ in range(args.repeat))
    call = min(ingest_call(text, WORK / "ing.zarr", meta) for _ in range(args.repeat))
    ref = loadtxt(text)
    res["ingest"] = {
        "text_mb": size,
        "pipe_s": pipe,
        "pipe_mb_s": size / pipe,
        "call_s": call,
        "call_mb_s": size / call,
        "loadtxt_s": ref,
        "loadtxt_mb_s": size / ref,
        "ratio_to_loadtxt": ref / call,
    }

    small = make_npy(WORK / f"sandpile-{mib // 4}.npy", mib // 4, seed=2)
    big = make_npy(WORK / f"sandpile-{big_mib}.npy", big_mib, seed=1)
    small_text = make_text(small, WORK / f"sandpile-{mib // 4}.txt")
    res["memory"] = {}
    big_text = text if args.quick else make_text(big, WORK / f"sandpile-{big_mib}.txt")
    for key, inputs in (("npy", (small, big)), ("text", (small_text, big_text))):
        rows = []
        for src in inputs:
            m = peak(src, WORK / "mem.zarr", meta)
            m["input_mib"] = src.stat().st_size / 2**20
            m["input_over_peak"] = m["input_mib"] * 1024 / m["peak_kib"]
            rows.append(m)
        res["memory"][key] = rows
    for p in WORK.glob("*.zarr"):
        shutil.rmtree(p, ignore_errors=True)

    n, i = res["npy"], res["ingest"]
    print(f"{'measure':<44} {'value':>12}")
    print(f"{'npy -> archive, massarc (MiB/s)':<44} {n['massarc_mib_s']:>12.1f}")
    print(f"{'npy -> archive, zarr-python baseline (MiB/s)':<44} {n['zarr_mib_s']:>12.1f}")
    print(f"{'  ratio massarc / baseline (target >= 0.8)':<44} {n['ratio']:>12.2f}")
    print(f"{'text ingest, cat | massarc ingest - (MB/s)':<44} {i['pipe_mb_s']:>12.1f}")
    print(f"{'text ingest, in-process ingest() (MB/s)':<44} {i['call_mb_s']:>12.1f}")
    print(f"{'text, np.loadtxt parse only (MB/s)':<44} {i['loadtxt_mb_s']:>12.1f}")
    for key in ("npy", "text"):
        for m in res["memory"][key]:
            label = f"peak RSS, {key} input of {m['input_mib']:.0f} MiB (MiB)"
            print(
                f"{label:<44} {m['peak_kib'] / 1024:>12.0f}   input = "
                f"{m['input_over_peak']:.1f} x peak; {m['imports_kib'] / 1024:.0f} MiB after "
                "imports"
            )
    OUT.mkdir(exist_ok=True)
    (OUT / "convert.json").write_text(json.dumps(res, indent=2))


if __name__ == "__main__":
    main()
