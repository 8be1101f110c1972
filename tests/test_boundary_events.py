"""The exact part of the ``boundary`` check: an archived event log against the lattice.

The log is written as FORMAT.md section 5 specifies (group ``events``, 1-D arrays
``time``, ``replica``, ``source``, ``target``, ``amount``). Moves are drawn here between
neighbours by construction (flat C-order indices, ``numpy.ravel_multi_index``); one
planted move then breaks the rule, and the check must name it.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import zarr

from massarc.archive import create_run, open_run
from massarc.schema import parse_metadata
from massarc.validators import CheckContext
from massarc.validators.checks.boundary import BoundaryCheck
from massarc.validators.checks.boundary.events import audit_events


def _meta(sites: list[int], boundary: list[str]):
    return parse_metadata(
        {
            "model": {"family": "zrp", "b": 3.0},
            "lattice": {"sites": sites, "boundary": boundary},
            "run": {"regime": "transient"},
        }
    )


def _moves(sites: tuple[int, ...], periodic: list[bool], n: int, seed: int) -> tuple:
    """``n`` random moves between neighbours (wrapping only on periodic axes)."""
    rng = np.random.default_rng(seed)
    src = np.stack([rng.integers(0, s, n) for s in sites])
    axis = rng.integers(0, len(sites), n)
    step = rng.choice([-1, 1], n)
    dst = src.copy()
    dst[axis, np.arange(n)] += step
    for a, (s, wrap) in enumerate(zip(sites, periodic, strict=True)):
        if wrap:
            dst[a] %= s
        else:  # a move off the edge turns back
            off = (dst[a] < 0) | (dst[a] >= s)
            dst[a, off] = src[a, off] - step[off]
    return np.ravel_multi_index(tuple(src), sites), np.ravel_multi_index(tuple(dst), sites)


def _write(path: Path, meta, events: dict[str, np.ndarray], replicas: int = 2) -> None:
    sites = tuple(meta.lattice.sites)
    data = np.ones((replicas, 3, *sites), np.uint8)
    with create_run(path, meta) as w:
        w.append([0.0, 1.0, 2.0], data)
    group = zarr.open_group(str(path), mode="r+").create_group("events")
    for key, values in events.items():
        arr = group.create_array(
            key, shape=values.shape, dtype=values.dtype, dimension_names=("event",)
        )
        arr[:] = values


def _log(source: np.ndarray, target: np.ndarray) -> dict[str, np.ndarray]:
    n = len(source)
    return {
        "time": np.linspace(0.0, 2.0, n),
        "replica": (np.arange(n) >= n // 2).astype(np.int32),
        "source": source.astype(np.int64),
        "target": target.astype(np.int64),
        "amount": np.ones(n, np.int64),
    }


def _check(path: Path):
    run = open_run(path)
    return BoundaryCheck().run(CheckContext(run, run.meta, {}, BoundaryCheck.option_values()))


def test_a_clean_log_on_a_ring_passes_and_the_same_log_fails_between_walls(tmp_path):
    src, dst = _moves((10,), [True], 500, seed=1)
    wraps = np.flatnonzero(np.abs(src - dst) == 9)
    assert len(wraps)  # the log crosses the seam
    _write(tmp_path / "ring.zarr", _meta([10], ["periodic"]), _log(src, dst))
    ok = _check(tmp_path / "ring.zarr")
    assert ok.status == "pass" and "all 500 logged moves" in ok.message
    _write(tmp_path / "walls.zarr", _meta([10], ["reflecting"]), _log(src, dst))
    bad = _check(tmp_path / "walls.zarr")
    first = int(wraps[0])
    assert bad.status == "fail"
    assert bad.values["event"] == first
    assert bad.values["bad_events"] == len(wraps)
    assert f"event {first} " in bad.message and "not neighbours" in bad.message
    assert bad.where is not None and bad.where.site == [int(src[first]), int(dst[first])]


def test_a_move_that_skips_a_site_in_2d_is_located(tmp_path):
    sites = (6, 9)
    src, dst = _moves(sites, [False, True], 300, seed=2)
    y, x = np.unravel_index(src[200], sites)
    dst[200] = np.ravel_multi_index((y, (x + 2) % 9), sites)  # two steps along x
    log = _log(src, dst)
    _write(tmp_path / "run.zarr", _meta(list(sites), ["reflecting", "periodic"]), log)
    result = _check(tmp_path / "run.zarr")
    assert result.status == "fail"
    assert result.values["event"] == 200 and result.values["bad_events"] == 1
    assert result.values["replica"] == 1
    assert result.values["time"] == pytest.approx(log["time"][200])


def test_a_malformed_log_and_bad_indices_are_reported(tmp_path):
    src, dst = _moves((10,), [True], 20, seed=3)
    log = _log(src, dst)
    del log["target"]
    _write(tmp_path / "missing.zarr", _meta([10], ["periodic"]), log)
    result = _check(tmp_path / "missing.zarr")
    assert result.status == "fail" and "events/target" in result.message

    lattice = _meta([10], ["periodic"]).lattice
    log = _log(src, dst)
    log["source"][5] = 10  # not a site
    log["replica"][7] = 2  # the run has two replicas
    _write(tmp_path / "range.zarr", _meta([10], ["periodic"]), log)
    audit = audit_events(open_run(tmp_path / "range.zarr").events, lattice, 2)
    assert audit.bad is not None and audit.bad.index == 5 and audit.n_bad == 2
    assert "not a site" in audit.bad.reason


def test_reservoir_moves_only_at_the_edges_of_an_open_axis(tmp_path):
    meta = _meta([10], ["open"])
    source = np.array([-1, 0, 4, 9, -1])
    target = np.array([0, 1, 5, -1, 5])  # the last one enters in the middle
    _write(tmp_path / "open.zarr", meta, _log(source, target))
    result = _check(tmp_path / "open.zarr")
    assert result.status == "fail" and result.values["event"] == 4
    assert "open edge" in result.message
    audit = audit_events(open_run(tmp_path / "open.zarr").events, meta.lattice, 2)
    assert audit.n_bad == 1
    ring = _meta([10], ["periodic"]).lattice
    assert audit_events(open_run(tmp_path / "open.zarr").events, ring, 2).n_bad == 3
