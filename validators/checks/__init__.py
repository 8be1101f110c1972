"""The built-in checks, one module per simple check and one package per check that brings
its own statistic or test (:mod:`.boundary`, :mod:`.stationary_law`, :mod:`.drift`,
:mod:`.independence`).

:func:`builtin_checks` is the one place they are registered from: the check registry
calls it on its first listing, and an import error here propagates (a broken built-in
fails loudly, it is never skipped).
"""

from __future__ import annotations

from ..engine.registry import Check

__all__ = ["builtin_checks"]


def builtin_checks() -> tuple[type[Check], ...]:
    """The built-in checks, in report order (basic checks first, statistical ones after)."""
    from .boundary import BoundaryCheck
    from .conservation import ConservationCheck
    from .drift import DriftCheck
    from .independence import IndependenceCheck
    from .integrity import IntegrityCheck
    from .nonnegative import NonNegativeCheck
    from .schema import SchemaCheck
    from .stationary_law import StationaryLawCheck
    from .steady_state import SteadyStateCheck
    from .time_order import TimeOrderCheck

    return (
        SchemaCheck,
        IntegrityCheck,
        TimeOrderCheck,
        NonNegativeCheck,
        ConservationCheck,
        SteadyStateCheck,
        BoundaryCheck,
        StationaryLawCheck,
        DriftCheck,
        IndependenceCheck,
    )
