"""Calibration of `massarc check` at its default settings: false alarms on honest runs of
the reference samplers and detection of planted faults. Writes docs/calibration.md.

    .venv/bin/python bench/calibrate.py [--clean 100] [--faults 50] [--seed 1]

Clean runs (per family, at least 100): honest runs that claim what they are. ZRP: rings
(symmetric and asymmetric) and symmetric chains with walls, started from an exact
steady-state sample and claimed stationary. CMAM: rings and chains, started from an even
spread and run for 10 relaxation times L^2 / D, claimed stationary. A false alarm is any
check returning ``fail`` (or ``error``); warnings are counted separately.

Planted faults: each is written into an otherwise honest run; it is detected when the
check meant to catch it returns ``fail``.
"""

from __future__ import annotations

import argparse
import json
import shutil
import tempfile
import time
from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from _common import interval

from massarc.archive import create_run
from massarc.schema import InitialCondition, RunMeta, parse_metadata
from massarc.simulate import simulate, snapshot_times
from massarc.validators import audit

ROOT = Path(__file__).resolve().parents[1]
OUT = Path(__file__).parent / "out"
L = 32
REPLICAS = 4


def meta_for(
    family: str, boundary: str, drift: str = "symmetric", regime: str = "stationary", **model: float
) -> RunMeta:
    body = {"family": family, "drift": drift, **model}
    if family == "zrp":
        body.setdefault("b", 4.0)
    else:
        body.setdefault("diffusion", 1.0)
        body.setdefault("chipping", 1.0)
    return parse_metadata(
        {"model": body, "lattice": {"sites": [L], "boundary": boundary}, "run": {"regime": regime}}
    )


@dataclass
class Case:
    """One simulated run: what it truly is, and what its archive declares."""

    truth: RunMeta
    declared: RunMeta
    t_max: float
    snapshots: int
    density: float
    initial: str
    spacing: str = "linear"


def zrp_clean(i: int) -> Case:
    kind = ["ring-sym", "ring-asym", "walls-sym"][i % 3]
    b, rho = [(4.0, 1.5), (3.0, 0.6), (4.0, 0.4)][(i // 3) % 3]  # condensed, fluid, fluid
    drift = "asymmetric" if kind == "ring-asym" else "symmetric"
    boundary = "reflecting" if kind == "walls-sym" else "periodic"
    meta = meta_for("zrp", boundary, drift, b=b)
    z = 2 if drift == "asymmetric" else 3
    t_max = 2.0 * L**z
    return Case(meta, meta, t_max, 4096, rho, "steady-state")


def cmam_clean(i: int) -> Case:
    boundary = ["periodic", "reflecting"][i % 2]
    w, rho = [(1.0, 2.0), (1.0, 0.3), (3.0, 1.5)][(i // 2) % 3]  # rho_c = 0.414, 0.414, 1
    meta = meta_for("cmam", boundary, chipping=w)
    return Case(meta, meta, 10.0 * L**2, 4096, rho, "uniform")


def simulate_case(case: Case, seed: int) -> tuple[np.ndarray, np.ndarray]:
    times = snapshot_times(case.t_max, case.snapshots, spacing=case.spacing)
    mass = round(case.density * L)
    x = simulate(case.truth, times, replicas=REPLICAS, seed=seed, mass=mass, initial=case.initial)
    return np.asarray(x), np.asarray(times, dtype=float)


def write(path: Path, meta: RunMeta, x: np.ndarray, times: np.ndarray, **kw: object) -> Path:
    with create_run(path, meta, strict=False, **kw) as w:
        w.append(times, x)
    return path


def statuses(path: Path) -> dict[str, str]:
    report = audit([path])
    return {c.id: c.status for c in report.runs[0].checks}


# -- planted faults ------------------------------------------------------------------------
Fault = Callable[[np.random.Generator, int], tuple[Path, str]]


def _honest(
    rng: np.random.Generator, seed: int, family: str
) -> tuple[Case, np.ndarray, np.ndarray]:
    case = zrp_clean(seed) if family == "zrp" else cmam_clean(seed)
    x, t = simulate_case(case, seed)
    return case, x, t


def fault_mass(delta: int) -> Callable[[Path, np.random.Generator, int], tuple[Path, str]]:
    def plant(tmp: Path, rng: np.random.Generator, seed: int) -> tuple[Path, str]:
        case, x, t = _honest(rng, seed, ["zrp", "cmam"][seed % 2])
        x = x.astype(np.int64)
        r, s = int(rng.integers(REPLICAS)), int(rng.integers(1, x.shape[1]))
        occupied = np.flatnonzero(x[r, s] > 0)
        site = int(rng.choice(occupied))
        x[r, s:, site] += delta  # a particle lost (or duplicated) from snapshot s on
        x[r, s:, site] = np.maximum(x[r, s:, site], 0)
        return write(
            tmp / "f.zarr", case.declared, x, t, max_mass=int(x.sum(axis=-1).max())
        ), "conservation"

    return plant


def fault_negative(tmp: Path, rng: np.random.Generator, seed: int) -> tuple[Path, str]:
    case, x, t = _honest(rng, seed, ["zrp", "cmam"][seed % 2])
    x = x.astype(np.int32)
    r, s = int(rng.integers(REPLICAS)), int(rng.integers(x.shape[1]))
    i, j = rng.choice(L, size=2, replace=False)
    moved = int(x[r, s, i]) + 1
    x[r, s, i] = -1  # a negative mass; its difference goes to site j, so the total is kept
    x[r, s, j] += moved
    return write(tmp / "f.zarr", case.declared, x, t, dtype="int32"), "nonnegative"


def fault_swapped_times(tmp: Path, rng: np.random.Generator, seed: int) -> tuple[Path, str]:
    case, x, t = _honest(rng, seed, ["zrp", "cmam"][seed % 2])
    k = int(rng.integers(1, len(t) - 1))
    t = t.copy()
    t[k], t[k + 1] = t[k + 1], t[k]
    return write(tmp / "f.zarr", case.declared, x, t), "time-order"


def fault_boundary(true_b: str, declared_b: str) -> Callable[..., tuple[Path, str]]:
    def plant(tmp: Path, rng: np.random.Generator, seed: int) -> tuple[Path, str]:
        family = ["zrp", "cmam"][seed % 2]
        drift = (
            "asymmetric"
            if (family == "zrp" and seed % 4 == 0 and true_b == "periodic")
            else "symmetric"
        )
        if family == "zrp":
            truth = meta_for("zrp", true_b, drift, b=3.0)
            case = Case(truth, truth, 2000.0, 4000, 0.6, "steady-state")
        else:
            truth = meta_for("cmam", true_b)
            case = Case(truth, truth, 2000.0, 4000, 1.0, "uniform")
        x, t = simulate_case(case, seed)
        declared = truth.model_copy(
            update={"lattice": truth.lattice.model_copy(update={"boundary": (declared_b,)})}
        )
        return write(tmp / "f.zarr", declared, x, t), "boundary"

    return plant


def fault_wrong_b(tmp: Path, rng: np.random.Generator, seed: int) -> tuple[Path, str]:
    b_true, b_declared, rho = [(4.0, 3.0, 0.4), (4.0, 5.0, 1.5), (3.0, 4.0, 0.6)][seed % 3]
    truth = meta_for("zrp", "periodic", b=b_true)
    case = Case(truth, truth, 2.0 * L**3, 4096, rho, "steady-state")
    x, t = simulate_case(case, seed)
    declared = truth.model_copy(update={"model": truth.model.model_copy(update={"b": b_declared})})
    return write(tmp / "f.zarr", declared, x, t), "stationary-law"


def fault_coarsening(declare_start: bool) -> Callable[..., tuple[Path, str]]:
    def plant(tmp: Path, rng: np.random.Generator, seed: int) -> tuple[Path, str]:
        if seed % 2:
            truth = meta_for("cmam", "periodic")
            case = Case(truth, truth, 0.03 * L**2, 1024, 2.0, "random", "log")
        else:
            truth = meta_for("zrp", "periodic", b=4.0)
            case = Case(truth, truth, 0.01 * L**3, 1024, 1.5, "random", "log")
        x, t = simulate_case(case, seed)
        declared = truth
        if declare_start:  # as massarc sample (or any simulator that records it) writes it
            run = truth.run.model_copy(update={"initial": InitialCondition(kind="random")})
            declared = truth.model_copy(update={"run": run})
        return write(tmp / "f.zarr", declared, x, t), "steady-state"

    return plant


FAULTS: dict[str, Callable[..., tuple[Path, str]]] = {
    "lost particle": fault_mass(-1),
    "duplicated particle": fault_mass(+1),
    "negative mass": fault_negative,
    "swapped times": fault_swapped_times,
    "walls declared as a ring": fault_boundary("reflecting", "periodic"),
    "ring declared as walls": fault_boundary("periodic", "reflecting"),
    "wrong declared b": fault_wrong_b,
    "coarsening run labelled stationary, random start declared": fault_coarsening(True),
    "coarsening run labelled stationary, start not declared": fault_coarsening(False),
}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--clean", type=int, default=100, help="clean runs per family")
    ap.add_argument("--faults", type=int, default=50, help="runs per planted fault")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--doc", type=Path, default=ROOT / "docs" / "calibration.md")
    args = ap.parse_args()
    tmp = Path(tempfile.mkdtemp())
    t0 = time.perf_counter()
    clean: dict[str, dict] = {}
    try:
        for family, make in (("zrp", zrp_clean), ("cmam", cmam_clean)):
            fails: Counter[str] = Counter()
            warns: Counter[str] = Counter()
            n_fail_runs = n_warn_runs = 0
            for i in range(args.clean):
                seed = args.seed * 100000 + i
                case = make(i)
                x, t = simulate_case(case, seed)
                st = statuses(write(tmp / f"{family}{i}.zarr", case.declared, x, t))
                shutil.rmtree(tmp / f"{family}{i}.zarr")
                bad = [k for k, v in st.items() if v in ("fail", "error")]
                fails.update(bad)
                warns.update(k for k, v in st.items() if v == "warn")
                n_fail_runs += bool(bad)
                n_warn_runs += any(v == "warn" for v in st.values())
            clean[family] = {
                "runs": args.clean,
                "runs_failed": n_fail_runs,
                "runs_warned": n_warn_runs,
                "fails": dict(fails),
                "warns": dict(warns),
            }
            print(family, clean[family], flush=True)
        faults: dict[str, dict] = {}
        for name, plant in FAULTS.items():
            rng = np.random.default_rng(args.seed)
            hits = 0
            others: Counter[str] = Counter()
            for i in range(args.faults):
                d = tmp / f"fault{i}"
                d.mkdir()
                path, check = plant(d, rng, args.seed * 100000 + 50000 + i)
                st = statuses(path)
                hits += st.get(check) == "fail"
                others.update(k for k, v in st.items() if v == "fail" and k != check)
                shutil.rmtree(d)
            faults[name] = {
                "check": check,
                "runs": args.faults,
                "detected": hits,
                "other_checks_failing": dict(others),
            }
            print(name, faults[name], flush=True)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    elapsed = time.perf_counter() - t0
    result = {
        "clean": clean,
        "faults": faults,
        "lattice": L,
        "replicas": REPLICAS,
        "seed": args.seed,
        "seconds": elapsed,
    }
    OUT.mkdir(exist_ok=True)
    (OUT / "calibration.json").write_text(json.dumps(result, indent=2))
    write_doc(args.doc, result)
    print(f"wrote {args.doc} in {elapsed:.0f} s")


BEGIN = "<!-- bench/calibrate.py: begin -->"
END = "<!-- bench/calibrate.py: end -->"


def write_doc(path: Path, r: dict) -> None:
    """Fill the part of ``path`` between :data:`BEGIN` and :data:`END` (the rest of the
    page, the studies as groups store runs, is written by hand from the other studies)."""
    lines = [
        "## Dense snapshots from the reference samplers (`bench/calibrate.py`)",
        "",
        "Measured by `bench/calibrate.py` on runs of the reference samplers "
        f"(L = {r['lattice']} sites, {r['replicas']} replicas per run, seed {r['seed']}, "
        f"{r['seconds'] / 60:.0f} minutes on 2 cores). Regenerate with",
        "",
        "    .venv/bin/python bench/calibrate.py",
        "",
        "Intervals are Clopper-Pearson 95%. Defaults of every check are used.",
        "",
        "### False alarms on honest runs",
        "",
        "| family | runs | runs with a `fail` | 95% interval | runs with a `warn` "
        "| which checks failed | which warned |",
        "| --- | --- | --- | --- | --- | --- | --- |",
    ]
    for fam, c in r["clean"].items():
        lo, hi = interval(c["runs_failed"], c["runs"])
        fails = ", ".join(f"{k} {v}" for k, v in sorted(c["fails"].items())) or "none"
        warns = ", ".join(f"{k} {v}" for k, v in sorted(c["warns"].items())) or "none"
        lines.append(
            f"| {fam} | {c['runs']} | {c['runs_failed']} | {lo:.3f} - {hi:.3f} | "
            f"{c['runs_warned']} | {fails} | {warns} |"
        )
    lines += [
        "",
        "ZRP runs: rings (symmetric, asymmetric) and symmetric chains with walls, "
        "u(k) = 1 + b/k in the condensed (b = 4, rho = 1.5) and fluid phases, from an exact "
        "steady-state sample, for 2 L^z. CMAM runs: rings and chains, D = 1, w = 1 or 3, "
        "condensed and fluid, from an even spread, for 10 L^2 / D.",
        "",
        "### Detection of planted faults",
        "",
        "| fault | check | runs | detected | 95% interval | other checks failing |",
        "| --- | --- | --- | --- | --- | --- |",
    ]
    for name, f in r["faults"].items():
        lo, hi = interval(f["detected"], f["runs"])
        others = ", ".join(f"{k} {v}" for k, v in sorted(f["other_checks_failing"].items()))
        lines.append(
            f"| {name} | `{f['check']}` | {f['runs']} | {f['detected']} | "
            f"{lo:.3f} - {hi:.3f} | {others or 'none'} |"
        )
    lines += [
        "",
        "Faults, each planted in an otherwise honest run: one unit removed from (or added to) "
        "one site from a random snapshot on; one mass set to -1 in an int32 archive (the "
        "unit moved to another site, so the total is unchanged); two consecutive times "
        "swapped; a chain with walls declared periodic and a ring declared reflecting (ZRP, "
        "some asymmetric, and CMAM, a snapshot every 0.5 time units); the ZRP simulated "
        "with one b and declared with another (fluid and condensed); a run from a random "
        "start stopped at 0.01 L^3 (ZRP) or 0.03 L^2 (CMAM) and labelled stationary, once with "
        "the random start recorded in `run.initial` (as `massarc sample` records it) and once "
        "without: then only the data can show it (the exact law of the ZRP's largest mass, "
        "the CMAM's condensate scale).",
        "",
    ]
    text = "\n".join(lines)
    doc = path.read_text() if path.exists() else f"{BEGIN}\n{END}\n"
    if BEGIN not in doc or END not in doc:
        raise SystemExit(f"{path}: expected the markers {BEGIN} and {END}; found none")
    head, rest = doc.split(BEGIN, 1)
    tail = rest.split(END, 1)[1]
    path.parent.mkdir(exist_ok=True)
    path.write_text(f"{head}{BEGIN}\n{text}{END}{tail}")


if __name__ == "__main__":
    main()
