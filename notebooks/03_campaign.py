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
# # 3 · A campaign: comparing and combining runs
#
# > **Invented data.** The six runs in `data_demo/campaign/` are synthetic null scans (no 2θ
# > term injected) of an invented apparatus on invented nights in May 2026. Nothing here was
# > measured.
#
# One scan gives one bound. A campaign asks three more questions: how does each night compare
# with what the hypothesis predicts *that night*; are the nights consistent with one another;
# and what do they say together? Two ways of combining answer two different hypotheses: an
# effect fixed to the table (lab frame) and an effect fixed on the sky (sky frame).

# %%

import numpy as np
import pandas as pd

import nullfit as nf
from nullfit import figures

pd.set_option("display.float_format", "{:.4g}".format)
pd.set_option("display.width", 140)

SEED = 20260504
rng = np.random.default_rng(SEED)


from nullfit.output.demo import demo_data_dir  # the repository's data_demo/ (or the bundled copy)

DATA = demo_data_dir()
logs = sorted((DATA / "campaign").glob("C*.csv"))
scans = [nf.read_scan(p) for p in logs]
print(", ".join(f"{s.run_id} ({s.epoch_iso[:10]})" for s in scans))

# %% [markdown]
# ## Each run against the hypothesis
#
# The hypothesis is the classical wind along the direction of the Earth's orbital velocity,
# at 30 km/s (`velocity="orbital"` with `speed_m_s=30000`). Its projection onto the table
# depends on the night and the hour, so each run gets its own expected amplitude (the
# phase-coherent one, which is what a fit of constant (c₂, s₂) measures). Each run is fitted
# with the defaults (per-turn drift, turn errors) and bounded with the unified construction.

# %%
child = rng.integers(2**62, size=len(scans))  # one recorded seed per run
runs = [nf.analyse(s, velocity="orbital", speed_m_s=30_000.0, limits=("feldman-cousins",), rng=int(seed))
        for s, seed in zip(scans, child)]
table = nf.compare_runs(runs)
cols = ["run", "date_utc", "n_turns", "dropped_rows", "partial_turn_rows", "expected_amplitude", "upper_amplitude",
        "expected_peak_to_peak", "upper_peak_to_peak", "ratio_expected_to_bound", "speed_bound_m_s"]
table[cols]

# %% [markdown]
# Amplitude and peak-to-peak sit side by side: the expected column and the bound column of the
# same kind give the same ratio. C05 lacks 180 s of readings (a camera dropout); the two
# partial turns on either side of the gap are left out of the fit and their 48 readings counted in
# `partial_turn_rows` (`dropped_rows` counts the rows the reader dropped), never silently lost. Its four ±0.08 fringe outliers are not removed: they
# widen the turn scatter, and so the bound.
#
# On a log scale every run excludes the hypothesis, by factors of 50 to 200:

# %%
figures.plot_expected_vs_bound(table);

# %%
assert (table["ratio_expected_to_bound"] > 1).all()
assert np.allclose(table["expected_peak_to_peak"] / table["upper_peak_to_peak"], table["ratio_expected_to_bound"])

# %% [markdown]
# ## Lab-frame combination: an effect fixed to the table
#
# A systematic of the apparatus (a tilt, a thermal gradient that follows the table) has the
# same (c₂, s₂) every night. The runs then combine as an inverse-covariance weighted mean, and
# χ² = Σ (xᵢ − x̄)ᵀ Cᵢ⁻¹ (xᵢ − x̄) on 2(n − 1) degrees of freedom tests whether they agree.

# %%
lab = nf.combine_lab(runs)
lab

# %%
lab_limit = lab.limit(method="feldman-cousins", confidence_level=0.95)
print(f"combined 2θ amplitude, unified 95 %: < {lab_limit.upper:.3g} fringe "
      f"(peak-to-peak < {lab_limit.upper_peak_to_peak:.3g} fringe); consistency p = {lab.p_value:.2f}")

# %%
sig_runs = np.array([np.sqrt(np.trace(np.asarray(r.fit.harmonic(2).cov)) / 2) for r in runs])
sig_lab = np.sqrt(np.trace(lab.cov) / 2)
assert sig_lab < sig_runs.min()  # an inverse-covariance mean is more precise than any one run
assert lab.p_value > 0.01  # null runs with honest errors should agree

# %% [markdown]
# A small p-value here would mean either that the errors of some runs are too small or that
# the effect changes from night to night; either way the combined error would be too small.
#
# ## Sky-frame combination: an effect fixed on the sky
#
# A wind fixed on the sky predicts a *different* (c₂, s₂) in every run: the amplitude and the
# table-frame phase depend on the date and hour. Averaging the raw (c₂, s₂) would let the
# runs cancel each other. Instead fit one scale κ to all runs: the data are modelled as
# xᵢ = κ pᵢ + noise, where pᵢ is run i's predicted (c₂, s₂) at the reference speed. κ = 1 is
# the hypothesis at 30 km/s, κ = 0 is no effect, and since amplitudes scale as v²,
# κ = (v / v_ref)².

# %%
sky = nf.combine_sky(runs)
sky

# %%
V_REF = 30_000.0  # the speed imposed on the orbital direction above
kappa = sky.limits_frame(confidence_level=0.95)
kappa["speed_bound_km_s"] = [None if (u is None or m.startswith("central")) else V_REF * np.sqrt(u) / 1e3
                             for m, u in zip(kappa["method"], kappa["kappa_upper"])]
kappa[["method", "kappa_lower", "kappa_upper", "speed_bound_km_s"]]

# %% [markdown]
# κ is a Gaussian mean with a physical boundary at zero, so the same routes apply in one
# dimension: the unified (Feldman–Cousins) interval, the one-sided Neyman limit, and a Bayesian
# limit with a flat prior on κ ≥ 0. The speed bound is v_ref·√κ_up.
#
# Here κ̂ sits about 1.7 σ above zero and the unified interval has become (barely) two-sided.
# That is no detection: with no signal, a 95 % unified interval excludes zero in 5 % of
# campaigns, and its lower edge here is tiny. The upper end is what bounds the hypothesis.
# The χ² of the fit tests whether one κ describes all nights.

# %%
assert sky.p_value > 0.01
fc_row = kappa.set_index("method").loc["feldman-cousins"]
assert fc_row["kappa_upper"] < 1.0  # the hypothesis (κ = 1) is excluded
assert fc_row["kappa_lower"] < 2 * sky.sigma  # no strong excess in null data

# %% [markdown]
# ### The same fit in the Robertson–Mansouri–Sexl reading
#
# Take as velocity the lab's motion relative to the CMB frame (`cmb+orbital+earth-rotation`). In
# the RMS test theory the 2θ amplitude is 2|β − δ − ½| times the classical-wind amplitude, so
# κ = −2(β − δ − ½) is signed, and its central interval bounds |β − δ − ½|.

# %%
rms_runs = [nf.analyse(s, velocity="cmb+orbital+earth-rotation", limits=("feldman-cousins",), rng=int(seed))
            for s, seed in zip(scans, child)]
rms = nf.combine_sky(rms_runs)
central = rms.limits_frame(0.95).set_index("method").loc["central"]
print(f"κ = {rms.kappa:.3g} ± {rms.sigma:.2g};  95 % central interval [{central['kappa_lower']:.3g}, "
      f"{central['kappa_upper']:.3g}]  →  |β − δ − ½| ≤ {central['rms_bound_abs_beta_minus_delta_minus_half']:.2g}")

# %% [markdown]
# The CMB-frame speed (≈ 370 km/s) is more than ten times the orbital speed, so the same data
# bound the RMS combination far more tightly than the orbital-speed wind (κ scales as v²).
# Like every number in these notebooks, it is invented: the arithmetic is the point.
