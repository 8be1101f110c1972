"""The occupation law P(m) over the window, on log-log axes, with the exact finite-size
law of the ZRP and the model's power-law guide.

Data (gid ``measured``): P(m) = ``occupation[m]`` / the sum of every bin, at masses
1 .. bins - 2 with a non-zero count (m = 0 has no place on a log axis; the last bin counts
every larger mass and is not a P(m)). The exact law (gid ``exact-law``) is
:func:`massarc.schema.laws.canonical_site_law` for the declared rates, the number of sites
and the declared total mass, drawn at m = 1 .. min(M, bins - 2); it holds for the ZRP on a
ring or torus (any drift) and with symmetric moves between walls. The guide (gid
``guide``) goes through the measured point at the geometric middle of the measured masses
(:func:`guide_anchor`):

* ZRP with u(k) = 1 + b/k, b > 2 (a condensing model): P(m) ~ m^(-b) at the critical
  density, the tail of the single-site weight f(m) = prod 1/u(k) ~ m^(-b);
* CMAM: m^(-5/2) at rho_c, the mean-field result, labelled as the mean-field guide.
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING, Any

import numpy as np

from massarc.archive import Run
from massarc.schema import CMAMModel, ZRPModel
from massarc.schema.laws import canonical_site_law, why_no_canonical_law

from .shared import finish, new_figure, stored_of

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = [
    "EXACT_MASS_MAX",
    "NEEDS",
    "exact_law_reason",
    "guide_anchor",
    "guide_exponent",
    "occupation_figure",
]

NEEDS = ("occupation",)

#: Largest total mass whose exact law is drawn (its cost grows as M log M).
EXACT_MASS_MAX = 2_000_000

#: The CMAM's critical occupation law in mean-field theory: P(m) ~ m^(-5/2).
CMAM_MEAN_FIELD = 2.5


def _total_mass(run: Run) -> int | None:
    declared = run.meta.run
    if declared.total_mass is not None:
        return int(declared.total_mass)
    if declared.density is not None:
        mass = declared.density * run.meta.lattice.volume
        return round(mass) if abs(mass - round(mass)) < 1e-9 else None
    return None


def exact_law_reason(run: Run) -> str | None:
    """Why the exact ZRP law is not drawn for this run (None: it is)."""
    why = why_no_canonical_law(run.meta)
    if why is not None:
        return f"no exact law is drawn: {why}"
    mass = _total_mass(run)
    if mass is None:
        return "no exact law is drawn: the run declares no total mass"
    if mass > EXACT_MASS_MAX:
        return f"no exact law is drawn: total mass {mass} > {EXACT_MASS_MAX}"
    return None


def guide_exponent(model: Any) -> tuple[float, str] | None:
    """(a, label) of the power-law guide m^(-a), or None when the model has none."""
    if isinstance(model, ZRPModel) and model.b is not None and model.b > 2:
        return float(model.b), f"critical power law m^(-b), b = {model.b:g}"
    if isinstance(model, CMAMModel):
        return CMAM_MEAN_FIELD, "mean-field guide m^(-5/2) (CMAM at rho_c)"
    return None


def guide_anchor(masses: np.ndarray) -> int:
    """Index of the measured mass the guide goes through: the one nearest (in log) to the
    geometric middle of the measured masses, where the power-law tail has set in but the
    finite-size cut-off has not.

    >>> guide_anchor(np.array([1.0, 2.0, 3.0, 10.0, 50.0, 100.0]))
    3
    """
    logs = np.log(masses)
    return int(np.abs(logs - (logs[0] + logs[-1]) / 2).argmin())


def occupation_figure(run: Run | str | os.PathLike[str]) -> Figure:
    """The single-site occupation law of the window on log-log axes.

    Parameters
    ----------
    run
        A run whose summaries hold ``occupation``, or its location.

    Returns
    -------
    matplotlib.figure.Figure
        One panel: measured P(m), the exact ZRP law where it holds, the power-law guide.
    """
    run, stored = stored_of(run, NEEDS)
    counts = stored["occupation"].astype(np.float64)
    total = counts.sum()
    top = len(counts) - 2  # the last bin is an overflow bin
    m = np.arange(1, top + 1)
    keep = counts[1 : top + 1] > 0
    measured_m = m[keep]
    measured_p = counts[1 : top + 1][keep] / total if total > 0 else np.zeros(0)
    fig, (ax,) = new_figure(1)
    ax.plot(measured_m, measured_p, "o", ms=3, color="C0", label="measured P(m)",
            gid="measured")  # fmt: skip
    details = []
    why = exact_law_reason(run)
    if why is None:
        mass, volume = _total_mass(run), run.meta.lattice.volume
        law = canonical_site_law(run.meta.model, volume, mass)
        upto = min(mass, top)
        ax.plot(np.arange(1, upto + 1), law[1 : upto + 1], "-", color="C3", lw=1.2,
                label=f"exact finite-size law ({volume} sites, M = {mass})",
                gid="exact-law")  # fmt: skip
        if run.meta.run.regime == "transient":
            details.append("the exact law is the steady state's; the run declares a transient")
    else:
        details.append(why)
    guide = guide_exponent(run.meta.model)
    if guide is not None and measured_m.size:
        slope, label = guide
        x = measured_m.astype(np.float64)
        k = guide_anchor(x)
        ax.plot(x, measured_p[k] * (x / x[k]) ** (-slope), "--", color="0.3", lw=1,
                label=label, gid="guide")  # fmt: skip
    if total > 0:
        details.append(f"P(0) = {counts[0] / total:.3g} (not on the log axis)")
    overflow = counts[-1]
    if overflow > 0:
        details.append(f"{overflow / total:.2g} of the site-snapshots hold m > {top} (not shown)")
    ax.set_xscale("log")
    ax.set_yscale("log")
    if measured_p.size:
        ax.set_ylim(bottom=0.3 * measured_p.min(), top=2.0 * measured_p.max())
    ax.set_xlabel("site mass m (mass units)")
    ax.set_ylabel("occupation probability P(m) (dimensionless)")
    ax.legend(fontsize="small")
    return finish(fig, run, stored, details)
