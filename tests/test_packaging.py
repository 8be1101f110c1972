"""The folder -> subpackage mapping of pyproject.toml (package-dir) stays complete, and a
regular (non-editable) install imports massarc.<folder> from the top-level folders."""

from __future__ import annotations

import subprocess
import sys
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CONFIG = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]


def _expected_packages() -> set[str]:
    found = set()
    for name, folder in CONFIG["package-dir"].items():
        base = ROOT / folder
        for init in base.rglob("__init__.py"):
            rel = init.parent.relative_to(base)
            if "__pycache__" in rel.parts:
                continue
            found.add(".".join([name, *rel.parts]))
    return found


def test_every_code_folder_is_a_listed_subpackage() -> None:
    listed = set(CONFIG["packages"])
    missing = _expected_packages() - listed
    assert not missing, f"add to [tool.setuptools].packages in pyproject.toml: {sorted(missing)}"


def test_a_regular_install_imports_every_subpackage(tmp_path: Path) -> None:
    target = tmp_path / "site"
    subprocess.run(
        [
            sys.executable,
            "-m",
            "pip",
            "install",
            "--quiet",
            "--no-deps",
            "--no-build-isolation",
            "--no-compile",
            "--target",
            str(target),
            str(ROOT),
        ],
        check=True,
        capture_output=True,
        cwd=tmp_path,
    )
    code = (
        "import massarc, massarc.schema, massarc.archive, massarc.validators, "
        "massarc.summaries, massarc.simulate, massarc.cli;"
        "from importlib.resources import files;"
        "assert (files('massarc.schema') / 'metadata.schema.json').is_file();"
        "print(massarc.schema.__file__)"
    )
    out = subprocess.run(
        [sys.executable, "-c", code],
        check=True,
        capture_output=True,
        text=True,
        cwd=tmp_path,
        env={"PYTHONPATH": str(target), "PATH": "/usr/bin:/bin"},
    )
    assert out.stdout.strip().startswith(str(target / "massarc" / "schema"))
