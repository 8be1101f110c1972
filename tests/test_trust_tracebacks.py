"""Issue 11, defect 13: damaged archives and inputs give one line and exit status 2 (or a
failed audit, exit 1), never a traceback; ``info`` refuses a major format version it does
not know (schema/FORMAT.md, section 8)."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import pytest
from _audit_runs import write_run
from click.testing import CliRunner

from massarc.cli import cli


def _edit_json(rel: str, change: Callable[[dict], None]) -> Callable[[Path], None]:
    def edit(run: Path) -> None:
        node = run / rel
        doc = json.loads(node.read_text())
        change(doc)
        node.write_text(json.dumps(doc))

    return edit


def _corrupt_time(run: Path) -> None:
    for f in (run / "time" / "c").rglob("*"):
        if f.is_file():
            f.write_bytes(b"not a chunk")


DAMAGE: dict[str, tuple[Callable[[Path], None], str]] = {
    # name: (damage, what the one line of `info` or `convert` must say)
    "mass-not-json": (lambda r: (r / "mass" / "zarr.json").write_text("{"), "mass/zarr.json"),
    "mass-a-list": (lambda r: (r / "mass" / "zarr.json").write_text("[1]"), "mass/zarr.json"),
    "mass-zarr-v2": (
        _edit_json("mass/zarr.json", lambda d: d.update(zarr_format=2)),
        "mass/zarr.json",
    ),
    "time-not-json": (lambda r: (r / "time" / "zarr.json").write_text("{"), "time/zarr.json"),
    "negative-shape": (
        _edit_json("mass/zarr.json", lambda d: d.update(shape=[-3, *d["shape"][1:]])),
        "mass/zarr.json",
    ),
    "total-mass-1e400": (
        lambda r: (r / "zarr.json").write_text(
            (r / "zarr.json").read_text().replace('"total_mass": 40', '"total_mass": 1e400')
        ),
        "total_mass",
    ),
    "time-chunk-corrupt": (_corrupt_time, "time/c/0"),
}


def _invoke(*args: str):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)  # a traceback fails


def _no_traceback(res, command: str) -> None:
    assert res.exit_code in (0, 1, 2), res.output
    if res.exit_code == 2:
        lines = res.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith(f"massarc {command}: error: ")


@pytest.mark.parametrize("case", list(DAMAGE))
def test_damaged_run_gives_one_line_or_a_verdict(tmp_path: Path, case: str) -> None:
    damage, named = DAMAGE[case]
    run = write_run(tmp_path / "run.zarr", snapshots=20)
    damage(run)
    check = _invoke("check", str(run))
    _no_traceback(check, "check")
    assert check.exit_code in (1, 2)  # never a pass
    info = _invoke("info", str(run))
    _no_traceback(info, "info")
    convert = _invoke("convert", str(run), str(tmp_path / "out.npz"))
    _no_traceback(convert, "convert")
    assert convert.exit_code == 2 and named in convert.stderr
    assert not (tmp_path / "out.npz").exists()


def test_info_refuses_an_unknown_major_version(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", snapshots=20)
    _edit_json("zarr.json", lambda d: d["attributes"]["massarc"].update(format_version="2.0"))(run)
    res = _invoke("info", str(run))
    _no_traceback(res, "info")
    assert res.exit_code == 2 and "format_version: expected 1.x" in res.stderr


def test_a_zip_that_is_not_a_zip(tmp_path: Path) -> None:
    fake = tmp_path / "run.zip"
    fake.write_bytes(b"this is not a zip archive")
    for command in ("info", "check"):
        res = _invoke(command, str(fake))
        _no_traceback(res, command)
        assert res.exit_code == 2 and "run.zip: expected a zip file" in res.stderr


def _text_run(path: Path, meta_line: str = "") -> Path:
    path.write_text("# massarc-text 1\n" + meta_line + "# replica 0\n0.0 1 2 3\n1.0 2 2 2\n")
    return path


@pytest.mark.parametrize("where", ["--meta", "# massarc-meta"])
def test_deeply_nested_metadata_is_refused(tmp_path: Path, where: str) -> None:
    deep = '{"extra": ' + "[" * 50000 + "]" * 50000 + "}"
    meta = {
        "model": {"family": "zrp", "b": 3.0},
        "lattice": {"sites": [3], "boundary": "periodic"},
        "run": {"regime": "stationary"},
    }
    if where == "--meta":
        (tmp_path / "meta.json").write_text(deep)
        src = _text_run(tmp_path / "in.txt", f"# massarc-meta: {json.dumps(meta)}\n")
        res = _invoke(
            "convert", str(src), str(tmp_path / "o.zarr"), "--meta", str(tmp_path / "meta.json")
        )
    else:
        src = _text_run(tmp_path / "in.txt", f"# massarc-meta: {deep}\n")
        res = _invoke("convert", str(src), str(tmp_path / "o.zarr"))
    _no_traceback(res, "convert")
    assert res.exit_code == 2 and "nested at most 64 deep" in res.stderr
    assert not (tmp_path / "o.zarr").exists()
