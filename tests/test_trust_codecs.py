"""Issue 11, defect 4 and "refuse before decoding": the Zarr metadata of every array of a
run is checked against an allow-list of data types and codecs, and against the chunk-size
cap, before any chunk is decoded. The refusal names the array and the codec. Each hostile
case runs in a child process under an address-space cap (tests/_hostile.py) and a timeout."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import pytest
from _audit_runs import write_run
from _hostile import assert_refused_before_decoding, capped_massarc


def _edit(rel: str, change: Callable[[dict], None]) -> Callable[[Path], None]:
    def edit(run: Path) -> None:
        node = run / rel / "zarr.json"
        doc = json.loads(node.read_text())
        change(doc)
        node.write_text(json.dumps(doc))

    return edit


def _vlen_bytes(doc: dict) -> None:  # 17 GB of memory before: each byte a length prefix
    doc["codecs"] = [{"name": "vlen-bytes", "configuration": {}}]


def _pickle(doc: dict) -> None:
    doc["codecs"] = [
        {"name": "bytes", "configuration": {"endian": "little"}},
        {"name": "numcodecs.pickle", "configuration": {"protocol": 5}},
    ]


def _object(doc: dict) -> None:
    doc["data_type"] = "object"


def _unknown(doc: dict) -> None:
    doc["codecs"].append({"name": "made-up-codec"})


def _huge_chunks(doc: dict) -> None:
    doc["chunk_grid"]["configuration"]["chunk_shape"] = [1, 10**9, 16]


CASES = {
    "vlen-bytes": ("mass", _vlen_bytes, "mass: codec 'vlen-bytes' is not allowed"),
    "pickle": ("time", _pickle, "time: codec 'numcodecs.pickle' is not allowed"),
    "object": ("mass", _object, "mass: data type 'object' is not allowed"),
    "unknown": ("mass", _unknown, "mass: codec 'made-up-codec' is not allowed"),
    "huge-chunks": ("mass", _huge_chunks, "mass: chunks of [1, 1000000000, 16] decode to"),
}


@pytest.mark.parametrize("case", list(CASES))
def test_refused_before_decoding(tmp_path: Path, case: str) -> None:
    array, change, message = CASES[case]
    run = write_run(tmp_path / "run.zarr", snapshots=20)
    _edit(array, change)(run)
    stderr = assert_refused_before_decoding(run, tmp_path / "out.npz", message)
    assert len(stderr.strip().splitlines()) == 1


def test_a_sweep_goes_on_past_a_refused_run(tmp_path: Path) -> None:
    sweep = tmp_path / "sweep"
    write_run(sweep / "a.zarr", snapshots=20)
    bad = write_run(sweep / "b.zarr", snapshots=20)
    _edit("mass", _unknown)(bad)
    check = capped_massarc("check", str(sweep), "--as", "json", timeout=60)
    assert check.returncode == 1, check.stderr[-2000:]
    runs = {Path(r["path"]).name: r for r in json.loads(check.stdout)["runs"]}
    assert runs["a.zarr"]["status"] in ("pass", "warn")  # small invented data may warn
    schema = next(c for c in runs["b.zarr"]["checks"] if c["id"] == "schema")
    assert schema["status"] == "fail" and "made-up-codec" in schema["message"]
