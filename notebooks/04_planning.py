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
# # 4 · Planning: how many turns for a target bound?
#
# > **Invented data.** The noise is measured on `data_demo/quiet.csv`, a synthetic scan of an
# > invented apparatus; the rest is simulation with fixed seeds. Nothing here was measured.
#
# Before a campaign: given the noise this apparatus showed on a quiet night, how many turns
# must a run last for its 95 % upper limit on the 2θ amplitude to reach a target? We answer by
# simulation — draw many runs of N turns with the measured per-turn noise, bound each one
# exactly as the analysis will, and take the typical (median) bound — and compare with the
# back-of-envelope σ/√N scaling.

# %%

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd

import nullfit as nf
from nullfit import figures

pd.set_option("display.float_format", "{:.4g}".format)
pd.set_option("display.width", 120)

SEED = 20260401
rng = np.random.default_rng(SEED)
CL = 0.95


from nullfit.output.demo import demo_data_dir  # the repository's data_demo/ (or the bundled copy)

DATA = demo_data_dir()

# %% [markdown]
# ## The noise to plan with
#
# Fit the quiet night with the defaults and take the **per-turn** coefficients: each turn's
# (c₂, s₂) scatter around the mean with a 2 × 2 covariance Σ_turn. That covariance already
# contains everything that matters for the bound — reading noise, what per-turn drift removal
# costs, the angle sampling — so it is the right thing to scale.

# %%
scan = nf.read_scan(DATA / "quiet.csv")
fit = nf.fit_scan(scan)
per_turn = fit.per_turn[["c2", "s2"]].to_numpy()
sigma_turn = np.cov(per_turn.T)  # per-turn covariance of (c2, s2)
turn_s = scan.duration_s / fit.n_turns
app = nf.Apparatus.from_mapping(scan.meta.apparatus)
print(f"{fit.n_turns} turns of {turn_s:.0f} s;  per-turn σ(c2) = {np.sqrt(sigma_turn[0, 0]):.3g}, "
      f"σ(s2) = {np.sqrt(sigma_turn[1, 1]):.3g} fringe;  χ²/dof of the turn scatter = {fit.chi2_dof:.2f}")

# %% [markdown]
# Scaling by 1/√N assumes the turns are independent. The Allan deviation of the per-turn
# series checks it: for independent turns it falls as τ^(−1/2) (the dashed line); a flattening
# would mean correlated turns, and longer runs would gain less than √N.

# %%
figures.plot_allan(fit, harmonic=2);

# %% [markdown]
# ## The target
#
# Say the campaign should bound the in-plane speed of a classical wind by 1 km/s. In BOH-2
# (L = 10.4 m, λ = 532 nm) that is a 2θ **amplitude** of L v²/(λ c²); the corresponding
# peak-to-peak shift is twice that.

# %%
V_TARGET = 1_000.0  # m/s
target = app.wind_amplitude(V_TARGET)
print(f"target: A2 < {target:.3g} fringe (amplitude) = {nf.peak_to_peak(target):.3g} fringe peak-to-peak")

# %% [markdown]
# ## Sensitivity by simulation
#
# For each N: draw 300 runs of N per-turn (c₂, s₂) pairs from N(0, Σ_turn) (no signal),
# take the mean and the sample covariance / N exactly as `fit_scan` does, and compute the
# unified 95 % upper limit with `dof = N − 1` exactly as `upper_limit` does.

# %%
N_GRID = np.array([10, 20, 40, 80, 160, 320, 640])
N_RUNS = 300
chol = np.linalg.cholesky(sigma_turn)


def simulated_limits(n_turns: int, n_runs: int, gen) -> np.ndarray:
    ups = np.empty(n_runs)
    for i in range(n_runs):
        turns = gen.standard_normal((n_turns, 2)) @ chol.T
        c, s = turns.mean(axis=0)
        cov = np.cov(turns.T) / n_turns
        ups[i] = nf.amplitude_limit(c, s, cov, method="feldman-cousins", confidence_level=CL, dof=n_turns - 1).upper
    return ups


sims = {int(n): simulated_limits(int(n), N_RUNS, rng) for n in N_GRID}
sens = pd.DataFrame(
    {
        "hours": N_GRID * turn_s / 3600,
        "median upper": [np.median(sims[n]) for n in N_GRID],
        "90 % of runs below": [np.quantile(sims[n], 0.9) for n in N_GRID],
    },
    index=pd.Index(N_GRID, name="turns N"),
)

# %% [markdown]
# The analytic scaling: with a known covariance the median bound is k·σ/√N. Here σ² is the
# larger eigenvalue of Σ_turn (the few-turn construction bounds the covariance by it), and k
# is the unified 95 % limit, in units of σ, at the median observed amplitude Â/σ when there
# is no signal (the median of Â for this covariance shape, from a large fixed-seed draw;
# √(2 ln 2) ≈ 1.18 for an isotropic covariance).

# %%
sig_major = np.sqrt(np.linalg.eigvalsh(sigma_turn)[-1])
z = np.random.default_rng(SEED + 2).standard_normal((200_000, 2)) @ chol.T
x_med = np.median(np.hypot(z[:, 0], z[:, 1])) / sig_major
k = nf.amplitude_limit(x_med, 0.0, np.eye(2), method="feldman-cousins", confidence_level=CL).upper
sens["k·σ/√N"] = k * sig_major / np.sqrt(N_GRID)
print(f"median Â/σ = {x_med:.3f},  k = {k:.3f}")
sens

# %%
fig, ax = plt.subplots(figsize=(7, 4))
ax.loglog(N_GRID, sens["median upper"], "o-", label="simulation: median 95 % upper limit")
ax.fill_between(N_GRID, [np.quantile(sims[n], 0.1) for n in N_GRID], sens["90 % of runs below"],
                alpha=0.2, label="10–90 % of simulated runs")
ax.loglog(N_GRID, sens["k·σ/√N"], "--", color="0.3", label="analytic k·σ/√N (known covariance)")
ax.axhline(target, color="C3", lw=1, label=f"target: {V_TARGET / 1e3:g} km/s classical wind")
ax.set(xlabel="turns per run N", ylabel="2θ amplitude upper limit [fringe]",
       title="Sensitivity of one run, noise of the quiet night")
ax.legend(fontsize=8)
fig.tight_layout()

# %% [markdown]
# At large N the simulation follows σ/√N. At small N it lies above it: with few turns the
# covariance is itself an estimate, and an honest limit pays for that (Hotelling scaling).
#
# ## The number of turns
#
# Interpolate log(median limit) against log N to find where it crosses the target, then
# check that point by simulating it directly.

# %%
log_n = np.interp(np.log(target), np.log(sens["median upper"].to_numpy()[::-1]), np.log(N_GRID[::-1]))
n_needed = int(np.ceil(np.exp(log_n)))
check = simulated_limits(n_needed, N_RUNS, rng)
n_analytic = int(np.ceil((k * sig_major / target) ** 2))
print(f"turns needed for a median bound of {target:.3g} fringe: N ≈ {n_needed} "
      f"({n_needed * turn_s / 3600:.1f} h of turning);  analytic estimate: {n_analytic}")
print(f"check at N = {n_needed}: median limit {np.median(check):.3g} fringe, "
      f"{np.mean(check <= target):.0%} of runs reach the target")

# %% [markdown]
# "Median" means half the runs of that length do better and half worse. To reach the target
# with 90 % probability, plan with the 90 % column instead; it needs noticeably more turns.

# %%
n90 = int(np.ceil(np.exp(np.interp(np.log(target), np.log(sens["90 % of runs below"].to_numpy()[::-1]),
                                   np.log(N_GRID[::-1])))))
print(f"turns for 90 % of runs below the target: N ≈ {n90} ({n90 * turn_s / 3600:.1f} h)")

# %%
med = sens["median upper"].to_numpy()
assert np.all(np.diff(med) < 0)  # more turns, smaller bound
assert abs(med[-1] / sens["k·σ/√N"].iloc[-1] - 1) < 0.10  # σ/√N holds at large N
assert 0.4 <= np.mean(check <= target) <= 0.6  # the N found does give a median bound at the target
assert abs(n_analytic / n_needed - 1) < 0.2 and n_needed < n90

# %% [markdown]
# ## Does the per-turn shortcut hold for whole scans?
#
# The simulation above drew per-turn coefficients directly. As a check, simulate a few full
# scans with the quiet night's sampling (72 readings per turn, 90 s turns, slow drift) and its
# measured reading noise (the fit's residual rms), fit and bound them with the library, and
# compare with the per-turn shortcut at the same N.

# %%
N_CHECK, N_SCANS = 40, 60
full = []
scan_rng = np.random.default_rng(SEED + 1)
for i in range(N_SCANS):
    sim, _ = nf.simulate_scan(n_turns=N_CHECK, period_s=turn_s, samples_per_turn=72, sigma=fit.residual_rms,
                              drift={"offset": 0.2, "slope": 2e-6}, rng=scan_rng)
    full.append(nf.upper_limit(nf.fit_scan(sim), confidence_level=CL).upper)
print(f"N = {N_CHECK}: median limit, {N_SCANS} full scans {np.median(full):.3g} fringe;  "
      f"per-turn shortcut {np.median(sims[N_CHECK]):.3g} fringe")

# %% [markdown]
# The two agree within the scatter of a few dozen scans. The residual rms slightly under-states
# the reading noise (the fit removes a few parameters per turn), so the full-scan check, if
# anything, comes out a little optimistic. For a real plan, use the per-turn covariance of a
# night like the one you expect — a drifting night (see `drifting.csv`) can have a per-turn
# scatter several times larger, and then the hours grow with its square.

# %%
assert 0.7 < np.median(full) / np.median(sims[N_CHECK]) < 1.3
