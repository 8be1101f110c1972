"""The ``stationary-law`` check in one home: its goodness-of-fit test (:mod:`.law_fit`)
and its verdict (:mod:`.check`)."""

from .check import StationaryLawCheck

__all__ = ["StationaryLawCheck"]
