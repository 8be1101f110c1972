"""The examples in the docstrings run: every module of the installed ``massarc`` package is
imported and its doctests run (ELLIPSIS, NORMALIZE_WHITESPACE), one test per module, from
the repository root so that paths such as ``samples/dune-strip.zarr`` resolve.

An example that cannot run anywhere (it needs the user's own files) is marked
``# doctest: +SKIP``; one that could run must not be.
"""

from __future__ import annotations

import doctest
import importlib
import io
import pkgutil
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
#: The subpackages pyproject.toml lists: an editable install maps them onto the top-level
#: folders, so walking ``massarc.__path__`` alone would not find them.
PACKAGES = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"]

#: Modules whose examples fail today, in folders other engineers are moving while this list
#: was written (validators/, archive/formats/). The lead clears an entry once the module's
#: examples are fixed; an entry whose examples pass fails the test, so the list cannot rot.
EXPECTED_FAILURES = {
    # scan_lines: `s.kind` shows the whole preallocated buffer, not the s.n lines scanned
    "massarc.archive.formats._scan",
}


def _modules() -> list[str]:
    names = set(PACKAGES)
    for package in PACKAGES:
        path = importlib.import_module(package).__path__
        names |= {m.name for m in pkgutil.walk_packages(path, f"{package}.")}
    return sorted(names)


MODULES = _modules()


def test_every_folder_is_walked() -> None:
    top = {name.split(".")[1] for name in MODULES if name.count(".") >= 1}
    assert {"schema", "archive", "validators", "summaries", "simulate", "cli"} <= top
    assert "massarc.archive.formats.text" in MODULES


def test_expected_failures_name_real_modules() -> None:
    assert set(EXPECTED_FAILURES) <= set(MODULES)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples_run(name: str, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(ROOT)
    module = importlib.import_module(name)
    tests = [t for t in doctest.DocTestFinder().find(module, name) if t.examples]
    runner = doctest.DocTestRunner(
        optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE, verbose=False
    )
    out = io.StringIO()
    for test in tests:
        runner.run(test, out=out.write)
    failed = runner.summarize(verbose=False).failed
    if name in EXPECTED_FAILURES:
        assert failed, f"{name}: its examples pass now; remove it from EXPECTED_FAILURES"
    else:
        assert not failed, out.getvalue()
