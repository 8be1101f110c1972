"""Coarsening study through ``massarc summarize``: growth exponents of the driven and the
symmetric ZRP, and the rise and fall of the variance of the largest mass.

    nice -n 10 .venv/bin/python bench/bench_coarsening.py            # about 5 minutes
    nice -n 10 .venv/bin/python bench/bench_coarsening.py --quick    # about 1 minute

Runs (reference sampler, u(k) = 1 + 4/k so rho_c = 1/2, density 2, random start, ring):

1. exponents: driven (totally asymmetric) ZRP on L = 2000 sites up to t = 10^4 and
   symmetric ZRP on L = 500 up to t = 3 x 10^4, 8 replicas, 60 snapshots spaced
   geometrically from t = 1, three seeds each; the stored exponents of the typical mass
   (sum m^2 / sum m), the mean largest mass and the coarsening length over the default
   fitting range (``fit_decades`` = 2 below the last time), and the typical mass's over
   an early (t = 10 .. t_max / 10) and a late (t = 100 .. t_max) range, against 1/z
   (z = 2 driven, 3 symmetric; Godreche, J. Phys. A 36, 6313, 2003);
2. variance: the driven ZRP on L = 100 with 32 replicas, from t = 1 to 30 L^2, and the
   same ring started from exact steady-state samples (the settled reference); the stored
   ``largest_mass_var`` with its bootstrap interval at the probes.

Writes ``bench/out/coarsening.json`` and the figure ``docs/coarsening.png``.
"""

from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

import numpy as np

OUT = Path(__file__).parent / "out"
FIGURE = Path(__file__).resolve().parents[1] / "docs" / "coarsening.png"
KEYS = ("typical_mass", "largest_mass", "coarsening_length")


def _meta(drift: str, sites: int, regime: str = "transient"):
    from massarc.schema import parse_metadata

    return parse_metadata({"model": {"family": "zrp", "b": 4.0, "drift": drift},
                           "lattice": {"sites": [sites], "boundary": "periodic"},
                           "run": {"regime": regime}})  # fmt: skip


def _summarised(path: Path, meta, times, replicas: int, seed: int, initial: str, **opts):
    from massarc.simulate import simulate
    from massarc.summaries import summarize

    simulate(meta, times, replicas=replicas, seed=seed, mass=2 * meta.lattice.volume,
             initial=initial, location=path, overwrite=True)  # fmt: skip
    return summarize(path, {"resamples": 999, **opts}, force=True)[0]


def exponents(quick: bool) -> list[dict]:
    """Stored exponents (default range), and the same fit (``fit_growth``, the function
    summarize uses) on the stored arrays over an early and a late range."""
    from massarc.simulate import snapshot_times
    from massarc.summaries.growth import fit_growth

    cases = [("asymmetric", 2000, 1e4), ("symmetric", 500, 3e4)]
    seeds = [1] if quick else [1, 2, 3]
    rows = []
    for drift, sites, t_max in cases:
        times = snapshot_times(t_max, 60, "log", t_first=1.0)
        ranges = {"early": (10.0, t_max / 10), "late": (100.0, t_max)}
        for seed in seeds:
            t0 = time.perf_counter()
            path = OUT / "coarsening" / f"{drift}-{sites}-{seed}.zarr"
            done = _summarised(path, _meta(drift, sites), times, 4 if quick else 8, seed, "random")
            expo, s = done.findings["exponents"], done.summaries
            row = {"drift": drift, "sites": sites, "t_max": t_max, "seed": seed,
                   "seconds": time.perf_counter() - t0,
                   "range": [expo["typical_mass"]["start"], expo["typical_mass"]["stop"]],
                   "expected": expo["typical_mass"]["expected"],
                   **{k: [expo[k]["exponent"], expo[k]["stderr"]] for k in KEYS}}  # fmt: skip
            for label, (lo, hi) in ranges.items():
                fit = fit_growth(times, s.array("typical_mass"), lo, hi)
                row[f"typical_mass_{label}"] = [fit["exponent"], fit["stderr"], lo, hi]
            rows.append(row)
            print(f"{drift:>10} L={sites} seed {seed}: " + ", ".join(
                f"{k} {v[0]:.3f}±{v[1]:.3f}" for k, v in row.items() if k.startswith(KEYS)
            ) + f"  (1/z = {row['expected']:.3f}, {row['seconds']:.0f} s)")  # fmt: skip
    return rows


def variance(quick: bool) -> dict:
    from massarc.simulate import snapshot_times

    sites = 100
    t_max = 30.0 * sites**2
    replicas = 16 if quick else 32
    times = snapshot_times(t_max, 200, "log", t_first=1.0)
    opts = {"probes": 40, "window": "all"}
    path = OUT / "coarsening" / "variance-coarsening.zarr"
    coarse = _summarised(path, _meta("asymmetric", sites), times, replicas, 7, "random", **opts)
    ref_times = snapshot_times(t_max, 200)
    path = OUT / "coarsening" / "variance-settled.zarr"
    settled = _summarised(path, _meta("asymmetric", sites, "stationary"), ref_times, replicas,
                          8, "steady-state", **opts)  # fmt: skip
    s, r = coarse.summaries, settled.summaries
    var, ci = s.array("largest_mass_var"), s.array("largest_mass_var_ci")
    probe = s.array("probe_snapshot")
    steady = float(np.nanmean(r.array("largest_mass_var")))
    steady_ci = r.array("largest_mass_var_ci")
    peak = int(np.nanargmax(var))
    late = var[times >= 10 * sites**2]
    out = {
        "sites": sites, "replicas": replicas, "times": times.tolist(), "var": var.tolist(),
        "probe_time": times[probe].tolist(), "ci": ci.tolist(), "steady_var": steady,
        "steady_ci_mean_width": float(np.nanmean(steady_ci[:, 1] - steady_ci[:, 0])),
        "peak_var": float(var[peak]), "peak_time": float(times[peak]),
        "late_var_mean": float(np.mean(late)), "late_from": 10 * sites**2,
    }  # fmt: skip
    print(
        f"variance of the largest mass: steady state {steady:.1f}; peak {out['peak_var']:.1f} "
        f"at t = {out['peak_time']:.0f}; mean after t = 10 L^2: {out['late_var_mean']:.1f}"
    )
    return out


def figure(rows: list[dict], var: dict) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(1, 2, figsize=(10, 4))
    t, v = np.asarray(var["times"]), np.asarray(var["var"])
    ax[0].plot(t, v, lw=1, label=f"random start, {var['replicas']} replicas")
    ci = np.asarray(var["ci"], dtype=float)
    ax[0].fill_between(var["probe_time"], ci[:, 0], ci[:, 1], alpha=0.3, label="95 % bootstrap")
    ax[0].axhline(var["steady_var"], color="k", ls="--", label="exact steady-state start")
    ax[0].set_xscale("log")
    ax[0].set_xlabel("t")
    ax[0].set_ylabel("variance of the largest mass over replicas")
    ax[0].set_title(f"driven ZRP, L = {var['sites']}, rho = 2")
    ax[0].legend(fontsize=8)
    for drift, marker in (("asymmetric", "o"), ("symmetric", "s")):
        sel = [r for r in rows if r["drift"] == drift]
        for k, key in enumerate(KEYS):
            vals = [r[key][0] for r in sel]
            ax[1].errorbar(np.full(len(vals), k + (0.1 if drift == "symmetric" else -0.1)),
                           vals, yerr=[r[key][1] for r in sel], fmt=marker, ms=4,
                           label=f"{'driven' if drift == 'asymmetric' else 'symmetric'}"
                           if k == 0 else None)  # fmt: skip
        ax[1].axhline(sel[0]["expected"], ls=":", color="grey")
    ax[1].set_xticks(range(3), ["typical mass", "largest mass", "coarsening length"])
    ax[1].set_ylabel("growth exponent (1/z dotted)")
    ax[1].legend(fontsize=8)
    fig.tight_layout()
    FIGURE.parent.mkdir(exist_ok=True)
    fig.savefig(FIGURE, dpi=90)
    print(f"wrote {FIGURE}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="one seed, fewer replicas")
    args = ap.parse_args()
    (OUT / "coarsening").mkdir(parents=True, exist_ok=True)
    rows = exponents(args.quick)
    var = variance(args.quick)
    (OUT / "coarsening.json").write_text(json.dumps({"exponents": rows, "variance": var}) + "\n")
    figure(rows, var)


if __name__ == "__main__":
    main()
