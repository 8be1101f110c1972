"""The figures draw exactly the stored summaries: for each figure, the data of every
artist (Line2D x/y data, the band's polygon, the histogram's steps, the mesh's cells) equal
the arrays read directly with zarr, the theory curves equal their outside definitions
(scipy.stats densities, the exact ZRP law, power laws of the published exponents), and
every axis has labels with units, a legend where there are several series, and the caption
names the run and the window.

Runs come from the reference sampler, small: a driven ZRP coarsening from a random start,
exact steady-state samples of a symmetric ZRP, a CMAM on a small torus."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import numpy as np
import pytest
import zarr
from scipy import stats

from massarc.archive import open_run
from massarc.schema import parse_metadata
from massarc.schema.laws import canonical_site_law
from massarc.simulate import simulate, snapshot_times
from massarc.summaries import summarize
from massarc.summaries.figures import (
    FIGURES,
    FigureError,
    coarsening_figure,
    correlation_figure,
    extremes_figure,
    largest_mass_figure,
    occupation_figure,
    space_time_figure,
)
from massarc.summaries.growth import geometric_points

QUICK = {"probes": 16, "resamples": 99}


def _meta(model: dict, sites: list[int], regime: str, units: str):
    return parse_metadata({"model": model, "lattice": {"sites": sites, "boundary": "periodic"},
                           "run": {"regime": regime, "time_units": units}})  # fmt: skip


@pytest.fixture(scope="module")
def coarsening(tmp_path_factory) -> Path:
    """Driven ZRP, b = 4, 48 sites at density 2, from a random start: coarsening."""
    path = tmp_path_factory.mktemp("figures") / "depots-coarsening.zarr"
    meta = _meta({"family": "zrp", "b": 4.0, "drift": "asymmetric"}, [48], "transient", "hours")
    times = snapshot_times(3000.0, 300, "log", t_first=1.0)
    simulate(meta, times, replicas=4, seed=11, mass=96, initial="random", location=path)
    summarize(path, QUICK)
    return path


@pytest.fixture(scope="module")
def steady(tmp_path_factory) -> Path:
    """Exact steady-state samples of a symmetric ZRP, b = 4, 32 sites, 48 units."""
    path = tmp_path_factory.mktemp("figures") / "depots-steady.zarr"
    meta = _meta({"family": "zrp", "b": 4.0, "drift": "symmetric"}, [32], "stationary", "hours")
    simulate(meta, snapshot_times(199.0, 200), replicas=4, seed=12, mass=48, exact=True,
             location=path)  # fmt: skip
    summarize(path, QUICK)
    return path


@pytest.fixture(scope="module")
def torus(tmp_path_factory) -> Path:
    """CMAM, D = w = 1, on an 8 x 8 torus at density 2, from a random start."""
    path = tmp_path_factory.mktemp("figures") / "dunes-torus.zarr"
    meta = _meta({"family": "cmam", "diffusion": 1.0, "chipping": 1.0}, [8, 8], "transient",
                 "days")  # fmt: skip
    simulate(meta, snapshot_times(60.0, 61), replicas=4, seed=13, mass=128, initial="random",
             location=path)  # fmt: skip
    summarize(path, QUICK)
    return path


def _stored(path: Path, name: str) -> np.ndarray:
    """A stored summary read directly with zarr, without massarc."""
    return np.asarray(zarr.open_group(path, mode="r")["summaries"][name][...])


def _attrs(path: Path, name: str) -> dict:
    return dict(zarr.open_group(path, mode="r")["summaries"][name].attrs)


def _window(path: Path) -> dict:
    return zarr.open_group(path, mode="r")["summaries"].attrs["massarc"]["window"]


def _times(path: Path) -> np.ndarray:
    return np.asarray(zarr.open_group(path, mode="r")["time"][...])


def _by_gid(ax, gid: str):
    found = [a for a in ax.get_children() if a.get_gid() == gid]
    assert len(found) == 1, f"expected one artist {gid!r}; found {len(found)}"
    return found[0]


def _log_slopes(line) -> np.ndarray:
    x, y = np.asarray(line.get_xdata(), float), np.asarray(line.get_ydata(), float)
    return np.diff(np.log(y)) / np.diff(np.log(x))


def _caption(fig) -> str:
    [text] = [t for t in fig.texts if t.get_gid() == "caption"]
    return " ".join(text.get_text().split())


def _assert_readable(fig, path: Path) -> None:
    """Labels with units on every data axis, a legend where there are several series, and
    a caption naming the run and its window."""
    for ax in fig.axes:
        if ax.get_label() == "<colorbar>":
            assert re.search(r"\(mass units\)", ax.get_ylabel()), ax.get_ylabel()
            continue
        for label in (ax.get_xlabel(), ax.get_ylabel()):
            assert re.search(r"\([^()]*\w[^()]*\)", label), f"no unit in {label!r}"
        series = [a for a in ax.get_children() if a.get_gid() and not a.get_label().startswith("_")]
        if len(series) > 1:
            assert ax.get_legend() is not None
            shown = {t.get_text() for t in ax.get_legend().get_texts()}
            assert {a.get_label() for a in series} <= shown
    caption = _caption(fig)
    assert f"run {path.name}" in caption
    window = _window(path)
    words = {"stationary": "stationary window", "last-half": "last half", "all": "whole run"}
    assert words[window["rule"]] in caption and f"snapshot {window['start']}" in caption


def _assert_band(collection, x: np.ndarray, low: np.ndarray, high: np.ndarray) -> None:
    """The filled band's outline runs through exactly the points (x, low) and (x, high)."""
    [path] = collection.get_paths()
    got = {tuple(np.round(v, 9)) for v in path.vertices}
    want = {tuple(np.round(v, 9)) for v in np.concatenate([np.c_[x, low], np.c_[x, high]])}
    assert got == want


def test_the_figure_names_are_the_plot_command_s() -> None:
    assert list(FIGURES) == ["largest-mass", "occupation", "correlation", "coarsening",
                             "extremes", "space-time"]  # fmt: skip


@pytest.mark.parametrize("log", [False, True])
def test_largest_mass_draws_the_stored_mean_variance_and_intervals(coarsening, log) -> None:
    fig = largest_mass_figure(coarsening, log=log)
    times = _times(coarsening)
    # common practice: the mean and the variance (ddof 1) over replicas of the largest site
    # mass, recomputed here from the raw masses with NumPy
    raw = np.asarray(zarr.open_group(coarsening, mode="r")["mass"][...]).max(axis=2)
    probe_t = _stored(coarsening, "probe_time")
    left, right = fig.axes
    panels = [(left, "largest_mass_mean", "mean", raw.mean(axis=0)),
              (right, "largest_mass_var", "variance", raw.var(axis=0, ddof=1))]  # fmt: skip
    for ax, name, gid, direct in panels:
        line = _by_gid(ax, gid)
        np.testing.assert_array_equal(line.get_xdata(), times)
        np.testing.assert_array_equal(line.get_ydata(), _stored(coarsening, name))
        np.testing.assert_allclose(line.get_ydata(), direct, rtol=1e-12)
        ci = _stored(coarsening, f"{name}_ci")
        _assert_band(_by_gid(ax, "band"), probe_t, ci[:, 0], ci[:, 1])
        assert _by_gid(ax, "window-start").get_xdata()[0] == _window(coarsening)["start_time"]
        assert (ax.get_xscale(), ax.get_yscale()) == (("log", "log") if log else ("linear",) * 2)
    assert "mass units²" in right.get_ylabel() and "hours" in left.get_xlabel()
    _assert_readable(fig, coarsening)


def test_largest_mass_variance_rises_and_falls_while_coarsening(coarsening) -> None:
    # the physics the figure is for: in a coarsening run the variance over replicas of the
    # largest mass is small at the start and at the end, larger in between (from memory:
    # the condensate mass fluctuates most while the last few condensates merge)
    var = _by_gid(largest_mass_figure(coarsening).axes[1], "variance").get_ydata()
    peak = int(np.argmax(var))
    assert 0 < peak < len(var) - 1 and var[peak] > 3 * max(var[0], var[-1])


def test_occupation_draws_the_stored_law_the_exact_zrp_law_and_the_critical_guide(
    steady,
) -> None:
    fig = occupation_figure(steady)
    (ax,) = fig.axes
    counts = _stored(steady, "occupation").astype(float)
    top = len(counts) - 2  # the last bin counts every larger mass
    m = np.arange(1, top + 1)
    keep = counts[1 : top + 1] > 0
    measured = _by_gid(ax, "measured")
    np.testing.assert_array_equal(measured.get_xdata(), m[keep])
    np.testing.assert_allclose(measured.get_ydata(), counts[1 : top + 1][keep] / counts.sum())
    # the exact canonical law of 32 sites holding 48 units (massarc.schema.laws, itself
    # checked against direct enumeration in tests/test_laws.py::
    # test_canonical_site_law_equals_direct_enumeration)
    run = open_run(steady)
    law = canonical_site_law(run.meta.model, 32, 48)
    exact = _by_gid(ax, "exact-law")
    np.testing.assert_array_equal(exact.get_xdata(), np.arange(1, 49))
    np.testing.assert_allclose(exact.get_ydata(), law[1:49], rtol=1e-12)
    # the critical law of u(k) = 1 + b/k decays as m^(-b) (Evans and Hanney, J. Phys. A 38,
    # R195, 2005: f(m) = prod 1/u(k) ~ m^(-b)); the guide goes through a measured point
    guide = _by_gid(ax, "guide")
    np.testing.assert_allclose(_log_slopes(guide), -4.0, rtol=1e-9)
    on_data = np.isclose(guide.get_ydata(), measured.get_ydata(), rtol=1e-12)
    assert on_data.sum() >= 1 and "b = 4" in guide.get_label()
    assert (ax.get_xscale(), ax.get_yscale()) == ("log", "log")
    _assert_readable(fig, steady)


def test_occupation_leaves_out_the_overflow_bin_but_counts_it(steady, tmp_path) -> None:
    copy = Path(shutil.copytree(steady, tmp_path / "few-bins.zarr"))
    summarize(copy, {**QUICK, "occupation_bins": 8}, force=True)
    counts = _stored(copy, "occupation").astype(float)
    assert counts[-1] > 0  # masses >= 7 are pooled in the last bin
    (ax,) = (fig := occupation_figure(copy)).axes
    measured = _by_gid(ax, "measured")
    assert measured.get_xdata().max() <= 6
    keep = counts[1:7] > 0
    np.testing.assert_allclose(measured.get_ydata(), counts[1:7][keep] / counts.sum())
    np.testing.assert_array_equal(_by_gid(ax, "exact-law").get_xdata(), np.arange(1, 7))
    assert f"{counts[-1] / counts.sum():.2g} of the site-snapshots hold m > 6" in _caption(fig)


def test_occupation_of_the_cmam_has_the_mean_field_guide_and_no_exact_law(torus) -> None:
    fig = occupation_figure(torus)
    (ax,) = fig.axes
    # mean-field theory: P(m) ~ m^(-5/2) at rho_c (Majumdar, Krishnamurthy and Barma,
    # PRL 81, 3691, 1998)
    guide = _by_gid(ax, "guide")
    np.testing.assert_allclose(_log_slopes(guide), -2.5, rtol=1e-9)
    assert "mean-field" in guide.get_label()
    assert not [a for a in ax.get_children() if a.get_gid() == "exact-law"]
    assert "no exact stationary law is known for family cmam" in _caption(fig)
    _assert_readable(fig, torus)


def test_correlation_draws_the_stored_g_against_r_and_r_over_l(coarsening) -> None:
    fig = correlation_figure(coarsening)
    g = _stored(coarsening, "correlation")
    probe_t, probe_s = _stored(coarsening, "probe_time"), _stored(coarsening, "probe_snapshot")
    length = _stored(coarsening, "coarsening_length")[probe_s]
    left, right = fig.axes
    r = np.arange(48 // 2 + 1)  # r = 0 .. L/2 on a ring, where G(r) = G(L - r)
    drawn = sorted(int(a.get_gid().split("-")[1]) for a in left.get_lines()
                   if (a.get_gid() or "").startswith("probe-"))  # fmt: skip
    assert drawn[0] == 0 and drawn[-1] == len(probe_t) - 1 and len(drawn) == 4
    for p in drawn:
        line = _by_gid(left, f"probe-{p}")
        np.testing.assert_array_equal(line.get_xdata(), r)
        np.testing.assert_array_equal(line.get_ydata(), g[p, : len(r)])
        assert f"t = {probe_t[p]:.4g} hours" == line.get_label()
        if np.isfinite(length[p]):
            scaled = _by_gid(right, f"scaled-{p}")
            np.testing.assert_allclose(scaled.get_xdata(), r / length[p], rtol=1e-12)
            np.testing.assert_allclose(scaled.get_ydata(), g[p, : len(r)] / g[p, 0], rtol=1e-12)
    assert len(right.get_lines()) >= 3
    _assert_readable(fig, coarsening)


def test_correlation_at_chosen_times_takes_the_nearest_probes(coarsening) -> None:
    probe_t = _stored(coarsening, "probe_time")
    fig = correlation_figure(coarsening, times=[probe_t[5] * 1.01, probe_t[9] * 0.99])
    gids = sorted(a.get_gid() for a in fig.axes[0].get_lines() if a.get_gid())
    assert gids == ["probe-5", "probe-9"]
    assert "nearest" in _caption(fig)
    with pytest.raises(FigureError, match="finite"):
        correlation_figure(coarsening, times=[float("nan")])


def test_correlation_of_a_steady_run_says_why_there_is_no_scaling_panel(steady) -> None:
    fig = correlation_figure(steady)
    assert len(fig.axes) == 1
    assert "not drawn: the run starts in the steady state" in _caption(fig)
    _assert_readable(fig, steady)


def test_correlation_in_2d_is_the_radial_average(torus) -> None:
    fig = correlation_figure(torus, curves=2)
    g = _stored(torus, "correlation")
    last = len(_stored(torus, "probe_time")) - 1
    line = _by_gid(fig.axes[0], f"probe-{last}")
    np.testing.assert_array_equal(line.get_ydata(), g[last, :5])  # r = 0 .. 8 // 2
    assert "radial" in fig.axes[0].get_xlabel()


def test_coarsening_draws_the_stored_means_and_growth_fits(coarsening) -> None:
    fig = coarsening_figure(coarsening)
    times = _times(coarsening)
    points = zarr.open_group(coarsening, mode="r")["summaries"].attrs["massarc"]["options"][
        "fit_points"
    ]
    panels = [("typical_mass_mean", "typical_mass"), ("coarsening_length", "condensates")]
    for ax, (name, per_replica) in zip(fig.axes, panels, strict=True):
        values = _stored(coarsening, name)
        data = _by_gid(ax, "data")
        np.testing.assert_array_equal(data.get_xdata(), times)
        np.testing.assert_array_equal(data.get_ydata(), values)
        growth = _attrs(coarsening, name)["growth"]
        fit, expected = _by_gid(ax, "fit"), _by_gid(ax, "expected")
        x = np.asarray(fit.get_xdata())
        assert (x[0], x[-1]) == pytest.approx((growth["start"], growth["stop"]), rel=1e-12)
        np.testing.assert_allclose(_log_slopes(fit), growth["exponent"], rtol=1e-9)
        # the drawn fit is the least-squares line on log-log (scipy.stats.linregress) at the
        # fit's snapshots, those where every replica is positive; its slope is the stored
        # exponent
        idx = geometric_points(times, growth["start"], growth["stop"], points)
        idx = idx[np.all(_stored(coarsening, per_replica)[:, idx] > 0, axis=0)]
        ls = stats.linregress(np.log(times[idx]), np.log(values[idx]))
        assert ls.slope == pytest.approx(growth["exponent"], abs=1e-9)
        np.testing.assert_allclose(np.log(fit.get_ydata()), ls.intercept + ls.slope * np.log(x),
                                   rtol=1e-9)  # fmt: skip
        # z = 2 for the driven ZRP: l(t) ~ t^(1/2) (Godreche, J. Phys. A 36, 6313, 2003)
        np.testing.assert_allclose(_log_slopes(expected), 0.5, rtol=1e-9)
        assert (ax.get_xscale(), ax.get_yscale()) == ("log", "log")
    assert "(sites)" in fig.axes[1].get_ylabel()
    _assert_readable(fig, coarsening)


def test_coarsening_of_a_steady_run_draws_no_growth_laws(steady) -> None:
    fig = coarsening_figure(steady)
    for ax in fig.axes:
        assert {a.get_gid() for a in ax.get_lines()} == {"data"}
    assert "no growth to measure" in _caption(fig)


def test_extremes_draw_the_stored_sample_and_the_scipy_densities(steady) -> None:
    fig = extremes_figure(steady)
    (ax,) = fig.axes
    sample = _stored(steady, "extreme_sample")
    fits = _attrs(steady, "extreme_sample")["fits"]
    heights, edges, _ = _by_gid(ax, "sample").get_data()
    # whole-mass bins: half-integer edges, one integer width, the sample inside
    assert np.all(edges % 1 == 0.5) and len(set(np.diff(edges))) == 1
    assert edges[0] < sample.min() and sample.max() < edges[-1]
    np.testing.assert_allclose(heights, np.histogram(sample, bins=edges, density=True)[0])
    # the laws in scipy.stats' parametrisation (schema/FORMAT.md, section 6)
    scipy_laws = {"gumbel": stats.gumbel_r, "frechet": stats.invweibull,
                  "weibull": stats.weibull_max, "gev": stats.genextreme}  # fmt: skip
    fitted = {k: v for k, v in fits["laws"].items() if v.get("params_mass")}
    assert "gumbel" in fitted and "gev" in fitted
    for name, entry in fitted.items():
        line = _by_gid(ax, f"pdf-{name}")
        x = np.asarray(line.get_xdata())
        assert (x[0], x[-1]) == (edges[0], edges[-1])
        want = scipy_laws[name](*entry["params_mass"]).pdf(x)
        np.testing.assert_allclose(line.get_ydata(), want, rtol=1e-12, atol=1e-300)
    best = min(fitted, key=lambda k: fitted[k]["aic"])
    assert "lowest AIC" in _by_gid(ax, f"pdf-{best}").get_label()
    for name in set(fits["laws"]) - set(fitted):
        assert not [a for a in ax.get_children() if a.get_gid() == f"pdf-{name}"]
    _assert_readable(fig, steady)


def test_space_time_shows_the_masses_of_its_stretch(coarsening) -> None:
    fig = space_time_figure(coarsening, replica=2, start=20, stop=290, rows=100)
    ax = fig.axes[0]
    mesh = _by_gid(ax, "masses")
    raw = zarr.open_group(coarsening, mode="r")["mass"]
    step = 3  # ceil(270 / 100)
    np.testing.assert_array_equal(np.asarray(mesh.get_array()).reshape(-1, 48),
                                  raw[2, 20:290:step])  # fmt: skip
    times = _times(coarsening)[20:290:step]
    corners = mesh.get_coordinates()  # (rows + 1, sites + 1, 2)
    edges = corners[:, 0, 1]
    assert np.all((edges[:-1] < times) & (times < edges[1:]))
    np.testing.assert_array_equal(corners[0, :, 0], np.arange(49) - 0.5)
    assert ax.get_ylim()[0] > ax.get_ylim()[1]  # time runs down
    assert mesh.get_cmap().name == "cividis" and mesh.norm.vmin == 0
    assert mesh.norm.vmax == raw[2, 20:290:step].max()
    assert "replica 2, snapshots 20..289" in _caption(fig)
    _assert_readable(fig, coarsening)


def test_space_time_reads_only_its_replica(coarsening, tmp_path) -> None:
    copy = Path(shutil.copytree(coarsening, tmp_path / "copy.zarr"))
    for chunk in (copy / "mass" / "c" / "1").rglob("*"):
        if chunk.is_file():
            chunk.write_bytes(b"damaged" * 8)
    space_time_figure(copy, replica=0)  # replica 1's damaged chunks are never read
    with pytest.raises(Exception, match=r"(?i)checksum|crc|decod|codec|invalid|error"):
        space_time_figure(copy, replica=1)


def test_space_time_in_2d_is_a_grid_of_snapshots(torus) -> None:
    fig = space_time_figure(torus, replica=1)
    raw = zarr.open_group(torus, mode="r")["mass"]
    images = [a for ax in fig.axes for a in ax.get_images()]
    picked = [int(im.get_gid().split("-")[1]) for im in images]
    assert picked == np.unique(np.linspace(0, 60, 6).round()).astype(int).tolist()
    for im, k in zip(images, picked, strict=True):
        np.testing.assert_array_equal(im.get_array(), raw[1, k])
        assert im.get_cmap().name == "cividis"
    _assert_readable(fig, torus)


def test_space_time_needs_no_summaries_and_says_so() -> None:
    sample = Path(__file__).resolve().parents[1] / "samples" / "dune-strip.zarr"
    fig = space_time_figure(sample, start=500)
    assert "window unknown (no stored summaries)" in _caption(fig)


@pytest.mark.parametrize(
    ("options", "message"),
    [({"replica": 4}, "replica 4: expected 0 .. 3"),
     ({"start": 10, "stop": 10}, "snapshots 10:10"),
     ({"stop": 999}, "snapshots 0:999"),
     ({"rows": 0}, "rows: expected an integer >= 1")],
)  # fmt: skip
def test_space_time_refuses_a_stretch_outside_the_run(coarsening, options, message) -> None:
    with pytest.raises(FigureError, match=re.escape(message)):
        space_time_figure(coarsening, **options)


@pytest.mark.parametrize("name", [n for n in FIGURES if n != "space-time"])
def test_a_run_without_summaries_names_the_missing_array_and_the_command(name) -> None:
    sample = Path(__file__).resolve().parents[1] / "samples" / "depot-ring.zarr"
    with pytest.raises(FigureError, match=r"no stored summary '\w+'.*massarc summarize"):
        FIGURES[name](sample)
