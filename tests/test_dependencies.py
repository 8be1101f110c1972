"""Dependencies say what the code needs, and a missing one is loud.

* Every third-party module the package imports is declared in pyproject.toml: imported when
  its module loads -> a core dependency; imported lazily or behind ``except ImportError``
  -> a core dependency or an extra; a module only pytest loads (a ``pytest11`` entry point)
  counts as lazy.
* The ``test`` extra is installed whole (the suite imports its libraries plainly and fails
  without them, instead of skipping), numba included, so the compiled paths are tested.
* A missing library stops the import of the module that needs it; the single pass reports a
  chunk as corrupt only for what the data did, never for an error of the machine.
"""

from __future__ import annotations

import ast
import importlib.metadata
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest
from floor_constraints import declared, normalise

from massarc.archive import open_run
from massarc.archive.scan import scan
from massarc.archive.stats import SnapshotStatistic

ROOT = Path(__file__).resolve().parents[1]
PACKAGE_DIRS = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"][
    "package-dir"
]
SAMPLE = ROOT / "samples" / "depot-ring.zarr"
#: Modules only pytest loads (the ``pytest11`` entry points): pytest is there by construction,
#: so what they import on load is needed only where pytest runs (an extra suffices).
PYTEST_PLUGINS = {
    value.replace("massarc.", "massarc/", 1).replace(".", "/") + ".py"
    for value in tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    .get("entry-points", {})
    .get("pytest11", {})
    .values()
}


def _guards_import_error(node: ast.Try) -> bool:
    names = {"ImportError", "ModuleNotFoundError", "Exception"}
    for handler in node.handlers:
        kinds = handler.type.elts if isinstance(handler.type, ast.Tuple) else [handler.type]
        if any(isinstance(k, ast.Name) and k.id in names for k in kinds):
            return True
    return False


def _imports(tree: ast.AST) -> list[tuple[str, bool]]:
    """(top-level module, imported when the module loads) for every absolute import;
    ``if TYPE_CHECKING:`` blocks are not imports at run time."""
    out: list[tuple[str, bool]] = []

    def visit(node: ast.AST, eager: bool) -> None:
        if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef | ast.Lambda):
            eager = False
        elif isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            for child in node.orelse:
                visit(child, eager)
            return
        elif isinstance(node, ast.Try) and _guards_import_error(node):
            for child in node.body:
                visit(child, False)
            for child in [*node.handlers, *node.orelse, *node.finalbody]:
                visit(child, eager)
            return
        if isinstance(node, ast.Import):
            out.extend((a.name.split(".")[0], eager) for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            out.append((node.module.split(".")[0], eager))
        for child in ast.iter_child_nodes(node):
            visit(child, eager)

    visit(tree, True)
    return out


def _third_party_imports() -> dict[str, dict[str, bool]]:
    """distribution -> {file: imported eagerly there} over the package's source files."""
    dists = importlib.metadata.packages_distributions()
    found: dict[str, dict[str, bool]] = {}
    for folder in set(PACKAGE_DIRS.values()):
        for path in sorted((ROOT / folder).rglob("*.py")):
            rel = str(path.relative_to(ROOT))
            on_load = rel not in PYTEST_PLUGINS
            for module, eager in _imports(ast.parse(path.read_text(), rel)):
                eager = eager and on_load
                if module in sys.stdlib_module_names or module == "massarc":
                    continue
                assert module in dists, f"{rel}: no installed distribution provides {module!r}"
                for dist in dists[module]:
                    seen = found.setdefault(normalise(dist), {})
                    seen[rel] = seen.get(rel, False) or eager
    return found


def test_every_imported_library_is_declared() -> None:
    groups = declared()
    core = {r.name for r in groups[""]}
    anywhere = {r.name for reqs in groups.values() for r in reqs}
    problems = []
    for dist, files in sorted(_third_party_imports().items()):
        eager = sorted(f for f, e in files.items() if e)
        if eager and dist not in core:
            problems.append(f"{dist}: imported on load by {eager[0]}; expected in dependencies")
        elif dist not in anywhere:
            problems.append(f"{dist}: imported by {sorted(files)[0]}; expected in an extra")
    assert not problems, "\n".join(problems)


def test_the_import_scan_sees_lazy_guarded_and_type_only_imports() -> None:
    source = (
        "import numpy\n"
        "from typing import TYPE_CHECKING\n"
        "if TYPE_CHECKING:\n    import pandas\n"
        "try:\n    import numba\nexcept ImportError:\n    numba = None\n"
        "def f():\n    import h5py\n"
        "from . import sibling\n"
    )
    assert _imports(ast.parse(source)) == [
        ("numpy", True),
        ("typing", True),
        ("numba", False),
        ("h5py", False),
    ]


def test_the_test_extra_is_installed_whole() -> None:
    missing = []
    for req in declared()["test"]:
        try:
            importlib.metadata.version(req.name)
        except importlib.metadata.PackageNotFoundError:
            missing.append(req.name)
    assert not missing, f"install the test extra (pip install -e '.[test]'): missing {missing}"


def test_numba_paths_are_on() -> None:
    from massarc.archive.formats import _scan
    from massarc.archive.stats import _kernels
    from massarc.simulate import kernels

    assert _kernels.HAVE_NUMBA and _scan.HAVE_NUMBA and kernels.HAVE_NUMBA


@pytest.mark.parametrize("library", ["google_crc32c", "numcodecs"])
def test_a_missing_checksum_or_codec_library_fails_the_import(library: str) -> None:
    code = (
        f"import sys; sys.modules[{library!r}] = None\n"
        "try:\n    import massarc.archive.scan\n"
        "except ImportError as exc:\n    print('ImportError', exc)\n"
        "else:\n    print('imported')\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT
    )
    assert out.stdout.startswith("ImportError") and library in out.stdout


@pytest.mark.parametrize("direct", [True, False])
def test_an_error_of_the_machine_is_not_a_verdict_on_the_data(
    monkeypatch: pytest.MonkeyPatch, direct: bool
) -> None:
    run = open_run(SAMPLE)

    def broken(*args: object, **kwargs: object) -> None:
        raise ImportError("a library the reader needs is missing")

    monkeypatch.setattr("massarc.archive._chunk_read.blosc.decompress", broken)
    monkeypatch.setattr(type(run), "read_chunk", broken)
    with pytest.raises(ImportError, match="library the reader needs"):
        scan(run, {"snapshots": SnapshotStatistic(run)}, workers=1, direct=direct)


def test_the_audit_reports_a_stopped_pass_as_errors_not_as_data_faults(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from massarc.validators import audit

    def broken(*args: object, **kwargs: object) -> None:
        raise ImportError("a library the reader needs is missing")

    monkeypatch.setattr("massarc.archive._chunk_read.blosc.decompress", broken)
    report = audit([SAMPLE])
    by_id = {c.id: c for c in report.runs[0].checks}
    assert by_id["time-order"].status == "error"  # the time array needs the codec too
    assert by_id["integrity"].status == "error"
    assert "library the reader needs" in by_id["integrity"].message
    assert report.exit_code == 1
