"""Time-series diagnostics for runs: autocorrelation times, equilibration, R-hat, ESS, trend.

NumPy/SciPy implementations, independent of any MCMC package (the tests compare them with
emcee, pymbar and arviz). Conventions are spelled out in each module; the one that trips
people up: Sokal's ``tau_int = 1/2 + sum rho`` versus the statistical inefficiency
``g = 1 + 2 sum rho = 2 tau_int`` (what emcee and pymbar return).
"""

from .autocorr import (
    SOKAL_C,
    AutocorrTime,
    autocorrelation,
    autocovariance,
    integrated_autocorr_time,
    sokal_window,
    statistical_inefficiency,
)
from .equilibration import (
    Equilibration,
    detect_equilibration,
    statistical_inefficiency_first_zero,
)
from .rank import (
    ess_bulk,
    ess_chains,
    ess_tail,
    rank_normalize,
    rhat_basic,
    rhat_rank,
    split_chains,
)
from .trend import TrendTest, trend_test

__all__ = [
    "SOKAL_C",
    "AutocorrTime",
    "Equilibration",
    "TrendTest",
    "autocorrelation",
    "autocovariance",
    "detect_equilibration",
    "ess_bulk",
    "ess_chains",
    "ess_tail",
    "integrated_autocorr_time",
    "rank_normalize",
    "rhat_basic",
    "rhat_rank",
    "sokal_window",
    "split_chains",
    "statistical_inefficiency",
    "statistical_inefficiency_first_zero",
    "trend_test",
]
