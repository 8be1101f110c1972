"""Running massarc on hostile input in a child process that cannot take the machine down:
an address-space cap (``RLIMIT_AS``) and a timeout, so that a regression shows as a failed
test, not as a machine out of memory or a hung suite."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

__all__ = ["MEMORY_CAP", "assert_refused_before_decoding", "capped_massarc"]

#: Address space of the child: 1 GiB (issue 11), above the 0.58 to 0.67 GiB that an honest
#: audit of the samples reserves with the NumPy kernels (VmPeak measured on 2026-12-03,
#: `massarc check samples/*.zarr` with MASSARC_PURE=1 and two malloc arenas: Python, zarr
#: and scipy mapped, numba never imported since scipy and numba load on first use; 0.15 to
#: 0.23 GiB resident; `check --list` 0.13 GiB). Every hostile case claims 1.5 GiB or more.
MEMORY_CAP = 1 << 30
MASSARC = str(Path(sys.executable).with_name("massarc"))


#: Sets the cap, then becomes massarc (no preexec_fn: the test process may run threads).
_LAUNCH = (
    "import os, resource, sys; "
    "resource.setrlimit(resource.RLIMIT_AS, (int(sys.argv[1]), int(sys.argv[1]))); "
    "os.execv(sys.argv[2], sys.argv[2:])"
)


def capped_massarc(*args: str, timeout: float = 60.0) -> subprocess.CompletedProcess[str]:
    """``massarc ARGS`` under the memory cap; raises ``subprocess.TimeoutExpired`` when it
    does not finish in ``timeout`` seconds (the child is killed)."""
    # What the cap measures is what the input makes massarc allocate, not address space
    # reserved ahead: the NumPy kernels (MASSARC_PURE; compiling numba's takes LLVM's share)
    # and two malloc arenas (glibc reserves 64 MiB of address space per thread arena, and
    # zarr decodes in a pool of threads; common practice under RLIMIT_AS)
    env = {
        **os.environ,
        "OMP_NUM_THREADS": "1",
        "OPENBLAS_NUM_THREADS": "1",
        "MASSARC_PURE": "1",
        "MALLOC_ARENA_MAX": "2",
    }
    return subprocess.run(
        [sys.executable, "-c", _LAUNCH, str(MEMORY_CAP), MASSARC, *args],
        capture_output=True,
        text=True,
        timeout=timeout,
        env=env,
        check=False,
    )


def assert_refused_before_decoding(run: Path, out: Path, message: str) -> str:
    """Under the cap: ``check`` fails ``schema`` with ``message`` and decodes no chunk,
    ``info`` shows ``message``, and ``convert`` to ``out`` exits 2 naming it; returns
    ``convert``'s stderr."""
    check = capped_massarc("check", str(run), "--as", "json", timeout=60)
    assert check.returncode == 1, check.stderr[-2000:]
    (report,) = json.loads(check.stdout)["runs"]
    schema = next(c for c in report["checks"] if c["id"] == "schema")
    assert schema["status"] == "fail" and message in schema["message"]
    assert report["chunks_read"] == 0
    info = capped_massarc("info", str(run), timeout=60)
    assert info.returncode == 0 and message in info.stdout, info.stderr[-2000:]
    convert = capped_massarc("convert", str(run), str(out), timeout=60)
    assert convert.returncode == 2 and message in convert.stderr, convert.stderr[-2000:]
    return convert.stderr
