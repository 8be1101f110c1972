"""The one progress callback every long operation accepts.

``progress(done, total, unit)`` is called in the caller's thread as work advances: ``done``
and ``total`` count ``unit`` (``"chunks"``, ``"snapshots"`` or ``"bytes"``); ``total`` is
None while it is not yet known. The command line turns it into a bar on a terminal
(``massarc.cli._common.progress_bar``); library callers may pass any callable.

>>> seen = []
>>> report: Progress = lambda done, total, unit: seen.append((done, total, unit))
>>> report(3, 10, "chunks"); seen
[(3, 10, 'chunks')]
"""

from __future__ import annotations

from collections.abc import Callable

__all__ = ["UNITS", "Progress"]

#: The units a progress callback may receive.
UNITS = ("chunks", "snapshots", "bytes")

Progress = Callable[[int, int | None, str], None]
