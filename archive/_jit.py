"""numba, imported only when a compiled kernel is first needed.

Importing numba costs about a third of a second and most of the memory an audit reserves,
so no module of massarc imports it at import time: the compiled kernels live in modules of
their own (``_compiled.py`` beside the code that calls them), imported on first use, and
each is decorated with :func:`kernel`. Compiled machine code is cached on disk by numba
(``cache=True``): beside the module in ``__pycache__``, or, when the package is installed
in a directory this user cannot write, in numba's per-user cache directory
(``NUMBA_CACHE_DIR`` when set). Where neither can be written the kernel is compiled once
per process instead of failing.

:func:`use_numba` is the one switch, and every kernel has a NumPy twin that gives identical
numbers. ``MASSARC_PURE=1`` forces the twins, ``MASSARC_PURE=0`` the kernels (when numba is
installed); by default a statistic of a run smaller than :data:`SMALL_RUN_BYTES` uses the
twins, since importing numba and loading its cached kernels takes longer than the twins
need for the whole run (:func:`backend_for`).
"""

from __future__ import annotations

import importlib.util
import os
from collections.abc import Callable
from typing import Any

__all__ = ["HAVE_NUMBA", "SMALL_RUN_BYTES", "backend_for", "kernel", "use_numba"]

#: True when numba can be imported (found without importing it).
HAVE_NUMBA = importlib.util.find_spec("numba") is not None
#: Uncompressed masses below which a run is reduced with the NumPy twins by default: about
#: what they reduce in the time numba takes to import and load its kernels (half a second).
SMALL_RUN_BYTES = 128 << 20


def use_numba(nbytes: int | None = None) -> bool:
    """True when the compiled kernels should run: numba installed, and ``MASSARC_PURE`` set
    to 0, or unset and ``nbytes`` (the data to reduce, when known) at least
    :data:`SMALL_RUN_BYTES`; ``MASSARC_PURE=1`` turns them off."""
    flag = os.environ.get("MASSARC_PURE", "").strip().lower()
    if not HAVE_NUMBA or flag in ("1", "true", "yes"):
        return False
    if flag in ("0", "false", "no"):
        return True
    return nbytes is None or nbytes >= SMALL_RUN_BYTES


def backend_for(run: Any) -> str:
    """``"numba"`` or ``"numpy"``: the kernels a statistic of ``run`` uses (:func:`use_numba`
    of its uncompressed size)."""
    nbytes = getattr(run, "nbytes", None)
    return "numba" if use_numba(nbytes if isinstance(nbytes, int) else None) else "numpy"


def kernel(**options: Any) -> Callable[[Callable[..., Any]], Any]:
    """``numba.njit(cache=True, **options)``, or without the disk cache where numba finds
    no directory it can write (it refuses ``cache=True`` there with a RuntimeError)."""
    import numba

    def wrap(fn: Callable[..., Any]) -> Any:
        try:
            return numba.njit(cache=True, **options)(fn)
        except RuntimeError as exc:
            if "no locator available" not in str(exc):
                raise
            return numba.njit(**options)(fn)

    return wrap
