"""Analyses several checks share: the stationary window of a run (:mod:`.window`), the
time-series diagnostics behind it (:mod:`.diagnostics`: autocorrelation times, R-hat and
ESS, equilibration detection, the replica trend test), and the tests on series measured
in independent replicas that ``drift`` and ``independence`` use (:mod:`.replica_tests`:
the replica mean test and the pair product test)."""

__all__: list[str] = []
