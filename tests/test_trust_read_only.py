"""Issue 11, "must show": the read-only hash test. Every command that only reads a run
(``info``, ``check`` in every rendering and with a report file, ``summarize`` when the
stored summaries are up to date, with and without ``--export``, ``plot``, and ``convert``
from the run to every writable format) leaves every file and folder of the run exactly as
it was: the same names, the same bytes (SHA-256) and the same modification times. A
collection is read the same way. Common practice: an audit tool never writes its inputs.
"""

from __future__ import annotations

import hashlib
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from massarc.archive.formats import format_listing
from massarc.cli import cli
from massarc.summaries import summarize

#: The summary options the runs were summarised with (so that they are up to date).
SAME = ["--set", "probes=8", "--set", "resamples=99"]
SAMPLE = Path(__file__).resolve().parents[1] / "samples" / "dune-strip.zarr"


def _tree(root: Path) -> dict[str, tuple[str, int, int]]:
    """Every file and folder under ``root``: (SHA-256 of a file's bytes, size, mtime in ns)."""
    out = {}
    for p in [root, *sorted(root.rglob("*"))]:
        st = p.lstat()
        digest = hashlib.sha256(p.read_bytes()).hexdigest() if p.is_file() else "dir"
        out[p.relative_to(root).as_posix()] = (digest, st.st_size, st.st_mtime_ns)
    return out


@pytest.fixture(scope="module")
def collection(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A collection of two summarised copies of the dune strip (samples/ stay as they are)."""
    root = tmp_path_factory.mktemp("ro") / "sweep"
    for name in ("a.zarr", "b.zarr"):
        copy = Path(shutil.copytree(SAMPLE, root / name))
        summarize(copy, {"probes": 8, "resamples": 99})
    return root


def _writable_suffixes() -> list[tuple[str, str]]:
    """(format, a suffix) of every format ``convert`` can write, the archive itself too."""
    out = []
    for row in format_listing():
        if "write" in row["modes"] and row["suffixes"]:
            out.append((row["name"], row["suffixes"][0]))
    return out


def _commands(run: Path, collection: Path, out: Path) -> list[list[str]]:
    cmds = [
        ["info", str(run)],
        ["info", "--as", "json", str(collection)],
        ["check", str(run)],
        ["check", str(collection), "--as", "json"],
        ["check", str(run), "--as", "junit", "-o", str(out / "audit.xml")],
        ["summarize", str(run), *SAME],  # up to date: nothing to write
        ["summarize", str(collection), "--as", "json", *SAME],
        ["summarize", str(run), "--export", "csv", str(out / "exported"), *SAME],
        ["plot", str(run), "largest-mass", "-o", str(out / "figure.png"), "--dpi", "30"],
        ["plot", str(run), "space-time", "-o", str(out / "figure.svg"), "--rows", "32"],
        ["convert", str(collection), str(out / "sweep-text"), "--to", "text", "-q"],
    ]
    for name, suffix in _writable_suffixes():
        cmds.append(["convert", str(run), str(out / f"copy-{name}{suffix}"), "--to", name, "-q"])
    return cmds


def test_read_only_commands_never_modify_a_run(collection: Path, tmp_path: Path) -> None:
    run = collection / "a.zarr"
    before = _tree(collection)
    commands = _commands(run, collection, tmp_path)
    names = {c[0] for c in commands}
    assert {"info", "check", "summarize", "plot", "convert"} <= names
    assert len([c for c in commands if c[0] == "convert"]) >= 6  # npz, text, csv, hdf5, ...
    for args in commands:
        res = CliRunner().invoke(cli, args)
        assert res.exit_code in (0, 1), (args, res.output)  # 1: the audit found a problem
        assert _tree(collection) == before, f"massarc {' '.join(args)} modified its input"
