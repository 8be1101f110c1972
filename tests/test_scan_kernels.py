"""The fused chunk reductions: compiled and NumPy paths agree, and both agree with plain
NumPy reference computations (np.sum, np.max, np.argmax, np.bincount)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from massarc.archive.stats._kernels import Plan, reduce_rows

BACKENDS = ["numpy", "numba"]  # the `test` extra installs numba (through `fast`)
FIELDS = ("total", "maximum", "minimum", "sum_sq", "occupied", "argmax")
FLAGS = ("first_negative", "n_negative", "first_fractional", "n_fractional")
FLAGS += ("first_sentinel", "n_sentinel", "hist_first")


def _same(a, b) -> None:
    for f in FIELDS:
        np.testing.assert_array_equal(getattr(a, f), getattr(b, f), err_msg=f)
    for f in FLAGS:
        assert getattr(a, f) == getattr(b, f), f
    if a.hist is None:
        assert b.hist is None
    else:
        np.testing.assert_array_equal(a.hist, b.hist)


def _reference(x: np.ndarray, start: int, plan: Plan) -> dict:
    """Plain NumPy, element by element semantics of the module docstring (reference)."""
    x2 = x.reshape(len(x), -1)
    if x2.dtype.kind == "f":
        bad = ~np.isfinite(x2) | (x2 != np.floor(x2))
        xi = np.where(bad, 0, x2).astype(np.int64)
    else:
        bad = np.zeros(x2.shape, bool)
        xi = x2.astype(np.int64)
    out = {
        "total": xi.sum(axis=1),
        "maximum": xi.max(axis=1),
        "argmax": np.argmax(xi, axis=1),
        "occupied": (xi != 0).sum(axis=1),
        "n_fractional": int(bad.sum()),
        "n_negative": int(((x2 < 0) & ~bad).sum()) if x2.dtype.kind in "if" else 0,
    }
    if plan.bins:
        top = plan.bins - 1
        b = np.clip(xi, 0, top) if x2.dtype.kind != "u" else np.minimum(x2, top).astype(np.int64)
        blocks = np.searchsorted(plan.edges, np.arange(start, start + len(x)), side="right") - 1
        hist = {}
        for blk in np.unique(blocks):
            hist[int(blk)] = np.bincount(b[blocks == blk].ravel(), minlength=plan.bins)
        out["hist"] = hist
    return out


DTYPES = ["uint8", "uint16", "uint32", "uint64", "int8", "int16", "int32", "int64", "float64"]


@pytest.mark.parametrize("dtype", DTYPES)
def test_backends_agree_and_match_reference(dtype: str) -> None:
    rng = np.random.default_rng(7)
    x = rng.poisson(1.5, size=(37, 3, 11)).astype(np.int64)
    x[5, 1, 2] = 300  # above the top bin (where the dtype holds it)
    if np.dtype(dtype).kind in "if":
        x[9, 0, 4] = -3  # negative
        x[20, 2, 0] = -1
    x = (x.clip(0, 254) if dtype == "uint8" else x).astype(dtype)
    if np.dtype(dtype).kind == "f":
        x[3, 0, 0] = 2.5
        x[4, 1, 1] = np.nan
        x[6, 2, 2] = np.inf
    sent = int(np.iinfo(dtype).max) if np.dtype(dtype).kind in "ui" else None
    if sent is not None:
        x[30, 1, 7] = sent  # a never-written value
    plan = Plan(sent, 64, np.array([0, 10, 45, 80]))
    results = [reduce_rows(x, 40, plan, backend=b) for b in BACKENDS]
    for r in results[1:]:
        _same(results[0], r)
    ref = _reference(x, 40, plan)
    r = results[-1]
    for key in ("total", "maximum", "argmax", "occupied"):
        np.testing.assert_array_equal(getattr(r, key), ref[key], err_msg=key)
    assert (r.n_fractional, r.n_negative) == (ref["n_fractional"], ref["n_negative"])
    for k, row in enumerate(r.hist):
        np.testing.assert_array_equal(row, ref["hist"][r.hist_first + k])
    if sent is not None:
        assert r.n_sentinel >= 1 and r.first_sentinel <= 30 * 33 + 1 * 11 + 7
    if np.dtype(dtype).kind in "if":
        assert r.first_negative == 9 * 33 + 0 * 11 + 4
    if np.dtype(dtype).kind == "f":
        assert r.first_fractional == 3 * 33 and r.n_fractional == 3


@settings(max_examples=60, deadline=None)
@given(
    hnp.arrays(
        np.int64,
        st.tuples(st.integers(1, 9), st.integers(1, 13)),
        elements=st.integers(-5, 255),
    ),
    st.sampled_from(["uint8", "uint16", "int16", "int32", "int64"]),
    st.integers(2, 40),
    st.integers(0, 20),
)
def test_backends_agree_on_arbitrary_rows(x: np.ndarray, dtype: str, bins: int, start: int) -> None:
    x = (x.clip(0) if dtype.startswith("u") else x).astype(dtype)
    edges = np.array([0, start + 1, start + 3, start + 100])
    plan = Plan(int(np.iinfo(x.dtype).max), bins, edges)
    a = reduce_rows(x, start, plan, backend="numpy")
    for b in BACKENDS[1:]:
        _same(a, reduce_rows(x, start, plan, backend=b))
    # every (row, site) is counted exactly once (np.bincount reference normalisation)
    assert a.hist.sum() == x.size


def test_sum_of_squares_exact_for_small_dtypes() -> None:
    x = np.full((2, 70000), 65534, np.uint16)  # sum of squares 3.0e14 > 2**32, < 2**53
    for b in BACKENDS:
        r = reduce_rows(x, 0, Plan(), backend=b)
        assert r.sum_sq[0] == 70000 * 65534**2  # exact integer (Python arithmetic)
