"""The optional event log of a run: subgroup ``events`` (FORMAT.md section 5).

1-D arrays of equal length, all with ``dimension_names`` ``("event",)``, sorted by
(replica, time): ``time`` float64, ``replica`` int32, ``source`` and ``target`` int64
(flat C-order site indices; a negative index is the reservoir of an open boundary) and
``amount`` int64.
"""

from __future__ import annotations

import numpy as np
import zarr

from massarc.schema.spec import EVENTS

from .errors import DataError
from .layout import codecs

__all__ = ["EVENT_ARRAYS", "EVENT_CHUNK", "append_events"]

#: Array names and dtypes of the event log, in the order of FORMAT.md.
EVENT_ARRAYS = {
    "time": np.dtype("float64"),
    "replica": np.dtype("int32"),
    "source": np.dtype("int64"),
    "target": np.dtype("int64"),
    "amount": np.dtype("int64"),
}
#: Events per chunk (8 MiB of int64 per array).
EVENT_CHUNK = 1 << 20


def _arrays(group: zarr.Group, clevel: int) -> dict[str, zarr.Array]:
    if EVENTS not in group:
        sub = group.create_group(EVENTS, attributes={"long_name": "event log"})
        for key, dt in EVENT_ARRAYS.items():
            sub.create_array(
                key,
                shape=(0,),
                chunks=(EVENT_CHUNK,),
                dtype=dt,
                fill_value=float("nan") if dt.kind == "f" else 0,
                dimension_names=("event",),
                compressors=codecs(dt, clevel),
                config={"write_empty_chunks": True},
            )
    sub = group[EVENTS]
    return {key: sub[key] for key in EVENT_ARRAYS}


def append_events(
    group: zarr.Group,
    name: str,
    time: np.ndarray,
    replica: np.ndarray,
    source: np.ndarray,
    target: np.ndarray,
    amount: np.ndarray,
    *,
    clevel: int = 5,
) -> int:
    """Append events to the log of the run ``group``; return the new length.

    Raises :class:`DataError` when the arrays differ in length or the log would not stay
    sorted by (replica, time).
    """
    cols = {
        "time": np.asarray(time, np.float64).reshape(-1),
        "replica": np.asarray(replica).reshape(-1),
        "source": np.asarray(source).reshape(-1),
        "target": np.asarray(target).reshape(-1),
        "amount": np.asarray(amount).reshape(-1),
    }
    lengths = {k: len(v) for k, v in cols.items()}
    if len(set(lengths.values())) != 1:
        got = ", ".join(f"{k}={n}" for k, n in lengths.items())
        raise DataError(f"{name}: expected event arrays of equal length; got {got}")
    arrays = _arrays(group, clevel)
    n_old = int(arrays["time"].shape[0])
    n_new = lengths["time"]
    if not n_new:
        return n_old
    rep, t = cols["replica"].astype(np.int64), cols["time"]
    if n_old:
        rep = np.concatenate([[int(arrays["replica"][n_old - 1])], rep])
        t = np.concatenate([[float(arrays["time"][n_old - 1])], t])
    later = (np.diff(rep) > 0) | ((np.diff(rep) == 0) & (np.diff(t) >= 0))
    if not later.all():
        j = int(np.argmin(later))
        index = n_old + j if n_old else j + 1
        raise DataError(
            f"{name}: event {index} (replica {int(rep[j + 1])}, time {float(t[j + 1])}) comes "
            "before the event preceding it; expected events sorted by (replica, time)"
        )
    for key, arr in arrays.items():
        arr.resize((n_old + n_new,))
        arr[n_old:] = cols[key].astype(EVENT_ARRAYS[key], casting="unsafe")
    return n_old + n_new
