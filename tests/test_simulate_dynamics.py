"""The continuous-time dynamics against exact results: the ZRP keeps its canonical steady
state, one particle performs a continuous-time random walk (Skellam displacement), a
small CMAM reaches the stationary law of its generator, walls and drift act as declared,
and the compiled and pure event loops agree bit for bit."""

from __future__ import annotations

import itertools
from typing import Any

import numpy as np
import pytest
from scipy import linalg, stats
from test_simulate_exact import chisquare_merged

from massarc.schema import RunMeta, parse_metadata
from massarc.schema.laws import canonical_site_law
from massarc.simulate import simulate, snapshot_times


def _meta(model: dict[str, Any], sites: list[int], boundary: str | list[str]) -> RunMeta:
    return parse_metadata(
        {
            "model": model,
            "lattice": {"sites": sites, "boundary": boundary},
            "run": {"regime": "stationary"},
        }
    )


def _model(model: dict[str, Any]) -> Any:
    return _meta(model, [1], "periodic").model


ZRP_B3 = {"family": "zrp", "b": 3.0}
STATIONARY_CASES = {
    "symmetric ring": (ZRP_B3, "periodic"),
    "asymmetric ring": ({**ZRP_B3, "drift": "asymmetric"}, "periodic"),
    "partly asymmetric ring": (
        {**ZRP_B3, "drift": "asymmetric", "right_probability": 0.8},
        "periodic",
    ),
    "symmetric chain with walls": (ZRP_B3, "reflecting"),
}


def _occupation_fractions(x: np.ndarray, bins: int) -> np.ndarray:
    """Per replica, the fraction of (snapshot, site) pairs holding m = 0..bins-2 and >= bins-1."""
    flat = np.minimum(x.reshape(x.shape[0], -1), bins - 1)
    counts = np.stack([np.bincount(row, minlength=bins) for row in flat])
    return counts / flat.shape[1]


def _stationary_run(model: dict[str, Any], boundary: str, seed: int) -> np.ndarray:
    meta = _meta(model, [64], boundary)
    # b = 3, rho = 0.5 < rho_c = 1: fluid; snapshots 10 time units apart after the start
    t = snapshot_times(100.0, 11)
    x = simulate(meta, t, replicas=40, seed=seed, mass=32, initial="steady-state")
    return x[:, 1:]


@pytest.mark.parametrize("case", sorted(STATIONARY_CASES))
def test_zrp_stays_in_its_canonical_steady_state(case: str) -> None:
    model, boundary = STATIONARY_CASES[case]
    x = _stationary_run(model, boundary, seed=21)
    law = canonical_site_law(_model(model), 64, 32)
    bins = 5
    expected = np.concatenate([law[: bins - 1], [law[bins - 1 :].sum()]])
    frac = _occupation_fractions(x, bins)
    # replicas are independent, so each bin's per-replica fractions are i.i.d.: one-sample
    # t-tests (scipy.stats.ttest_1samp) against the canonical law (Evans and Hanney 2005)
    p = stats.ttest_1samp(frac, expected, axis=0).pvalue
    assert p.min() > 1e-4 / bins, (case, frac.mean(axis=0), expected)
    if boundary == "reflecting":
        # walls keep the product measure uniform: the mean mass at the wall sites is rho
        for site in (0, 63):
            wall = x[:, :, site].mean(axis=1)
            assert stats.ttest_1samp(wall, 0.5).pvalue > 1e-4, site


def test_the_stationarity_test_rejects_the_wrong_dynamics() -> None:
    # negative control: start in the b = 3 steady state but run u(k) = 1 + 1/k; the same
    # test must see the occupation law move away
    x = simulate(
        _meta({"family": "zrp", "b": 1.0}, [64], "periodic"),
        snapshot_times(100.0, 11),
        replicas=40,
        seed=21,
        mass=32,
        initial="uniform",
    )[:, 1:]
    law = canonical_site_law(_model(ZRP_B3), 64, 32)
    expected = np.concatenate([law[:4], [law[4:].sum()]])
    p = stats.ttest_1samp(_occupation_fractions(x, 5), expected, axis=0).pvalue
    assert p.min() < 1e-8


def _unwrapped_positions(x: np.ndarray) -> np.ndarray:
    """Positions (replica, time, axis) of the single unit, unwrapped on the ring."""
    shape = x.shape[2:]
    flat = x.reshape(*x.shape[:2], -1).argmax(axis=2)
    pos = np.stack(np.unravel_index(flat, shape), axis=-1)
    step = np.diff(pos, axis=1)
    lengths = np.array(shape)
    step = (step + lengths // 2) % lengths - lengths // 2  # minimal image, |step| << L/2
    return np.concatenate([np.zeros_like(pos[:, :1]), np.cumsum(step, axis=1)], axis=1)


def _skellam_pvalue(displacement: np.ndarray, right: float, left: float) -> float:
    """Chi-square p-value of integer displacements against scipy.stats.skellam(right, left)."""
    lo, hi = int(displacement.min()), int(displacement.max())
    k = np.arange(lo, hi + 1)
    law = stats.skellam(right, left)
    probs = law.pmf(k)
    probs[0] += law.cdf(lo - 1)
    probs[-1] += law.sf(hi)
    return chisquare_merged(np.bincount(displacement - lo, minlength=len(k)), probs)


WALKERS = {
    # u(1) = 1 + b = 2 equals r_max: every attempt on the occupied site moves it
    "zrp b=1, p=0.75": ({"family": "zrp", "b": 1.0, "drift": "asymmetric",
                         "right_probability": 0.75}, 2.0, 0.75),
    # u(1) = 0.5 < r_max = 3: five attempts in six are thinned away
    "zrp table, p=0.3": ({"family": "zrp", "rates": [0.5, 3.0], "drift": "asymmetric",
                          "right_probability": 0.3}, 0.5, 0.3),
    # one CMAM unit hops at D + w whether it moves as a cluster or chips off
    "cmam symmetric": ({"family": "cmam", "diffusion": 0.5, "chipping": 1.5}, 2.0, 0.5),
    "cmam totally asymmetric": ({"family": "cmam", "diffusion": 1.5, "chipping": 0.25,
                                 "drift": "asymmetric"}, 1.75, 1.0),
}  # fmt: skip


@pytest.mark.parametrize("case", sorted(WALKERS))
def test_one_unit_performs_a_continuous_time_random_walk(case: str) -> None:
    model, rate, p = WALKERS[case]
    t_max = 10.0
    x = simulate(
        _meta(model, [64], "periodic"),
        snapshot_times(t_max, 41),
        replicas=2000,
        seed=5,
        mass=1,
        initial="condensed",
    )
    disp = _unwrapped_positions(x)[:, -1, 0]
    # from memory (continuous-time random walk): jumps right at rate u p, left at u (1 - p),
    # so the displacement is Skellam(u p t, u (1 - p) t) (scipy.stats.skellam), with mean
    # v t = u (2p - 1) t and variance 2 D t = u t (D = u/2 in 1D)
    mean, var = rate * (2 * p - 1) * t_max, rate * t_max
    assert abs(disp.mean() - mean) < 4.5 * np.sqrt(var / len(disp))
    assert stats.chi2.sf((len(disp) - 1) * disp.var(ddof=1) / var, len(disp) - 1) > 1e-4
    assert _skellam_pvalue(disp, rate * p * t_max, rate * (1 - p) * t_max) > 1e-3


def test_one_particle_in_2d_drifts_towards_plus_y_and_plus_x() -> None:
    model = {"family": "zrp", "rate": 1.5, "drift": "asymmetric", "right_probability": 0.8}
    t_max = 8.0
    x = simulate(
        _meta(model, [24, 32], "periodic"),
        snapshot_times(t_max, 33),
        replicas=2000,
        seed=6,
        mass=1,
        initial="random",
    )
    disp = _unwrapped_positions(x)[:, -1]
    # the axis is picked uniformly: on each axis Skellam(u p t / 2, u (1 - p) t / 2), from
    # memory (continuous-time random walk on the square lattice)
    right, left = 1.5 * 0.8 * t_max / 2, 1.5 * 0.2 * t_max / 2
    for axis in (0, 1):
        assert disp[:, axis].mean() > 0
        assert _skellam_pvalue(disp[:, axis], right, left) > 1e-3, axis


def _cmam_generator(
    sites: int, mass: int, d: float, w: float, p: float, ring: bool
) -> tuple[list[tuple[int, ...]], np.ndarray]:
    """Generator of the CMAM on a small ring or chain, from the model definition (Majumdar,
    Krishnamurthy and Barma 1998): a site's whole mass moves at rate D, one unit chips off
    at rate w; the target is the right neighbour with probability p; moves into a wall are
    suppressed."""
    states = [c for c in itertools.product(range(mass + 1), repeat=sites) if sum(c) == mass]
    index = {s: i for i, s in enumerate(states)}
    q = np.zeros((len(states), len(states)))
    for s in states:
        for i, m in enumerate(s):
            if m == 0:
                continue
            for amount, rate in ((m, d), (1, w)):
                for step, prob in ((1, p), (-1, 1 - p)):
                    j = i + step
                    if ring:
                        j %= sites
                    elif not 0 <= j < sites:
                        continue
                    new = list(s)
                    new[i] -= amount
                    new[j] += amount
                    q[index[s], index[tuple(new)]] += rate * prob
    q -= np.diag(q.sum(axis=1))
    return states, q


@pytest.mark.parametrize("ring", [True, False], ids=["ring", "chain with walls"])
def test_small_cmam_reaches_the_stationary_law_of_its_generator(ring: bool) -> None:
    sites, mass, d, w, p = 3, 4, 1.0, 0.5, 0.8
    states, q = _cmam_generator(sites, mass, d, w, p, ring)
    # stationary law: the null vector of Q^T (scipy.linalg.null_space); spectral gap from
    # scipy.linalg.eigvals sets a snapshot spacing after which correlations are < 1e-6
    pi = linalg.null_space(q.T)[:, 0]
    pi /= pi.sum()
    rates = np.sort(-linalg.eigvals(q).real)
    gap = rates[1]
    spacing = 14.0 / gap
    model = {"family": "cmam", "diffusion": d, "chipping": w, "drift": "asymmetric",
             "right_probability": p}  # fmt: skip
    x = simulate(
        _meta(model, [sites], "periodic" if ring else "reflecting"),
        spacing * np.arange(1, 11),
        replicas=300,
        seed=17,
        mass=mass,
    )
    index = {s: i for i, s in enumerate(states)}
    codes = [index[tuple(row)] for row in x.reshape(-1, sites).tolist()]
    assert chisquare_merged(np.bincount(codes, minlength=len(states)), pi) > 1e-3


CONSERVATION_CASES = [
    ("zrp", [40], "periodic"),
    ("zrp", [40], "reflecting"),
    ("zrp", [9, 11], ["periodic", "reflecting"]),
    ("cmam", [40], "reflecting"),
    ("cmam", [9, 11], "reflecting"),
    ("cmam", [8, 8], "periodic"),
]


@pytest.mark.parametrize(("family", "sites", "boundary"), CONSERVATION_CASES)
def test_mass_is_conserved_exactly(family: str, sites: list[int], boundary: Any) -> None:
    law = {"b": 2.5} if family == "zrp" else {"diffusion": 1.0, "chipping": 0.7}
    model = {"family": family, **law, "drift": "asymmetric", "right_probability": 0.9}
    x = simulate(_meta(model, sites, boundary), snapshot_times(300.0, 151), replicas=3,
                 seed=2, mass=137)  # fmt: skip
    totals = x.reshape(*x.shape[:2], -1).sum(axis=2)
    # common practice: a closed system holds its total at every snapshot (reflecting walls
    # included: no move may lose or create mass)
    assert np.all(totals == 137)
    assert x.min() >= 0


@pytest.mark.parametrize("family", ["zrp", "cmam"])
def test_walls_suppress_moves_and_drift_pushes_mass_to_plus_x(family: str) -> None:
    law = {"rate": 1.0} if family == "zrp" else {"diffusion": 1.0, "chipping": 1.0}
    left = {"family": family, **law, "drift": "asymmetric", "right_probability": 0.0}
    right = {"family": family, **law, "drift": "asymmetric"}
    t = snapshot_times(500.0, 11)
    # everything pushes against the wall at site 0: nothing ever moves
    x = simulate(_meta(left, [12], "reflecting"), t, replicas=2, seed=1, mass=20,
                 initial="condensed")  # fmt: skip
    assert np.all(x[:, :, 0] == 20)
    # totally asymmetric towards +x: all mass ends against the far wall, in 1D and 2D
    x = simulate(_meta(right, [12], "reflecting"), t, replicas=2, seed=1, mass=20)
    assert np.all(x[:, -1, -1] == 20)
    x = simulate(_meta(right, [5, 6], "reflecting"), t, replicas=2, seed=1, mass=20)
    assert np.all(x[:, -1, -1, -1] == 20)
    # on a ring with one wall axis: mass gathers on the last row, spread along the ring
    x = simulate(_meta(right, [5, 6], ["reflecting", "periodic"]), t, replicas=2, seed=1,
                 mass=20)  # fmt: skip
    assert np.all(x[:, -1, -1, :].sum(axis=1) == 20)


@pytest.mark.parametrize(
    ("model", "sites", "boundary"),
    [
        ({**ZRP_B3, "drift": "asymmetric", "right_probability": 0.7}, [6, 5],
         ["periodic", "reflecting"]),
        ({"family": "cmam", "diffusion": 1.0, "chipping": 0.3}, [30], "reflecting"),
    ],
)  # fmt: skip
def test_compiled_and_pure_loops_are_bit_identical(model: dict, sites: list, boundary) -> None:
    meta = _meta(model, sites, boundary)
    # one long interval (more than one batch of attempts) and several short ones
    t = np.array([0.0, 0.5, 1.0, 2000.0, 2000.25])
    args = {"replicas": 2, "seed": 13, "mass": 45}
    compiled = simulate(meta, t, pure=False, **args)
    pure = simulate(meta, t, pure=True, **args)
    assert np.array_equal(compiled, pure)
    assert not np.array_equal(compiled[:, 2], compiled[:, 3])
