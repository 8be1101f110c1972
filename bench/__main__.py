"""Run every benchmark and calibration study under bench/ (``make bench``).

Each script prints its own table and writes bench/out/<name>.json. Pass names to run a
subset: ``python -m bench compression sampler``.
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).parent


def main(argv: list[str]) -> int:
    scripts = sorted(HERE.glob("bench_*.py")) + sorted(HERE.glob("calibrate*.py"))
    if argv:
        scripts = [s for s in scripts if any(a in s.stem for a in argv)]
    failed = []
    for script in scripts:
        print(f"\n=== {script.name}", flush=True)
        t0 = time.perf_counter()
        rc = subprocess.call([sys.executable, str(script)])
        print(f"=== {script.name}: exit {rc} in {time.perf_counter() - t0:.0f} s", flush=True)
        if rc:
            failed.append(script.name)
    if failed:
        print("failed: " + ", ".join(failed))
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
