"""``make bench``: the performance record (``bench_performance.py``, which writes
docs/performance.md), or other benchmarks and calibration studies under bench/.

    python -m bench                      # the performance record (about 10 minutes)
    python -m bench --quick              # the same at development sizes (a few minutes)
    python -m bench compression sampler  # scripts whose names contain these words
    python -m bench --all                # every benchmark, then every calibration (hours)

Each script prints its own table and writes bench/out/<name>.json.
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).parent


def main(argv: list[str]) -> int:
    flags = [a for a in argv if a.startswith("--")]
    names = [a for a in argv if not a.startswith("--")]
    scripts = sorted(HERE.glob("bench_*.py")) + sorted(HERE.glob("calibrate*.py"))
    if names:
        scripts = [s for s in scripts if any(a in s.stem for a in names)]
    elif "--all" not in flags:
        scripts = [HERE / "bench_performance.py"]
    passed = [f for f in flags if f != "--all"]  # e.g. --quick, for the scripts that take it
    failed = []
    for script in scripts:
        print(f"\n=== {script.name}", flush=True)
        t0 = time.perf_counter()
        rc = subprocess.call([sys.executable, str(script), *passed])
        print(f"=== {script.name}: exit {rc} in {time.perf_counter() - t0:.0f} s", flush=True)
        if rc:
            failed.append(script.name)
    if failed:
        print("failed: " + ", ".join(failed))
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
