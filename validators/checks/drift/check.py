"""The ``drift`` check: do the data agree with the declared drift, axis by axis?

Statistics: the ``spacetime`` statistic (antisymmetric space-time covariances of the masses
at sampled starts; :mod:`.spacetime`, brought by the check itself), ``profiles`` (centre of
mass between walls) and ``snapshots`` (the density). The judgement is :mod:`.axis_test`,
with the physics of :mod:`massarc.validators.analysis.transport`; their docstrings give
every definition.

Null hypotheses and p-values, per axis of at least 4 sites:

* declared symmetric. H0: the process is mirror-symmetric along the axis, so every
  antisymmetric cell (the change of sum_r A(r) or sum_r r A(r) over a lag, an equal-time
  asymmetry, the centre of mass between walls) has mean 0. Statistic: the robust replica
  score of each cell (Stouffer's sum of per-replica autocorrelation-corrected scores,
  guarded by their spread). p-value: Bonferroni over the reliable cells of the two-sided
  tails (Student's t with ESS - 1 degrees of freedom). fail when p < ``alpha``.
* declared driven with right-hop probability p. H0: the drift is the declared one, so
  at lags short enough that fluctuations stay within a quarter of the axis every cell
  has the sign of p - 1/2, and the first moment follows its mass-conservation prediction
  (p K+ - q K-) dt / d within the ``tolerance`` band. fail when the other direction is
  significant (one-sided, Bonferroni), or when the first moment is significantly outside
  the band (a symmetric axis shows as far too weak; it fails only when the declared
  drift would have reached the test's threshold plus ``margin``).

Under H0 a clean axis fails with probability at most about ``alpha``. An axis is
``skip`` when the data cannot decide (snapshots so far apart that fluctuations wrap the
ring, too little motion or too few starts, a condensate whose noise drowns the fluid),
with the measured numbers and what would make it decidable. Open axes are not judged:
injection at one end breaks the mirror symmetry by design. The check skips models that
declare no drift (custom models).
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from massarc.archive.stats import ProfileStats
from massarc.schema import CMAMModel, ZRPModel
from massarc.schema.spec import mass_dimensions

from ...analysis.transport import run_density, transport_of, walls_centre
from ...engine.registry import Check, CheckContext, Option
from ...engine.result import CheckResult
from .._common import fault_note
from .axis_test import AxisDrift, judge_axis
from .spacetime import SpacetimeStatistic, SpacetimeStats

__all__ = ["DriftCheck"]


def _axis_name(axis: int, ndim: int) -> str:
    return mass_dimensions(ndim)[2 + axis]


def _fmt(x: Any) -> str:
    return f"{x:.3g}" if isinstance(x, int | float) and math.isfinite(x) else "nan"


def _towards(sign: int, name: str) -> str:
    return f"+{name}" if sign > 0 else f"-{name}"


class DriftCheck(Check):
    """Declared drift against mirror symmetry, direction and size of space-time correlations.

    Null hypothesis
    ---------------
    Per axis of at least 4 sites: an axis declared symmetric is mirror-symmetric in
    distribution (every antisymmetric space-time cell has mean 0); an axis declared driven
    has the declared drift (its short-lag cells have the sign of p - 1/2 and the first
    moment follows its mass-conservation prediction within ``tolerance``). Statistics and
    p-values: the module docstring.

    Where
    -----
    ``axis``: the failing axis (``site`` in 1D, ``y`` or ``x`` in 2D).
    """

    id = "drift"
    description = "the data agree with the declared drift (direction and size, per axis)"
    needs: ClassVar = {"spacetime": {}, "profiles": {}, "snapshots": {}}
    provides: ClassVar = (SpacetimeStatistic,)
    options: ClassVar = {
        "alpha": Option(1e-4, float, "false-alarm rate of the tests, per axis"),
        "margin": Option(
            2.0,
            float,
            "an axis is judged (pass, or fail as too weak) only when the drift it is tested "
            "against would clear the test's threshold by this many standard deviations",
        ),
        "tolerance": Option(
            0.5,
            float,
            "the first moment may be this factor smaller (or its inverse larger) than the "
            "prediction of the declared drift",
        ),
    }
    requires: ClassVar = ("metadata", "data")

    def run(self, ctx: CheckContext) -> CheckResult:
        meta = ctx.meta
        assert meta is not None  # guaranteed by ``requires``
        model = meta.model
        if not isinstance(model, ZRPModel | CMAMModel):
            return self.result("skip", f"the {model.family} model declares no drift")
        opts = ctx.options
        thresholds = dict(opts)
        st: SpacetimeStats | None = ctx.stats.get("spacetime")
        prof: ProfileStats | None = ctx.stats.get("profiles")
        if st is None:
            return self.result("skip", "the spacetime statistic is not available")
        ndim = meta.lattice.ndim
        volume = int(np.prod(ctx.run.sites))
        density = run_density(ctx.stats.get("snapshots"), ctx.meta, volume) or 1.0
        transport = transport_of(model, density)
        p = float(model.right_probability)
        mass = density * float(np.prod(ctx.run.sites))
        times = np.asarray(ctx.run.times, dtype=np.float64)
        used = np.asarray(st.starts, dtype=np.int64)
        used = used[used < len(times)]
        span = float(times[used.max()] - times[used.min()]) if len(used) > 1 else None
        verdicts: list[AxisDrift] = []
        notes: list[str] = []
        for axis, data in enumerate(st.axes):
            name = _axis_name(axis, ndim)
            if meta.lattice.boundary[axis] == "open":
                notes.append(f"axis {name} is open: injection at one end breaks the mirror")
                continue
            if data is None:
                notes.append(f"axis {name} has fewer than 4 sites: not tested")
                continue
            centre = None
            walls = meta.lattice.boundary[axis] == "reflecting"
            if (
                isinstance(model, ZRPModel)
                and walls
                and p != 0.5
                and meta.run.regime == "stationary"
            ):
                centre = walls_centre(model, tuple(ctx.run.sites), axis, mass, p)
            verdicts.append(
                judge_axis(
                    data,
                    lags=st.lags,
                    ndim=ndim,
                    right_probability=p,
                    centre=centre,
                    transport=transport,
                    starts=st.starts,
                    span=span,
                    profile=None if prof is None else prof.axis(axis),
                    edges=None if prof is None else prof.edges[axis],
                    flat=isinstance(model, ZRPModel) and data.periodic,
                    alpha=float(opts["alpha"]),
                    margin=float(opts["margin"]),
                    tolerance=float(opts["tolerance"]),
                )
            )
        values: dict[str, Any] = {
            "right_probability": p,
            "axes": [{"name": _axis_name(v.axis, ndim), **v.values()} for v in verdicts],
            "lags": list(st.lags),
            "starts": len(st.starts),
        }
        finite = [v.p_value for v in verdicts if v.p_value is not None]
        values["p_value"] = min(finite) if finite else None
        suffix = "".join(f"; {n}" for n in notes) + fault_note(ctx)
        failed = [v for v in verdicts if v.status == "fail"]
        if failed:
            v = min(failed, key=lambda x: x.p_value if x.p_value is not None else 1.0)
            name = _axis_name(v.axis, ndim)
            return self.result(
                "fail",
                _failure(v, name, p) + suffix,
                values=values,
                thresholds=thresholds,
                where={"axis": name},
            )
        passed = [v for v in verdicts if v.status == "pass"]
        skipped = [v for v in verdicts if v.status == "skip"]
        parts = [f"axis {_axis_name(v.axis, ndim)}: {v.reason}" for v in skipped]
        if not passed:
            text = "cannot decide: " + ("; ".join(parts) if parts else "no axis to test")
            return self.result("skip", text + suffix, values=values, thresholds=thresholds)
        summary = "; ".join(_success(v, _axis_name(v.axis, ndim)) for v in passed)
        if parts:
            summary += "; not decided: " + "; ".join(parts)
        return self.result("pass", summary + suffix, values=values, thresholds=thresholds)


def _failure(v: AxisDrift, name: str, p: float) -> str:
    n = v.numbers
    pv = f"p = {v.p_value:.2g}" if v.p_value is not None else ""
    if v.kind == "driven":
        where = f" (towards {_towards(v.sign, name)})" if v.sign else ""
        return (
            f"axis {name} is declared symmetric but the data are driven{where}: "
            f"{n.get('strongest')} has z = {_fmt(n.get('strongest_z'))}; {pv}"
        )
    declared = f"driven towards {_towards(1 if p > 0.5 else -1, name)} (right_probability {p:g})"
    if v.kind == "other-way":
        return (
            f"axis {name} is declared {declared} but fluctuations travel towards "
            f"{_towards(-1 if p > 0.5 else 1, name)}; {pv}"
        )
    if n.get("size_of") == "centre of mass":
        size = (
            f"centre of mass {_fmt(n.get('centre_of_mass'))} +- "
            f"{_fmt(n.get('centre_of_mass_se'))} sites from the middle against "
            f"{_fmt(n.get('centre_of_mass_predicted'))} in the declared steady state"
        )
    else:
        size = (
            f"first moment {_fmt(n.get('first_moment'))} +- {_fmt(n.get('first_moment_se'))} "
            f"against {_fmt(n.get('first_moment_predicted'))} predicted (ratio "
            f"{_fmt(n.get('ratio'))}, lag {n.get('size_lag')}, window {n.get('size_window')}, "
            f"{n.get('size_variant')})"
        )
    if v.kind == "symmetric":
        head = f"axis {name} is declared {declared} but the data look mirror-symmetric"
        return f"{head}: {size}; {pv}"
    word = "weaker" if v.kind == "weaker" else "stronger"
    return f"axis {name} is declared {declared} but the drift is {word}: {size}; {pv}"


def _success(v: AxisDrift, name: str) -> str:
    n = v.numbers
    if v.reason == "mirror-symmetric":
        return (
            f"axis {name} mirror-symmetric as declared (p = {_fmt(v.p_value)}; a drift "
            f"|2p - 1| >= {_fmt(n.get('smallest_detectable_drift'))} would have shown)"
        )
    text = f"axis {name} {v.reason}"
    if v.sign:
        text += f" (towards {_towards(v.sign, name)})"
    if n.get("size_of") == "first moment":
        text += f", first moment {_fmt(n['ratio'])} x the prediction at lag {n['size_lag']}"
    elif n.get("size_of") == "centre of mass":
        text += f", centre of mass {_fmt(n['ratio'])} x the steady-state prediction"
    return text
