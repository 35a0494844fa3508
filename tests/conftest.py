"""Shared builders for the test suite (exposed as fixtures that return the builder functions).

* ``make_arrays(rng, ...)`` → ``(t, angle_deg, y, tilt)``: a continuously sampled scan with a
  quadratic drift, the harmonics ``coef = (c1, s1, c2, s2)``, AR(1) noise (``ar``) and a random-walk
  tilt channel (coupled into the signal by ``tilt_coef``);
* ``make_scan(seed, ...)`` → the same as a validated `Scan` with the tilt as aux column ``"tilt"``;
* ``reference_design(scan, drift, aux, harmonics)`` → a dense design built independently of
  ``nullfit.fitting`` (raw time powers, explicit per-turn columns, B-splines coefficient by
  coefficient) for comparisons with statsmodels;
* ``loop_reference(scan, ...)`` → per-turn ``numpy.linalg.lstsq`` fits, the obvious
  implementation of the per-turn demodulation;
* ``sky_turns(kind, n_runs, span_days, ...)`` → ``(TurnTable, SkyTruth)``: a simulated campaign's
  per-turn table drawn from the sidereal model plus white noise, at the invented Brennmoor site with a
  resonator pair logging ``(ν₁ − ν₂)/ν``; ``SKY_TRUTH`` an SME parameter set of a few σ of a year;
* ``hotelling_p(fit, truth)`` → p-value of the estimates against the truth with the fit's covariance
  (Hotelling T², the covariance estimated on ``fit.dof`` degrees of freedom).
"""

import numpy as np
import pytest
from scipy.interpolate import BSpline

from nullfit.fitting.design import scale_time, spline_intervals, spline_knots, typical_turn_period
from nullfit.reading.scan import Scan

#: (c1, s1, c2, s2) of the default synthetic scan.
TRUE = (0.05, 0.1, 0.3, -0.12)


def _make_arrays(rng, *, per_turn=40, n_turns=12, extra=13, start_deg=20.0, dt=0.5, ar=0.6, noise=0.01,
                 coef=TRUE, tilt_coef=0.0, offset=0.0, quadratic=3e-7):
    rng = np.random.default_rng(rng) if not isinstance(rng, np.random.Generator) else rng
    n = per_turn * n_turns + extra
    t = np.arange(n) * dt
    ang = np.arange(n) * 360.0 / per_turn + start_deg
    th = np.deg2rad(ang)
    e = np.zeros(n)
    w = noise * rng.normal(size=n)
    e[0] = w[0]
    for i in range(1, n):
        e[i] = ar * e[i - 1] + w[i]
    tilt = np.cumsum(rng.normal(size=n)) * 0.1
    y = (offset + 2e-3 * t + quadratic * t ** 2 + coef[0] * np.cos(th) + coef[1] * np.sin(th)
         + coef[2] * np.cos(2 * th) + coef[3] * np.sin(2 * th) + tilt_coef * tilt + e)
    return t, ang, y, tilt


def _make_scan(seed=0, **kw):
    t, ang, y, tilt = _make_arrays(np.random.default_rng(seed), **kw)
    return Scan.from_arrays(t, ang, y, aux={"tilt": tilt})


def _reference_design(scan, drift, aux=False, harmonics=(1, 2)):
    """Dense design built independently of nullfit.fitting (complete turns only):
    ``(X, y, number of nuisance columns before the harmonics)``."""
    keep = scan.turn_complete[scan.turn]
    t, th, turn = scan.time[keep], scan.angle[keep], scan.turn[keep]
    cols = []
    if drift.startswith("per-turn"):
        deg = 1 if drift == "per-turn" else int(drift.split(":")[1])
        for tr in np.unique(turn):
            m = turn == tr
            tm = 0.5 * (t[m][0] + t[m][-1])
            for d in range(deg + 1):
                cols.append(np.where(m, (t - tm) ** d, 0.0))
    elif drift.startswith("poly"):
        u = (t - t.mean()) / 100.0  # raw powers: same column space as Legendre in scaled time
        cols += [u ** d for d in range(int(drift.split(":")[1]) + 1)]
    elif drift.startswith("spline"):
        h = float(drift.split(":")[1])
        starts = np.flatnonzero(np.r_[True, turn[1:] != turn[:-1]])
        period = typical_turn_period(t[starts], t[0], t[-1], t.size)
        knots = spline_knots(spline_intervals(t[-1] - t[0], period, h))
        u = scale_time(t, t[0], t[-1])
        for j in range(knots.size - 4):
            c = np.zeros(knots.size - 4)
            c[j] = 1.0
            cols.append(np.nan_to_num(BSpline(knots, c, 3, extrapolate=False)(u)))
        cols[-1][u == 1.0] = 1.0  # right end point belongs to the last basis function
    else:
        cols.append(np.ones(t.size))
    n_nuis = len(cols)
    for k in harmonics:
        cols += [np.cos(k * th), np.sin(k * th)]
    if aux:
        cols.append(scan.aux["tilt"][keep])
    return np.column_stack(cols), scan.signal[keep], n_nuis


def _loop_reference(scan, harmonics=(1, 2), degree=1, complete_only=True, y=None):
    """Per-turn numpy.linalg.lstsq on ``1, (t − t_mid), …, cos kθ, sin kθ``; a dict of arrays over
    the fitted turns (columns as in ``demodulate``); σ from ``RSS/(n − p) · (XᵀX)⁻¹``."""
    y = scan.signal if y is None else y
    out = {k: [] for k in ["turn", "time_mid_s", "n_samples", "resid_rms"]}
    for k in harmonics:
        for nm in (f"c{k}", f"s{k}", f"sigma_c{k}", f"sigma_s{k}"):
            out[nm] = []
    for tr in np.unique(scan.turn):
        if complete_only and not scan.turn_complete[tr]:
            continue
        m = scan.turn == tr
        t, a, yy = scan.time[m], scan.angle[m], y[m]
        tm = 0.5 * (t[0] + t[-1])
        cols = [(t - tm) ** d for d in range(degree + 1)]
        for k in harmonics:
            cols += [np.cos(k * a), np.sin(k * a)]
        X = np.column_stack(cols)
        p = X.shape[1]
        if m.sum() <= p:
            continue
        b, *_ = np.linalg.lstsq(X, yy, rcond=None)
        r = yy - X @ b
        cov = (r @ r) / (m.sum() - p) * np.linalg.inv(X.T @ X)
        out["turn"].append(tr)
        out["time_mid_s"].append(tm)
        out["n_samples"].append(m.sum())
        out["resid_rms"].append(np.sqrt(r @ r / m.sum()))
        for j, k in enumerate(harmonics):
            i = degree + 1 + 2 * j
            out[f"c{k}"].append(b[i])
            out[f"s{k}"].append(b[i + 1])
            out[f"sigma_c{k}"].append(np.sqrt(cov[i, i]))
            out[f"sigma_s{k}"].append(np.sqrt(cov[i + 1, i + 1]))
    return {k: np.array(v) for k, v in out.items()}


@pytest.fixture
def make_arrays():
    return _make_arrays


@pytest.fixture
def make_scan():
    return _make_scan


@pytest.fixture
def reference_design():
    return _reference_design


@pytest.fixture
def loop_reference():
    return _loop_reference


# ----------------------------------------------------------------------------- sky campaigns
#: SME truth of the simulated campaigns: a few σ of a year-long campaign with sigma_turn = 1e-15.
SKY_TRUTH = {"e_XY": 3e-17, "e_XZ": -2e-17, "e_YZ": 1e-17, "e_XX-YY": 4e-17, "e_ZZ": -3e-17, "o_XY": 2e-13,
             "o_XZ": -1e-13, "o_YZ": 3e-13}


def _sky_setup():
    from nullfit.hypothesis.apparatus import Apparatus
    from nullfit.hypothesis.site import Site

    site = Site(58.391, 13.845, elevation_m=125.0, mark_azimuth_deg=23.5, table_sense="counterclockwise",
                name="Brennmoor field station (INVENTED)")
    return site, Apparatus(None, None, signal="fractional", readout_sign=-1, name="BOH-R (INVENTED)")


def _sky_turns(kind="days", n_runs=36, span_days=365.0, *, truth=None, model="sme", sigma_turn=1e-15, lab_sigma=0.0,
               turn_period_s=600.0, run_hours=None, seed=0, schedule_seed=3, site=None, apparatus=None, pair=True):
    from nullfit.campaign.sky_simulate import simulate_sky_turns
    from nullfit.simulation.sky import campaign_schedule

    s0, a0 = _sky_setup()
    sch = campaign_schedule(kind, n_runs=n_runs, span_days=span_days, run_hours=run_hours, rng=schedule_seed)
    truth = SKY_TRUTH if truth is None else truth
    return simulate_sky_turns(model, truth, site=site or s0, apparatus=apparatus or a0, schedule=sch,
                              turn_period_s=turn_period_s, sigma_turn=sigma_turn, lab_sigma=lab_sigma, rng=seed,
                              pair=pair)


def _hotelling_p(fit, truth):
    from scipy import stats

    d = np.array([fit[n][0] - truth.get(n, 0.0) for n in fit.names])
    t2 = float(d @ np.linalg.solve(fit.cov, d))
    p, nu = len(d), fit.dof
    f = (nu - p + 1) / (nu * p) * t2
    return float(stats.f.sf(f, p, nu - p + 1))


@pytest.fixture
def sky_setup():
    return _sky_setup


@pytest.fixture
def sky_turns():
    return _sky_turns


@pytest.fixture
def hotelling_p():
    return _hotelling_p


def _write_logs(folder, n=4, *, seed=0, n_turns=8, samples_per_turn=48, fmt="parquet", stem="R"):
    """Write ``n`` synthetic logs (Unix-second times, a 2θ signal, a random-walk ``tilt`` channel)
    with a manifest beside each (``[columns] time = "unix_s"``, ``aux = ["tilt"]``); their paths."""
    from pathlib import Path

    from nullfit import simulate_frame

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for i in range(n):
        df, _ = simulate_frame(n_turns=n_turns, samples_per_turn=samples_per_turn, sigma=0.01,
                               harmonics={2: (0.02, 30.0)}, rng=seed + i, epoch_unix=1_780_000_000 + 86_400 * i,
                               time_format="unix")
        df["tilt"] = np.cumsum(np.random.default_rng(1000 + seed + i).normal(size=len(df))) * 0.1
        path = folder / f"{stem}{i}.{fmt}"
        if fmt == "csv":
            df.to_csv(path, index=False)
        else:
            df.to_parquet(path, index=False)
        path.with_suffix(".toml").write_text('[columns]\ntime = "unix_s"\naux = ["tilt"]\n')
        paths.append(path)
    return paths


@pytest.fixture(scope="session")
def write_logs():
    return _write_logs
