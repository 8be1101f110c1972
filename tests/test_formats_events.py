"""Event logs: snapshots reconstructed from moves, and the archived ``events`` group.

The reference is a plain loop that applies one move after another and records the
configuration at each requested time (common practice: the definition of a snapshot).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from massarc.archive import open_run
from massarc.archive.formats import convert
from massarc.cli import cli


def _log(
    tmp: Path,
    sites: tuple[int, ...],
    replicas: int,
    moves: int,
    seed: int,
    boundary: str = "periodic",
) -> tuple[Path, np.ndarray, list[list[tuple]]]:
    """A legal random event log: each move takes mass a site holds to a neighbour."""
    rng = np.random.default_rng(seed)
    volume = int(np.prod(sites))
    initial = rng.multinomial(3 * volume, np.full(volume, 1 / volume), size=replicas)
    events: list[list[tuple]] = []
    for r in range(replicas):
        state = initial[r].copy()
        t, out = 0.0, []
        for _ in range(moves):
            t += float(rng.exponential(0.05))
            src = int(rng.choice(np.flatnonzero(state)))
            coords = list(np.unravel_index(src, sites))
            axis = int(rng.integers(len(sites)))
            coords[axis] = (coords[axis] + int(rng.choice([-1, 1]))) % sites[axis]
            tgt = int(np.ravel_multi_index(coords, sites))
            amount = int(rng.integers(1, state[src] + 1))
            if tgt == src:
                continue
            state[src] -= amount
            state[tgt] += amount
            out.append((t, r, src, tgt, amount))
        events.append(out)
    meta = {
        "model": {"family": "cmam", "diffusion": 1.0, "chipping": 1.0},
        "lattice": {"sites": list(sites), "boundary": boundary},
        "run": {"regime": "transient"},
    }
    lines = ["# massarc-events 1", "# massarc-meta: " + json.dumps(meta), "# initial"]
    lines += ["0.0 " + " ".join(map(str, row)) for row in initial.tolist()]
    lines.append("# events")
    lines += [f"{t!r} {r} {s} {g} {a}" for rep in events for (t, r, s, g, a) in rep]
    path = tmp / "moves.events"
    path.write_text("\n".join(lines) + "\n")
    return path, initial, events


def _reference(initial: np.ndarray, events: list[list[tuple]], grid: np.ndarray) -> np.ndarray:
    out = np.zeros((len(initial), len(grid), initial.shape[1]), np.int64)
    for r, rep in enumerate(events):
        state, i = initial[r].copy(), 0
        for k, g in enumerate(grid):
            while i < len(rep) and rep[i][0] <= g:
                _, _, s, t, a = rep[i]
                state[s] -= a
                state[t] += a
                i += 1
            out[r, k] = state
    return out


@pytest.mark.parametrize("sites", [(9,), (3, 4)])
def test_snapshots_match_the_move_by_move_reference(tmp_path, sites):
    path, initial, events = _log(tmp_path, sites, replicas=3, moves=300, seed=len(sites))
    convert(path, tmp_path / "run.zarr", options={"every": "0.4", "keep-events": "true"})
    run = open_run(tmp_path / "run.zarr")
    last = max(e[0] for rep in events for e in rep)
    grid = 0.4 * np.arange(int(np.floor(last / 0.4)) + 1)
    np.testing.assert_array_equal(run.times, grid)
    want = _reference(initial, events, grid).reshape(3, len(grid), *sites)
    np.testing.assert_array_equal(np.stack([run.read(r) for r in range(3)]), want)
    ev = run.events
    flat = [e for rep in events for e in rep]
    np.testing.assert_array_equal(ev["time"][:], [e[0] for e in flat])
    np.testing.assert_array_equal(ev["source"][:], [e[2] for e in flat])
    np.testing.assert_array_equal(ev["amount"][:], [e[4] for e in flat])
    for key, dtype in {
        "time": "float64",
        "replica": "int32",
        "source": "int64",
        "target": "int64",
        "amount": "int64",
    }.items():
        assert ev[key].dtype == np.dtype(dtype) and ev[key].metadata.dimension_names == ("event",)


def test_explicit_times_and_a_replica_without_events(tmp_path):
    path, initial, events = _log(tmp_path, (6,), replicas=2, moves=40, seed=3)
    head, moves = path.read_text().split("# events\n")
    kept = [ln for ln in moves.splitlines() if ln.split(" ")[1] == "0"]
    path.write_text(head + "# events\n" + "\n".join(kept) + "\n")  # replica 1 never moves
    convert(path, tmp_path / "r.zarr", options={"times": "0:1.5:0.5"})
    run = open_run(tmp_path / "r.zarr")
    want = _reference(initial, [events[0], []], np.array([0.0, 0.5, 1.0, 1.5]))
    np.testing.assert_array_equal(np.stack([run.read(r) for r in range(2)]), want)


@pytest.mark.parametrize(
    ("edit", "expect"),
    [
        (lambda ev: ev.replace(" 4 5 1\n", " 4 5 99\n", 1), "leaves it negative"),
        (lambda ev: ev + "0.001 0 1 2 1\n", "expected events sorted by (replica, time)"),
        (lambda ev: ev + "9.0 0 1 7 1\n", "expected sites in 0..5"),
        (lambda ev: ev + "9.0 5 1 2 1\n", "expected a replica in 0..0"),
    ],
)
def test_bad_event_logs(tmp_path, edit, expect):
    body = (
        "# massarc-events 1\n# massarc-meta: "
        + json.dumps(
            {
                "model": {"family": "zrp", "rate": 1.0},
                "lattice": {"sites": [6], "boundary": "periodic"},
                "run": {"regime": "transient"},
            }
        )
        + "\n# initial\n0.0 1 1 1 1 1 1\n"
        "# events\n0.5 0 4 5 1\n0.7 0 5 0 1\n"
    )
    src = tmp_path / "bad.events"
    src.write_text(edit(body))
    result = CliRunner().invoke(
        cli, ["convert", str(src), str(tmp_path / "o.zarr"), "--option", "every=0.25"]
    )
    assert result.exit_code == 2
    assert expect in result.stderr and "line " in result.stderr
    assert not (tmp_path / "o.zarr").exists()
    result = CliRunner().invoke(cli, ["convert", str(src), str(tmp_path / "o.zarr")])
    assert result.exit_code == 2 and "--option every=DT" in result.stderr
