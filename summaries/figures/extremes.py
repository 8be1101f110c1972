"""Extreme values: the histogram of the largest masses the laws were fitted to, with the
fitted laws' densities.

The histogram (gid ``sample``) is the stored ``extreme_sample`` as a density, on bins of
whole masses (integer width from NumPy's ``auto`` rule, edges at half-integers). Each law
stored in the array's ``fits`` attribute with parameters in mass units (``params_mass``)
is drawn as its scipy.stats density at those parameters (gid ``pdf-<law>``): Gumbel
``gumbel_r``, Frechet ``invweibull``, Weibull for maxima ``weibull_max``, GEV
``genextreme`` (schema/FORMAT.md, section 6). The law of lowest AIC is marked in the
legend; laws stored with only a note (no fit) are named in the caption.
"""

from __future__ import annotations

import math
import os
from typing import TYPE_CHECKING

import numpy as np

from massarc.archive import Run

from ..extremes import LAWS
from .shared import MASS_UNITS, finish, fmt, new_figure, stored_of

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = ["NEEDS", "extremes_figure", "whole_mass_edges"]

NEEDS = ("extreme_sample",)

_NAMES = {"gumbel": "Gumbel", "frechet": "Frechet", "weibull": "Weibull", "gev": "GEV"}


def whole_mass_edges(sample: np.ndarray) -> np.ndarray:
    """Bin edges at half-integers, of an integer width near NumPy's ``auto`` choice,
    covering the sample.

    >>> whole_mass_edges(np.array([3.0, 4.0, 4.0, 6.0])).tolist()
    [2.5, 3.5, 4.5, 5.5, 6.5]
    """
    x = np.asarray(sample, dtype=np.float64)
    auto = np.histogram_bin_edges(x, bins="auto")
    width = max(1, math.ceil(auto[1] - auto[0])) if len(auto) > 1 else 1
    low, high = math.floor(x.min()) - 0.5, math.ceil(x.max()) + 0.5
    bins = max(1, math.ceil((high - low) / width))
    return low + width * np.arange(bins + 1)


def extremes_figure(run: Run | str | os.PathLike[str]) -> Figure:
    """Histogram of the largest masses with the fitted extreme-value laws.

    Parameters
    ----------
    run
        A run whose summaries hold ``extreme_sample`` and its fitted laws, or
        its location.

    Returns
    -------
    matplotlib.figure.Figure
        One panel.
    """
    run, stored = stored_of(run, NEEDS)
    sample = stored["extreme_sample"]
    fits = stored.attrs("extreme_sample").get("fits") or {}
    fig, (ax,) = new_figure(1)
    details = [f"{sample.size} draws, every {fits.get('stride', '?')} snapshots of the window"]
    if sample.size:
        edges = whole_mass_edges(sample)
        density, _ = np.histogram(sample, bins=edges, density=True)
        ax.stairs(density, edges, fill=True, color="C0", alpha=0.35,
                  label="largest mass (histogram)", gid="sample")  # fmt: skip
        x = np.linspace(edges[0], edges[-1], 400)
        best = fits.get("best")
        for k, (name, entry) in enumerate((fits.get("laws") or {}).items()):
            params = entry.get("params_mass")
            if not params or name not in LAWS:
                details.append(f"{_NAMES.get(name, name)}: {entry.get('note', 'not fitted')}")
                continue
            label = f"{_NAMES[name]} (KS p = {fmt(entry.get('p_value'), 2)})"
            if name == best:
                label += ", lowest AIC"
            with np.errstate(all="ignore"):
                pdf = LAWS[name](*params).pdf(x)
            ax.plot(x, pdf, color=f"C{k + 1}", lw=2.2 if name == best else 1.2,
                    ls="-" if name == best else "--", label=label, gid=f"pdf-{name}")  # fmt: skip
        ax.set_ylim(0.0, 1.6 * float(density.max()))  # a density spiking at a bound stays in
    if fits.get("note"):
        details.append(fits["note"])
    ax.set_xlabel(f"largest mass ({MASS_UNITS})")
    ax.set_ylabel(f"probability density (1 / {MASS_UNITS})")
    ax.legend(fontsize="small")
    return finish(fig, run, stored, details)
