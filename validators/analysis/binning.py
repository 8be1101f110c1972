"""Merging adjacent histogram bins until each expects enough counts, for the chi-square
and G tests of occupation laws (``stationary-law``, ``massarc compare``)."""

from __future__ import annotations

import numpy as np

__all__ = ["merge_bins"]


def merge_bins(expected: np.ndarray, threshold: float, max_bins: int) -> list[tuple[int, int]]:
    """Groups of adjacent bins, left to right, each with an expected count >= ``threshold``
    (raised until there are at most ``max_bins``); a short tail joins the last group.

    >>> merge_bins(np.array([1.0, 9.0, 2.0, 2.0, 2.0, 0.5]), 4.0, 10)
    [(0, 1), (2, 5)]
    >>> merge_bins(np.array([10.0, 3, 3, 8, 1, 1]), 5.0, 6)
    [(0, 0), (1, 2), (3, 5)]
    """
    values = expected.tolist()
    while True:
        groups: list[tuple[int, int]] = []
        start, acc = 0, 0.0
        for i, e in enumerate(values):
            acc += e
            if acc >= threshold:
                groups.append((start, i))
                start, acc = i + 1, 0.0
        if start < len(values):
            if groups:
                groups[-1] = (groups[-1][0], len(values) - 1)
            else:
                groups.append((0, len(values) - 1))
        if len(groups) <= max(max_bins, 1):
            return groups
        threshold *= 1.25
