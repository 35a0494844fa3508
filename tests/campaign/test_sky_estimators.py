"""The two routes from a per-turn table to SME/RMS parameters: checked against independent
implementations (statsmodels WLS with explicit offset columns and a brute-force jackknife loop; numpy
lstsq per day and statsmodels' cluster-robust covariance), and on simulated campaigns with a known
truth (recovery, agreement of the routes, span degeneracy, the combined fit, C₀, RMS, input errors).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from nullfit.campaign.sky import fit_sky
from nullfit.campaign.sky_data import sky_data, turn_design, turn_weights
from nullfit.campaign.sky_days import day_quadratures
from nullfit.core.errors import AnalysisError, FitWarning, ScanError
from nullfit.hypothesis.sidereal import MODEL_NAMES, design_matrix


# ----------------------------------------------------------------------------- independent implementations
def test_global_route_matches_statsmodels_wls_and_a_brute_force_jackknife(sky_turns):
    # Reference: statsmodels WLS on the dense design (parameters + one offset column per segment and
    # channel), and the jackknife done the obvious way: refit with each segment's rows left out.
    import statsmodels.api as sm

    table, _ = sky_turns("scattered", n_runs=20, run_hours=6.0, turn_period_s=1800.0, seed=4, lab_sigma=2e-15)
    data = sky_data(table)
    fit = fit_sky(data, "sme", route="global", weights="turn")
    cols = [MODEL_NAMES["sme"].index(n) for n in fit.names]
    XC, XB = turn_design(data, "sme")
    seg = data.window
    G, n = seg.max() + 1, data.n_turns
    dummies = (seg[:, None] == np.arange(G)[None]).astype(float)
    X = np.block([[XC[:, cols], dummies, np.zeros((n, G))], [XB[:, cols], np.zeros((n, G)), dummies]])
    u = 1e-16  # work in units of 1e-16 so that the solver sees numbers of order one
    y = np.r_[data.C, data.B] / u
    w = np.r_[1 / data.var, 1 / data.var]
    w = w / w.mean()
    p = len(cols)
    ref = sm.WLS(y, X, weights=w).fit().params[:p] * u
    assert fit.estimate == pytest.approx(ref, rel=1e-7, abs=1e-9 * np.abs(ref).max())
    loo = []
    seg2 = np.r_[seg, seg]
    for g in range(G):
        keep = seg2 != g
        keepcol = np.r_[np.ones(p, bool), np.arange(G) != g, np.arange(G) != g]
        r = sm.WLS(y[keep], X[keep][:, keepcol], weights=w[keep]).fit().params[:p] * u
        loo.append(r)
    loo = np.array(loo)
    cov = (G - 1) / G * (loo - loo.mean(0)).T @ (loo - loo.mean(0))
    assert fit.cov == pytest.approx(cov, rel=1e-6, abs=1e-9 * np.abs(cov).max())
    assert fit.dof == G - 1


def test_days_route_matches_numpy_day_fits_and_statsmodels_cluster_covariance(sky_turns):
    # Reference: numpy lstsq of the five-term expansion per day (stage 1); stage 2 as ordinary least
    # squares on the whitened quadratures with statsmodels' cluster-robust covariance (days as
    # clusters, its default small-sample correction G/(G−1)·(N−1)/(N−K)).
    import statsmodels.api as sm

    table, _ = sky_turns("days", n_runs=24, turn_period_s=1200.0, seed=5, lab_sigma=2e-15)
    data = sky_data(table)
    dq = day_quadratures(data, weights="equal")
    for j, win in enumerate(dq.window[:5]):
        m = data.window == win
        w = data.w[m]
        F = np.column_stack([np.ones(m.sum()), np.sin(w), np.cos(w), np.sin(2 * w), np.cos(2 * w)])
        c = np.linalg.lstsq(F, data.C[m], rcond=None)[0]
        b = np.linalg.lstsq(F, data.B[m], rcond=None)[0]
        assert dq.q[j] == pytest.approx(np.r_[c, b], rel=1e-9, abs=1e-27)
    fit = fit_sky(data, "sme", route="days", weights="equal")
    rows = [1, 2, 3, 4, 6, 7, 8, 9]
    cols = [MODEL_NAMES["sme"].index(n) for n in fit.names]
    Xs, ys, groups = [], [], []
    for j in range(dq.n_days):
        site = data.sites[dq.site[j]]
        M = design_matrix("sme", latitude_deg=site.latitude_deg,
                          annual_phase_deg=np.rad2deg(dq.W[j]), precess_to_unix=data.mid_unix).matrix[rows][:, cols]
        L = np.linalg.cholesky(np.linalg.inv(dq.V[j][np.ix_(rows, rows)])).T  # LᵀL = V⁻¹
        Xs.append(L @ M)
        ys.append(L @ dq.q[j, rows])
        groups += [j] * len(rows)
    X, y = np.vstack(Xs), np.concatenate(ys)
    res = sm.OLS(y, X / np.abs(X).max()).fit(cov_type="cluster", cov_kwds={"groups": np.array(groups)})
    assert fit.estimate == pytest.approx(res.params / np.abs(X).max(), rel=1e-7)
    ref_cov = res.cov_params() / np.abs(X).max() ** 2
    assert fit.cov == pytest.approx(ref_cov, rel=1e-6, abs=1e-9 * np.abs(ref_cov).max())


def test_segment_weights_come_from_successive_differences_and_ignore_the_signal(sky_turns):
    # Reference: numpy, segment by segment: s² = Σ (Δy)² / (2 (n − 1)) of consecutive turns, pooled
    # over B and C (the von Neumann successive-difference estimator of a white-noise variance).
    table, _ = sky_turns("days", n_runs=12, turn_period_s=1800.0, seed=1)
    data = sky_data(table)
    w = turn_weights(data, data.window, "segment")
    ref = np.empty(data.n_turns)
    for g in np.unique(data.window):
        m = np.flatnonzero(data.window == g)
        m = m[np.argsort(data.time_s[m])]
        ss = np.sum(np.diff(data.B[m]) ** 2) + np.sum(np.diff(data.C[m]) ** 2)
        ref[m] = 1.0 / (ss / (4 * (m.size - 1)))
    assert w == pytest.approx(ref / ref.mean(), rel=1e-10)
    # the same noise with a sidereal signal as large as the per-turn noise: the weights barely move
    # (a scatter about the segment mean would count the signal as noise and down-weight the runs
    # where it varies most, biasing the estimates)
    from conftest import SKY_TRUTH

    loud, _ = sky_turns("days", n_runs=12, seed=1, truth={k: 50 * v for k, v in SKY_TRUTH.items()})
    quiet, _ = sky_turns("days", n_runs=12, seed=1, truth={})
    wl = turn_weights(sky_data(loud), sky_data(loud).window, "segment")
    wq = turn_weights(sky_data(quiet), sky_data(quiet).window, "segment")
    assert np.abs(sky_data(loud).C - sky_data(quiet).C).std() > 0.5 * sky_data(quiet).C.std()
    assert wl == pytest.approx(wq, rel=0.05)


# ----------------------------------------------------------------------------- recovery and agreement
@pytest.mark.parametrize("kind,n_runs", [("days", 36), ("scattered", 90)])
def test_injected_sme_parameters_come_back_within_errors(sky_turns, hotelling_p, kind, n_runs):
    # Truth: 4 × conftest.SKY_TRUTH (several σ each); lab-fixed offsets of 2e-15 per run are nuisance.
    from conftest import SKY_TRUTH

    truth = {k: 4 * v for k, v in SKY_TRUTH.items()}
    table, _ = sky_turns(kind, n_runs=n_runs, run_hours=None if kind == "days" else 4.0, seed=11,
                         lab_sigma=2e-15, truth=truth, sigma_turn=1e-15 if kind == "days" else 3e-16)
    fit = fit_sky(table, "sme", route="global")
    assert fit.names == ("e_XY", "e_XZ", "e_YZ", "e_XX-YY", "o_XY", "o_XZ", "o_YZ")
    assert fit.fixed == ("e_ZZ",)
    assert hotelling_p(fit, truth) > 1e-3
    assert hotelling_p(fit, {}) < 1e-6  # and the signal is seen: zero is excluded


def test_both_routes_agree_within_a_fraction_of_sigma(sky_turns):
    # Measured over 200 simulated year-long campaigns: the global − days difference has a standard
    # deviation of 0.08–0.10 σ per parameter (largest of 1600 differences 0.41 σ).
    for seed in (1, 2):
        table, _ = sky_turns("days", n_runs=36, seed=seed, lab_sigma=1e-15)
        data = sky_data(table)
        g = fit_sky(data, "sme", route="global")
        d = fit_sky(data, "sme", route="days")
        assert g.names == d.names
        diff = np.abs(g.estimate - d.estimate) / g.sigma
        assert diff.max() < 0.45, diff
        # each σ comes from the scatter of the same 36 segments (relative scatter ≈ 1/√70 = 0.12 if they
        # were independent); the two routes' σ agree within 0.95–1.05 for these seeds
        assert d.sigma == pytest.approx(g.sigma, rel=0.15)


def test_e_o_correlation_falls_with_the_span_and_warns_when_short(sky_turns):
    # Expected (docs/sky.md, module docstring of sky_result): within days every quadrature sees
    # e + β⊕·(fixed mix of o); only the annual turn of β⃗⊕ separates them.
    corr = {}
    for span in (10, 30, 90, 180, 365):
        table, _ = sky_turns("days", n_runs=10 if span == 10 else 30, span_days=span, seed=span)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            fit = fit_sky(table, "sme")
        corr[span] = fit.eo_correlation[0]
        warned = any(issubclass(w.category, FitWarning) and "degenerate" in str(w.message) for w in caught)
        assert warned == (corr[span] > 0.8), (span, corr[span])
        assert any("nearly degenerate" in n for n in fit.notes) == (corr[span] > 0.8)
    assert corr[10] > 0.95
    assert corr[365] < 0.1
    spans = sorted(corr)
    assert all(corr[a] > corr[b] for a, b in zip(spans, spans[1:])), corr
    assert any("solar-day" in n for n in fit.notes)


def test_combined_fit_measures_e_plus_alias_times_o(sky_turns, hotelling_p):
    # Over 10 days ê estimates e + A·o with A the alias matrix of the linear model; the truth for
    # the combination is computed from the injected e and o (o ten times conftest.SKY_TRUTH's, so that
    # the alias shifts, ~β⊕·o, stand out against σ).
    from conftest import SKY_TRUTH

    injected = {k: (10 * v if k.startswith("o_") else v) for k, v in SKY_TRUTH.items()}
    table, truth = sky_turns("days", n_runs=10, span_days=10, seed=21, sigma_turn=2e-16, truth=injected)
    with warnings.catch_warnings():
        warnings.simplefilter("error", FitWarning)
        fit = fit_sky(table, "sme", combined=True)
    assert fit.names == ("e_XY", "e_XZ", "e_YZ", "e_XX-YY")
    t = truth.parameters.as_dict()
    o = np.array([t["o_XY"], t["o_XZ"], t["o_YZ"]])
    combined = {n: t[n] + float(fit.alias[i] @ o) for i, n in enumerate(fit.names)}
    assert hotelling_p(fit, combined) > 1e-3
    assert hotelling_p(fit, {n: t[n] for n in fit.names}) < 1e-3  # the plain e's are far off
    # Reference: the boost part of docs/sky.md ("SME written out"): at a fixed annual phase W each
    # κ̃_e− component enters exactly where a component of K does, so over a short span the alias rows
    # are those substitutions at the campaign's mean W (β⊕ = 9.93e-5, η = 23.439°, recalled there).
    b, eta = 9.93e-5, np.radians(23.4392794)
    W = float(np.mean(sky_data(table).W))
    sW, cW = np.sin(W), np.cos(W)
    expected = np.array([[0.0, b * sW, b * np.cos(eta) * cW],                 # K_XY
                         [-b * sW, 0.0, b * np.sin(eta) * cW],                # K_XZ
                         [b * np.cos(eta) * cW, -b * np.sin(eta) * cW, 0.0],  # K_YZ
                         [0.0, 2 * b * np.cos(eta) * cW, -2 * b * sW]])      # K_XX − K_YY
    assert fit.alias == pytest.approx(expected, abs=0.03 * b)
    assert "alias" in fit.to_dict()


def test_c0_option_estimates_e_zz(sky_turns, hotelling_p):
    table, truth = sky_turns("days", n_runs=36, seed=8)
    fit = fit_sky(table, "sme", use_c0=True)
    assert "e_ZZ" in fit.names and fit.fixed == ()
    assert hotelling_p(fit, truth.parameters.as_dict()) > 1e-3
    default = fit_sky(table, "sme")
    d = default.to_dict()
    assert d["parameters"]["e_ZZ"] == {"estimate": None, "sigma": None, "lower": None, "upper": None,
                                       "estimated": False}
    assert fit.to_dict()["offsets"]["C0"] is None


@pytest.mark.parametrize("route", ["global", "days"])
def test_rms_parameter_comes_back(sky_turns, hotelling_p, route):
    table, truth = sky_turns("days", n_runs=36, model="rms", truth={"P_MM": 3e-11}, seed=31, lab_sigma=1e-15)
    fit = fit_sky(table, "rms", route=route)
    assert fit.names == ("P_MM",)
    assert hotelling_p(fit, {"P_MM": 3e-11}) > 1e-3
    assert 1e-13 < fit.sigma[0] < 1e-10
    lim = fit.interval("P_MM")
    assert lim.method == "central" and lim.lower < fit[("P_MM")][0] < lim.upper


def test_single_resonator_option(sky_turns, hotelling_p):
    # One resonator against a fixed one sees half the pair's coefficients (docs/sky.md): simulated
    # with pair=False, fitted with pair=False the truth returns; fitted as a pair, half of it.
    table, truth = sky_turns("days", n_runs=36, seed=41, pair=False, sigma_turn=3e-16)
    fit = fit_sky(table, "sme", pair=False)
    assert hotelling_p(fit, truth.parameters.as_dict()) > 1e-3
    as_pair = fit_sky(table, "sme", pair=True)
    assert as_pair.estimate == pytest.approx(0.5 * fit.estimate, rel=1e-9)


def test_ephemeris_orbit_recovers_an_ephemeris_truth(sky_turns, hotelling_p, sky_setup):
    from nullfit.campaign.sky_simulate import simulate_sky_turns
    from nullfit.simulation.sky import campaign_schedule

    site, app = sky_setup()
    truth = {"o_XY": 6e-13, "o_XZ": -4e-13, "o_YZ": 5e-13, "e_XY": 2e-17}
    table, _ = simulate_sky_turns("sme", truth, site=site, apparatus=app,
                                  schedule=campaign_schedule("days", n_runs=30), sigma_turn=5e-16,
                                  turn_period_s=900.0, orbit="ephemeris", rng=3)
    eph = fit_sky(table, "sme", orbit="ephemeris")
    circ = fit_sky(table, "sme", orbit="circular")
    assert hotelling_p(eph, truth) > 1e-3
    # the circular orbit is off by < 3e in direction and ±e in speed (docs/sky.md): small, not zero
    shift = np.abs(eph.estimate - circ.estimate) / eph.sigma
    assert 0 < shift.max() < 1.0


# ----------------------------------------------------------------------------- bookkeeping and refusals
def test_dropped_turns_are_counted(sky_turns):
    table, _ = sky_turns("days", n_runs=12, turn_period_s=1800.0, seed=2)
    f = table.frame.copy()
    f.loc[[3, 10, 11], "c2"] = np.nan
    f.loc[20, "complete"] = False
    bad = type(table)(f, table.meta)
    data = sky_data(bad)
    assert dict(data.dropped) == {"partial turns": 1, "turns with non-finite coefficients or errors": 3}
    assert data.n_turns == len(f) - 4
    fit = fit_sky(data, "sme", combined=True)
    assert fit.to_dict()["dropped"] == dict(data.dropped)


def test_refusals_name_the_problem(sky_turns):
    table, _ = sky_turns("days", n_runs=6, span_days=6, turn_period_s=1800.0, seed=2)
    with pytest.raises(AnalysisError, match="segments"):
        fit_sky(table, "sme", segments="run")
    short, _ = sky_turns("scattered", n_runs=40, run_hours=3.0, turn_period_s=900.0, seed=2)
    with pytest.raises(AnalysisError, match="well-covered sidereal days"):
        fit_sky(short, "sme", route="days")
    meta = {**table.meta, "runs": {r: {**m, "site": {k: v for k, v in m["site"].items() if k != "mark_azimuth_deg"}}
                                   for r, m in table.runs.items()}}
    with pytest.raises(ScanError, match="mark_azimuth_deg"):
        sky_data(type(table)(table.frame, meta))
    with pytest.raises(ValueError, match="combined"):
        fit_sky(table, "rms", combined=True)
    with pytest.raises(ValueError, match="route"):
        fit_sky(table, "sme", route="weekly")
    with pytest.raises(AnalysisError, match="2θ"):
        sky_data(type(table)(table.frame, {**table.meta, "harmonics": [1]}))


def test_result_renders_and_reports_its_intervals(sky_turns):
    table, _ = sky_turns("days", n_runs=36, seed=6)
    fit = fit_sky(table, "sme", confidence_level=0.9)
    d = fit.to_dict()
    for key in ("model", "route", "span_days", "n_turns", "parameters", "correlation", "notes"):
        assert key in d
    assert set(d["parameters"]) == set(MODEL_NAMES["sme"])
    corr = np.array(d["correlation"])
    assert corr.shape == (7, 7) and np.allclose(np.diag(corr), 1.0) and np.allclose(corr, corr.T)
    # central interval: x̂ ± t σ with Student-t on the covariance's dof (scipy as reference)
    from scipy import stats

    t = stats.t.ppf(0.95, fit.dof)
    est, sig = fit["o_XY"]
    assert d["parameters"]["o_XY"]["lower"] == pytest.approx(est - t * sig, rel=1e-12)
    assert d["parameters"]["o_XY"]["upper"] == pytest.approx(est + t * sig, rel=1e-12)
    assert "o_XY" in str(fit) and "<table>" in fit._repr_html_()
    assert repr(fit).startswith("SkyFit(sme, global")
    import json

    json.loads(fit.to_json(allow_nan=False))


def test_a_subset_counts_only_the_segments_it_holds(sky_turns):
    # Leaving runs out must not leave empty segments behind: an empty segment would enter the
    # jackknife as a replicate equal to the full estimate and shrink the errors.
    table, _ = sky_turns("days", n_runs=30, turn_period_s=1800.0, seed=9)
    data = sky_data(table)
    keep = data.run % 2 == 0
    sub = data.subset(keep)
    for seg in ("run", "day"):
        fit = fit_sky(sub, "sme", segments=seg)
        assert fit.n_segments == 15 and fit.dof == 14
    assert dict(sub.dropped)["left out by selection"] == int((~keep).sum())
