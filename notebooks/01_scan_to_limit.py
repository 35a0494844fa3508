# ---
# jupyter:
#   jupytext:
#     formats: ipynb,py:percent
#     text_representation:
#       extension: .py
#       format_name: percent
#       format_version: '1.3'
#       jupytext_version: 1.19.6
#   kernelspec:
#     display_name: Python 3
#     language: python
#     name: python3
# ---

# %% [markdown]
# # 1 · From a scan log to a limit
#
# > **Invented data.** Everything below runs on `data_demo/`: synthetic scans drawn by
# > `nullfit.simulation` for an invented laboratory (Brennmoor Optics Hall) and an invented
# > interferometer (BOH-2). Nothing here was measured; do not quote these numbers.
#
# One scan, start to finish: read the log and its manifest, look at it, fit drift and
# harmonics, read the per-turn table, state the result correctly near zero, put four
# limits on the 2θ amplitude, test for a signal, and compare with what the classical wind
# hypothesis would have produced in this apparatus at this site and time.
#
# The scan chosen, `injected_2theta.csv`, has a small 2θ term injected on purpose, so we
# can check that the machinery finds what was put in.

# %%
import json

import numpy as np
import pandas as pd

import nullfit as nf
from nullfit import figures

pd.set_option("display.float_format", "{:.4g}".format)
pd.set_option("display.width", 120)

SEED = 20260312  # every random step below derives from this
rng = np.random.default_rng(SEED)


from nullfit.output.demo import demo_data_dir  # the repository's data_demo/ (or the bundled copy)

DATA = demo_data_dir()
LOG = DATA / "injected_2theta.csv"

# %% [markdown]
# ## The log and its manifest
#
# The log holds three columns (time, table angle, fringe reading). Everything else — column
# roles, units, the apparatus, the site and what the run was — sits in a TOML manifest next to
# the log, which `read_scan` finds by its name.

# %%
print(LOG.read_text().splitlines()[:4])
manifest = nf.read_manifest(LOG.with_suffix(".toml"))
print("apparatus:", dict(manifest.apparatus))
print("site:     ", {k: manifest.site[k] for k in ("latitude_deg", "longitude_deg", "mark_azimuth_deg")})
print(manifest.notes.strip().splitlines()[0])

# %%
scan = nf.read_scan(LOG)
scan

# %% [markdown]
# The table stops at **16 marks** per turn and reads the start mark again at the end of
# each turn (17 readings). The repeated mark is a drift reference, not a 17th azimuth: with
# 16 equally spaced marks, harmonics up to k = 7 are identified, comfortably more than the
# 1θ and 2θ we fit.
#
# ## Look before fitting
#
# The raw reading is dominated by slow drift; the 1θ term (a tilt of the table, typically)
# is visible turn by turn; the 2θ term we are after is far below the noise of one reading.

# %%
figures.plot_scan(scan);

# %% [markdown]
# ## The fit
#
# Defaults: `drift="per-turn"`, `errors="turns"`.
#
# * **Per-turn drift.** An offset and a slope are removed inside every turn, where the drift
#   happens, instead of averaging turns first and detrending the average (which folds slow
#   drift into the 2θ bin). Those 2 × 60 nuisance parameters are projected out turn by turn.
# * **Turn errors.** Each turn is demodulated on its own; the estimate is the mean of the
#   per-turn (c, s) and its covariance is their scatter / N. The scatter includes whatever
#   the noise really is — correlated within a turn, leftover drift — so the error does not
#   rely on a white-noise model. The price: the covariance is itself estimated from N − 1 = 59
#   degrees of freedom, which the intervals account for (Student-t, Hotelling T²).

# %%
fit = nf.fit_scan(scan)  # harmonics=(1, 2), drift="per-turn", errors="turns"
h2 = fit.harmonic(2)
fit

# %% [markdown]
# Two things in that summary deserve a sentence.
#
# * χ²/dof of the per-turn scatter compares the turn-to-turn scatter with what white noise
#   inside each turn predicts. Here it is near 1: the noise is close to white, and the
#   white-noise (OLS) error would not be badly wrong *for this scan* (see below). On a
#   drifting night it is not (notebook 2).
# * σ(s₂) > σ(c₂): the per-turn slope removed from each turn looks partly like a sin kθ term
#   (the angle advances linearly with time within a turn), so removing it costs some
#   precision on the sine coefficients. Uneven costs are why the limits below use the full
#   2 × 2 covariance, not one σ.

# %%
err = {}
for e in ("turns", "hac", "ols"):
    h = nf.fit_scan(scan, errors=e).harmonic(2)
    err[e] = {"c2": h.c, "σ(c2)": h.sigma_c, "s2": h.s, "σ(s2)": h.sigma_s}
pd.DataFrame(err).T

# %% [markdown]
# ## The per-turn table
#
# One row per turn: the coefficients of that turn alone, with their white-noise errors. The
# fit's estimate is the column mean. Plotting c₂ and s₂ against time shows whether the
# signal is steady and whether the turns scatter as much as their error bars say.

# %%
fit.per_turn[["turn", "time_mid_s", "n_samples", "c2", "s2", "sigma_c2", "sigma_s2"]].head(5)

# %%
figures.plot_per_turn(fit, harmonic=2);

# %% [markdown]
# The signal folded by table angle (drift removed, binned means with errors, fitted
# harmonics), and the (c₂, s₂) plane with the 95 % error ellipse:

# %%
figures.plot_folded(scan, fit, bins=16);

# %%
figures.plot_plane(fit, harmonic=2, confidence_level=0.95);

# %% [markdown]
# ## Why "Â ± σ" is the wrong statement near zero
#
# The amplitude Â = √(ĉ² + ŝ²) can never be negative. When the true amplitude is zero or
# small, noise in *either* coefficient only increases Â: it is biased upward, and its spread
# is not Gaussian (a Rice law, Rayleigh when A = 0). Draw estimates from this fit's own
# covariance and see what "Â ± 1.96 σ_Â" (delta-method σ) does:

# %%
cov2 = np.asarray(h2.cov)
sig = np.sqrt(np.trace(cov2) / 2)
draws = rng.multivariate_normal([0.0, 0.0], cov2, size=20_000)
rows = []
for a_true in (0.0, 1.0, 2.0, 4.0):  # in units of σ, along the fitted phase
    mu = a_true * sig * np.array([np.cos(2 * np.radians(h2.phase_deg)), np.sin(2 * np.radians(h2.phase_deg))])
    x = draws + mu
    a_hat = np.hypot(x[:, 0], x[:, 1])
    g = x / a_hat[:, None]  # delta-method σ of the amplitude for each draw
    s_a = np.sqrt(np.einsum("ni,ij,nj->n", g, cov2, g))
    covered = np.abs(a_hat - a_true * sig) <= 1.96 * s_a
    rows.append({"true A / σ": a_true, "mean Â / σ": a_hat.mean() / sig, "'Â ± 1.96σ' covers": covered.mean()})
naive = pd.DataFrame(rows)
naive

# %% [markdown]
# With no signal at all (A = 0) the average Â is about 1.2 σ, and the naive "95 %" interval
# excludes zero in about one scan in eight: a "2σ detection" made of noise alone. The bias
# persists at A ≈ σ and fades only when A is several σ. Near zero, quote a limit (or an
# interval from a construction that knows Â ≥ 0), never Â ± σ.

# %%
assert naive["mean Â / σ"].iloc[0] > 1.1  # Rayleigh mean √(π/2) ≈ 1.25 for an isotropic covariance
assert naive["'Â ± 1.96σ' covers"].iloc[0] < 0.90

# %% [markdown]
# ## Four limits, one significance, the expected signal
#
# `nf.analyse` ties the stages together: the fit above, the four limit routes at 95 %, the
# p-value of "no 2θ term", and — given a hypothesis — the expected signal and the ratio
# expected / bound. The hypothesis here is the classical wind blowing at the Earth's orbital
# velocity (`velocity="orbital"`), projected onto the table plane at the site in the manifest,
# at the times of this scan.

# %%
ana = nf.analyse(scan, velocity="orbital", confidence_level=0.95, rng=SEED, bootstrap_replicates=4000)
ana.limits_frame().drop(columns=["settings"])

# %%
figures.plot_limits(ana);

# %% [markdown]
# How to read the four rows (notebook 2 compares them properly):
#
# * **feldman-cousins** (unified): an interval; it became two-sided here by itself, because
#   the estimate is far enough from zero. Coverage is guaranteed by construction.
# * **neyman** (classical one-sided): only an upper limit, same coverage guarantee.
# * **bayes**: a credible upper limit (prior uniform in the (c, s) plane); a statement of
#   belief, not of coverage.
# * **bootstrap**: percentile limit from resampling blocks of turns; biased upward at small
#   amplitudes (stated in its notes).
#
# The injected amplitude was 8.0 × 10⁻⁴ fringe (from `truth.json`). It must lie inside the
# unified interval — not a guarantee for one scan (5 % of scans miss), but a sanity check we
# would want to know about if it failed with this seed.

# %%
truth = json.loads((DATA / "truth.json").read_text())["runs"]["S01"]["harmonics"]["2"]
fc = ana.limits["feldman-cousins"]
print(f"injected A2 = {truth['amplitude']:.3g} fringe;  unified 95 % interval = [{fc.lower:.3g}, {fc.upper:.3g}] fringe")
assert fc.lower <= truth["amplitude"] <= fc.upper

# %%
ana.significance

# %% [markdown]
# The p-value is that of Hotelling's T² for (c₂, s₂) = 0 with the covariance estimated from
# 60 turns. A 2.7σ excess in one scan is a reason to repeat the run, not a discovery:
# in a campaign many scans are looked at, and a systematic fixed to the table also appears
# at 2θ.

# %% [markdown]
# ## What the hypothesis predicts here, and the ratio

# %%
exp = ana.expected
app = ana.apparatus
print(f"apparatus: L = {app.arm_length_m} m (effective), λ = {app.wavelength_m * 1e9:.0f} nm")
print(f"in-plane speed during the scan: {exp.speed_h_min_m_s / 1e3:.1f} … {exp.speed_h_max_m_s / 1e3:.1f} km/s")
print(f"expected A2, phase-coherent (what a fit measures): {exp.amplitude:.4g} fringe")
print(f"mean instantaneous A2:                             {exp.mean_amplitude:.4g} fringe")
print(f"ratio expected / bound (unified upper limit):       {ana.ratio:.1f}")
print(f"speed bound on the hypothesis:                     {ana.speed_bound_m_s / 1e3:.2f} km/s")

# %% [markdown]
# The wind axis turns in the table frame as the Earth rotates; a fit of constant (c₂, s₂)
# averages the turning phasor, so the number to compare with the bound is the phase-coherent
# amplitude, slightly below the mean instantaneous one for a two-hour scan.
#
# A simple cross-check: for an in-plane speed of 30 km/s the classical wind gives
# A₂ = L v² / (λ c²) ≈ 0.196 fringe in BOH-2 (the demo README quotes this number).

# %%
a30 = app.wind_amplitude(30_000.0)
print(f"A2(30 km/s) = {a30:.4f} fringe")
assert abs(a30 - 10.4 * 3e4**2 / (532e-9 * nf.SPEED_OF_LIGHT**2)) < 1e-12
assert ana.ratio > 10  # the hypothesis predicts far more than the bound allows

# %% [markdown]
# ## Amplitude versus peak-to-peak, explicitly
#
# The 2θ term is A cos(2(θ − φ)). The shift between two orientations 90° apart is its
# peak-to-peak value, **2A**. Every number above is an amplitude. The table below shows both;
# a ratio is the same either way *if* numerator and denominator are of the same kind.

# %%
pp = nf.peak_to_peak
both = pd.DataFrame(
    {
        "amplitude A2 [fringe]": [h2.amplitude, fc.upper, exp.amplitude],
        "peak-to-peak 2·A2 [fringe]": [pp(h2.amplitude), pp(fc.upper), pp(exp.amplitude)],
    },
    index=["observed (biased near 0)", "unified 95 % upper limit", "expected (orbital, coherent)"],
)
both

# %%
v_right = app.speed_bound(fc.upper)  # amplitude bound → speed
v_wrong = app.speed_bound(pp(fc.upper))  # a peak-to-peak bound fed in as if it were an amplitude
print(f"speed bound from the amplitude limit:               {v_right:8.0f} m/s  (in-plane speed of a lab-frame wind)")
print(f"same formula fed the peak-to-peak limit (an error): {v_wrong:8.0f} m/s  (√2 too loose)")
print(f"ratio expected p-p / bound amplitude (an error):    {pp(exp.amplitude) / fc.upper:.1f}  (2× too strong)")
assert np.isclose(v_wrong / v_right, np.sqrt(2))

# %% [markdown]
# The speed bound printed by `analyse` (orbital direction history kept) and the lab-wind
# bound above differ because the orbital wind's in-plane projection is below its full speed
# and turns during the scan; both are amplitude-based.
