"""Storing the summaries: idempotent, recomputed on request or when the options change,
never touching mass, time or the header, refusing a run being written, and atomic: a
writer killed at any moment leaves the old summaries or the new ones, never a mix."""

from __future__ import annotations

import hashlib
import os
import pickle
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from conftest import make_meta, multinomial_run

from massarc.archive import ArchiveError, create_run, open_run
from massarc.archive import summaries as store
from massarc.summaries import summarize

QUICK = {"probes": 4, "resamples": 19}


def _run(path: Path, *, complete: bool = True) -> Path:
    data = multinomial_run(3, 24, (10,), mass=30, seed=2)
    w = create_run(path, make_meta("zrp", sites=(10,), b=4.0), snapshots_hint=8)
    w.append(np.arange(24.0), data)
    w.close(complete=complete)
    return path


def _digest(path: Path) -> dict[str, str]:
    """Hash of every file of the run outside the summaries group."""
    out = {}
    for f in sorted(path.rglob("*")):
        rel = f.relative_to(path).as_posix()
        if f.is_file() and not rel.startswith("summaries"):
            out[rel] = hashlib.sha256(f.read_bytes()).hexdigest()
    return out


def test_summarize_is_idempotent_and_never_touches_the_run(tmp_path):
    path = _run(tmp_path / "r.zarr")
    before = _digest(path)
    first = summarize(path, QUICK)[0]
    assert first.computed and _digest(path) == before  # mass, time, header untouched
    stamp = first.summaries.provenance["created"]
    again = summarize(path, QUICK)[0]
    assert not again.computed and again.summaries.provenance["created"] == stamp
    time.sleep(1.1)
    forced = summarize(path, QUICK, force=True)[0]
    assert forced.computed and forced.summaries.provenance["created"] != stamp
    changed = summarize(path, {**QUICK, "probes": 3})[0]
    assert changed.computed and len(changed.summaries.array("probe_snapshot")) == 3
    assert _digest(path) == before
    assert not [p for p in path.iterdir() if p.name.startswith("summaries.")]  # no debris


def test_a_run_being_written_is_refused_and_left_alone(tmp_path):
    path = _run(tmp_path / "open.zarr", complete=False)
    before = _digest(path)
    with pytest.raises(ArchiveError, match=r"open\.zarr: the run is being written"):
        summarize(path, QUICK)
    assert _digest(path) == before and not (path / "summaries").exists()


def test_a_crash_between_the_two_renames_leaves_the_old_summaries_readable(tmp_path, monkeypatch):
    path = _run(tmp_path / "r.zarr")
    summarize(path, QUICK)
    old = open_run(path).summaries.provenance["options"]
    calls = []
    real = os.rename

    def second_rename_fails(a, b):
        calls.append((a, b))
        if len(calls) == 2:
            raise OSError("simulated crash between the renames")
        real(a, b)

    monkeypatch.setattr(store.os, "rename", second_rename_fails)
    with pytest.raises(OSError, match="simulated"):
        summarize(path, {**QUICK, "probes": 3}, force=True)
    monkeypatch.setattr(store.os, "rename", real)
    s = open_run(path).summaries  # read from summaries.old-*, the last complete group
    assert s is not None and s.provenance["options"] == old
    summarize(path, {**QUICK, "probes": 3})
    assert sorted(p.name for p in path.iterdir() if p.name.startswith("summaries")) == ["summaries"]


CHILD = r"""
import pickle, sys
from massarc.archive import open_run
from massarc.archive.summaries import write_summaries
run = open_run(sys.argv[1])
sets = pickle.loads(open(sys.argv[2], "rb").read())
print("ready", flush=True)
k = 0
while True:  # rewrite the two sets in turn until killed
    write_summaries(run, *sets[k % 2])
    k += 1
"""


def _sets(path: Path) -> list[tuple]:
    """The arrays and attributes of two summaries of the run (4 and 3 probes)."""
    from massarc.summaries.build import build_summaries
    from massarc.summaries.collect import choose_window, single_pass
    from massarc.summaries.options import SummaryOptions

    run = open_run(path)
    out = []
    for probes in (4, 3):
        opts = SummaryOptions(probes=probes, resamples=19)
        col = single_pass(run, opts)
        out.append(build_summaries(run, opts, col, choose_window(run, col.snapshots, "stationary")))
    return out


def test_sigkill_while_writing_leaves_old_or_new_summaries_never_a_mix(tmp_path):
    path = _run(tmp_path / "r.zarr")
    sets = _sets(path)
    (tmp_path / "sets.pickle").write_bytes(pickle.dumps(sets))
    expected = {}
    for arrays, attrs in sets:
        expected[attrs["options"]["probes"]] = {n: a.data for n, a in arrays.items()}
    store.write_summaries(open_run(path), *sets[0])
    rng = np.random.default_rng(9)
    env = {**os.environ, "PYTHONWARNINGS": "ignore"}
    for _ in range(8):
        child = subprocess.Popen(
            [sys.executable, "-c", CHILD, str(path), str(tmp_path / "sets.pickle")],
            stdout=subprocess.PIPE,
            text=True,
            env=env,
        )
        assert child.stdout is not None and child.stdout.readline().strip() == "ready"
        time.sleep(float(rng.uniform(0.02, 0.4)))
        child.send_signal(signal.SIGKILL)
        child.wait()
        s = open_run(path).summaries
        assert s is not None
        probes = s.provenance["options"]["probes"]
        for name, want in expected[probes].items():  # every array from the same set
            assert s.attrs(name)["options"]["probes"] == probes
            np.testing.assert_array_equal(s.array(name), want)
    summarize(path, {"probes": 4, "resamples": 19}, force=True)  # the next write tidies up
    assert [p.name for p in path.iterdir() if p.name.startswith("summaries")] == ["summaries"]


def test_summaries_of_a_run_in_memory_are_replaced_in_place():
    location = "memory://summaries-store-test"
    with create_run(location, make_meta("zrp", sites=(10,), b=4.0), overwrite=True) as w:
        w.append(np.arange(24.0), multinomial_run(3, 24, (10,), mass=30, seed=3))
    summarize(location, QUICK)
    summarize(location, {**QUICK, "probes": 3})
    s = open_run(location).summaries
    assert s.provenance["options"]["probes"] == 3 and len(s.array("probe_snapshot")) == 3


def test_a_damaged_chunk_stops_the_summaries_with_its_name(tmp_path):
    path = _run(tmp_path / "r.zarr")
    chunk = sorted((path / "mass" / "c").rglob("*"))[-1]
    assert chunk.is_file()
    chunk.write_bytes(chunk.read_bytes()[:-7] + b"garbage")
    with pytest.raises(
        ArchiveError,
        match=r"r\.zarr: chunk mass/c/2/2/0 \(replica 2, snapshots 16\.\.23\) is corrupt",
    ):
        summarize(path, QUICK)
    assert not (path / "summaries").exists()
