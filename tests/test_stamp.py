"""Issue 11, section 5: the audit stamp (``check --stamp``) and ``massarc verify``.

The digest is checked against an independent implementation written here from the
specification (schema/FORMAT.md, section 10) with hashlib, json and zarr only, on the
frozen worked example tests/fixtures/stamp/ and on runs re-encoded with other codecs and
chunk shapes.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import struct
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
import pytest
import zarr
from _audit_runs import write_run
from click.testing import CliRunner
from zarr.codecs import BloscCodec, GzipCodec, ZstdCodec

from massarc.archive import ArchiveError, open_run
from massarc.archive import stamp as stamp_module
from massarc.archive.digest import content_digest
from massarc.archive.formats import convert
from massarc.cli import cli
from massarc.schema.spec import STAMP
from massarc.schema.version import __version__

FIXTURE = Path(__file__).parent / "fixtures" / "stamp" / "ring-stamped.zarr"
EXPECTED = FIXTURE.with_name("ring-stamped.digest")


def spec_digest(path: Path) -> str:
    """The content digest, written from FORMAT.md section 10 alone (not massarc's code)."""

    def frame(b: bytes) -> bytes:
        return struct.pack("<Q", len(b)) + b

    def canon(v: object) -> bytes:
        return json.dumps(v, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()

    g = zarr.open_group(path, mode="r")
    header = json.loads((path / "zarr.json").read_text())["attributes"]["massarc"]
    r, t = header["state"]["replicas"], header["state"]["snapshots"]
    h = hashlib.sha256(frame(b"massarc-content-digest") + frame(b"1") + frame(canon(header)))
    arrays = {"mass": g["mass"][:r, :t], "time": g["time"][:t]}
    for name in ("inflow", "outflow"):
        if name in g:
            arrays[name] = g[name][:r, :t]
    if "events" in g:
        for name, arr in g["events"].arrays():
            arrays[f"events/{name}"] = arr[:]
    for name in sorted(arrays, key=str.encode):
        a = np.asarray(arrays[name])
        h.update(frame(name.encode()) + frame(a.dtype.name.encode()) + frame(canon(a.shape)))
        h.update(struct.pack("<Q", a.nbytes) + a.astype(a.dtype.newbyteorder("<")).tobytes())
    return h.hexdigest()


def _cli(*args: str):
    return CliRunner().invoke(cli, list(args))


def _stamped(tmp_path: Path) -> Path:
    run = tmp_path / "run.zarr"
    shutil.copytree(FIXTURE, run)
    return run


def test_worked_example_matches_the_specification() -> None:
    # worked example: the frozen fixture and its digest, written once (tests/fixtures/stamp)
    expected = EXPECTED.read_text().split()[0]
    assert spec_digest(FIXTURE) == expected
    assert content_digest(open_run(FIXTURE)).value == expected
    assert json.loads((FIXTURE / STAMP).read_text())["digest"]["value"] == expected


def test_open_run_with_events_and_series_matches_the_specification() -> None:
    path = Path(__file__).parent / "fixtures" / "v1.1" / "open-strip-1d.zarr"
    d = content_digest(open_run(path))
    assert {"inflow", "outflow", "events/time"} <= set(d.parts)
    assert d.value == spec_digest(path)


def _rewrite(src: Path, dst: Path, chunks: int, compressors: list) -> None:
    """Copy a run with zarr directly, every array with other chunks and codecs."""
    a = zarr.open_group(src, mode="r")
    b = zarr.open_group(dst, mode="w", zarr_format=3)
    b.attrs.update(dict(a.attrs))
    for name, arr in a.arrays():
        shape = arr.shape
        grid = tuple(max(1, min(n, chunks)) for n in shape)
        new = b.create_array(
            name,
            shape=shape,
            chunks=grid,
            dtype=arr.dtype,
            fill_value=arr.fill_value,
            dimension_names=arr.metadata.dimension_names,
            compressors=compressors,
        )
        new[...] = arr[...]


@pytest.mark.parametrize(
    ("chunks", "compressors"),
    [(2, [GzipCodec(level=9)]), (3, [ZstdCodec(level=1)]), (1, [BloscCodec(cname="lz4")])],
)
def test_digest_survives_re_encoding_with_zarr(tmp_path: Path, chunks: int, compressors) -> None:
    other = tmp_path / "other.zarr"
    _rewrite(FIXTURE, other, chunks, compressors)
    assert zarr.open_array(other / "mass").chunks != zarr.open_array(FIXTURE / "mass").chunks
    assert content_digest(open_run(other)).value == EXPECTED.read_text().split()[0]
    shutil.copy(FIXTURE / STAMP, other / STAMP)  # the stamp travels with the data
    result = _cli("verify", str(other))
    assert result.exit_code == 0, result.output
    assert "matches its stamp" in result.output


def test_digest_survives_convert_with_other_options(tmp_path: Path) -> None:
    src = write_run(tmp_path / "src.zarr", replicas=2, snapshots=40, chunk=7)
    dst = tmp_path / "dst.zarr"
    convert(src, dst, options={"clevel": "1"})
    assert zarr.open_array(dst / "mass").chunks != zarr.open_array(src / "mass").chunks
    assert content_digest(open_run(dst)).value == content_digest(open_run(src)).value
    assert content_digest(open_run(dst)).value == spec_digest(dst)


def _edit_header(run: Path, edit) -> None:
    node = run / "zarr.json"
    doc = json.loads(node.read_text())
    edit(doc["attributes"]["massarc"])
    node.write_text(json.dumps(doc, indent=2))


@pytest.mark.parametrize(
    ("what", "part"),
    [
        ("mass", "mass"),
        ("time", "time"),
        ("model.b", "metadata"),
        ("seed", "metadata"),
    ],
)
def test_one_changed_value_is_detected(tmp_path: Path, what: str, part: str) -> None:
    run = _stamped(tmp_path)
    if what == "mass":
        arr = zarr.open_array(run / "mass", mode="r+")
        arr[1, 3, 5] = int(arr[1, 3, 5]) + 1
    elif what == "time":
        arr = zarr.open_array(run / "time", mode="r+")
        arr[2] = np.nextafter(arr[2], np.inf)  # the smallest change a float64 can make
    elif what == "model.b":
        _edit_header(run, lambda h: h["metadata"]["model"].update(b=3.25))
    else:
        _edit_header(run, lambda h: h["metadata"]["run"].update(seeds=[11, 13]))
    result = _cli("verify", str(run))
    assert result.exit_code == 1, result.output
    assert f"differs: {part}" in result.output
    assert content_digest(open_run(run, lenient=True)).value == spec_digest(run)


def test_a_lost_chunk_is_a_mismatch_naming_it(tmp_path: Path) -> None:
    run = _stamped(tmp_path)
    (run / "mass" / "c" / "1" / "0" / "0").unlink()
    result = _cli("verify", str(run))
    assert result.exit_code == 1
    assert "mass/c/1/0/0" in result.output


def test_no_stamp_or_a_broken_one_is_bad_input(tmp_path: Path) -> None:
    run = tmp_path / "run.zarr"
    shutil.copytree(FIXTURE, run)
    (run / STAMP).unlink()
    result = _cli("verify", str(run))
    assert result.exit_code == 2
    assert "no stamp (massarc-stamp.json)" in result.output
    (run / STAMP).write_text('{"format": "massarc-stamp", "format_version": "1.0", "dig')
    result = _cli("verify", str(run))
    assert result.exit_code == 2
    assert f"{STAMP}: not JSON" in result.output
    assert len(result.output.strip().splitlines()) == 1


def test_stamp_records_version_time_checks_options_and_origins(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=30)
    config = tmp_path / "audit.toml"
    config.write_text("[checks.boundary]\nalpha = 0.001\n")
    before = datetime.now(UTC) - timedelta(seconds=2)
    result = _cli(
        "check", str(run), "-q", "--stamp", "--config", str(config),
        "--set", "conservation.tolerance=0",
    )  # fmt: skip
    assert result.exit_code in (0, 1), result.output
    doc = json.loads((run / STAMP).read_text())
    assert doc["format"] == "massarc-stamp"
    assert doc["massarc_version"] == __version__
    created = datetime.fromisoformat(doc["created"])
    assert before <= created <= datetime.now(UTC) + timedelta(seconds=2)
    checks = {c["id"]: c for c in doc["audit"]["checks"]}
    report = json.loads(_cli("check", str(run), "-q", "--as", "json").output)
    assert set(checks) == {c["id"] for c in report["runs"][0]["checks"]}
    assert checks["conservation"]["options"]["tolerance"] == {"value": 0, "from": "--set"}
    assert checks["boundary"]["options"]["alpha"] == {"value": 0.001, "from": str(config)}
    assert checks["boundary"]["options"]["floor"]["from"] == "default"
    assert doc["audit"]["config"] == str(config)
    assert doc["digest"]["value"] == spec_digest(run)
    assert _cli("verify", str(run)).exit_code == 0


def test_incomplete_and_zip_runs_are_refused_before_the_audit(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=30)
    _edit_header(run, lambda h: h["state"].update(complete=False))
    result = _cli("check", str(run), "-q", "--stamp")
    assert result.exit_code == 2
    assert "cannot stamp: the run is incomplete" in result.output
    assert not (run / STAMP).exists()
    zipped = Path(__file__).parent / "fixtures" / "v1.1" / "ring.zarr.zip"
    result = _cli("check", str(zipped), "-q", "--stamp")
    assert result.exit_code == 2
    assert "only into a run in a local directory" in result.output


def _leftovers(run: Path) -> list[str]:
    return sorted(p.name for p in run.iterdir() if p.name.startswith(f".{STAMP}"))


@pytest.mark.parametrize("fails", ["fsync", "replace", "write"])
def test_a_failed_stamp_write_leaves_the_old_stamp(tmp_path: Path, monkeypatch, fails) -> None:
    run = _stamped(tmp_path)
    old = (run / STAMP).read_bytes()
    opened = open_run(run)
    doc = stamp_module.stamp_document(content_digest(opened), {"status": "pass"})

    def boom(*args, **kwargs):
        raise OSError(28, "No space left on device")

    target = {"fsync": "fsync", "replace": "replace", "write": "fdopen"}[fails]
    monkeypatch.setattr(stamp_module.os, target, boom)
    with pytest.raises(ArchiveError, match="cannot write the stamp"):
        stamp_module.write_stamp(opened, doc)
    assert (run / STAMP).read_bytes() == old
    assert _leftovers(run) == []


def test_a_failed_first_stamp_leaves_none(tmp_path: Path, monkeypatch) -> None:
    run = _stamped(tmp_path)
    (run / STAMP).unlink()
    opened = open_run(run)
    doc = stamp_module.stamp_document(content_digest(opened), {"status": "pass"})
    monkeypatch.setattr(
        stamp_module.os, "replace", lambda *a: (_ for _ in ()).throw(OSError(5, "I/O"))
    )
    with pytest.raises(ArchiveError):
        stamp_module.write_stamp(opened, doc)
    assert not (run / STAMP).exists()
    assert _leftovers(run) == []


def test_a_read_only_run_is_refused_with_a_clear_message(tmp_path: Path, monkeypatch) -> None:
    # The suite may run as root, for whom chmod does not make a directory read-only; the
    # refusal is what the file system says when the temporary file cannot be created.
    run = _stamped(tmp_path)
    old = (run / STAMP).read_bytes()
    real_open = os.open

    def read_only(path, flags, *args):
        if flags & os.O_CREAT:
            raise OSError(30, "Read-only file system")
        return real_open(path, flags, *args)

    monkeypatch.setattr(stamp_module.os, "open", read_only)
    opened = open_run(run)
    with pytest.raises(ArchiveError, match=r"Read-only file system.*writable run directory"):
        stamp_module.write_stamp(opened, stamp_module.stamp_document(content_digest(opened), {}))
    assert (run / STAMP).read_bytes() == old


def test_stamping_leaves_the_data_and_header_untouched(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=30)
    before = {p: p.read_bytes() for p in run.rglob("*") if p.is_file()}
    assert _cli("check", str(run), "-q", "--stamp", "--only", "schema").exit_code == 0
    after = {p: p.read_bytes() for p in run.rglob("*") if p.is_file() and p.name != STAMP}
    assert after == before
    # the stamp is no Zarr node: a second audit still passes integrity
    result = _cli("check", str(run), "-q", "--only", "integrity", "--as", "json")
    assert json.loads(result.output)["runs"][0]["checks"][0]["status"] == "pass"
