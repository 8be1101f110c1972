"""Checks of every batch a source yields, with messages that name the input.

The archive writer validates too, but it can only name the archive and a snapshot index;
here the message names the input file and, for text formats, the line:
``run.txt: line 12: replica 0, snapshot 10, site 3: mass -1 is negative; expected ...``.
"""

from __future__ import annotations

import numpy as np

from massarc.schema import RunMeta

from ..errors import DataError
from ..guards import first_bad_mass
from .registry import Batch

__all__ = ["BatchGuard"]


class BatchGuard:
    """Validate batches in stream order and normalise their shapes.

    Replica 0 builds the reference time axis (``ref``, which a resumed archive seeds with
    its committed times); every other replica must repeat it exactly.
    """

    def __init__(
        self,
        name: str,
        meta: RunMeta,
        limit: int | None,
        ref_times: np.ndarray | None = None,
        first_replica: int = 0,
        growable: bool = True,
    ) -> None:
        self.name = name
        self.lattice = tuple(meta.lattice.sites)
        self.volume = meta.lattice.volume
        self.total = meta.run.total_mass
        self.limit = limit
        self._ref = [np.asarray(ref_times, np.float64)] if ref_times is not None else []
        self._ref_len = 0 if ref_times is None else len(ref_times)
        self._archived = self._ref_len  # reference times that come from a resumed archive
        self.counts: dict[int, int] = {}
        self.current: int | None = None
        self.first_replica = first_replica
        self.lockstep: int | None = None
        self.growable = growable

    # -- helpers --------------------------------------------------------------------------

    def _prefix(self, batch: Batch, row: int | None) -> str:
        if batch.lines is not None and row is not None and row < len(batch.lines):
            return f"{self.name}: line {int(batch.lines[row])}: "
        return f"{self.name}: "

    def ref(self) -> np.ndarray:
        if len(self._ref) > 1:
            self._ref = [np.concatenate(self._ref)]
        return self._ref[0] if self._ref else np.empty(0)

    # -- the check ------------------------------------------------------------------------

    def check(self, batch: Batch) -> tuple[np.ndarray, np.ndarray]:
        """Return (times, mass) of ``batch``, mass shaped ``(n, *lattice)`` (or with a
        leading replica axis for lockstep batches); raise :class:`DataError` otherwise."""
        lead = 1 if batch.replica is not None else 2
        mass = self._shape(batch, lead)
        times = np.asarray(batch.times, dtype=np.float64).reshape(-1)
        n = mass.shape[lead - 1]
        if len(times) != n:
            raise DataError(
                f"{self.name}: expected one time per snapshot; got {len(times)} times for "
                f"{n} snapshots"
            )
        if batch.replica is None:
            if self.current is not None:
                raise DataError(f"{self.name}: expected batches of one replica at a time")
            if self.lockstep is not None and mass.shape[0] != self.lockstep:
                raise DataError(
                    f"{self.name}: expected {self.lockstep} replicas in every batch; "
                    f"got {mass.shape[0]}"
                )
            self.lockstep = mass.shape[0]
            rep0 = 0
        else:
            self._order(batch)
            rep0 = batch.replica
        start = self.counts.get(rep0, 0)
        self._times(batch, times, rep0, start)
        self._masses(batch, mass if batch.replica is None else mass[None], rep0, start)
        self.counts[rep0] = start + n
        return times, mass

    def _shape(self, batch: Batch, lead: int) -> np.ndarray:
        mass = np.asarray(batch.mass)
        tail = tuple(mass.shape[lead:])
        if mass.ndim >= lead and tail == self.lattice:
            return mass
        if len(self.lattice) == 2 and tail == (self.volume,):
            return mass.reshape(*mass.shape[:lead], *self.lattice)
        got = f"{tail[0]} sites" if len(tail) == 1 else f"shape {list(tail)}"
        where = self._prefix(batch, 0)
        raise DataError(
            f"{where}metadata contradicts the data: lattice.sites is {list(self.lattice)} "
            f"({self.volume} sites) but the data hold {got} per snapshot"
        )

    def _order(self, batch: Batch) -> None:
        r = batch.replica
        assert r is not None
        if self.lockstep is not None:
            raise DataError(f"{self.name}: expected lockstep batches only")
        if self.current is None:
            if r > self.first_replica:
                raise DataError(
                    f"{self._prefix(batch, 0)}expected replica {self.first_replica} first; "
                    f"got replica {r}"
                )
            self.current = r
            return
        if r == self.current:
            return
        if r != self.current + 1:
            raise DataError(
                f"{self._prefix(batch, 0)}replicas must come in order 0, 1, 2, ...; got "
                f"replica {r} after replica {self.current}"
            )
        done, want = self.counts.get(self.current, 0), self._ref_len
        if done < want:
            raise DataError(
                f"{self._prefix(batch, 0)}replica {self.current} ends after {done} of "
                f"{want} snapshots (replica 0 has {want})"
            )
        self.current = r

    def _times(self, batch: Batch, t: np.ndarray, rep: int, start: int) -> None:
        if not len(t):
            return
        bad = ~np.isfinite(t)
        if bad.any():
            i = int(np.argmax(bad))
            raise DataError(
                f"{self._prefix(batch, i)}replica {rep}, snapshot {start + i}: time "
                f"{float(t[i])} is not finite; expected finite times"
            )
        ref = self.ref()
        known = max(0, min(len(t), self._ref_len - start))
        if known:
            want = ref[start : start + known]
            diff = want != t[:known]
            if diff.any():
                i = int(np.argmax(diff))
                where = f"{self._prefix(batch, i)}replica {rep}, snapshot {start + i}"
                if start + i < self._archived:
                    raise DataError(
                        f"{where} has time {float(t[i])} in the input but {float(want[i])} in "
                        "the archive being resumed; is this the same run?"
                    )
                raise DataError(
                    f"{where}: time {float(t[i])} differs from replica 0's {float(want[i])}; "
                    "every replica must repeat the times of replica 0"
                )
        if known < len(t):
            if (rep != 0 and self.lockstep is None) or not self.growable:
                raise DataError(
                    f"{self._prefix(batch, known)}replica {rep} has more snapshots than "
                    f"replica 0 ({self._ref_len})"
                )
            prev = ref[-1] if self._ref_len else None
            new = t[known:]
            seq = new if prev is None else np.concatenate([[prev], new])
            steps = np.diff(seq)
            if (steps <= 0).any():
                j = int(np.argmax(steps <= 0))
                i = known + j + (1 if prev is None else 0)
                raise DataError(
                    f"{self._prefix(batch, i)}replica {rep}, snapshot {start + i}: time "
                    f"{float(seq[j + 1])} is not after the previous {float(seq[j])}; "
                    "expected strictly increasing times"
                )
            self._ref.append(new.copy())
            self._ref_len += len(new)

    def _masses(self, batch: Batch, m: np.ndarray, rep0: int, start: int) -> None:
        """``m`` is ``(replicas, n, *lattice)``."""
        if not m.size:
            return
        too_large = (
            f"is too large for the archive (largest storable {(self.limit or 0) - 1}; declare "
            "run.total_mass or pass --option max-mass=N)"
        )
        try:
            found = first_bad_mass(m, self.limit, too_large)
        except DataError as exc:
            raise DataError(f"{self.name}: {exc}") from None
        where, what = found if found is not None else (None, None)
        if where is not None:
            r, s, *site = (int(x) for x in where)
            site_txt = site[0] if len(site) == 1 else tuple(site)
            raise DataError(
                f"{self._prefix(batch, s)}replica {rep0 + r}, snapshot {start + s}, site "
                f"{site_txt}: mass {m[where].item()} {what}; expected a non-negative integer"
            )
        if start == 0 and self.total is not None:
            totals = m[:, 0].reshape(m.shape[0], -1).sum(axis=1, dtype=np.int64)
            off = np.flatnonzero(totals != self.total)
            if len(off):
                r = int(off[0])
                raise DataError(
                    f"{self._prefix(batch, 0)}metadata contradicts the data: run.total_mass "
                    f"is {self.total} but replica {rep0 + r}, snapshot 0 holds {int(totals[r])}"
                )
