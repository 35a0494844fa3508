"""The scan fit: drift + harmonics (+ auxiliary nuisance terms) with a choice of honest errors.

Model (``docs/conventions.md``)::

    y(t, θ) = drift(t) + Σ_k [c_k cos kθ + s_k sin kθ] + Σ_j d_j aux_j(t) + noise

Drift models (``drift=``; see :mod:`nullfit.design`)
    ``"per-turn"`` (offset + slope inside every turn, projected out turn by turn —
    Frisch–Waugh–Lovell, never dense columns), ``"poly"``/``"poly:d"`` (Legendre in scaled
    time), ``"spline"``/``"spline:h"`` (cubic B-spline, knots every ``h`` turns), ``"none"``
    (a constant offset).

Errors (``errors=``)
    ``"turns"`` (default)
        Every turn is demodulated on its own (:func:`nullfit.demodulate`).  The point estimate
        is the **unweighted mean of the per-turn coefficients** and its covariance is their
        sample covariance divided by the number of turns ``N``.  This absorbs drift and any
        noise that is correlated over less than a turn, but the covariance rests on only
        ``N − 1`` degrees of freedom (``ScanFit.dof``): intervals then use Student-t
        (one coefficient) and Hotelling's T² (cos and sin jointly), and the fit warns below
        10 turns.  At least 3 turns are needed.  Requires per-turn drift.

        The per-turn series is checked for turn-to-turn dependence (lag-1 autocorrelation,
        Ljung–Box test, integrated autocorrelation time τ̂; :mod:`nullfit.fitting.dependence`,
        ``ScanFit.dependence``).  When dependence is detected the scatter is taken over blocks
        of ``⌈6 τ̂⌉`` consecutive turns (at least 5 blocks; ``dof`` = blocks − 1) and the fit
        warns (``dependence="widen"``, the default); ``dependence="warn"`` keeps the turn
        scatter and marks every result built on it as not calibrated.  Independent turns are
        not affected unless the test rejects by chance (nominal 5 %; at most 8 % measured, the
        test being slightly liberal at small N), and batch means of independent turns remain
        exactly calibrated.
    ``"blocks"`` (``block_turns=B``)
        As ``"turns"``, but the scatter is that of the means of consecutive blocks of ``B``
        turns (``dof`` = number of blocks − 1): use it when the noise is correlated over
        more than a turn.  The dependence check is still reported.
    ``"hac"``
        Joint least-squares fit with a Newey–West covariance: Bartlett kernel, lag ``L`` chosen
        by the Newey–West (1994) rule of thumb ``L = floor(4 (n/100)^(2/9))`` unless
        ``hac_lags`` is given, and the small-sample factor ``n/(n − p)`` (``p`` counts every
        fitted parameter, including the per-turn drift terms).  This is the definition of
        statsmodels' ``OLS(...).fit(cov_type="HAC", cov_kwds={"maxlags": L,
        "use_correction": True})``; ``tests/fitting/test_fit_hac.py`` checks it to 1e-8.  The lag
        covers readings, not turns: the turn-to-turn dependence check runs on a per-turn
        demodulation as well, and a detected dependence is warned about (use ``"turns"``).
    ``"ols"``
        Joint fit, white-noise covariance ``σ̂² (XᵀX)⁻¹`` with ``σ̂² = RSS/(n − p)``.  It
        *under-covers* whenever the noise is correlated or drift is left over — shown by
        ``tests/fitting/test_fit_calibration.py``; use it only as a reference.

The joint fit (``"hac"``, ``"ols"``) never holds the dense design: ``XᵀX`` and ``Xᵀy`` are
accumulated in chunks, the drift block is projected out (per turn for ``"per-turn"``, a banded
Cholesky solve for the spline), and the HAC "meat" is formed from moving sums of the scores
(see :class:`BartlettMeat`).

Partial turns are left out by default (``complete_only=True``) and counted
(``ScanFit.excluded_rows``, a note in the summary); rows dropped when reading the log are
counted separately (``ScanFit.scan_dropped_rows``); ``ScanFit.dropped_rows`` is their sum.
"""

from __future__ import annotations

import math
import re
import warnings
from typing import Any

import numpy as np

from ..core.errors import FitWarning
from .design import check_harmonics, check_knot_spacing, check_separable, harmonic_names, parse_drift
from .estimate import RICE_SNR
from .joint import fit_joint
from .scanfit import ScanFit
from .turn_errors import check_dependence_mode, fit_turn_scatter, joint_dependence

#: Warn when the covariance rests on fewer independent turns (or blocks) than this.
FEW_TURNS = 10
#: Warn when a harmonic column's variance inflation factor exceeds this (common practice: VIF > 10).
VIF_WARN = 10.0
#: Warn when the condition number of the equilibrated normal matrix exceeds this: the
#: coefficients then keep fewer than ~8 significant digits.
COND_WARN = 1e8
#: A harmonic whose amplitude is below this many σ gets the Rice-bias note.
ERRORS = ("turns", "blocks", "hac", "ols")


def parse_errors(errors: str = "turns", *, hac_lags=None, block_turns=None):
    """``"turns"``, ``"blocks"``/``"blocks:B"``, ``"hac"``/``"hac:L"`` or ``"ols"`` →
    ``(kind, hac_lags, block_turns)``."""
    m = re.match(r"^\s*(turns|blocks|hac|ols)\s*(?::\s*(\d+))?\s*$", str(errors).lower())
    if m is None:
        raise ValueError(f"errors must be one of 'turns', 'blocks[:B]', 'hac[:L]', 'ols', not {errors!r}")
    kind, arg = m.group(1), m.group(2)
    if arg is not None:
        if kind == "blocks":
            block_turns = int(arg)
        elif kind == "hac":
            hac_lags = int(arg)
        else:
            raise ValueError(f"errors={errors!r}: only 'blocks:B' and 'hac:L' take a number")
    if kind == "blocks":
        if block_turns is None:
            raise ValueError("errors='blocks' needs block_turns (turns per block), e.g. errors='blocks:5'")
        if int(block_turns) < 1:
            raise ValueError(f"block_turns must be >= 1, not {block_turns}")
        block_turns = int(block_turns)
    if hac_lags is not None:
        if int(hac_lags) != hac_lags or int(hac_lags) < 0:
            raise ValueError(f"hac_lags must be a non-negative integer, not {hac_lags!r}")
        hac_lags = int(hac_lags)
    return kind, hac_lags, block_turns


def check_errors_drift(kind: str, spec) -> None:
    """Turn and block errors come from per-turn demodulation: they need a per-turn drift."""
    if kind in ("turns", "blocks") and spec.kind != "per-turn":
        raise ValueError(f"errors={kind!r} estimates the covariance from per-turn demodulation, which removes "
                         f"drift turn by turn: use drift='per-turn', or errors='hac' with drift={spec.label!r}")


def fit_scan(scan, *, harmonics=(1, 2), drift="per-turn", errors="turns", degree: int = 3,
             knot_turns: float = 2.0, aux=None, hac_lags: int | None = None, block_turns: int | None = None,
             complete_only: bool = True, dependence: str = "widen") -> ScanFit:
    """Fit drift + harmonics to a scan and estimate their covariance.

    Parameters
    ----------
    scan : Scan
    harmonics : tuple of int
        Harmonic orders in table angle (default 1θ and 2θ).
    drift : str
        ``"per-turn"`` (default), ``"poly"``/``"poly:d"``, ``"spline"``/``"spline:h"`` or
        ``"none"`` (see the module docstring).
    errors : str
        ``"turns"`` (default), ``"blocks"``/``"blocks:B"``, ``"hac"``/``"hac:L"``, ``"ols"``.
    degree : int
        Legendre degree for ``drift="poly"``.
    knot_turns : float
        Knot spacing in turns for ``drift="spline"`` (warns below ``1/k_min`` turn).
    aux : str or sequence of str, optional
        Auxiliary columns of ``scan.aux`` (tilt, temperature …) fitted as nuisance terms with a
        single coefficient each over the scan.
    hac_lags : int, optional
        Bartlett lag for ``errors="hac"`` (default: Newey–West rule, see module docstring).
    block_turns : int, optional
        Turns per block for ``errors="blocks"``.
    dependence : {"widen", "warn"}
        What ``errors="turns"`` does when the per-turn coefficients are dependent from turn to
        turn: widen to blocks (default) or keep the turn scatter, warn, and mark the results as
        not calibrated.
    complete_only : bool
        Leave partial turns out (counted, never silently).  With ``False`` they enter the fit;
        with turn/block errors each partial turn then weighs as much as a complete one in the
        mean, so prefer the default.

    Returns
    -------
    ScanFit

    Raises
    ------
    AnalysisError
        When the angle coverage cannot separate the requested harmonics, no usable turn is
        left, or turn/block errors have fewer than 3 turns (blocks) to scatter.
    ValueError
        For unknown options, or turn/block errors combined with a non-per-turn drift.
    """
    ks = check_harmonics(harmonics)
    spec = parse_drift(drift, degree=degree, knot_turns=knot_turns)
    kind, hac_lags, block_turns = parse_errors(errors, hac_lags=hac_lags, block_turns=block_turns)
    check_dependence_mode(dependence)
    if isinstance(aux, str):
        aux = (aux,)
    aux = tuple(aux or ())
    check_errors_drift(kind, spec)
    check_separable(scan.angle, ks, marks=scan.marks, source=scan.source)
    if spec.kind == "spline":
        check_knot_spacing(spec.knot_turns, ks, stacklevel=3)
    if kind in ("turns", "blocks"):
        res = fit_turn_scatter(scan, ks, spec, aux, complete_only, block_turns if kind == "blocks" else None,
                               dependence)
    else:
        res = fit_joint(scan, ks, spec, aux, complete_only, kind, hac_lags)
        res["dependence"] = joint_dependence(scan, ks, complete_only)
    res["complete_only"] = bool(complete_only)
    res["hac_lags_given"] = hac_lags is not None
    return finish_fit(scan, ks, spec, kind, res)


# ---------------------------------------------------------------------------- assembling the result
def finish_fit(scan, ks, spec, kind, res) -> ScanFit:
    """The `ScanFit` from an estimator's results ``res`` (shared by the in-memory fit and the
    streamed fit): notes, settings, descriptions.  ``res['eng']`` is the engine (or any object with
    its bookkeeping: ``excluded``, ``excluded_text()``, ``seg.n``, ``n_rows``, ``excluded_rows``,
    ``excluded_turns``, ``aux_names``, ``n_aux``); ``scan`` gives ``dropped``, ``unit``, ``source``."""
    eng = res["eng"]
    notes: list[str] = []
    excluded = {why: {"turns": t, "rows": r} for why, (t, r) in eng.excluded.items()}
    if eng.excluded:
        notes.append(f"left out: {eng.excluded_text()} — not used in the fit")
    for why, c in scan.dropped:
        notes.append(f"{c} row(s) dropped while reading the log: {why}")
    lags = res.get("hac_lags")
    settings: dict[str, Any] = {"drift": spec.label, "drift_description": spec.description,
                                "errors": kind, "complete_only": res["complete_only"], "aux": list(eng.aux_names)}
    dep = res.get("dependence")
    if kind == "turns" and res["block_turns"] > 1:
        nb, B, N = res["n_blocks"], res["block_turns"], eng.seg.n
        desc = (f"scatter of {N} per-turn coefficients taken over {nb} blocks of ≈{B} turns because the turns "
                f"are dependent (estimate = unweighted mean of the turns; {nb - 1} dof; Student-t / Hotelling T²)")
        settings["block_turns"] = B
    elif kind == "turns":
        N = eng.seg.n
        desc = (f"scatter of {N} per-turn coefficients (estimate = unweighted mean of the turns; "
                f"covariance = sample covariance / N on {N - 1} dof; Student-t / Hotelling T²)")
    elif kind == "blocks":
        nb, B = res["n_blocks"], res["block_turns"]
        desc = (f"scatter of {nb} blocks of {B} turns (estimate = unweighted mean of the turns; "
                f"{nb - 1} dof; Student-t / Hotelling T²)")
        settings["block_turns"] = B
    elif kind == "hac":
        rule = "given" if res["hac_lags_given"] else "Newey–West rule floor(4 (n/100)^(2/9))"
        desc = f"HAC, Bartlett kernel, {lags} lags ({rule}), small-sample factor n/(n−p)"
        settings.update(hac_lags=lags, hac_kernel="bartlett", hac_lag_rule=rule, small_sample_correction="n/(n-p)")
        notes.append("point estimate: joint least squares over all fitted turns")
    else:
        desc = "OLS, white noise: σ² = RSS/(n − p) — under-covers with correlated noise or leftover drift"
        notes.append("point estimate: joint least squares over all fitted turns")
    settings["errors_description"] = desc
    if res.get("n_params") is not None:
        settings["n_params"] = res["n_params"]
    if dep is not None:
        settings["dependence"] = "widen" if kind == "turns" and dep.action != "warned" else dep.action
        _dependence_notes(dep, kind, notes)
    if res.get("chi2") is not None:
        settings["chi2_reference"] = (
            "per-turn coefficients about their weighted mean, weighted by the pooled within-turn white-noise "
            f"covariance (σ̃² = Σ RSS/(ν − 2), ν = {res['chi2_resid_dof']}): mean 1 when within-turn white noise "
            "explains the turn-to-turn scatter; p-value from F(dof, ν)")
    if kind in ("turns", "blocks"):
        nu = res["cov_dof"]
        units = "turns" if kind == "turns" and res["block_turns"] == 1 else "blocks"
        notes.append(f"covariance estimated from {nu + 1} {units}: only {nu} degrees of freedom; intervals and "
                     "tests use Student-t (one coefficient) and Hotelling's T² (cos and sin jointly)")
        if nu + 1 < FEW_TURNS:
            msg = (f"only {nu + 1} {units} behind the covariance ({nu} dof): the σ are themselves uncertain "
                   f"by ~{100 / math.sqrt(2 * max(nu, 1)):.0f}%")
            notes.append(msg)
            warnings.warn(msg, FitWarning, stacklevel=3)
        if eng.n_aux:
            notes.append("aux coefficients are global; their estimation error is propagated into the turn scatter "
                         "(influence per turn)")
    vif = res.get("vif")
    if vif:
        bad = {k: v for k, v in vif.items() if k in harmonic_names(ks) and v > VIF_WARN}
        if bad:
            msg = ("the drift model or aux terms absorb most of " + ", ".join(f"{k} (VIF {v:.3g})" for k, v in bad.items())
                   + ": their σ are inflated by √VIF; choose a smoother drift model")
            notes.append(msg)
            warnings.warn(msg, FitWarning, stacklevel=3)
    cond = res.get("cond")
    if cond is not None and cond > COND_WARN:
        msg = (f"ill-conditioned design (condition number {cond:.3g} of the equilibrated normal matrix): "
               "coefficients keep fewer than ~8 significant digits")
        notes.append(msg)
        warnings.warn(msg, FitWarning, stacklevel=3)
    for k in ks:
        j = ks.index(k)
        c, s = res["coef"][2 * j], res["coef"][2 * j + 1]
        cv = res["cov"][2 * j:2 * j + 2, 2 * j:2 * j + 2]
        snr = math.hypot(c, s) / math.sqrt(max(0.5 * np.trace(cv), 1e-300))
        if snr < RICE_SNR:
            notes.append(f"A{k} is within {RICE_SNR:g} σ of zero: amplitude ± σ is biased upward (Rice); "
                         "use nullfit.upper_limit for a limit")
    n_used = eng.n_rows
    coef = np.array(res["coef"], dtype=float)
    cov = np.array(res["cov"], dtype=float)
    for a in (coef, cov):
        a.setflags(write=False)
    resid = res["residuals"]
    if resid is not None:
        resid.setflags(write=False)
    return ScanFit(
        harmonics=ks, coef=coef, cov=cov, dof=res["cov_dof"], n_samples=n_used, n_turns=eng.seg.n,
        dropped_rows=scan.dropped_rows + eng.excluded_rows, scan_dropped_rows=scan.dropped_rows,
        excluded_rows=eng.excluded_rows, excluded_turns=eng.excluded_turns, drift=spec.label, errors=kind,
        settings=settings, residual_rms=float(math.sqrt(res["rss"] / n_used)), chi2=res["chi2"],
        chi2_dof_n=res["chi2_n"], residuals=resid, per_turn=res["per_turn"], aux_names=eng.aux_names,
        aux_coef=res["aux_coef"], aux_cov=res["aux_cov"], variance_inflation=vif, condition_number=res.get("cond"),
        hac_lags=lags, block_turns=res.get("block_turns") if kind in ("turns", "blocks") else None,
        dependence=dep, chi2_p=res.get("chi2_p"),
        unit=scan.unit, source=scan.source, excluded=excluded, notes=tuple(notes))


def _dependence_notes(dep, kind, notes: list) -> None:
    """Notes and warnings about the turn-to-turn dependence check (see :mod:`.dependence`)."""
    notes.append(dep.statement())
    if not dep.positive:
        return
    if dep.action == "widened":
        msg = (f"turn-to-turn dependence detected (Ljung–Box p = {dep.p_value:.2g}, τ̂ = {dep.tau_max:.3g} turns): "
               f"errors widened to {dep.n_blocks} blocks of ≈{dep.block_turns} turns ({dep.n_blocks - 1} dof)")
    elif dep.action == "warned":
        msg = (f"TURN-TO-TURN DEPENDENCE DETECTED (Ljung–Box p = {dep.p_value:.2g}, τ̂ = {dep.tau_max:.3g} turns) "
               "and the turn scatter kept (dependence='warn'): σ is too small by about "
               f"√τ̂ ≈ {max(dep.tau_max, 1.0) ** 0.5:.2g}; use the default dependence='widen'")
    elif dep.action == "given" and dep.block_turns < dep.suggested_block_turns:
        msg = (f"turn-to-turn dependence detected (τ̂ = {dep.tau_max:.3g} turns): blocks of {dep.block_turns} turns "
               f"may be too short (the check suggests {dep.suggested_block_turns})")
    elif kind in ("hac", "ols"):
        msg = (f"per-turn coefficients are dependent from turn to turn (Ljung–Box p = {dep.p_value:.2g}, "
               f"τ̂ = {dep.tau_max:.3g} turns): errors={kind!r} does not cover that; use errors='turns'")
    else:
        msg = None
    if msg:
        warnings.warn(msg, FitWarning, stacklevel=4)
    if dep.caveat:
        notes.append(dep.caveat)
