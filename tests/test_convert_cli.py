"""``massarc convert`` from the command line: the npz contract, bad input, exports."""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest
from click.testing import CliRunner

from massarc.archive import create_run, open_run
from massarc.cli import cli
from massarc.schema import parse_metadata

CONTRACT_META = """\
[model]
family = "zrp"
b = 3.5
drift = "asymmetric"
[lattice]
sites = [200]
boundary = "periodic"
[run]
regime = "stationary"
"""
SMALL = {
    "model": {"family": "zrp", "b": 1.5},
    "lattice": {"sites": [3], "boundary": "periodic"},
    "run": {"regime": "transient"},
}


def _run(*args: object) -> tuple[int, str, str]:
    result = CliRunner().invoke(cli, [str(a) for a in args])
    return result.exit_code, result.stdout, result.stderr


def _digest(path: Path) -> str:
    files = sorted(p for p in path.rglob("*") if p.is_file()) if path.is_dir() else [path]
    h = hashlib.sha256()
    for f in files:
        h.update(f.read_bytes())
    return h.hexdigest()


@pytest.fixture
def meta_toml(tmp_path: Path) -> Path:
    path = tmp_path / "meta.toml"
    path.write_text(CONTRACT_META)
    return path


@pytest.mark.parametrize("layout", ["replica-time-site", "time-site"])
def test_contract_npz_to_archive(layout, tmp_path, meta_toml):
    rng = np.random.default_rng(7)
    mass = rng.multinomial(400, np.full(200, 1 / 200), size=(4, 30))
    if layout == "time-site":
        mass = mass[0]
    time = np.linspace(0.0, 29.0, 30)
    np.savez(tmp_path / "run.npz", mass=mass, time=time)
    code, out, err = _run(
        "convert", tmp_path / "run.npz", tmp_path / "run.zarr", "--meta", meta_toml
    )
    assert code == 0, err
    run = open_run(tmp_path / "run.zarr")
    assert run.complete and run.meta.model.b == 3.5 and run.meta.run.total_mass == 400
    got = np.stack([run.read(r) for r in range(run.n_replicas)])
    np.testing.assert_array_equal(got, mass.reshape(-1, 30, 200))
    np.testing.assert_array_equal(run.times, time)
    assert "run.zarr" in out


def test_contract_through_the_installed_console_script(tmp_path, meta_toml):
    mass = np.random.default_rng(1).multinomial(50, np.full(200, 1 / 200), size=(2, 3))
    np.savez(tmp_path / "run.npz", mass=mass, time=np.arange(3.0))
    exe = Path(sys.executable).with_name("massarc")
    proc = subprocess.run(
        [exe, "convert", "run.npz", "run.zarr", "--meta", "meta.toml"],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    assert open_run(tmp_path / "run.zarr").shape == (2, 3, 200)


def test_export_and_back_without_meta(tmp_path):
    meta = parse_metadata(SMALL)
    with create_run(tmp_path / "a.zarr", meta) as w:
        w.append([0.0, 0.5], np.array([[[1, 0, 2], [0, 1, 2]]]))
    assert _run("convert", tmp_path / "a.zarr", tmp_path / "a.txt")[0] == 0
    assert _run("convert", tmp_path / "a.txt", tmp_path / "b.zarr")[0] == 0
    assert open_run(tmp_path / "b.zarr").meta == open_run(tmp_path / "a.zarr").meta
    code, out, _ = _run("convert", "--list-formats")
    assert code == 0 and "csv-long" in out and "--from NAME" in out


@pytest.mark.parametrize(
    ("destination", "expect"),
    [
        (".", "does not contain the source"),  # the parent directory (issue 11, defect 10)
        ("a.zarr", "other than the source"),
        ("a.zarr/out.npz", "outside the source"),
    ],
)
def test_overwrite_never_deletes_or_writes_into_the_source(tmp_path, destination, expect):
    # before the guard, `convert anc/run.zarr anc --to zarr --overwrite` removed run.zarr and
    # every unrelated file of anc/ (common practice: a destination must not hold the input)
    meta = parse_metadata(SMALL)
    with create_run(tmp_path / "a.zarr", meta) as w:
        w.append([0.0, 0.5], np.array([[[1, 0, 2], [0, 1, 2]]]))
    (tmp_path / "notes.txt").write_text("field notes")
    before = {p: _digest(p) for p in (tmp_path / "a.zarr", tmp_path / "notes.txt")}
    dst = tmp_path / destination
    code, _, err = _run(
        "convert",
        tmp_path / "a.zarr",
        dst,
        "--to",
        "zarr" if destination == "." else "npz",
        "--overwrite",
    )
    assert code == 2 and expect in err and err.count("\n") == 1, err
    assert {p: _digest(p) for p in before} == before
    assert not (tmp_path / "a.zarr" / "out.npz").exists()


# -- bad input ------------------------------------------------------------------------


def _write(tmp_path: Path, name: str, content: str | bytes) -> Path:
    path = tmp_path / name
    path.write_bytes(content.encode() if isinstance(content, str) else content)
    return path


def _meta_line(**changes: object) -> str:
    meta = json.loads(json.dumps(SMALL))
    for key, value in changes.items():
        section, field = key.split("__")
        meta[section][field] = value
    return "# massarc-meta: " + json.dumps(meta) + "\n"


TEXT_CASES = {
    "ragged": ("0 1 2 3\n1 1 2\n", "line 3: expected 3 masses"),
    "not-integer": ("0 1 2 3\n1 1 2.5 0\n", "line 3: replica 0, snapshot 1, site 1"),
    "negative": ("0 1 2 3\n1 1 -2 5\n", "line 3: replica 0, snapshot 1, site 1: mass -2"),
    "nan-mass": ("0 1 2 3\n1 nan 2 3\n", "line 3: replica 0, snapshot 1, site 0"),
    "backwards": ("0 1 2 3\n2 1 2 3\n1 1 2 3\n", "line 4: replica 0, snapshot 2: time 1.0 is not"),
    "nan-time": ("0 1 2 3\nnan 1 2 3\n", "line 3: replica 0, snapshot 1: time nan is not finite"),
    "bad-time": ("0 1 2 3\nabc 1 2 3\n", "line 3: expected a number for the time"),
    "width": ("0 1 2 3 4\n", "line 2: metadata contradicts the data: lattice.sites is [3]"),
    "short-replica": ("0 1 2 3\n1 1 2 3\n\n0 1 2 3\n", "replica 1 ends after 1 of 2 snapshots"),
    "replica-times": (
        "0 1 2 3\n1 3 2 1\n# replica 1\n0 1 2 3\n2 1 2 3\n",
        "line 6: replica 1, snapshot 1: time 2.0 differs from replica 0's 1.0",
    ),
    "replica-order": ("# replica 0\n0 1 2 3\n# replica 2\n0 1 2 3\n", "expected '# replica 1'"),
}


def _assert_rejected(
    code: int, err: str, expect: str, dst: Path, inputs: list[Path], before: list[str]
) -> None:
    assert code == 2, err
    assert err.count("\n") == 1 and "massarc convert: error:" in err  # one line
    assert expect in err, err
    assert not dst.exists()
    assert not list(dst.parent.glob(f"{dst.name}.partial-*"))  # the temporary is gone
    assert [_digest(p) for p in inputs] == before  # inputs never modified


@pytest.mark.parametrize("case", sorted(TEXT_CASES))
def test_bad_text_input(case, tmp_path):
    body, expect = TEXT_CASES[case]
    src = _write(tmp_path, "in.txt", _meta_line() + body)
    before = [_digest(src)]
    dst = tmp_path / "out.zarr"
    code, _, err = _run("convert", src, dst)
    _assert_rejected(code, err, expect, dst, [src], before)
    assert str(src) in err


@pytest.mark.parametrize(
    ("changes", "expect"),
    [
        ({"run__total_mass": 7}, "run.total_mass is 7 but replica 0, snapshot 0 holds 6"),
        ({"run__seeds": [1, 2, 3]}, "run.seeds has 3 entries but the data hold 2 replicas"),
        ({"lattice__sites": [4]}, "lattice.sites is [4] (4 sites) but the line holds 3"),
    ],
)
def test_metadata_that_contradicts_the_data(changes, expect, tmp_path):
    src = _write(tmp_path, "in.txt", _meta_line(**changes) + "0 1 2 3\n\n0 3 2 1\n")
    dst = tmp_path / "out.zarr"
    code, _, err = _run("convert", src, dst)
    _assert_rejected(code, err, expect, dst, [src], [_digest(src)])


def test_missing_metadata_names_the_key_and_how_to_give_it(tmp_path):
    src = _write(tmp_path, "in.txt", "0 1 2 3\n")
    dst = tmp_path / "out.zarr"
    code, _, err = _run(
        "convert",
        src,
        dst,
        "--set",
        "model.family=zrp",
        "--set",
        "model.b=1.0",
        "--set",
        "run.regime=transient",
    )
    _assert_rejected(code, err, "lattice: required key is missing", dst, [src], [_digest(src)])
    assert "--meta FILE" in err and "--set lattice=" in err


CSV_CASES = {
    "unknown-long": ("replica,time,site,mass,colour\n0,0,1,2,red\n", "unknown column 'colour'"),
    "unknown-wide": ("replica,time,m0,m1,extra\n0,0,1,2,3\n", "unknown column 'extra'"),
    "ungrouped": (
        "replica,time,site,mass\n0,0,0,1\n0,1,0,1\n0,0,1,1\n",
        "line 5: rows must be grouped by (replica, time)",
    ),
    "replica-back": (
        "replica,time,site,mass\n0,0,0,1\n1,0,0,1\n0,1,0,1\n",
        "line 5: rows must be grouped by replica",
    ),
    "duplicate-site": (
        "replica,time,site,mass\n0,0,1,1\n0,0,1,2\n",
        "line 4: site 1 appears twice",
    ),
    "outside": ("replica,time,site,mass\n0,0,3,1\n", "line 3: site 3 is outside the lattice"),
    "ragged-wide": ("replica,time,m0,m1,m2\n0,0,1,2,3\n0,1,1,2\n", "line 4: expected 5 fields"),
    "empty-field": ("replica,time,m0,m1,m2\n0,0,1,,3\n", "line 3: field 4 is empty"),
}


@pytest.mark.parametrize("case", sorted(CSV_CASES))
def test_bad_csv_input(case, tmp_path):
    body, expect = CSV_CASES[case]
    name = "in.wide.csv" if "wide" in case or "field" in case else "in.csv"
    src = _write(tmp_path, name, _meta_line() + body)
    dst = tmp_path / "out.zarr"
    code, _, err = _run("convert", src, dst)
    _assert_rejected(code, err, expect, dst, [src], [_digest(src)])


def test_bad_arrays_truncated_files_and_missing_dataset(tmp_path):
    meta = _write(tmp_path, "m.json", json.dumps(SMALL))
    dst = tmp_path / "out.zarr"
    np.save(tmp_path / "full.npy", np.ones((2, 50, 3), np.uint16))
    raw = (tmp_path / "full.npy").read_bytes()
    cases = [
        (_write(tmp_path, "cut.npy", raw[:-10]), "truncated: the .npy header promises"),
        (_write(tmp_path, "wrong.npy", (tmp_path / "full.npy").read_bytes()), None),
    ]
    np.save(tmp_path / "wrong.npy", np.ones((2, 2, 5, 3)))
    cases[1] = (tmp_path / "wrong.npy", "expected a (time, site) or (replica, time, site) array")
    nanarr = np.ones((4, 3))
    nanarr[2, 1] = np.nan
    np.save(tmp_path / "nan.npy", nanarr)
    cases.append((tmp_path / "nan.npy", "replica 0, snapshot 2, site 1: mass nan is not an"))
    np.savez_compressed(tmp_path / "z.npz", mass=np.ones((3, 400, 3), np.uint16))
    zraw = (tmp_path / "z.npz").read_bytes()
    cases.append((_write(tmp_path, "cutz.npz", zraw[: len(zraw) // 2]), "not a readable .npz"))
    with h5py.File(tmp_path / "h.h5", "w") as f:
        f.create_dataset("traj/occupancy", data=np.ones((4, 3)))
    cases.append((tmp_path / "h.h5", "no dataset 'mass' (datasets: /traj/occupancy)"))
    hraw = (tmp_path / "h.h5").read_bytes()
    cases.append((_write(tmp_path, "cut.h5", hraw[: len(hraw) // 3]), "cannot open as HDF5"))
    for src, expect in cases:
        before = [_digest(src)]
        code, _, err = _run("convert", src, dst, "--meta", meta)
        _assert_rejected(code, err, expect, dst, [src], before)
        assert str(src) in err


def test_existing_destination_is_kept_without_overwrite(tmp_path):
    src = _write(tmp_path, "in.txt", _meta_line() + "0 1 2 3\n")
    dst = _write(tmp_path, "out.txt", "precious\n")
    code, _, err = _run("convert", src, dst)
    assert code == 2 and "already exists (pass --overwrite" in err
    assert dst.read_text() == "precious\n"
    assert _run("convert", src, tmp_path / "a.zarr")[0] == 0
    assert _run("convert", src, tmp_path / "a.zarr")[0] == 2
    assert _run("convert", src, tmp_path / "a.zarr", "--overwrite")[0] == 0


def test_unknown_format_and_options(tmp_path):
    src = _write(tmp_path, "in.bin", b"\x00\x00garbage")
    code, _, err = _run("convert", src, tmp_path / "o.zarr")
    assert code == 2 and "--from NAME" in err and "known formats:" in err
    txt = _write(tmp_path, "in.txt", _meta_line() + "0 1 2 3\n")
    code, _, err = _run("convert", txt, tmp_path / "o.zarr", "--option", "colour=red")
    assert code == 2 and "unknown option 'colour'" in err
    code, _, err = _run("convert", txt, tmp_path / "o.zarr", "--option", "colour")
    assert code == 2 and "expected KEY=VALUE" in err
