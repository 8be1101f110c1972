"""``massarc report``: the page written (exit 0 whatever the checks found), the audit's
settings honoured with where each option came from, summaries computed in memory on
request, and bad input refused in one line with exit status 2, nothing written and the
runs untouched."""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import numpy as np
import pytest
from _audit_runs import write_run
from _page_audit import page_problems, read_page
from click.testing import CliRunner

from massarc.cli import COMMANDS, cli

ROOT = Path(__file__).resolve().parents[1]
BASIC = ["--only", "schema", "--only", "integrity", "--only", "conservation"]


def _report(*args: str):
    return CliRunner().invoke(cli, ["report", *args], catch_exceptions=False)


def _tree(path: Path) -> dict[str, tuple[int, int]]:
    return {p.relative_to(path).as_posix(): (p.stat().st_size, p.stat().st_mtime_ns)
            for p in [path, *path.rglob("*")]}  # fmt: skip


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("report")

    def lose(m, t):  # replica 1 loses one unit at snapshot 30 (and keeps it lost)
        site = int(np.argmax(m[1, 30]))
        m[1, 30:, site] = np.maximum(m[1, 30:, site].astype(np.int64) - 1, 0)

    sweep = d / "sweep"
    sweep.mkdir()
    return {
        "good": write_run(sweep / "good.zarr"),
        "bad": write_run(sweep / "bad.zarr", edit=lose, strict=False),
        "sweep": sweep,
    }


def test_the_command_is_listed() -> None:
    assert "report" in COMMANDS
    assert "report" in CliRunner().invoke(cli, ["--help"]).stdout


def test_a_failing_run_gets_its_page_with_exit_0(runs, tmp_path) -> None:
    before = _tree(runs["sweep"])
    out = tmp_path / "page.html"
    res = _report(str(runs["good"]), str(runs["bad"]), *BASIC, "-o", str(out))
    assert res.exit_code == 0, res.output
    assert res.stdout.strip() == f"report of 2 run(s) written to {out}"
    page = out.read_text(encoding="utf-8")
    assert page_problems(page) == []
    # the planted loss: replica 1 loses a unit at snapshot 30 (the conservation check's where)
    assert "replica 1, snapshot 30" in page
    assert "This run has no stored summaries" in page
    assert _tree(runs["sweep"]) == before
    assert [p.name for p in tmp_path.iterdir()] == ["page.html"]  # no temporary left
    assert oct(out.stat().st_mode & 0o777) == oct(0o666 & ~_umask())


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def test_settings_are_honoured_and_their_origins_shown(runs, tmp_path) -> None:
    config = tmp_path / "rules.toml"
    config.write_text("[checks.conservation]\ntolerance = 2\n")
    out = tmp_path / "page.html"
    res = _report(str(runs["bad"]), *BASIC, "--only", "steady-state", "--config", str(config),
                  "--set", "steady-state.rhat_max=1.2", "--strict", "-o", str(out))  # fmt: skip
    assert res.exit_code == 0, res.output
    page = out.read_text(encoding="utf-8")
    # a loss of one unit is within a tolerance of 2: conservation passes
    assert '<tr class="st-pass"><th scope="row"><code>conservation</code>' in page
    rows = {
        "conservation.tolerance": f"<td>2</td><td>0</td><td>{config}</td>",
        "steady-state.rhat_max": "<td>1.2</td><td>1.05</td><td>--set</td>",
    }
    for option, cells in rows.items():
        assert f'<th scope="row"><code>{option}</code></th>{cells}' in page
    assert "--strict" in page and f"<td>{config}</td>" in page
    assert "warnings fail (strict)</th><td>yes" in page


def test_summarize_computes_in_memory_and_writes_nothing(tmp_path) -> None:
    run = Path(shutil.copytree(ROOT / "samples" / "dune-strip.zarr", tmp_path / "d.zarr"))
    before = _tree(run)
    out = tmp_path / "page.html"
    res = _report(str(run), *BASIC, "--summarize", "-q", "-o", str(out))
    assert res.exit_code == 0 and res.stdout == "", res.output
    page = out.read_text(encoding="utf-8")
    assert "held in memory; the run was not written" in page
    assert len(read_page(page).images) == 6
    assert _tree(run) == before


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["{missing}", "-o", "{tmp}/r.html"], "{missing}"),
        (["{tmp}", "-o", "{tmp}/r.html"], "holds no massarc run"),
        (["{good}", "-o", "{tmp}/no/r.html"], "directory {tmp}/no does not exist"),
        (["{good}", "-o", "{tmp}"], "is a directory"),
        (["{good}", "--set", "conservation.nope=1", "-o", "{tmp}/r.html"], "nope"),
        (["{good}", "--only", "no-such-check", "-o", "{tmp}/r.html"], "no-such-check"),
        (["{good}"], "Missing option '--output'"),
        (["-o", "{tmp}/r.html"], "expected at least one RUN_OR_COLLECTION"),
    ],
)
def test_bad_input_is_one_line_with_status_2(runs, tmp_path, args, message) -> None:
    names = {"missing": tmp_path / "missing.zarr", "tmp": tmp_path, "good": runs["good"]}
    res = _report(*(a.format(**names) for a in args))
    assert res.exit_code == 2, res.output
    assert res.stderr.startswith("massarc report: error: ")
    assert res.stderr.count("\n") == 1 and message.format(**names) in res.stderr
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize(
    ("given", "inside"),
    [("good", "good.zarr/page.html"), ("sweep", "good.zarr/page.html"), ("sweep", "page.html")],
)
def test_an_output_inside_a_run_or_its_collection_is_refused(runs, given, inside) -> None:
    before = _tree(runs["sweep"])
    res = _report(str(runs[given]), *BASIC, "-o", str(runs["sweep"] / inside))
    assert res.exit_code == 2, res.output
    assert "the report never writes into a run" in res.stderr
    assert _tree(runs["sweep"]) == before


def test_a_run_with_broken_metadata_still_gets_its_page(tmp_path) -> None:
    run = Path(shutil.copytree(ROOT / "samples" / "dune-strip.zarr", tmp_path / "d.zarr"))
    header = json.loads((run / "zarr.json").read_text())
    del header["attributes"]["massarc"]["metadata"]["model"]
    (run / "zarr.json").write_text(json.dumps(header))
    out = tmp_path / "page.html"
    res = _report(str(run), "--only", "schema", "--summarize", "-q", "-o", str(out))
    assert res.exit_code == 0, res.output
    page = out.read_text(encoding="utf-8")
    assert page_problems(page) == []
    assert '<tr class="st-fail"><th scope="row"><code>schema</code>' in page
    assert "The metadata cannot be read: " in page and "model" in page
    assert "They could not be computed here: " in page
