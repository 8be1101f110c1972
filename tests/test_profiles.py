"""The ``profiles`` statistic: mirror-symmetric bins and their masses.

Outside truth: plain loops summing the masses of each bin, and the mirror image of the
lattice (``numpy.flip``), whose bin profile must be the original one reversed.
"""

from __future__ import annotations

import itertools
from types import SimpleNamespace

import numpy as np
import pytest

from massarc.archive import Chunk
from massarc.archive.stats.profiles import ProfileStatistic, mirror_edges


@pytest.mark.parametrize("length", range(1, 40))
@pytest.mark.parametrize("bins", [1, 2, 3, 4, 7, 32])
def test_edges_cover_the_axis_and_mirror_onto_themselves(length, bins):
    e = mirror_edges(length, bins)
    assert e[0] == 0 and e[-1] == length
    assert np.all(np.diff(e) > 0)
    np.testing.assert_array_equal(length - e[::-1], e)  # the mirror i -> L-1-i
    assert len(e) - 1 <= max(min(bins, length) + 1, 1)


def _profiles(x: np.ndarray, **options):
    reps, snaps = x.shape[:2]
    run = SimpleNamespace(n_replicas=reps, n_snapshots=snaps, sites=x.shape[2:])
    stat = ProfileStatistic(run, **options)
    for r in range(reps):
        c = Chunk(r, 0, snaps, x[r])
        stat.merge(c, stat.chunk(c))
    return stat.finish([])


@pytest.mark.parametrize("shape", [(21,), (6, 9)])
def test_bin_masses_are_plain_sums_and_mirror(shape):
    rng = np.random.default_rng(0)
    x = rng.poisson(1.0, size=(2, 12, *shape)).astype(np.uint16)
    prof = _profiles(x, bins=4)
    for a, edges in enumerate(prof.edges):
        got = prof.axis(a)
        for r in range(2):
            for s, t in enumerate(prof.snapshots):
                snap = np.moveaxis(x[r, t], a, 0)
                want = [float(snap[lo:hi].sum()) for lo, hi in itertools.pairwise(edges)]
                np.testing.assert_array_equal(got[r, s], want)
        flipped = _profiles(np.flip(x, axis=2 + a), bins=4).axis(a)
        np.testing.assert_array_equal(flipped, got[:, :, ::-1])


def test_a_long_run_is_sampled_within_its_budget():
    x = np.zeros((2, 5000, 100), np.uint8)
    prof = _profiles(x, fraction=1 / 50, floor=0)
    assert len(prof.snapshots) == 100
    assert np.all(np.diff(prof.snapshots) == 50)
