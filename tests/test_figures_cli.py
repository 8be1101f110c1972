"""``massarc plot``: every figure written as PNG, SVG and PDF, bad input refused in one line
with exit status 2, the run never modified, and matplotlib kept out of the commands that
do not draw."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from massarc.cli import cli
from massarc.summaries import summarize
from massarc.summaries.figures import FIGURES

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "samples" / "depot-ring-unsettled.zarr"

# The first bytes of each format, from its specification: PNG (RFC 2083, section 3.1), PDF
# (ISO 32000-1, section 7.5.2: the header line "%PDF-"), SVG (an XML document: its
# declaration).
SIGNATURES = {".png": b"\x89PNG\r\n\x1a\n", ".pdf": b"%PDF-", ".svg": b"<?xml"}


@pytest.fixture(scope="module")
def run(tmp_path_factory) -> Path:
    """A summarised copy of the unsettled depot ring (samples/ stay as they are)."""
    copy = Path(shutil.copytree(SAMPLE, tmp_path_factory.mktemp("plot") / SAMPLE.name))
    summarize(copy, {"probes": 8, "resamples": 99})
    return copy


def _tree(path: Path) -> dict[str, tuple[int, int]]:
    """Every file and folder under ``path``: (size, modification time in ns)."""
    return {p.relative_to(path).as_posix(): (p.stat().st_size, p.stat().st_mtime_ns)
            for p in [path, *path.rglob("*")]}  # fmt: skip


def _plot(*args: str):
    return CliRunner().invoke(cli, ["plot", *args])


def test_every_figure_in_every_format_and_the_run_untouched(run, tmp_path) -> None:
    before = _tree(run)
    extra = {
        "largest-mass": ["--log"],
        "correlation": ["--times", "100,4000"],
        "space-time": ["--replica", "1", "--snapshots", "100:900", "--rows", "64"],
    }
    for k, name in enumerate(FIGURES):
        suffix = list(SIGNATURES)[k % 3]
        out = tmp_path / f"{name}{suffix}"
        res = _plot(str(run), name, "-o", str(out), "--dpi", "40", *extra.get(name, []))
        assert res.exit_code == 0, res.stderr
        data = out.read_bytes()
        assert len(data) > 1000 and data.startswith(SIGNATURES[suffix]), name
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        f"{name}{list(SIGNATURES)[k % 3]}" for k, name in enumerate(FIGURES)
    )  # no temporary file left behind
    assert _tree(run) == before  # plotting never writes into the run


@pytest.mark.parametrize("suffix", [".png", ".svg", ".pdf"])
def test_each_format_by_its_suffix(run, tmp_path, suffix) -> None:
    out = tmp_path / f"occupation{suffix.upper()}"
    assert _plot(str(run), "occupation", "-o", str(out), "--dpi", "40").exit_code == 0
    assert out.read_bytes().startswith(SIGNATURES[suffix])


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["occupation", "-o", "{tmp}/f.jpg"], "suffix '.jpg' is not one of .png, .svg, .pdf"),
        (["occupation", "-o", "{tmp}/f"], "suffix '(none)' is not one of"),
        (["histogram", "-o", "{tmp}/f.png"], "unknown figure 'histogram'; expected one of "
         "largest-mass, occupation, correlation, coarsening, extremes, space-time"),
        (["occupation", "--log", "-o", "{tmp}/f.png"], "--log applies to the largest-mass"),
        (["space-time", "--times", "5", "-o", "{tmp}/f.png"], "--times applies to the "
         "correlation"),
        (["space-time", "--snapshots", "9", "-o", "{tmp}/f.png"], "expected FIRST:LAST"),
        (["space-time", "--snapshots", "5:2", "-o", "{tmp}/f.png"], "snapshots 5:2: expected"),
        (["space-time", "--replica", "7", "-o", "{tmp}/f.png"], "replica 7: expected 0 .. 3"),
        (["correlation", "--times", "1,x", "-o", "{tmp}/f.png"], "--times '1,x': expected"),
        (["occupation", "-o", "{tmp}/missing/f.png"], "does not exist"),
        (["occupation", "-o", "{run}/f.png"], "lies inside the run"),
        (["occupation"], "Missing option '--output'"),
    ],
)  # fmt: skip
def test_bad_input_is_one_line_with_status_2(run, tmp_path, args, message) -> None:
    before = _tree(run)
    args = [a.format(tmp=tmp_path, run=run) for a in args]
    res = _plot(str(run), *args)
    assert res.exit_code == 2
    assert res.stderr.startswith("massarc plot: error: ") and res.stderr.count("\n") == 1
    assert message in res.stderr
    assert list(tmp_path.iterdir()) == [] and _tree(run) == before


def test_a_collection_is_refused_naming_a_run_of_it(run, tmp_path) -> None:
    res = _plot(str(run.parent), "occupation", "-o", str(tmp_path / "f.png"))
    assert res.exit_code == 2
    assert f"a collection, not a run; plot one of its runs, e.g. {run}" in res.stderr


@pytest.mark.parametrize("name", [n for n in FIGURES if n != "space-time"])
def test_missing_summaries_name_the_array_and_the_command(tmp_path, name) -> None:
    res = _plot(str(SAMPLE), name, "-o", str(tmp_path / "f.png"))
    assert res.exit_code == 2 and res.stderr.count("\n") == 1
    assert "no stored summary '" in res.stderr
    assert f"`massarc summarize {SAMPLE}` makes it" in res.stderr
    assert not (tmp_path / "f.png").exists()


def test_a_missing_array_is_named(run, tmp_path) -> None:
    copy = Path(shutil.copytree(run, tmp_path / "partial.zarr"))
    shutil.rmtree(copy / "summaries" / "extreme_sample")
    res = _plot(str(copy), "extremes", "-o", str(tmp_path / "f.png"))
    assert res.exit_code == 2
    assert "no stored summary 'extreme_sample' (the stored summaries lack it)" in res.stderr


def _python(code: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=ROOT, env={**os.environ, "MPLBACKEND": "Agg"})  # fmt: skip


def test_without_matplotlib_the_command_says_what_to_install(run, tmp_path) -> None:
    out = tmp_path / "f.png"
    res = _python(
        "import sys; sys.modules['matplotlib'] = None\n"
        "from massarc.cli import main\n"
        f"sys.argv = ['massarc', 'plot', {str(run)!r}, 'occupation', '-o', {str(out)!r}]\n"
        "main()\n"
    )
    assert res.returncode == 2
    assert res.stderr.strip() == (
        'massarc plot: error: figures need matplotlib: pip install "massarc[plot]"'
    )
    assert not out.exists()


def test_help_check_and_the_figures_package_do_not_import_matplotlib() -> None:
    res = _python(
        "import sys\n"
        "from massarc.cli import cli\n"
        "import massarc.summaries.figures\n"
        "for args in (['--help'], ['plot', '--help'], ['check', 'samples/dune-strip.zarr', "
        "'--quiet']):\n"
        "    try:\n        cli(args, standalone_mode=False)\n"
        "    except SystemExit:\n        pass\n"
        "print('matplotlib' in sys.modules)\n"
    )
    assert res.returncode == 0, res.stderr
    assert res.stdout.strip().splitlines()[-1] == "False"
