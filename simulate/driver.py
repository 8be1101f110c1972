"""Run many replicas and stream them into an archive (or into memory)."""

from __future__ import annotations

import contextlib
import importlib.metadata
import numbers
from collections.abc import Sequence
from datetime import UTC, datetime
from typing import Any, Literal, NamedTuple

import numpy as np

from massarc.archive import Run, chunk_snapshots, create_run, mass_dtype, open_run
from massarc.archive.progress import Progress
from massarc.schema import InitialCondition, MetadataError, RunMeta, Simulator, ZRPModel

from .dynamics import Dynamics, Replica, guard_dynamics
from .errors import SamplerError
from .exact import SteadyStateSampler
from .initial import INITIAL_KINDS, guard_product_measure, initial_masses
from .times import check_times, replica_seeds

__all__ = ["SIMULATOR_NAME", "Trajectory", "simulate"]

#: ``simulator.name`` recorded in the metadata of every run written here.
SIMULATOR_NAME = "massarc.simulate"

#: Masses of open runs are stored as uint32 (they are not bounded by the initial total).
_OPEN_DTYPE = np.dtype(np.uint32)


class Trajectory(NamedTuple):
    """What :func:`simulate` returns with ``transfers=True``.

    ``transfers[r, k, a, ...]`` is the net mass moved from each site to its +1 neighbour
    along axis ``a`` (minus the mass moved back) between snapshot ``k - 1`` and snapshot
    ``k`` (for ``k = 0``: between t = 0 and the first snapshot), counted move by move; the
    seam bond of a periodic axis is the entry of its last site, and the entry of the last
    site of a reflecting or open axis stays 0. ``inflow``/``outflow`` (replica, time) are
    the units that entered and left through open ends since the first snapshot (zeros on
    closed lattices).
    """

    mass: np.ndarray | Run
    transfers: np.ndarray
    inflow: np.ndarray
    outflow: np.ndarray


def _version() -> str | None:
    try:
        return importlib.metadata.version("massarc")
    except importlib.metadata.PackageNotFoundError:  # pragma: no cover - source checkout
        return None


def _spacing(times: np.ndarray) -> Literal["linear", "log", "other"]:
    """How the times are spaced: evenly, geometrically (all > 0), or otherwise."""
    if len(times) < 3:
        return "linear" if times[0] == 0 or len(times) == 1 else "other"
    if np.allclose(np.diff(times), times[1] - times[0], rtol=1e-9, atol=0):
        return "linear"
    if times[0] > 0:
        ratio = times[1:] / times[:-1]
        if np.allclose(ratio, ratio[0], rtol=1e-9, atol=0):
            return "log"
    return "other"


def _total_mass(meta: RunMeta, mass: int | None) -> int:
    if mass is None:
        mass = meta.run.total_mass
        if mass is None:
            raise SamplerError("mass: expected a total mass (or run.total_mass); got none")
    if not isinstance(mass, numbers.Integral) or isinstance(mass, bool) or mass < 0:
        raise SamplerError(f"mass: expected an integer >= 0; got {mass!r}")
    return int(mass)


def _written_meta(
    meta: RunMeta,
    mass: int | None,
    seeds: list[int],
    initial: InitialCondition,
    times: np.ndarray,
    command: str | None,
) -> RunMeta:
    run = meta.run.model_copy(
        update={
            "total_mass": mass,
            "density": None if mass is None else mass / meta.lattice.volume,
            "seeds": seeds,
            "initial": initial,
            "sampling": _spacing(times),
        }
    )
    out = meta.model_copy(
        update={
            "run": run,
            "simulator": Simulator(name=SIMULATOR_NAME, version=_version(), command=command),
            "created": meta.created or datetime.now(UTC).isoformat(timespec="seconds"),
        }
    )
    return RunMeta.model_validate(out.model_dump())  # model_copy does not validate


def simulate(
    meta: RunMeta,
    times: Sequence[float] | np.ndarray,
    *,
    replicas: int,
    seed: int | None = None,
    seeds: Sequence[int] | None = None,
    mass: int | None = None,
    initial: str = "random",
    exact: bool = False,
    location: Any = None,
    overwrite: bool = False,
    progress: Progress | None = None,
    pure: bool | None = None,
    command: str | None = None,
    transfers: bool = False,
) -> np.ndarray | Run | Trajectory:
    """Simulate ``replicas`` replicas of the model in ``meta``, observed at ``times``.

    Parameters
    ----------
    meta
        Metadata: a ZRP or CMAM model on a 1D or 2D lattice, each axis periodic, reflecting
        (a move into a reflecting wall is suppressed: the mass stays) or open (hops across
        the ends are suppressed; a unit enters every site at position 0 of the axis at rate
        ``lattice.open.injection`` and leaves every non-empty site at its last position at
        rate ``lattice.open.extraction``; the archive then holds ``inflow``/``outflow``).
    times
        Strictly increasing snapshot times >= 0 (see :func:`snapshot_times`). The replicas
        start at t = 0; a snapshot at t = 0 is the initial condition.
    replicas
        Number of independent replicas.
    seed, seeds
        Master seed (one seed per replica is derived from it), or the replica seeds
        themselves (then ``replicas == len(seeds)``): replica r of a run is reproduced
        alone with ``seeds=[run.meta.run.seeds[r]]``.
    mass
        Total mass per replica (default: ``meta.run.total_mass``); the initial mass of an
        open lattice (its archive then declares no total mass).
    initial
        ``random``, ``uniform``, ``condensed`` or ``steady-state`` (exact canonical sample;
        a ZRP on a periodic lattice, or a symmetric ZRP with walls).
    exact
        Write independent exact steady-state samples, one per snapshot, instead of the
        dynamics (ZRP only; ``initial`` is then ignored).
    location
        Where to write the archive (path, ``memory://`` URL, store); None returns an array.
    overwrite
        Replace an existing archive at ``location``.
    progress
        Called as ``progress(done, total, "snapshots")`` in replica-snapshots.
    pure
        Force the pure-Python event loop (True) or the numba one (False); default: numba
        when installed unless ``MASSARC_PURE=1``.
    command
        The command line, recorded in ``simulator.command``.
    transfers
        Also return the net mass moved across every bond in every snapshot interval,
        counted move by move (see :class:`Trajectory`; held in memory, int64).

    Returns
    -------
    numpy.ndarray or Run or Trajectory
        ``(replica, time, *lattice)`` masses when ``location`` is None, else the run written
        (opened for reading). With an archive only one chunk of snapshots per replica is held
        in memory at a time, all replicas in lockstep. With ``transfers=True``, a
        :class:`Trajectory` holding that and the transfers.

    Examples
    --------
    >>> from massarc.schema import parse_metadata
    >>> from massarc.simulate import snapshot_times
    >>> meta = parse_metadata({"model": {"family": "zrp", "b": 3.0},
    ...     "lattice": {"sites": [16], "boundary": "periodic"}, "run": {"regime": "transient"}})
    >>> x = simulate(meta, snapshot_times(10.0, 6), replicas=2, seed=1, mass=12)
    >>> x.shape, x.sum(axis=2).tolist()[0]
    ((2, 6, 16), [12, 12, 12, 12, 12, 12])
    """
    guard_dynamics(meta)
    t = check_times(np.asarray(times))
    total = _total_mass(meta, mass)
    if seeds is None:
        seed_list = replica_seeds(seed, replicas)
    else:
        seed_list = [int(s) for s in seeds]
        if len(seed_list) != replicas or any(s < 0 for s in seed_list):
            raise SamplerError(
                f"seeds: expected {replicas} integers >= 0 (one per replica); got {seeds!r}"
            )
    if exact or initial == "steady-state":
        guard_product_measure(meta)
    if exact and transfers:
        raise SamplerError("transfers: expected the dynamics; got exact=True (no moves)")
    if exact:
        condition = InitialCondition(
            kind="steady-state",
            description="independent exact samples of the canonical steady state, "
            "one per snapshot (no dynamics)",
        )
    elif initial in INITIAL_KINDS:
        condition = InitialCondition(kind=initial)  # type: ignore[arg-type]
    else:
        raise SamplerError(f"initial: expected one of {', '.join(INITIAL_KINDS)}; got {initial!r}")
    declared = total if meta.lattice.closed else None
    try:
        out_meta = _written_meta(meta, declared, seed_list, condition, t, command)
    except MetadataError as exc:  # pragma: no cover - inputs were validated above
        raise SamplerError(str(exc)) from None
    return _run(
        out_meta, t, total, seed_list, exact, location, overwrite, progress, pure, transfers
    )


def _run(
    meta: RunMeta,
    t: np.ndarray,
    total: int,
    seeds: list[int],
    exact: bool,
    location: Any,
    overwrite: bool,
    progress: Progress | None,
    pure: bool | None,
    transfers: bool,
) -> np.ndarray | Run | Trajectory:
    lattice = tuple(meta.lattice.sites)
    n_sites = meta.lattice.volume
    ndim = meta.lattice.ndim
    closed = meta.lattice.closed
    dtype = mass_dtype(total) if closed else _OPEN_DTYPE
    rngs = [np.random.default_rng(s) for s in seeds]
    sampler = None
    if exact or (meta.run.initial is not None and meta.run.initial.kind == "steady-state"):
        assert isinstance(meta.model, ZRPModel)
        sampler = SteadyStateSampler(meta.model, n_sites, total)
    reps: list[Replica] = []
    if not exact:
        kind = meta.run.initial.kind if meta.run.initial else "random"
        dyn = Dynamics.from_meta(meta, total)
        reps = [
            Replica(dyn, initial_masses(kind, meta, total, rng, sampler), rng, pure=pure)
            for rng in rngs
        ]
    piece = chunk_snapshots(lattice, dtype, len(t))
    n_rep = len(seeds)
    work = n_rep * len(t)
    writer = (
        None
        if location is None
        else create_run(location, meta, overwrite=overwrite, dtype=dtype, snapshots_hint=len(t))
    )
    memory = np.empty((n_rep, len(t), *lattice), dtype=dtype) if writer is None else None
    track = transfers or not closed
    flows = np.zeros((n_rep, len(t), ndim, *lattice), np.int64) if transfers else None
    io = np.zeros((n_rep, len(t), 2), np.int64)
    buf = np.empty((piece, n_sites), dtype=np.int64)
    flow_buf = np.empty((piece, ndim * n_sites), dtype=np.int64)
    done = 0
    # the writer's context marks the run complete on success and leaves it incomplete
    # (with every committed snapshot readable) when anything goes wrong
    with writer if writer is not None else contextlib.nullcontext():
        for start in range(0, len(t), piece):
            stop = min(start + piece, len(t))
            block = np.empty((n_rep, stop - start, *lattice), dtype=dtype)
            dts = np.diff(t[start:stop], prepend=t[start - 1] if start else 0.0)
            for r in range(n_rep):
                if exact:
                    assert sampler is not None
                    rows = sampler.sample(stop - start, rngs[r])
                else:
                    rows = buf[: stop - start]
                    if track:
                        fl = flow_buf[: stop - start]
                        reps[r].advance(dts, rows, fl, io[r, start:stop])
                        if flows is not None:
                            flows[r, start:stop] = fl.reshape(stop - start, ndim, *lattice)
                    else:
                        reps[r].advance(dts, rows)
                if not closed and rows.max(initial=0) >= np.iinfo(dtype).max:
                    raise SamplerError(
                        f"replica {r}: a site holds {int(rows.max())} units, more than "
                        f"{dtype} stores; lower lattice.open.injection"
                    )
                block[r] = rows.reshape(stop - start, *lattice)
                done += stop - start
                if progress is not None:
                    progress(done, work, "snapshots")
            cum = io[:, start:stop] - io[:, :1]  # since the first snapshot (FORMAT.md 2.3)
            if writer is not None:
                if closed:
                    writer.append(t[start:stop], block)
                else:
                    writer.append(t[start:stop], block, inflow=cum[..., 0], outflow=cum[..., 1])
            else:
                assert memory is not None
                memory[:, start:stop] = block
    result: np.ndarray | Run = memory if memory is not None else open_run(location)
    if not transfers:
        return result
    assert flows is not None
    since = io - io[:, :1]
    return Trajectory(result, flows, since[..., 0], since[..., 1])
