"""The examples of the documentation run as written (common practice: documentation that
is executed cannot rot): the Python examples of DEVELOPERS.md (in order, in one fresh
interpreter, from the repository root, so that registrations do not leak into the test
process), the shell sessions of docs/tutorial.md and docs/formats.md, and
docs/example_notebook.py."""

from __future__ import annotations

import json
import os
import re
import runpy
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[1]
FENCE = re.compile(r"^```python\n(.*?)^```", re.S | re.M)


def _examples(name: str) -> list[str]:
    return FENCE.findall((ROOT / name).read_text(encoding="utf-8"))


def test_the_developer_guide_has_examples() -> None:
    assert len(_examples("DEVELOPERS.md")) >= 2  # a statistic and a check


@pytest.mark.parametrize("name", ["DEVELOPERS.md", "docs/README.md"])
def test_python_examples_run(name: str) -> None:
    code = "\n\n".join(_examples(name))
    out = subprocess.run(
        [sys.executable, "-W", "error", "-c", code],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert out.returncode == 0, out.stderr[-3000:]


# -- shell sessions of the docs ------------------------------------------------------------
#
# Every ```sh block of a page runs, in order, in one bash (set -euo pipefail) from a
# temporary directory holding a copy of samples/, with this interpreter's bin directory
# (massarc, python) first on PATH. Inputs in samples/ must come out unchanged.

SHELL = re.compile(r"^```sh\n(.*?)^```", re.S | re.M)
BIN = Path(sys.executable).parent


def _shell(name: str) -> str:
    blocks = SHELL.findall((ROOT / name).read_text(encoding="utf-8"))
    assert blocks, f"{name}: no ```sh block"
    return "\n".join(blocks)


def _tree(root: Path) -> dict[str, bytes]:
    return {str(p.relative_to(root)): p.read_bytes() for p in root.rglob("*") if p.is_file()}


def _run_page(name: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    shutil.copytree(ROOT / "samples", cwd / "samples", ignore=shutil.ignore_patterns("*.sh"))
    before = _tree(cwd / "samples")
    env = {**os.environ, "PATH": f"{BIN}{os.pathsep}{os.environ.get('PATH', '')}"}
    env["MPLBACKEND"] = "Agg"
    script = "set -euo pipefail\n" + _shell(name)
    out = subprocess.run(
        ["bash", "-c", script], cwd=cwd, env=env, capture_output=True, text=True, timeout=600
    )
    assert out.returncode == 0, f"{name}: {out.stderr[-3000:]}"
    assert _tree(cwd / "samples") == before, f"{name} changed its inputs"
    return out


def _masses(path: Path) -> np.ndarray:
    """The committed masses as zarr-python alone reads them (the header cut by hand)."""
    import zarr

    state = zarr.open_group(path, mode="r").attrs["massarc"]["state"]
    return zarr.open_array(path / "mass", mode="r")[: state["replicas"], : state["snapshots"]]


def test_tutorial_runs(tmp_path: Path) -> None:
    _run_page("docs/tutorial.md", tmp_path)
    sample = _masses(ROOT / "samples" / "dune-strip.zarr")
    for made in ("dunes.zarr", "dunes-live.zarr"):  # zarr-python: the same masses came in
        np.testing.assert_array_equal(_masses(tmp_path / made), sample)
    report = json.loads((tmp_path / "audit.json").read_text())
    assert report["runs"][0]["status"] in ("pass", "warn")
    assert (tmp_path / "largest-mass.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG magic
    import zarr

    # the stored largest mass is the snapshot maximum of the masses (NumPy)
    stored = zarr.open_array(tmp_path / "dunes.zarr" / "summaries" / "largest_mass", mode="r")
    np.testing.assert_array_equal(stored[...], sample.max(axis=2))


def test_every_format_has_a_how_to_that_runs(tmp_path: Path) -> None:
    from massarc.archive.formats import available_formats

    page = (ROOT / "docs" / "formats.md").read_text(encoding="utf-8")
    for name in available_formats():
        assert f"### How to use `{name}`" in page, f"docs/formats.md: no how-to for {name}"
    _run_page("docs/formats.md", tmp_path)
    sample = _masses(ROOT / "samples" / "dune-strip.zarr")
    backs = sorted(tmp_path.glob("back-*.zarr"))
    assert len(backs) >= 9
    for path in backs:  # zarr-python: every import holds the sample's masses
        want = sample[:1] if path.name == "back-hdf5.zarr" else sample
        np.testing.assert_array_equal(_masses(path), want, err_msg=path.name)
    # the event log, replayed by hand (worked example): snapshots at t = 0, 0.5, 1, 1.5
    want = [
        [[3, 0, 1, 0, 2, 0], [2, 1, 1, 0, 1, 1], [3, 1, 1, 0, 1, 0], [3, 1, 1, 0, 1, 0]],
        [[1, 1, 1, 1, 1, 1], [1, 1, 0, 2, 1, 1], [2, 1, 0, 2, 1, 0], [2, 1, 0, 1, 2, 0]],
    ]
    np.testing.assert_array_equal(_masses(tmp_path / "depots-from-events.zarr"), want)


def test_example_notebook_runs(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    shutil.copytree(ROOT / "samples" / "depot-ring.zarr", tmp_path / "samples" / "depot-ring.zarr")
    monkeypatch.chdir(tmp_path)
    found = runpy.run_path(str(ROOT / "docs" / "example_notebook.py"), run_name="__main__")
    # The depot ring starts in the exact steady state (samples/README.md); its pooled
    # occupation must be the canonical single-site law (Evans and Hanney, J. Phys. A 38,
    # R195, 2005; schema/laws.py, checked against outside sources in tests/test_laws.py).
    assert found["distance"] < 0.01
    assert abs(found["observed_mean"] - found["exact_mean"]) < 0.05 * found["exact_mean"]
    html = found["report"]._repr_html_()
    assert "steady-state" in html and "conservation" in html
    assert "largest_mass" in found["summaries"]
