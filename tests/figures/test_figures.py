"""Figures: every function returns an Axes with units on its axes, and what is drawn is right.

References outside the project: scipy.stats (χ² quantile for the ellipse, Rice law for the belt
and the posterior), allantools (overlapping Allan deviation), numpy (running mean), and closed
forms of the simulated truth (harmonics of a noiseless scan).
"""

import math
import warnings
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from matplotlib.axes import Axes  # noqa: E402
from matplotlib.patches import Ellipse  # noqa: E402
from scipy import stats  # noqa: E402

from nullfit import (amplitude_limit, expected_for_scan, fit_scan, read_scan,  # noqa: E402
                     simulate_scan)
from nullfit import figures as P  # noqa: E402
from nullfit.fitting.allan import allan_deviation  # noqa: E402
from nullfit.fitting.estimate import HarmonicEstimate  # noqa: E402
from nullfit.limits.unified import belt_curves  # noqa: E402

DEMO = Path(__file__).resolve().parents[2] / "data_demo"


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


@pytest.fixture(scope="module")
def demo():
    """The injected-2θ demo scan, its fit, one limit per route and the expected classical wind."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan = read_scan(DEMO / "injected_2theta.csv")
        fit = fit_scan(scan)
        h = fit.harmonic(2)
        turns = fit.per_turn[["c2", "s2"]].to_numpy()
        common = dict(harmonic=2, unit=scan.unit)
        limits = {
            "feldman-cousins": amplitude_limit(h.c, h.s, h.cov, method="feldman-cousins", dof=fit.dof,
                                               **common),
            "neyman": amplitude_limit(h.c, h.s, h.cov, method="neyman", dof=fit.dof, **common),
            # the covariance taken as known here (dof=None): the isotropic-free Bayes kernel
            "bayes": amplitude_limit(h.c, h.s, h.cov, method="bayes", **common),
            "bootstrap": amplitude_limit(h.c, h.s, h.cov, method="bootstrap", turns=turns, rng=11,
                                         replicates=400, progress=False, **common),
        }
        expected = expected_for_scan(scan, speed_m_s=30_000.0)
    return dict(scan=scan, fit=fit, limits=limits, expected=expected)


def _by_gid(ax, gid):
    found = [a for a in ax.get_children() if a.get_gid() == gid]
    found += [ln for ln in ax.lines if ln.get_gid() == gid and ln not in found]
    assert found, f"no artist with gid {gid!r}"
    return found[0]


# ----------------------------------------------------------------------------- every function
def _calls(d):
    s, f, lim, e = d["scan"], d["fit"], d["limits"], d["expected"]
    run_table = pd.DataFrame({"run": ["X1", "X2"], "unit": ["fringe", "fringe"],
                              "expected_amplitude": [e.amplitude, e.amplitude],
                              "upper_amplitude": [lim["feldman-cousins"].upper, lim["neyman"].upper]})
    return {
        "scan": (lambda: P.plot_scan(s, f), ("fringe", "[h]")),
        "folded": (lambda: P.plot_folded(s, f), ("fringe", "[deg]")),
        "folded_polar": (lambda: P.plot_folded(s, f, polar=True), ("fringe", "[deg]")),
        "per_turn": (lambda: P.plot_per_turn(f), ("fringe", "[h]")),
        "plane": (lambda: P.plot_plane(f, expected=e), ("fringe", "fringe")),
        "posterior": (lambda: P.plot_posterior(lim["bayes"]), ("fringe", "fringe")),
        "belt": (lambda: P.plot_belt(lim["feldman-cousins"]), ("fringe", "fringe")),
        "limits": (lambda: P.plot_limits(lim), ("fringe",)),
        "expected_vs_bound": (lambda: P.plot_expected_vs_bound(run_table), ("fringe",)),
        "allan": (lambda: P.plot_allan(f), ("fringe", "[s]")),
    }


NAMES = ["scan", "folded", "folded_polar", "per_turn", "plane", "posterior", "belt", "limits",
         "expected_vs_bound", "allan"]


@pytest.mark.parametrize("name", NAMES)
def test_returns_axes_with_units(demo, name):
    call, units = _calls(demo)[name]
    ax = call()
    assert isinstance(ax, Axes)
    labels = ax.get_xlabel() + " | " + ax.get_ylabel()
    for u in units:
        assert u in labels, f"{name}: unit {u!r} missing from axis labels {labels!r}"
    assert ax.get_xlabel() and ax.get_ylabel()
    ax.figure.canvas.draw()  # renders without error


@pytest.mark.parametrize("name", ["scan", "folded", "plane"])
def test_draws_on_given_axes(demo, name):
    fig, ax = plt.subplots()
    call = {"scan": lambda: P.plot_scan(demo["scan"], demo["fit"], ax=ax),
            "folded": lambda: P.plot_folded(demo["scan"], demo["fit"], ax=ax),
            "plane": lambda: P.plot_plane(demo["fit"], ax=ax)}[name]
    assert call() is ax


def test_amplitude_and_peak_to_peak_labelled(demo):
    ax = P.plot_limits(demo["limits"])
    assert "amplitude" in ax.get_xlabel()
    tops = [c for c in ax.get_children() if type(c).__name__ == "SecondaryAxis"]
    assert tops and "peak-to-peak" in tops[0].get_xlabel()
    # every bar spans [lower, upper] of its limit (one-sided limits start at 0)
    for m, lim in demo["limits"].items():
        bar = _by_gid(ax, f"limit-{m}")
        assert bar.get_x() == pytest.approx(lim.lower or 0.0)
        assert bar.get_x() + bar.get_width() == pytest.approx(lim.upper)


def test_fractional_signal_unit_in_labels():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan = read_scan(DEMO / "resonator_pair.csv")
        fit = fit_scan(scan)
    assert "Δν/ν" in P.plot_scan(scan, fit).get_ylabel()
    assert "Δν/ν" in P.plot_per_turn(fit).get_ylabel()


def test_polar_needs_polar_axes(demo):
    fig, ax = plt.subplots()
    with pytest.raises(ValueError, match="polar"):
        P.plot_folded(demo["scan"], demo["fit"], polar=True, ax=ax)


def test_posterior_needs_bayes(demo):
    with pytest.raises(ValueError, match="bayes"):
        P.plot_posterior(demo["limits"]["neyman"])


# ----------------------------------------------------------------------------- drift model


def test_partial_turns_marked():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan, _ = simulate_scan(n_turns=6.5, start_angle_deg=120.0, harmonics={2: (0.01, 30.0)},
                                drift={"offset": 0.1, "slope": 1e-4}, sigma=0.003, rng=3)
        fit = fit_scan(scan)
    assert scan.n_complete_turns < scan.n_turns
    ax = P.plot_scan(scan, fit)
    partial = _by_gid(ax, "scan-partial")
    n_partial = int((~scan.turn_complete[scan.turn]).sum())
    assert len(partial.get_xdata()) == n_partial
    drift = _by_gid(ax, "scan-drift").get_ydata()
    assert np.isfinite(drift).sum() == scan.n_samples - n_partial
    bare = P.plot_scan(scan)  # without a fit: readings only, partial turns still marked
    assert len(_by_gid(bare, "scan-partial").get_xdata()) == n_partial
    assert not [ln for ln in bare.lines if ln.get_gid() == "scan-drift"]


# ----------------------------------------------------------------------------- folded signal
TRUTH = {1: (0.02, 40.0), 2: (0.01, 75.0)}


def _truth(theta_deg, ks=(1, 2), atten=None):
    th = np.deg2rad(np.asarray(theta_deg, dtype=float))
    out = np.zeros_like(th)
    for k in ks:
        a, ph = TRUTH[k]
        g = 1.0 if atten is None else atten(k)
        out += g * a * np.cos(k * (th - np.deg2rad(ph)))
    return out


def test_folded_noiseless_marks_go_through_the_truth():
    # 16 marks (start mark read again), linear drift, no noise: each bin holds one azimuth, so the
    # binned means are the harmonic model at the marks exactly.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan, _ = simulate_scan(n_turns=12, marks=16, repeat_start_mark=True, harmonics=TRUTH,
                                drift={"offset": 0.3, "slope": 2e-4}, noise=None, sigma=0.0, rng=1)
        fit = fit_scan(scan)
    ax = P.plot_folded(scan, fit, bins=16)
    means = _by_gid(ax, "folded-means")
    x, y = np.asarray(means.get_xdata()), np.asarray(means.get_ydata())
    np.testing.assert_allclose(x, np.arange(16) * 22.5)
    np.testing.assert_allclose(y, _truth(x), rtol=0, atol=1e-12)
    # and the drawn curves are the truth (sum of harmonics; the 2θ term alone)
    curve = _by_gid(ax, "folded-fit")
    np.testing.assert_allclose(curve.get_ydata(), _truth(curve.get_xdata()), rtol=0, atol=1e-12)
    term = _by_gid(ax, "folded-term")
    np.testing.assert_allclose(term.get_ydata(), _truth(term.get_xdata(), ks=(2,)), rtol=0, atol=1e-12)
    # the drawn curve passes through the binned means
    np.testing.assert_allclose(np.interp(x, curve.get_xdata(), curve.get_ydata()), y, rtol=0, atol=1e-6)


def test_folded_noiseless_continuous_bin_average():
    # 48 readings per turn, 16 bins: each bin holds the three azimuths θc − 7.5°, θc, θc + 7.5°,
    # so its mean is Σ_k A_k (1 + 2 cos(7.5° k))/3 · cos(k(θc − φ_k))   (closed form).
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan, _ = simulate_scan(n_turns=10, samples_per_turn=48, harmonics=TRUTH,
                                drift={"offset": -0.2, "slope": 5e-5}, noise=None, sigma=0.0, rng=2)
        fit = fit_scan(scan)
    ax = P.plot_folded(scan, fit, bins=16)
    means = _by_gid(ax, "folded-means")
    x, y = np.asarray(means.get_xdata()), np.asarray(means.get_ydata())
    expect = _truth(x, atten=lambda k: (1 + 2 * math.cos(math.radians(7.5 * k))) / 3)
    np.testing.assert_allclose(y, expect, rtol=0, atol=1e-12)




# ----------------------------------------------------------------------------- the (c, s) plane
def _ellipse(ax):
    e = _by_gid(ax, "plane-ellipse")
    assert isinstance(e, Ellipse)
    return e


@pytest.mark.parametrize("cl", [0.6827, 0.95])
def test_plane_ellipse_axes_and_orientation(demo, cl):
    h = demo["fit"].harmonic(2)
    ax = P.plot_plane(demo["fit"], confidence_level=cl)
    e = _ellipse(ax)
    q = stats.chi2.ppf(cl, 2)  # scipy: 2-D χ² quantile
    lam = np.linalg.eigvalsh(np.asarray(h.cov))
    assert e.width / 2 == pytest.approx(math.sqrt(q * lam[1]), rel=1e-12)
    assert e.height / 2 == pytest.approx(math.sqrt(q * lam[0]), rel=1e-12)
    assert e.center == pytest.approx((h.c, h.s))
    # orientation: the drawn outline (the unit circle through the patch transform; the on-curve
    # vertices of its Bézier path are every third one) lies on dᵀ C⁻¹ d = q
    t = np.linspace(0, 2 * np.pi, 37)
    pts = np.r_[e.get_patch_transform().transform(e.get_path().vertices[::3]),
                e.get_patch_transform().transform(np.c_[np.cos(t), np.sin(t)])]
    d = pts - np.array([h.c, h.s])
    m = np.einsum("ni,ij,nj->n", d, np.linalg.inv(np.asarray(h.cov)), d)
    np.testing.assert_allclose(m, q, rtol=1e-9)
    assert "χ²" in " ".join(t.get_text() for t in ax.get_legend().get_texts())


def test_plane_ellipse_correlated_covariance():
    cov = np.array([[4.0, 3.0], [3.0, 4.0]]) * 1e-8  # major axis along +45°, variances 7e-8 and 1e-8
    est = HarmonicEstimate(2, 1e-4, -2e-4, cov)
    e = _ellipse(P.plot_plane(est, confidence_level=0.9))
    q = stats.chi2.ppf(0.9, 2)
    assert e.width / 2 == pytest.approx(math.sqrt(7e-8 * q))
    assert e.height / 2 == pytest.approx(math.sqrt(1e-8 * q))
    assert math.tan(math.radians(e.angle)) == pytest.approx(1.0)


def test_plane_predicted_point_and_circle(demo):
    from nullfit.hypothesis.expected import expected_signal

    ax = P.plot_plane(demo["fit"], expected=demo["expected"])  # no table phase: a circle
    circ = _by_gid(ax, "plane-predicted")
    assert circ.get_radius() == pytest.approx(demo["expected"].amplitude)
    app = demo["expected"].apparatus
    e = expected_signal(app, velocity="lab:angle=30", speed_m_s=3000.0)  # a lab wind along θ = 30°
    ax = P.plot_plane(demo["fit"], expected=e)
    pt = _by_gid(ax, "plane-predicted")
    c, s = pt.get_xdata()[0], pt.get_ydata()[0]
    assert math.hypot(c, s) == pytest.approx(e.amplitude)
    assert math.degrees(math.atan2(s, c)) / 2 % 180 == pytest.approx(30.0)  # readout sign +1
    assert ax.get_aspect() == 1.0


# ----------------------------------------------------------------------------- per-turn and Allan
def test_per_turn_points_and_running_mean(demo):
    pt = demo["fit"].per_turn
    ax = P.plot_per_turn(demo["fit"], window=7)
    c = _by_gid(ax, "per-turn-c")
    np.testing.assert_allclose(c.get_ydata(), pt["c2"])
    run = _by_gid(ax, "running-c")
    ref = np.convolve(pt["c2"].to_numpy(), np.ones(7) / 7, mode="valid")  # numpy reference
    np.testing.assert_allclose(run.get_ydata(), ref, rtol=1e-12)
    np.testing.assert_allclose(run.get_xdata(), pt["time_mid_s"].to_numpy()[3:-3] / 3600.0)


def test_allan_line_matches_allan_deviation(demo):
    pt = demo["fit"].per_turn
    tau0 = float(np.median(np.diff(pt["time_mid_s"])))
    ax = P.plot_allan(demo["fit"])
    for p in ("c", "s"):
        ln = _by_gid(ax, f"allan-{p}")
        ref = allan_deviation(pt[f"{p}2"].to_numpy(), tau0)
        np.testing.assert_allclose(ln.get_xdata(), ref.tau_s)
        np.testing.assert_allclose(ln.get_ydata(), ref.adev, rtol=1e-12)
    white = _by_gid(ax, "allan-white")
    slope = np.diff(np.log(white.get_ydata())) / np.diff(np.log(white.get_xdata()))
    np.testing.assert_allclose(slope, -0.5, rtol=1e-9)


def test_allan_line_matches_allantools(demo):
    allantools = pytest.importorskip("allantools")  # independent implementation
    pt = demo["fit"].per_turn
    tau0 = float(np.median(np.diff(pt["time_mid_s"])))
    ln = _by_gid(P.plot_allan(demo["fit"]), "allan-c")
    taus, adev, _, _ = allantools.oadev(pt["c2"].to_numpy(), rate=1 / tau0, data_type="freq",
                                        taus=np.asarray(ln.get_xdata()))
    np.testing.assert_allclose(adev, ln.get_ydata(), rtol=1e-10)


def test_per_turn_needs_per_turn_table():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan = read_scan(DEMO / "quiet.csv")
        fit = fit_scan(scan, errors="hac")
    with pytest.raises(ValueError, match="per-turn"):
        P.plot_per_turn(fit)


# ----------------------------------------------------------------------------- posterior, belt
def test_posterior_isotropic_is_rice_in_A():
    # isotropic known covariance, plane prior: p(A | Â) = Rice density in A with parameter Â/σ
    # (closed form in nullfit.limits.bayes; scipy.stats.rice as the reference)
    sigma, c, s = 2e-4, 3e-4, -1e-4
    lim = amplitude_limit(c, s, np.eye(2) * sigma**2, method="bayes", harmonic=2, unit="fringe")
    ax = P.plot_posterior(lim)
    ln = _by_gid(ax, "posterior-density")
    A, d = np.asarray(ln.get_xdata()), np.asarray(ln.get_ydata())
    ref = stats.rice.pdf(A / sigma, math.hypot(c, s) / sigma) / sigma
    np.testing.assert_allclose(d, ref, rtol=1e-6, atol=1e-9 * ref.max())
    up = _by_gid(ax, "posterior-upper").get_xdata()[0]
    assert up == pytest.approx(lim.upper)
    assert up == pytest.approx(sigma * stats.rice.ppf(0.95, math.hypot(c, s) / sigma), rel=1e-5)




def test_belt_intersections_are_the_interval(demo):
    lim = demo["limits"]["feldman-cousins"]
    ax = P.plot_belt(lim)
    seg = _by_gid(ax, "belt-interval")
    assert tuple(seg.get_ydata()) == pytest.approx((lim.lower or 0.0, lim.upper))
    A, x1, x2, _, _ = belt_curves(np.asarray(lim.cov), lim.confidence_level, lim.dof, amplitude_max=3 * lim.upper)
    # upper: where the left edge x1(A) reaches Â; lower: where the right edge x2(A) reaches Â
    off = x1 > 0
    assert np.interp(lim.estimate, x1[off], A[off]) == pytest.approx(lim.upper, rel=2e-3)
    assert np.interp(lim.estimate, x2, A) == pytest.approx(lim.lower, rel=2e-3)


def test_belt_explicit_sigma_and_refuses_other_methods(demo):
    ax = P.plot_belt(sigma=1.0, observed=1.0, confidence_level=0.9)
    assert _by_gid(ax, "belt-observed").get_xdata()[0] == pytest.approx(1.0)
    with pytest.raises(ValueError, match="Feldman"):
        P.plot_belt(demo["limits"]["neyman"])


# ----------------------------------------------------------------------------- across runs
def test_expected_vs_bound_values_and_ratio():
    table = pd.DataFrame({"run": ["A", "B", "C"], "unit": ["fringe"] * 3,
                          "expected_amplitude": [0.2, 0.2, np.nan], "upper_amplitude": [1e-3, 4e-3, 2e-3],
                          "ratio_expected_to_bound": [200.0, 50.0, np.nan]})
    ax = P.plot_expected_vs_bound(table)
    assert ax.get_yscale() == "log"
    np.testing.assert_allclose(_by_gid(ax, "runs-bound").get_ydata(), table["upper_amplitude"])
    np.testing.assert_allclose(_by_gid(ax, "runs-expected").get_ydata(), table["expected_amplitude"])
    texts = {t.get_text() for t in ax.texts}
    assert {"×200", "×50"} <= texts and len([t for t in texts if t.startswith("×")]) == 2
    mixed = table.assign(unit=["fringe", "fractional", "fringe"])
    with pytest.raises(ValueError, match="different signal units"):
        P.plot_expected_vs_bound(mixed)


def test_polar_radius_is_never_negative(demo):
    ax = P.plot_folded(demo["scan"], demo["fit"], polar=True)
    lo, hi = ax.get_ylim()
    assert lo >= 0 and hi > lo
    for line in ax.get_lines():
        r = np.asarray(line.get_ydata(), dtype=float)
        assert np.all(r[np.isfinite(r)] >= 0), line.get_gid()



def test_polar_ticks_read_the_signal_not_the_shifted_radius(demo):
    # the radius is signal − drift shifted to stay ≥ 0; the tick at the "zero" circle must read 0
    ax = P.plot_folded(demo["scan"], demo["fit"], polar=True)
    zero = next(ln for ln in ax.get_lines() if ln.get_label().startswith("zero"))
    r_zero = float(np.asarray(zero.get_ydata())[0])
    assert r_zero > 0
    assert ax.yaxis.get_major_formatter()(r_zero, 0) == "0"
    assert "radius" not in ax.get_ylabel() and "signal − drift" in ax.get_ylabel()


@pytest.mark.parametrize("ncol", [1, 2])
def test_a_legend_above_the_axes_wraps_long_labels_to_the_figure_width(ncol):
    # a label longer than the figure is wide once made constrained layout collapse the axes (a warning
    # in the demo); wrapped at word boundaries it fits, and the words are all still there
    from nullfit.figures import style as st

    fig, ax = plt.subplots(figsize=(5.6, 5.6), layout="constrained")
    long = ("predicted amplitude (lab-frame wind in the table plane, 30000 m/s, direction unspecified): "
            "A₂ = 0.196 fringe, phase unknown")
    ax.plot([0, 1], [0, 1], label=long)
    ax.plot([0, 1], [1, 0], label="short")
    leg = st.legend(ax, above=True, ncol=ncol)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # matplotlib's "axes sizes collapsed to zero" would raise here
        fig.canvas.draw()
    width = leg.get_window_extent().width / fig.dpi
    assert width <= fig.get_figwidth()
    texts = [t.get_text() for t in leg.get_texts()]
    assert texts[0].split() == long.split() and "\n" in texts[0]
    assert ax.get_position().width > 0.5  # the axes keep most of the figure
    plt.close(fig)
