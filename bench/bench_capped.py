"""What reading HDF5 and NetCDF in a capped child process costs ``massarc convert``.

    nice -n 10 .venv/bin/python bench/bench_capped.py [--repeat 9]

Times the command ``massarc convert SRC DST`` (a subprocess: wall time, process start
included, the format detected from the content) on a small file (the test fixture
``zrp-ring-1d``: 2 replicas x 5 snapshots x 8 sites) and a 16 MiB one (4 replicas x 2000
snapshots x 1000 sites, uint16, a Poisson(0.8) sand pile of our invented scenario) in
three formats: HDF5 and NetCDF (read in a capped child, archive/formats/_capped.py) and
``.npy`` (read in-process), the baseline of the same run. The three are run in turn,
``--repeat`` times; the median of each is reported with its ratio to ``.npy``.

Before/after a change of the readers: run this once on each version of the code, one after
the other (e.g. ``git stash``), and compare the ratios. Writes ``bench/out/capped.json``.
"""

from __future__ import annotations

import argparse
import json
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

OUT = Path(__file__).parent / "out"
WORK = OUT / "capped-data"
ROOT = Path(__file__).resolve().parent.parent
FIXTURE = ROOT / "tests" / "fixtures" / "v1.1" / "zrp-ring-1d.zarr"
MASSARC = str(Path(sys.executable).with_name("massarc"))
SUFFIX = {"hdf5": ".h5", "netcdf": ".nc", "npy": ".npy"}


def _inputs() -> dict[str, dict[str, Path]]:
    """``{size: {format: path}}``, written once."""
    from massarc.archive import open_run
    from massarc.archive.formats import convert

    WORK.mkdir(parents=True, exist_ok=True)
    large = WORK / "large.zarr"
    if not large.exists():
        rng = np.random.default_rng(7)
        mass = rng.poisson(0.8, size=(4, 2000, 1000)).astype(np.uint16)
        np.save(WORK / "large-src.npy", mass)
        meta = WORK / "large.json"
        meta.write_text(
            json.dumps(
                {
                    "model": {"family": "zrp", "b": 3.5, "drift": "asymmetric"},
                    "lattice": {"sites": [1000], "boundary": "periodic"},
                    "run": {"regime": "transient"},
                }
            )
        )
        convert(WORK / "large-src.npy", large, meta=meta)
    out: dict[str, dict[str, Path]] = {}
    for size, run in (("small", FIXTURE), ("16 MiB", large)):
        stem = "small" if size == "small" else "large"
        meta = WORK / f"{stem}-meta.json"  # .npy carries none
        meta.write_text(json.dumps(open_run(run).meta.model_dump(mode="json")))
        for name, suffix in SUFFIX.items():
            path = WORK / f"{stem}{suffix}"
            if not path.exists():
                convert(run, path, dst_format=name)
            out.setdefault(size, {})[name] = path
    return out


def _time(src: Path) -> float:
    dst = WORK / "out.zarr"
    shutil.rmtree(dst, ignore_errors=True)
    meta = ["--meta", str(src.with_name(f"{src.stem}-meta.json"))] if src.suffix == ".npy" else []
    t0 = time.perf_counter()
    res = subprocess.run(
        [MASSARC, "convert", str(src), str(dst), *meta], capture_output=True, text=True
    )
    took = time.perf_counter() - t0
    if res.returncode != 0:
        raise SystemExit(f"massarc convert {src} failed: {res.stderr.strip()}")
    return took


def main(argv: list[str]) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=9)
    args = ap.parse_args(argv)
    inputs = _inputs()
    result: dict[str, dict[str, dict[str, float]]] = {}
    for size, paths in inputs.items():
        times: dict[str, list[float]] = {name: [] for name in paths}
        for _ in range(args.repeat):
            for name, path in paths.items():
                times[name].append(_time(path))
        base = statistics.median(times["npy"])
        result[size] = {
            name: {"median_s": statistics.median(t), "ratio_to_npy": statistics.median(t) / base}
            for name, t in times.items()
        }
        for name, row in result[size].items():
            print(f"{size:>7} {name:<7} {row['median_s']:.3f} s  x{row['ratio_to_npy']:.2f} npy")
    (OUT / "capped.json").write_text(json.dumps(result, indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
