"""What the bench scripts share: rate intervals, and reusing a run built by an earlier run.

The scripts run as files (``python bench/x.py``), so this module is imported as ``_common``;
it imports scipy and massarc only when called (the memory benches measure their imports).
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["interval", "reusable"]


def interval(k: int, n: int) -> tuple[float, float]:
    """Clopper-Pearson 95 % interval of k events in n runs (scipy.stats.beta).

    >>> interval(0, 50)[1] < 0.08
    True
    """
    from scipy.stats import beta

    lo = 0.0 if k == 0 else float(beta.ppf(0.025, k, n - k + 1))
    hi = 1.0 if k == n else float(beta.ppf(0.975, k + 1, n - k))
    return lo, hi


def reusable(path: Path, snapshots: int) -> bool:
    """Whether ``path`` holds a complete run of ``snapshots`` snapshots (a cached input)."""
    from massarc.archive import open_run

    if not path.exists():
        return False
    try:
        run = open_run(path)
    except Exception:  # a half-built or damaged cache is rebuilt
        return False
    return run.complete and run.n_snapshots == snapshots
