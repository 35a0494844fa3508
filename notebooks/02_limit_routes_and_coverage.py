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
# # 2 · Four routes to a limit, and what coverage means
#
# > **Invented data.** The scan comes from `data_demo/` (synthetic, invented scenario); the
# > rest of the notebook simulates its own data with fixed seeds. Nothing here was measured.
#
# The same estimate (ĉ₂, ŝ₂) with its covariance can be turned into an upper limit in
# several defensible ways that give different numbers. This notebook puts the four routes
# side by side on one scan, shows where each number comes from, and then checks by
# simulation the property that separates them: **coverage**.

# %%

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from scipy import stats

import nullfit as nf
from nullfit import figures

pd.set_option("display.float_format", "{:.4g}".format)
pd.set_option("display.width", 120)

SEED = 20260310  # each simulation below draws from its own generator seeded from this


from nullfit.output.demo import demo_data_dir  # the repository's data_demo/ (or the bundled copy)

DATA = demo_data_dir()

# %% [markdown]
# ## One estimate, four limits
#
# The quiet night `quiet.csv` has no 2θ term: the estimate is noise, about half a standard
# error from zero — exactly where the routes disagree most.

# %%
scan = nf.read_scan(DATA / "quiet.csv")
fit = nf.fit_scan(scan)
h2 = fit.harmonic(2)
print(f"c2 = {h2.c:.3g}, s2 = {h2.s:.3g} fringe;  Â2 = {h2.amplitude:.3g} fringe = {h2.snr:.2f} σ")

table = nf.limits_table(h2, confidence_level=0.95, rng=SEED, options={"bootstrap": {"replicates": 4000}})
limits = table.attrs["limits"]
table[["method", "lower", "upper", "upper_peak_to_peak", "sigma", "dof", "block_length"]]

# %% [markdown]
# All four are **amplitude** limits at 95 %; `upper_peak_to_peak` is twice `upper`.
#
# * **Neyman (one-sided):** the smallest A for which an estimate as small as ours would be
#   rare (5 %). A downward fluctuation of the noise yields a *tighter* limit — here clearly
#   below the other three, at about 1.4 σ. The limit is valid (it covers 95 %), but such a
#   small value says more about luck than about the apparatus; for a still smaller estimate
#   the set can even be empty.
# * **Unified (Feldman–Cousins):** the acceptance regions of a Neyman belt are filled in order
#   of the likelihood ratio f(Â | A) / f(Â | A_best). Same coverage, never empty, and it moves
#   from an upper limit to a two-sided interval by itself when the data warrant it.
# * **Bayes:** the 95 % quantile of the amplitude posterior (prior uniform in the (c, s)
#   plane, flat in phase; the estimated covariance enters through a Student kernel).
# * **Bootstrap:** resample blocks of turns, recompute the mean (c₂, s₂), take the 95 %
#   percentile of the resampled amplitude. It inherits the upward bias of Â.
#
# The unified belt and the Bayesian posterior, with the limits marked:

# %%
figures.plot_belt(limits["feldman-cousins"]);

# %%
figures.plot_posterior(limits["bayes"]);

# %% [markdown]
# Reading the belt: for each true amplitude A (vertical axis) the band holds the 95 % of
# observed Â that are "most compatible" with it. Draw a vertical line at the observed Â:
# the A values whose band it crosses form the interval. Near Â = 0 the band starts at zero,
# and the interval is an upper limit.

# %% [markdown]
# ## What coverage means
#
# A 95 % confidence procedure is a recipe that, applied to many repetitions of the
# experiment with the *same* true amplitude, produces intervals that contain that true value
# in 95 % of the repetitions — whatever the true value is. It is a property of the recipe,
# not of the one interval you got. Coverage below 95 % means the recipe claims more than it
# delivers; above 95 % it is conservative (honest but weaker than it could be).
#
# A credible (Bayesian) limit makes a different claim — a degree of belief given a prior —
# so it need not cover at any particular rate. It is still worth knowing what it does.
#
# ### A small simulation
#
# Each simulated experiment is a run of N = 40 turns whose per-turn (c₂, s₂) scatter with
# σ_turn = 1 (white, isotropic). The estimate is their mean, with known covariance
# (σ_turn² / N)·I, so σ = σ_turn / √N. We repeat 300 experiments at each true amplitude
# A = 0, 1, 2, 4 σ and ask each route for its 95 % limit.

# %%
N_TURNS, N_EXP, CL = 40, 300, 0.95
sigma = 1.0 / np.sqrt(N_TURNS)
cov = np.eye(2) * sigma**2
amplitudes = [0.0, 1.0, 2.0, 4.0]  # in units of σ
routes = ["feldman-cousins", "neyman", "bayes (plane prior)", "bayes (amplitude prior)", "bootstrap"]
hits = {r: np.zeros(len(amplitudes), int) for r in routes}
sim_rng = np.random.default_rng(SEED + 1)
for j, a in enumerate(amplitudes):
    a_true = a * sigma
    mu = a_true * np.array([np.cos(0.7), np.sin(0.7)])  # the phase is irrelevant for an isotropic covariance
    for i in range(N_EXP):
        turns = mu + sim_rng.standard_normal((N_TURNS, 2))
        c, s = turns.mean(axis=0)
        fc = nf.amplitude_limit(c, s, cov, method="feldman-cousins", confidence_level=CL)
        ny = nf.amplitude_limit(c, s, cov, method="neyman", confidence_level=CL)
        bp = nf.amplitude_limit(c, s, cov, method="bayes", confidence_level=CL, prior="plane")
        ba = nf.amplitude_limit(c, s, cov, method="bayes", confidence_level=CL, prior="amplitude")
        bs = nf.amplitude_limit(c, s, cov, method="bootstrap", confidence_level=CL, turns=turns,
                                replicates=1000, block_length=2, progress=False, rng=sim_rng)
        hits["feldman-cousins"][j] += fc.lower <= a_true <= fc.upper
        hits["neyman"][j] += (not ny.empty) and a_true <= ny.upper  # an empty set covers nothing
        hits["bayes (plane prior)"][j] += a_true <= bp.upper
        hits["bayes (amplitude prior)"][j] += a_true <= ba.upper
        hits["bootstrap"][j] += a_true <= bs.upper
coverage = pd.DataFrame({r: h / N_EXP for r, h in hits.items()}, index=pd.Index(amplitudes, name="true A / σ"))
coverage

# %% [markdown]
# With 300 experiments a procedure that covers exactly 95 % shows between about 92.3 % and
# 97.3 % (the central 95 % of the binomial law); the grey band in the figure.

# %%
lo, hi = stats.binom.ppf([0.025, 0.975], N_EXP, CL) / N_EXP
fig, ax = plt.subplots(figsize=(7, 3.6))
ax.axhspan(lo, hi, color="0.88", label=f"binomial 95 % band, {N_EXP} runs")
ax.axhline(CL, color="0.4", lw=0.8)
for r, m in zip(routes, "osD^v"):
    ax.plot(amplitudes, coverage[r], marker=m, label=r)
ax.set(xlabel="true amplitude A / σ", ylabel="coverage (fraction of runs)", ylim=(0.8, 1.005),
       title="Coverage of 95 % limits, 40 turns, known covariance")
ax.legend(fontsize=8, loc="lower right")
fig.tight_layout()

# %% [markdown]
# What the simulation shows (300 runs per point, fixed seeds):
#
# * **Unified and Neyman** cover at the nominal rate at every amplitude, inside the binomial
#   band — the construction guarantees it, and the code delivers it.
# * **Bayes, plane prior** always covers at A = 0 (its limit is never zero) and over-covers
#   at small A; it is conservative as a frequentist statement.
# * **Bayes, amplitude prior** gives smaller limits. It too covers always at A = 0, and it
#   comes down to about the nominal rate by a few σ; nothing in its construction stops it
#   from going below (larger simulations put it slightly under, near 94.5 %, at 3–5 σ). A
#   credible limit is not a confidence limit.
# * **Bootstrap** covers always at A = 0 and over-covers at small A: the resampled
#   amplitudes are centred on the already biased Â.
#
# A binomial test of the two frequentist routes makes this a check that can fail:

# %%
for r in ("feldman-cousins", "neyman"):
    for j, a in enumerate(amplitudes):
        p = stats.binomtest(int(hits[r][j]), N_EXP, CL).pvalue
        assert p > 0.001, f"{r} at A = {a}σ: coverage {hits[r][j] / N_EXP:.3f} is off nominal (p = {p:.2g})"
assert coverage.loc[0.0, "bayes (plane prior)"] == 1.0 and coverage.loc[0.0, "bootstrap"] == 1.0

# %% [markdown]
# ### Few turns: the covariance is itself an estimate
#
# With the error taken from the scatter of only N = 5 turns, σ̂ is uncertain by about 35 %,
# and it is too small about as often as too large. Treating σ̂ as exact makes the unified
# interval turn two-sided — a "detection" — too often when there is no signal at all.
# Passing `dof = N − 1` (what `upper_limit` does for a scan fit) makes the construction
# account for the estimated covariance (Hotelling scaling):

# %%
N_FEW, N_EXP_FEW = 5, 400
few_rng = np.random.default_rng(SEED + 2)
plug = honest = 0
for i in range(N_EXP_FEW):
    turns = few_rng.standard_normal((N_FEW, 2))  # A = 0
    c, s = turns.mean(axis=0)
    cov_hat = np.cov(turns.T) / N_FEW
    p_lim = nf.amplitude_limit(c, s, np.eye(2) * np.trace(cov_hat) / 2)  # σ̂ taken as exact
    h_lim = nf.amplitude_limit(c, s, cov_hat, dof=N_FEW - 1)  # σ̂ from N − 1 = 4 dof
    plug += p_lim.lower == 0.0
    honest += h_lim.lower == 0.0
print(f"coverage of A = 0, {N_FEW} turns, {N_EXP_FEW} runs:  σ̂ as exact {plug / N_EXP_FEW:.3f}   "
      f"with dof = {N_FEW - 1}: {honest / N_EXP_FEW:.3f}   (nominal {CL})")
assert honest >= stats.binom.ppf(0.001, N_EXP_FEW, CL)
assert plug < honest

# %% [markdown]
# Accounting for the estimated covariance restores coverage, conservatively: the price of
# not knowing σ is a wider interval. With tens of turns the two agree closely.

# %% [markdown]
# ## The error bar itself: white-noise (OLS) errors versus turn errors
#
# Every limit above is only as good as the covariance fed into it. A least-squares fit of
# the whole scan quotes the white-noise error σ̂²(XᵀX)⁻¹. Real interferometer noise is
# correlated from one reading to the next and carries random-walk drift; then the OLS error is
# too small. Simulate a handful of null scans (no 2θ term) with AR(1) noise (ρ = 0.9 per
# reading) and a random walk, fit each with three error models, and look at the pulls
# ĉ₂/σ(ĉ₂), ŝ₂/σ(ŝ₂): honest errors give pulls of unit spread.

# %%
N_SCANS = 40
pulls = {"ols": [], "hac": [], "turns": []}
scan_rng = np.random.default_rng(SEED + 3)
for i in range(N_SCANS):
    sim, _ = nf.simulate_scan(n_turns=20, period_s=60.0, samples_per_turn=48, noise="ar1", sigma=0.01,
                              ar1_coef=0.9, drift={"walk_step": 0.001}, rng=scan_rng)
    for e in pulls:
        h = nf.fit_scan(sim, harmonics=(2,), errors=e).harmonic(2)
        pulls[e] += [h.c / h.sigma_c, h.s / h.sigma_s]
pull_table = pd.DataFrame(
    {e: {"spread of pulls": np.std(p), "|pull| > 1.96": np.mean(np.abs(p) > 1.96)} for e, p in pulls.items()}
).T
pull_table

# %% [markdown]
# The OLS error is too small by a factor of about the pull spread: its "95 %" intervals miss
# far more often than 5 %, and every limit built on it would be too tight. The Newey–West
# (HAC) error helps but with its rule-of-thumb lag still under-states the error. The turn
# errors, built from the scatter of per-turn coefficients, are close to honest (their pulls
# follow a Student law with 19 dof, spread ≈ 1.05). That is why `errors="turns"` is the
# default.

# %%
assert pull_table.loc["ols", "spread of pulls"] > 1.5
assert 0.75 < pull_table.loc["turns", "spread of pulls"] < 1.35
