"""Crash consistency: a writer killed with SIGKILL at random moments leaves an archive that
reopens as a consistent prefix, and resuming completes it bit-exactly (FORMAT.md, 3)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from massarc.archive import create_run, open_run, resume_run

R, T, L, M, STEP = 3, 240, 48, 90, 4

CHILD = r"""
import sys, numpy as np
from massarc.archive import create_run
from massarc.schema import parse_metadata
path, mode = sys.argv[1], sys.argv[2]
R, T, L, M, STEP = (int(x) for x in sys.argv[3:8])
meta = parse_metadata({"model": {"family": "cmam", "diffusion": 1.0, "chipping": 0.5},
                       "lattice": {"sites": [L], "boundary": "reflecting"},
                       "run": {"regime": "transient"}})
rng = np.random.default_rng(7)
data = rng.multinomial(M, np.full(L, 1 / L), size=(R, T))
times = np.arange(T) * 0.25
w = create_run(path, meta, snapshots_hint=20)
print("started", flush=True)
if mode == "lockstep":  # many small commits, so that kills land mid-write
    for s in range(0, T, STEP):
        w.append(times[s:s + STEP], data[:, s:s + STEP]); w.flush(); print("wrote", flush=True)
else:
    for r in range(R):
        for s in range(0, T, STEP):
            w.append(times[s:s + STEP], data[r, s:s + STEP], replica=r); w.flush()
            print("wrote", flush=True)
w.close()
"""


def expected() -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(7)
    data = rng.multinomial(M, np.full(L, 1 / L), size=(R, T))
    return data, np.arange(T) * 0.25


def finish(path: Path, data: np.ndarray, times: np.ndarray, mode: str) -> None:
    """Resume after the crash and write whatever is missing."""
    w = resume_run(path)
    st = w.state
    if mode == "lockstep":
        for s in range(st.snapshots, T, STEP):
            w.append(times[s : s + STEP], data[:, s : s + STEP])
    else:
        if st.replicas <= 1 and st.open_replica is None:
            for s in range(st.snapshots, T, STEP):
                w.append(times[s : s + STEP], data[0, s : s + STEP], replica=0)
            first = max(st.replicas, 1)
        else:
            first = st.replicas
        for r in range(first, R):
            start = (w.state.open_replica or 0) if r == w.state.replicas else 0
            for s in range(start, T, STEP):
                w.append(times[s : s + STEP], data[r, s : s + STEP], replica=r)
    w.close()


def _child(path: Path, mode: str, env: dict[str, str]) -> subprocess.Popen[str]:
    args = [str(path), mode, *(str(x) for x in (R, T, L, M, STEP))]
    return subprocess.Popen(
        [sys.executable, "-c", CHILD, *args], stdout=subprocess.PIPE, text=True, env=env
    )


@pytest.mark.parametrize("mode", ["lockstep", "replica"])
def test_sigkill_at_random_moments_leaves_a_consistent_prefix(tmp_path: Path, mode: str) -> None:
    data, times = expected()
    rng = np.random.default_rng(2024 if mode == "lockstep" else 2025)
    env = {**os.environ, "PYTHONWARNINGS": "ignore"}
    appends = T // STEP * (1 if mode == "lockstep" else R)
    killed_mid_write = 0
    for trial in range(10):  # 10 kills per mode: 20 in all
        path = tmp_path / f"{mode}-{trial}.zarr"
        child = _child(path, mode, env)
        assert child.stdout is not None
        assert child.stdout.readline().strip() == "started"
        # the writer reports each append it committed; kill it after a random number of
        # them, a random moment later, while it is writing the next ones (whatever the
        # speed or load of the machine)
        for _ in range(int(rng.integers(0, appends - 8))):
            assert child.stdout.readline().strip() == "wrote"
        time.sleep(float(rng.uniform(0.0, 0.01)))
        child.send_signal(signal.SIGKILL)
        child.wait()
        run = open_run(path)
        n_rep, n_snap = run.n_replicas, run.n_snapshots
        if not run.complete:
            killed_mid_write += 1
        # consistent prefix: exactly the data written so far, nothing half-written
        assert np.array_equal(run.times, times[:n_snap])
        assert np.array_equal(np.asarray(run.mass[:n_rep, :n_snap]), data[:n_rep, :n_snap])
        if mode == "lockstep":
            assert n_rep in (0, R)
        finish(path, data, times, mode)
        done = open_run(path)
        assert done.complete and done.shape == data.shape
        assert np.array_equal(np.asarray(done.mass[:]), data)
        assert np.array_equal(done.times, times)
        assert not list(path.rglob("*.partial"))
    assert killed_mid_write >= 8, "the kills should land while the writer is writing"


def test_resume_extends_a_finished_run(tmp_path: Path) -> None:
    data, times = expected()
    from conftest import make_meta

    meta = make_meta("cmam", sites=(L,), boundary="reflecting", regime="transient")
    with create_run(tmp_path / "r.zarr", meta) as w:
        w.append(times[:100], data[:, :100])
    with resume_run(tmp_path / "r.zarr") as w:
        assert not open_run(tmp_path / "r.zarr").complete  # marked incomplete while writing
        w.append(times[100:], data[:, 100:])
    run = open_run(tmp_path / "r.zarr")
    assert run.complete and np.array_equal(np.asarray(run.mass[:]), data)


def test_resume_after_a_kill_while_the_arrays_were_created(tmp_path: Path) -> None:
    """A kill between creating ``mass`` and ``time`` (found by the ingest kill test of
    tests/test_crash_commands.py): nothing was committed, so resume begins the arrays again
    instead of failing on the missing ``time``."""
    import json
    import shutil

    from conftest import make_meta

    data, times = expected()
    path = tmp_path / "r.zarr"
    w = create_run(path, make_meta("cmam", sites=(L,), boundary="reflecting"))
    w.append(times[:4], data[:, :4])
    w._ensure_arrays(data[:, :4], {})  # the arrays exist; nothing committed yet
    shutil.rmtree(path / "time")  # as if killed after mass, before time
    assert (
        json.loads((path / "zarr.json").read_text())["attributes"]["massarc"]["state"]["snapshots"]
        == 0
    )
    with resume_run(path) as again:
        again.append(times, data)
    run = open_run(path)
    assert run.complete and np.array_equal(np.asarray(run.mass[:]), data)
