"""The performance record: ``massarc check``, ``summarize`` and ``convert`` end to end, against
bare zarr-python decoding (or encoding) of the same data, measured in the same run; writes
docs/performance.md (``make bench``).

    .venv/bin/python bench/bench_performance.py            # 1 GiB runs, 4 GiB for memory
    .venv/bin/python bench/bench_performance.py --quick    # 1/16 and 1/4 GiB, for development

Every command runs as a fresh process, timed from the parent (start-up included), and its
peak resident set is the ``ru_maxrss`` that ``os.wait4`` reports for that child alone:

* ``decode`` (the baseline of ``check`` and ``summarize``): ``python -c`` importing
  zarr-python and decoding every chunk-aligned slab of the mass array from a pool of as
  many threads as the audit uses;
* ``check``: ``massarc check RUN --as json`` with every default check;
* ``conservation``: ``massarc check RUN --only conservation``: the least audit that still
  reads and reduces every value (the floor any audit of the whole run pays);
* ``summarize``: ``massarc summarize RUN --force`` with every default;
* ``encode`` (the baseline of ``convert``): ``python -c`` importing zarr-python and writing
  the run's masses from a ``.npy`` file into an array with massarc's codecs and chunks;
* ``convert``: ``massarc convert RUN.npy OUT.zarr --meta META`` (the same ``.npy``);
* start-up: ``python -c pass``, ``python -c "import zarr"``, ``massarc --version`` and
  ``massarc check --list``.

Runs (built once with ``massarc.simulate``, cached under ``bench/out/check-data/``): a
totally asymmetric ZRP, u(k) = 1 + 4/k (rho_c = 1/2), 4 replicas from the exact steady
state, one snapshot per unit time, uint16, every axis a ring: *condensed* at density 0.6
(the run of ``bench_check.py``) and *fluid* at density 0.3 on 2000 sites, and the condensed
density on a 50 x 40 torus (2D), all 1 GiB. Memory is also measured as the condensed run
grows in snapshots (2000 sites; 1/4 and 4 times the main run) and in sites (500 and 8000
sites, as many snapshots as the main run). On the 2000-site runs, ``decode``, ``check``
and ``summarize`` are repeated with one thread (scaling), and every main run gets its
empirical entropy (``bench_compression``'s H0 and H1) beside its compression ratio.

The machine is shared: each measurement is the fastest of ``--repeat`` (alternating
kinds), and the load average is written beside the numbers.
"""

from __future__ import annotations

import argparse
import datetime
import json
import math
import os
import platform
import shutil
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import bench_check
import numpy as np
from bench_compression import conditional_entropy_bits, entropy_bits

HERE = Path(__file__).parent
OUT = HERE / "out"
DOC = HERE.parent / "docs" / "performance.md"
MASSARC = str(Path(sys.executable).with_name("massarc"))
SITES, B = bench_check.SITES, bench_check.B
DENSITY = {"condensed": 0.6, "fluid": 0.3}
#: The commands of the record, in the order of its tables.
KINDS = ("decode", "conservation", "check", "summarize", "encode", "convert")
#: The folders of massarc's code (compiled to bytecode before timing, as an install does).
CODE = ("schema", "archive", "validators", "summaries", "simulate", "massarc")

DECODE = """
import sys
from concurrent.futures import ThreadPoolExecutor
import zarr
arr = zarr.open_group(sys.argv[1], mode="r")["mass"]
step = arr.chunks[1]
slabs = [(r, a) for r in range(arr.shape[0]) for a in range(0, arr.shape[1], step)]
def read(s):
    return arr[s[0], s[1] : s[1] + step].nbytes
with ThreadPoolExecutor(int(sys.argv[2])) as pool:
    print(sum(pool.map(read, slabs)))
"""

ENCODE = """
import sys
import numpy as np
import zarr
from zarr.codecs import BloscCodec, BloscShuffle, Crc32cCodec
src = np.load(sys.argv[1], mmap_mode="r")
tc = int(sys.argv[3])
z = zarr.create_array(
    sys.argv[2], shape=src.shape, chunks=(1, tc, *src.shape[2:]), dtype=src.dtype,
    fill_value=np.iinfo(src.dtype).max, zarr_format=3,
    compressors=[BloscCodec(cname="zstd", clevel=5, shuffle=BloscShuffle.bitshuffle),
                 Crc32cCodec()],
    config={"write_empty_chunks": True},
)
for r in range(src.shape[0]):
    for a in range(0, src.shape[1], 8 * tc):
        z[r, a : a + 8 * tc] = src[r, a : a + 8 * tc]
"""


@dataclass(frozen=True)
class Spec:
    """One run of the record: its phase, size, lattice and what it is measured for.

    ``role``: ``"main"`` (every command, ``--repeat`` times, phases, one thread against
    all, entropy bound), ``"snapshots"`` or ``"sites"`` (memory: the run grows in that).
    """

    kind: str  # "condensed" or "fluid": the density of DENSITY
    gib: float
    sites: tuple[int, ...] = (SITES,)
    role: str = "main"

    @property
    def mass(self) -> int:
        return round(DENSITY[self.kind] * math.prod(self.sites))

    @property
    def label(self) -> str:
        lattice = "x".join(str(n) for n in self.sites)
        return f"{self.kind}, {lattice} sites"


def build(spec: Spec) -> Path:
    """The cached run of ``spec`` (``bench_check``'s builder: the condensed 2000-site run
    is the one it measures)."""
    return bench_check.build(spec.gib, spec.mass, spec.sites)


def meta_dict(spec: Spec) -> dict:
    return {
        "model": {"family": "zrp", "b": B, "drift": "asymmetric"},
        "lattice": {"sites": list(spec.sites), "boundary": "periodic"},
        "run": {"regime": "stationary", "total_mass": spec.mass},
    }


#: Runs one command and reports its wall time, exit status and ru_maxrss. A child inherits
#: the ru_maxrss of the process that forks it (Linux keeps the old image's peak across
#: exec), so the commands are started by this small fresh process, not by the bench itself.
LAUNCH = """
import json, os, subprocess, sys, time
t0 = time.perf_counter()
proc = subprocess.Popen(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
err = proc.stderr.read().decode(errors="replace")
_, status, usage = os.wait4(proc.pid, 0)
seconds = time.perf_counter() - t0
code = os.waitstatus_to_exitcode(status)
peak = usage.ru_maxrss * 1024
print(json.dumps({"seconds": seconds, "status": code, "peak": peak, "err": err[-2000:]}))
"""


def timed(cmd: list[str]) -> tuple[float, int, int]:
    """Wall seconds, exit status and peak resident set (bytes) of ``cmd`` as one child."""
    out = subprocess.run(
        [sys.executable, "-c", LAUNCH, *cmd], capture_output=True, text=True, check=True
    )
    res = json.loads(out.stdout.strip().splitlines()[-1])
    if res["status"] not in (0, 1):  # check exits 1 when a check fails: still timed
        raise RuntimeError(f"{' '.join(cmd)}: exit {res['status']}\n{res['err']}")
    return res["seconds"], res["status"], res["peak"]


def export_npy(path: Path, spec: Spec) -> tuple[Path, Path, int]:
    """The run's masses as ``.npy`` beside it (made once), its metadata file, chunk length."""
    import zarr

    arr = zarr.open_group(str(path), mode="r")["mass"]
    npy = path.with_suffix(".npy")
    meta = path.with_suffix(".meta.json")
    meta.write_text(json.dumps(meta_dict(spec)))
    if not npy.exists() or npy.stat().st_size < arr.nbytes:
        out = np.lib.format.open_memmap(npy, mode="w+", dtype=arr.dtype, shape=arr.shape)
        step = arr.chunks[1]
        for r in range(arr.shape[0]):
            for a in range(0, arr.shape[1], step):
                out[r, a : a + step] = arr[r, a : a + step]
        out.flush()
        del out
    return npy, meta, int(arr.chunks[1])


def entropy(npy: Path, snapshots: int = 4000) -> dict[str, float]:
    """Empirical entropies (bits per site and snapshot) of the first ``snapshots`` of every
    replica: H0 of the single-site mass, H1 of a mass given the same site's mass at the
    previous snapshot (``bench_compression``'s estimators)."""
    x = np.load(npy, mmap_mode="r")
    head = np.asarray(x[:, :snapshots]).reshape(x.shape[0], min(snapshots, x.shape[1]), -1)
    h0 = entropy_bits(np.bincount(head.reshape(-1).astype(np.int64)))
    return {"h0": h0, "h1": conditional_entropy_bits(head), "bits": 8.0 * x.dtype.itemsize}


def commands(path: Path, spec: Spec, workers: int, scratch: Path) -> dict[str, list[str]]:
    npy, meta, tc = export_npy(path, spec)
    py = sys.executable
    return {
        "decode": [py, "-c", DECODE, str(path), str(workers)],
        "check": [MASSARC, "check", str(path), "--as", "json", "-q", "--workers", str(workers)],
        "conservation": [
            MASSARC, "check", str(path), "--only", "conservation", "--as", "json", "-q",
            "--workers", str(workers),
        ],
        "summarize": [
            MASSARC, "summarize", str(path), "--force", "-q", "--as", "json",
            "--workers", str(workers),
        ],
        "encode": [py, "-c", ENCODE, str(npy), str(scratch / "encode.zarr"), str(tc)],
        "convert": [
            MASSARC, "convert", str(npy), str(scratch / "convert.zarr"), "--meta", str(meta),
            "--overwrite", "-q",
        ],
    }  # fmt: skip


def measure(cmds: dict[str, list[str]], repeat: int, scratch: Path) -> dict:
    """Best (and all) wall seconds and peak RSS of each command, alternating."""
    runs: dict[str, list[tuple[float, int]]] = {k: [] for k in cmds}
    for _ in range(repeat):
        for kind, cmd in cmds.items():
            shutil.rmtree(scratch / "encode.zarr", ignore_errors=True)
            seconds, _rc, peak = timed(cmd)
            runs[kind].append((seconds, peak))
    return {
        kind: {
            "seconds": min(s for s, _ in v),
            "all_seconds": [s for s, _ in v],
            "peak_rss": max(p for _, p in v),
        }
        for kind, v in runs.items()
    }


#: Where the time of ``check`` goes, measured in one fresh process: imports, a pass that
#: only decodes, the pass with every statistic of the default audit, the analyses.
PHASES = """
import json, sys, time
t = time.perf_counter()
from massarc.archive import open_run
from massarc.archive.scan import Statistic, scan
from massarc.validators.engine.registry import available_checks
from massarc.validators.engine.runner import _RunAudit
out = {"imports": time.perf_counter() - t}
run = open_run(sys.argv[1])
workers = int(sys.argv[2])

class Decode(Statistic):
    name = "decode-only"
    def chunk(self, chunk): return None
    def merge(self, ref, partial): pass
    def finish(self, faults): return None

t = time.perf_counter(); scan(run, {"d": Decode(run)}, workers=workers)
out["decode pass"] = time.perf_counter() - t
classes = list(available_checks().values())
audit = _RunAudit(run, classes, {c.id: c.option_values(None) for c in classes})
runnable = audit.plan()
t = time.perf_counter(); res = scan(run, audit.statistics, workers=workers)
out["pass with every statistic"] = time.perf_counter() - t
t = time.perf_counter()
for cls in runnable:
    audit.check(cls, res)
out["analyses (every check)"] = time.perf_counter() - t
print(json.dumps(out))
"""


def phases(path: Path, workers: int) -> dict[str, float]:
    """Seconds of each phase of ``check`` (see :data:`PHASES`), in a fresh process."""
    out = subprocess.run(
        [sys.executable, "-c", PHASES, str(path), str(workers)],
        capture_output=True, text=True, check=True,
    )  # fmt: skip
    return json.loads(out.stdout.strip().splitlines()[-1])


def startup(repeat: int) -> dict[str, float]:
    py = sys.executable
    cmds = {
        "python": [py, "-c", "pass"],
        "import zarr": [py, "-c", "import zarr"],
        "massarc --version": [MASSARC, "--version"],
        "massarc check --list": [MASSARC, "check", "--list"],
    }
    best = {k: float("inf") for k in cmds}
    for _ in range(repeat):
        for k, cmd in cmds.items():
            best[k] = min(best[k], timed(cmd)[0])
    return best


def imports_seconds() -> dict[str, float]:
    """Self-reported import time (``-X importtime``, microseconds summed at top level)."""
    out = {}
    for mod in ("zarr", "massarc.cli.check", "massarc.validators", "scipy.stats", "numba"):
        res = subprocess.run(
            [sys.executable, "-X", "importtime", "-c", f"import {mod}"],
            capture_output=True,
            text=True,
            check=True,
        )
        total = 0
        for line in res.stderr.splitlines():
            parts = line.split("|")
            if len(parts) == 3 and not parts[2].startswith("  ") and parts[1].strip().isdigit():
                total += int(parts[1])
        out[mod] = total / 1e6
    return out


def machine() -> dict:
    import numcodecs
    import numpy
    import zarr

    model = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    versions = {"python": platform.python_version(), "numpy": numpy.__version__}
    versions.update({"zarr": zarr.__version__, "numcodecs": numcodecs.__version__})
    for name in ("numba", "scipy"):
        try:
            versions[name] = __import__(name).__version__
        except ImportError:
            versions[name] = "not installed"
    commit = subprocess.run(
        ["git", "-C", str(HERE.parent), "rev-parse", "--short", "HEAD"],
        capture_output=True,
        text=True,
    ).stdout.strip()
    return {
        "cores": os.cpu_count(),
        "usable_cores": len(os.sched_getaffinity(0)),
        "cpu": model,
        "versions": versions,
        "commit": commit or "unknown",
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="1/16 GiB runs, 1/4 GiB for memory")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--workers", type=int, default=None)
    ap.add_argument("--no-doc", action="store_true", help="write only bench/out/performance.json")
    ap.add_argument("--no-large", action="store_true", help="skip the other (memory) sizes")
    ap.add_argument("--out", default=str(OUT / "performance.json"), help="the JSON written")
    args = ap.parse_args()
    started = time.perf_counter()
    workers = args.workers or len(os.sched_getaffinity(0))
    small, large = (1 / 16, 1 / 4) if args.quick else (1.0, 4.0)
    smaller = small / 4  # the third size of the memory table
    load_before = os.getloadavg()
    scratch = OUT / "performance-scratch"
    scratch.mkdir(parents=True, exist_ok=True)
    result: dict = {
        "date": datetime.datetime.now(datetime.UTC).strftime("%Y-%m-%d %H:%M UTC"),
        "machine": machine(),
        "workers": workers,
        "repeat": args.repeat,
        "sizes_gib": [small, smaller, large],
        "startup": startup(max(args.repeat, 3)),
        "imports": imports_seconds(),
        "runs": [],
    }
    # an install compiles the bytecode; an editable checkout under PYTHONDONTWRITEBYTECODE
    # would compile every module on every start and bill it to start-up
    root = HERE.parent
    subprocess.run(
        [sys.executable, "-m", "compileall", "-q", *(str(root / d) for d in CODE)], check=True
    )
    snapshots = round(small * 2**30 / (2 * SITES * bench_check.REPLICAS))
    plan = [Spec("condensed", small), Spec("fluid", small), Spec("condensed", small, (50, 40))]
    if not args.no_large:
        # memory as the run grows in snapshots (2000 sites), then in sites (as many
        # snapshots as the main run: 500 and 8000 sites are 1/4 and 4 times its size)
        plan += [Spec("condensed", smaller, role="snapshots")]
        plan += [Spec("condensed", large, role="snapshots")]
        plan += [Spec("condensed", smaller, (SITES // 4,), role="sites")]
        plan += [Spec("condensed", large, (SITES * 4,), role="sites")]
    for spec in plan:
        path = build(spec)
        cmds = commands(path, spec, workers, scratch)
        for f in path.rglob("*"):  # the page cache: every kind reads the same warm files
            if f.is_file():
                f.read_bytes()
        timed(cmds["check"])  # numba's cache and Python's bytecode, outside the timings
        main_run = spec.role == "main"
        m = measure(cmds, args.repeat if main_run else 1, scratch)
        stored = sum(f.stat().st_size for f in (path / "mass").rglob("*") if f.is_file())
        npy = path.with_suffix(".npy")
        arr = np.load(npy, mmap_mode="r")
        entry = {
            "kind": spec.kind, "label": spec.label, "sites": list(spec.sites), "gib": spec.gib,
            "role": spec.role, "bytes": int(arr.nbytes), "snapshots": int(arr.shape[1]),
            "stored_bytes": stored, **m,
        }  # fmt: skip
        if main_run:
            entry["phases"] = phases(path, workers)
            entry["entropy"] = entropy(npy)
        if main_run and spec.sites == (SITES,) and workers > 1:
            # scaling: the same commands from one thread (the baseline too)
            one = commands(path, spec, 1, scratch)
            entry["one_worker"] = measure(
                {k: one[k] for k in ("decode", "check", "summarize")}, args.repeat, scratch
            )
        result["runs"].append(entry)
        print(
            f"{spec.label} {spec.gib:g} GiB: "
            + ", ".join(f"{k} {v['seconds']:.2f} s" for k, v in m.items())
        )
        assert entry["snapshots"] == snapshots or spec.role == "snapshots", entry["snapshots"]
    shutil.rmtree(scratch, ignore_errors=True)
    result["load_before"] = load_before
    result["load_after"] = os.getloadavg()
    result["seconds"] = time.perf_counter() - started
    OUT.mkdir(parents=True, exist_ok=True)
    Path(args.out).write_text(json.dumps(result, indent=2) + "\n")
    text = render(result, quick=args.quick)
    print(text)
    if not args.no_doc:
        DOC.write_text(text)
        print(f"wrote {DOC}")


def _table(head: tuple[str, str], rows: dict[str, float]) -> list[str]:
    return [f"| {head[0]} | {head[1]} |", "| --- | ---: |"] + [
        f"| `{k}` | {v:.2f} |" for k, v in rows.items()
    ]


def _label(run: dict) -> str:
    return run.get("label", run["kind"])


def _phases_table(res: dict) -> list[str]:
    timed_phases = [r for r in res["runs"] if "phases" in r]
    if not timed_phases:
        return []
    names = list(timed_phases[0]["phases"])
    lines = [
        "",
        "## Where the time of `check` goes",
        "",
        "Seconds of each phase in one fresh process (`PHASES` in the bench), beside the",
        "wall time of the whole command above:",
        "",
        "| run | " + " | ".join(names) + " |",
        "| --- |" + " ---: |" * len(names),
    ]
    for r in timed_phases:
        cells = " | ".join(f"{r['phases'][n]:.2f}" for n in names)
        lines.append(f"| {_label(r)} {r['gib']:g} GiB | {cells} |")
    return lines


def _scaling_table(res: dict) -> list[str]:
    runs = [r for r in res["runs"] if "one_worker" in r]
    if not runs:
        return []
    lines = [
        "",
        f"## From one thread to {res['workers']}",
        "",
        "The same commands with `--workers 1` (the baseline decodes from one thread too);",
        "speed-up: seconds with one thread over seconds with all. `convert` and the encode",
        "baseline write from one thread, so they have no row here.",
        "",
        f"| run | command | 1 thread (s) | {res['workers']} threads (s) | speed-up |",
        "| --- | --- | ---: | ---: | ---: |",
    ]
    for r in runs:
        for kind, one in r["one_worker"].items():
            lines.append(
                f"| {_label(r)} {r['gib']:g} GiB | {kind} | {one['seconds']:.2f} | "
                f"{r[kind]['seconds']:.2f} | {one['seconds'] / r[kind]['seconds']:.2f} |"
            )
    return lines


def _entropy_table(res: dict) -> list[str]:
    runs = [r for r in res["runs"] if "entropy" in r]
    if not runs:
        return []
    lines = [
        "",
        "## Compression against the empirical entropy of the data",
        "",
        "H0: entropy of one site's mass; H1: of a mass given the same site's mass at the",
        "previous snapshot (bits per site and snapshot, from the first 4000 snapshots of",
        "every replica; `bench_compression.py`'s estimators). A coder that knows only that",
        "context needs at least H1 bits, so stored bits / H1 is the bound's ratio; the",
        "codecs also see neighbouring sites, which H1 does not, so they may pass it.",
        "",
        "| run | stored | H0 (bits) | H1 (bits) | bound bits / H0 | bound bits / H1 |",
        "| --- | ---: | ---: | ---: | ---: | ---: |",
    ]
    for r in runs:
        e = r["entropy"]
        comp = r["bytes"] / max(r["stored_bytes"], 1)
        lines.append(
            f"| {_label(r)} | {comp:.1f}x | {e['h0']:.2f} | {e['h1']:.2f} | "
            f"{e['bits'] / e['h0']:.1f}x | {e['bits'] / e['h1']:.1f}x |"
        )
    return lines


def _memory_table(res: dict, grows: str) -> list[str]:
    """Peak memory of the main condensed run and the runs that grow from it in ``grows``."""
    main = [r for r in res["runs"] if r.get("role", "main") == "main"][:1]
    sizes = sorted(main + [r for r in res["runs"] if r.get("role") == grows],
                   key=lambda r: r["bytes"])  # fmt: skip
    if len(sizes) < 3:
        return []
    a, b = main[0], sizes[-1]
    if grows == "snapshots":
        what = f"their number of snapshots ({SITES} sites, 4 replicas each)"
        unit, added = "(replica, snapshot)", (b["bytes"] - a["bytes"]) / (2 * SITES)
    else:
        what = f"their number of sites ({a['snapshots']} snapshots, 4 replicas each)"
        n = a["snapshots"] * 4
        unit, added = "site", (b["bytes"] - a["bytes"]) / (2 * n)
    head = " | ".join(f"{r['gib']:g} GiB (MB)" for r in sizes)
    lines = [
        "",
        f"## Peak memory as the run grows in {grows} (condensed run)",
        "",
        f"The sizes differ in {what}; growth is from {a['gib']:g} to {b['gib']:g} GiB; the",
        f"last column is the extra peak per added {unit} between those two sizes.",
        "",
        f"| command | {head} | growth | bytes per {unit} |",
        "| --- |" + " ---: |" * (len(sizes) + 2),
    ]
    for kind in KINDS:
        peaks = " | ".join(f"{r[kind]['peak_rss'] / 1e6:.0f}" for r in sizes)
        pa, pb = a[kind]["peak_rss"], b[kind]["peak_rss"]
        lines.append(
            f"| {kind} | {peaks} | {100 * (pb / pa - 1):+.0f} % | {(pb - pa) / added:.0f} |"
        )
    return lines


def render(res: dict, quick: bool) -> str:
    m = res["machine"]
    v = m["versions"]
    lines = [
        "# Performance record",
        "",
        "Written by `make bench` (`bench/bench_performance.py`; the method is in its docstring).",
        "Every time is a fresh process timed from outside, start-up included, the fastest of "
        f"{res['repeat']} on the {res['sizes_gib'][0]:g} GiB runs (1 on the other sizes); every "
        "ratio divides by a baseline measured in the same run.",
        "",
        f"* date: {res['date']}; massarc commit {m['commit']}"
        + ("; **quick sizes** (development, not a record)" if quick else ""),
        f"* machine: {m['usable_cores']} of {m['cores']} cores, {m['cpu']}; "
        f"{res['workers']} worker threads",
        f"* versions: python {v['python']}, numpy {v['numpy']}, zarr {v['zarr']}, numcodecs "
        f"{v['numcodecs']}, numba {v['numba']}, scipy {v['scipy']}",
        "* load average (1, 5, 15 min) before: "
        + ", ".join(f"{x:.1f}" for x in res["load_before"])
        + "; after: "
        + ", ".join(f"{x:.1f}" for x in res["load_after"])
        + " (the machine is shared; above about 2 every time stretches and ratios drift up)",
        f"* duration of this record: {res['seconds'] / 60:.1f} min",
        "",
        "## Start-up",
        "",
        *_table(("command", "seconds"), res["startup"]),
        "",
        "Import time reported by `python -X importtime` (each module alone, in a fresh process):",
        "",
        *_table(("module", "seconds"), res["imports"]),
    ]
    lines += [
        "",
        "## Against the bare decode (check, summarize) and encode (convert)",
        "",
        "MB/s: uncompressed masses (10^6 bytes) per second of wall time; compression: "
        "uncompressed over stored bytes of the mass array.",
        "",
        "| run | size | compression | command | seconds | ratio | MB/s | peak RSS (MB) |",
        "| --- | ---: | ---: | --- | ---: | ---: | ---: | ---: |",
    ]
    for run in res["runs"]:
        comp = run["bytes"] / max(run["stored_bytes"], 1)
        first = True
        for kind in KINDS:
            base = run["encode" if kind in ("encode", "convert") else "decode"]
            r = run[kind]
            head = f"| {_label(run)} | {run['gib']:g} GiB | {comp:.1f}x" if first else "| | |"
            first = False
            lines.append(
                f"{head} | {kind} | {r['seconds']:.2f} | {r['seconds'] / base['seconds']:.2f} "
                f"| {run['bytes'] / r['seconds'] / 1e6:.0f} | {r['peak_rss'] / 1e6:.0f} |"
            )
    lines += _phases_table(res) + _scaling_table(res) + _entropy_table(res)
    lines += _memory_table(res, "snapshots") + _memory_table(res, "sites")
    lines += [
        "",
        "Reading it. `conservation` is the least audit of a whole run: start-up, the pass",
        "decoding every chunk, one fused reduction of every value. Its ratio is the floor of",
        "any audit's ratio with this design: massarc's start-up (the archive layer, the",
        "metadata models, numba's cached kernels) and the reduction come on top of the",
        "decode. `check` adds the other statistics of the pass and the analyses after it",
        "(the phases table).",
        "",
        "Memory: a base (imports, compiled kernels, a few chunks in flight) plus the results",
        "the pass keeps per (replica, snapshot) (totals, extrema, sums of squares, occupied",
        "sites, positions, fingerprints, profile moments) and the analyses' working copies of",
        "them. The sizes above differ in their number of snapshots, so their peaks differ by",
        "about the last column times the added (replica, snapshot)s; a run that grows in",
        "sites instead keeps the same results per snapshot. `encode` maps its `.npy` input",
        "into memory, so its peak counts the input's pages; `convert` reads it in slabs.",
        "",
        "Re-measure: `make bench` (this file; about the duration above, plus about 10 minutes",
        "to build the runs the first time), or `make bench BENCH=--quick` for a look at",
        "development sizes. Other benchmarks and the calibration studies:",
        "`python -m bench --all` or by name (bench/README.md).",
        "",
    ]
    return "\n".join(lines)


if __name__ == "__main__":
    main()
