"""Analyses several checks share: the stationary window of a run (:mod:`.window`) and the
time-series diagnostics behind it (:mod:`.diagnostics`: autocorrelation times, R-hat and
ESS, equilibration detection, the replica trend test)."""

__all__: list[str] = []
