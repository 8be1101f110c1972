"""Start-up: the command line, the audit's API and the check listing import neither scipy nor
numba (they cost most of the start-up and are imported when a check or kernel first needs
them), and the compiled kernels still work where numba can write no cache.

Structural tests: what a fresh interpreter has imported, never how long it took (start-up
time is measured in bench/bench_performance.py against ``python -c "import zarr"``)."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from massarc.archive._jit import HAVE_NUMBA

HEAVY = ("scipy", "numba", "llvmlite", "matplotlib", "rich")


def _imported_after(code: str) -> list[str]:
    """Top-level packages of HEAVY a fresh interpreter holds after running ``code``."""
    probe = (
        f"{code}\nimport json, sys\n"
        f"print(json.dumps(sorted({{m.split('.')[0] for m in sys.modules}} & set({HEAVY!r}))))"
    )
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_cli_and_validators_import_neither_scipy_nor_numba() -> None:
    code = (
        "import massarc, massarc.cli, massarc.cli.check, massarc.validators\n"
        "from massarc.validators import available_checks\n"
        "from massarc.archive.scan import available_statistics\n"
        "assert len(available_checks()) >= 10 and available_statistics()"
    )
    assert _imported_after(code) == []


def test_check_list_imports_neither_scipy_nor_numba() -> None:
    code = (
        "import sys\nfrom click.testing import CliRunner\nfrom massarc.cli import cli\n"
        "res = CliRunner().invoke(cli, ['check', '--list'])\n"
        "assert res.exit_code == 0 and 'steady-state' in res.output, res.output"
    )
    assert _imported_after(code) == []


def test_a_json_audit_of_a_small_run_imports_no_numba() -> None:
    # below SMALL_RUN_BYTES the statistics use their NumPy twins unless MASSARC_PURE=0 asks
    # for the kernels; scipy comes in with the statistical checks, but not scipy.stats
    code = (
        "import os\nos.environ.pop('MASSARC_PURE', None)\n"
        "from massarc.validators import audit, render\n"
        "report = audit(['samples/depot-ring.zarr'])\n"
        "assert {c.id for c in report.runs[0].checks if c.status != 'error'} >= {'drift'}\n"
        "render(report, 'json')\n"
        "import sys\nassert 'scipy.stats' not in sys.modules"
    )
    loaded = _imported_after(code)
    assert "numba" not in loaded and "rich" not in loaded
    assert "scipy" in loaded  # the statistical checks did run


def test_the_kernels_are_chosen_by_run_size(monkeypatch: pytest.MonkeyPatch) -> None:
    from types import SimpleNamespace

    from massarc.archive import _jit

    monkeypatch.delenv("MASSARC_PURE", raising=False)
    small = SimpleNamespace(nbytes=_jit.SMALL_RUN_BYTES - 1)
    large = SimpleNamespace(nbytes=_jit.SMALL_RUN_BYTES)
    assert _jit.backend_for(small) == "numpy"
    assert _jit.backend_for(large) == ("numba" if HAVE_NUMBA else "numpy")
    monkeypatch.setenv("MASSARC_PURE", "0")
    assert _jit.backend_for(small) == ("numba" if HAVE_NUMBA else "numpy")
    monkeypatch.setenv("MASSARC_PURE", "1")
    assert _jit.backend_for(large) == "numpy"


@pytest.mark.skipif(not HAVE_NUMBA, reason="numba is not installed")
def test_kernels_compile_without_a_writable_cache_location() -> None:
    # numba refuses cache=True with a RuntimeError where it finds no directory to write its
    # cache in (a read-only install and no per-user cache); simulated by offering it no
    # cache locator at all. The kernel must still compile, uncached, and agree with NumPy.
    code = (
        "import numpy as np\n"
        "from numba.core import caching\n"
        "impl = getattr(caching, 'CacheImpl', None) or caching._CacheImpl\n"
        "impl._locator_classes = []\n"
        "from massarc.archive.stats.condensates import count_above\n"
        "x = np.array([[5, 0, 9, 2], [1, 30, 1, 0]], np.uint16)\n"
        "fast = count_above(x, 4, backend='numba')\n"
        "from massarc.archive.stats import _compiled\n"
        "assert _compiled.count_kernel._cache.__class__.__name__ == 'NullCache'\n"
        "print([v.tolist() for v in fast])"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    count, mass = json.loads(out.stdout.strip().splitlines()[-1])
    # by hand: masses above 4 are 5 and 9 in the first row, 30 in the second
    assert count == [2, 1] and mass == [14, 30]
