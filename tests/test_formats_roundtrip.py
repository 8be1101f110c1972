"""Round trips archive -> format -> archive are bit-exact for every writable format.

Masses, times and (where the format carries it) the metadata must come back unchanged,
on 1-D and 2-D lattices, with zeros, uint16-range masses, one replica or one snapshot.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from massarc.archive import create_run, open_run
from massarc.archive.formats import available_formats, convert
from massarc.schema import parse_metadata

#: Destination name per writable built-in format.
SUFFIX = {
    "zarr": "out.zarr",
    "npy": "out.npy",
    "npz": "out.npz",
    "text": "out.txt",
    "csv-long": "out.csv",
    "csv-wide": "out.wide.csv",
    "positions": "out.pos",
    "hdf5": "out.h5",
    "netcdf": "out.nc",
}
#: Formats that carry the metadata (everything but a bare .npy).
CARRIES_META = set(SUFFIX) - {"npy"}
#: Formats that carry inflow/outflow.
CARRIES_SERIES = {"zarr", "npz", "hdf5", "netcdf"}

runs = st.fixed_dictionaries(
    {
        "sites": st.one_of(
            st.tuples(st.integers(1, 12)), st.tuples(st.integers(1, 4), st.integers(1, 5))
        ),
        "boundary": st.sampled_from(["periodic", "reflecting", "open"]),
        "replicas": st.integers(1, 3),
        "snapshots": st.integers(1, 6),
        "top": st.sampled_from([0, 1, 7, 300, 65534]),
        "zeros": st.floats(0.0, 1.0),
        "seed": st.integers(0, 2**32 - 1),
        "t0": st.sampled_from([0.0, -3.25, 1e-300, 7.0e12]),
    }
)


def _make(tmp: Path, p: dict, small: bool) -> Path:
    """An archive for the drawn parameters: conserved mass on closed lattices."""
    rng = np.random.default_rng(p["seed"])
    sites, nrep, nt = p["sites"], p["replicas"], p["snapshots"]
    volume = int(np.prod(sites))
    top = min(p["top"], 20) if small else p["top"]
    meta = {
        "model": {"family": "cmam", "diffusion": 1.0, "chipping": 0.5},
        "lattice": {"sites": list(sites), "boundary": p["boundary"]},
        "run": {"regime": "transient", "seeds": list(range(nrep))},
        "extra": {"scenario": "dune field", "note": "é ü"},
    }
    if p["boundary"] == "open":
        meta["lattice"]["open"] = {"injection": 0.25, "extraction": 0.5}
        mass = rng.integers(0, top + 1, (nrep, nt, volume))
        mass[rng.random(mass.shape) < p["zeros"]] = 0
    else:
        total = top * (1 if small else max(1, volume // 4))
        total = min(total, 65534)
        flat = rng.multinomial(total, np.full(volume, 1.0 / volume), size=(nrep, nt))
        mass = flat
    mass = mass.reshape(nrep, nt, *sites).astype(np.uint16)
    times = p["t0"] + np.cumsum(rng.exponential(0.7, nt) + 1e-3) * (1 + abs(p["t0"]) * 1e-9)
    location = tmp / f"src-{p['seed']}.zarr"
    series = {}
    if p["boundary"] == "open":
        series = {
            "inflow": rng.integers(0, 50, (nrep, nt)),
            "outflow": rng.integers(0, 50, (nrep, nt)),
        }
    with create_run(location, parse_metadata(meta), overwrite=True, dtype="uint16") as w:
        w.append(times, mass, **series)
    return location


def _same(a_path: Path, b_path: Path, fmt: str) -> None:
    a, b = open_run(a_path), open_run(b_path)
    assert b.complete
    assert a.shape == b.shape
    np.testing.assert_array_equal(a.times, b.times)  # bit-exact float64
    for r in range(a.n_replicas):
        np.testing.assert_array_equal(a.read(r), b.read(r))
    if fmt in CARRIES_META:
        assert b.meta == a.meta
    if fmt in CARRIES_SERIES:
        for key in ("inflow", "outflow"):
            sa, sb = a.series(key), b.series(key)
            assert (sa is None) == (sb is None)
            if sa is not None:
                np.testing.assert_array_equal(sa, sb)


def test_every_writable_builtin_format_is_covered():
    writable = {n for n, c in available_formats().items() if c.writable}
    assert writable == set(SUFFIX)


@pytest.mark.parametrize("fmt", sorted(SUFFIX))
@settings(
    max_examples=12,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(p=runs)
def test_round_trip_is_exact(fmt: str, p: dict, tmp_path: Path) -> None:
    src = _make(tmp_path, p, small=fmt == "positions")
    out = tmp_path / f"{p['seed']}-{SUFFIX[fmt]}"
    back = tmp_path / f"{p['seed']}-back.zarr"
    convert(src, out, dst_format=fmt, overwrite=True)
    options, meta = {}, None
    if fmt == "npy":  # a bare .npy carries neither times nor metadata: give both back
        run = open_run(src)
        options = {"times": ",".join(repr(float(t)) for t in run.times)}
        meta = tmp_path / f"{p['seed']}-meta.json"
        meta.write_text(json.dumps(run.meta.model_dump(mode="json", exclude_none=True)))
    convert(out, back, meta=meta, options=options, overwrite=True)
    _same(src, back, fmt)
