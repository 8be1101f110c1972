"""Issue 11, defect 14: messages. A huge token is not echoed whole; a byte-order mark is
named as such; a CSV error in a site column names that column, not "mass"."""

from __future__ import annotations

import shutil
from pathlib import Path

from click.testing import CliRunner

from massarc.cli import cli

FIXTURES = Path(__file__).resolve().parent / "fixtures" / "v1.1"
META = [
    "--set", "model.family=zrp", "--set", "model.b=3", "--set", "lattice.sites=[3]",
    "--set", "lattice.boundary=periodic", "--set", "run.regime=stationary",
]  # fmt: skip


def _error_line(*args: str) -> str:
    res = CliRunner().invoke(cli, ["convert", *args], catch_exceptions=False)
    assert res.exit_code == 2, res.output
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1, res.stderr[:300]
    return lines[0]


def test_a_huge_token_is_not_echoed_whole(tmp_path: Path) -> None:
    src = tmp_path / "big.txt"
    token = "x" + "9" * 1_000_000
    src.write_text(f"# massarc-text 1\n# replica 0\n0.0 1 2 {token}\n")
    line = _error_line(str(src), str(tmp_path / "o.zarr"), *META)
    assert len(line) < 400
    assert "site 2" in line and "1000001 characters" in line


def test_a_byte_order_mark_is_named(tmp_path: Path) -> None:
    src = tmp_path / "bom.txt"
    src.write_bytes(b"\xef\xbb\xbf# massarc-text 1\n# replica 0\n0.0 1 2 3\n")
    line = _error_line(str(src), str(tmp_path / "o.zarr"), *META)
    assert "bom.txt: line 1: starts with a byte-order mark" in line
    assert "massarc-text'" not in line  # not the old "got 'massarc-text'" as a mass


def test_csv_site_column_errors_name_the_column(tmp_path: Path) -> None:
    src = tmp_path / "box.csv"
    shutil.copy(FIXTURES / "box.csv", src)
    lines = src.read_text().splitlines(keepends=True)
    head = next(i for i, text in enumerate(lines) if text.startswith("replica,"))
    rep, t, y, _x, m = lines[head + 2].strip().split(",")
    lines[head + 2] = f"{rep},{t},{y},one,{m}\n"
    src.write_text("".join(lines))
    line = _error_line(str(src), str(tmp_path / "o.zarr"))
    assert f"line {head + 3}: column x: expected a non-negative integer; got 'one'" in line
    assert "mass" not in line.split("column x")[1]
