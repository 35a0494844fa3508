"""Upper limits (and intervals) on a harmonic amplitude ``A = hypot(c, s)``, by four routes.

The observed amplitude of a 2-D Gaussian estimate is never negative and is biased upward near
zero (Rice law for an isotropic covariance); "Â ± σ" is the wrong statement there.  This
package gives the statements that are right, so that they can be compared side by side:

``"feldman-cousins"`` (:mod:`.unified`)
    unified, likelihood-ratio ordered Neyman construction; ``[lower, upper]``, switching from
    an upper limit to a two-sided interval by itself; exact coverage (projection over the
    unknown phase for an anisotropic covariance); with a covariance estimated from turns, the
    estimated shape scaled by the Hotelling factor; undefined (refused) at CL ≤ 1 − 1/e.
``"neyman"`` (:mod:`.neyman`)
    classical one-sided limit ``P(Â ≤ Â_obs | A_up) = 1 − CL``; may be empty (reported).
``"bayes"`` (:mod:`.bayes`)
    credible upper limit, prior ``"plane"`` (uniform in c, s) or ``"amplitude"`` (uniform in A);
    the posterior is kept for plotting (``limit.posterior``).
``"bootstrap"`` (:mod:`.bootstrap`)
    block bootstrap of the per-turn coefficients, percentile upper limit (biased upward,
    stated); block length follows the turn-to-turn dependence, at most 2000 blocks.

Every limit reports the σ it worked in (``Limit.sigma``, named by ``Limit.sigma_label``) and
repeats the estimate's caveats (e.g. too few independent blocks to calibrate, a coupling
correction) in its notes.  ``docs/limits.md`` has the measured coverages.

All limits are on the *amplitude*; :attr:`Limit.upper_peak_to_peak` gives ``2·upper``.
Every method sits in one registry (:mod:`.registry`): a name → one function signature
``(estimate, confidence_level, *, rng, **options) → Limit``.  Entry points:
:func:`amplitude_limit` (a harmonic estimate — ``fit.harmonic(2)`` — or a bare ``(c, s, cov)``),
:func:`upper_limit` (a scan fit), :func:`limits_table` (every method, one row each),
:func:`scalar_limit` (one Gaussian parameter such as a sky-template scale κ) and
:func:`detection_significance` (p-value under ``A = 0``).
"""

from __future__ import annotations

import numpy as np

from ..core.conventions import check_confidence_level, make_rng
from .bayes import PRIORS
from .bootstrap import SCHEMES
from .inputs import KEEP, as_estimate
from .registry import AMPLITUDE_METHODS, METHODS, get, method_name
from .result import Limit, Posterior
from .scalar import ScalarEstimate
from .significance import Significance, detection_significance
from .unified import unified_gaussian_interval


def amplitude_limit(c, s=None, cov=None, *, method: str = "feldman-cousins", confidence_level: float = 0.95,
                    rng=None, dof=KEEP, turns=None, harmonic=None, unit=None, **options) -> Limit:
    """Limit on the amplitude of a harmonic estimate.

    Parameters
    ----------
    c : HarmonicEstimate or float
        A harmonic estimate (``fit.harmonic(2)``: coefficients, covariance, dof, per-turn
        series and unit travel with it), or the cosine coefficient of a bare ``(c, s, cov)``.
    s, cov : float and array_like (2, 2), optional
        Sine coefficient and covariance of ``(c, s)`` when ``c`` is a number.
    method : {"feldman-cousins", "neyman", "bayes", "bootstrap"}
    confidence_level : float
        E.g. 0.95 (never alpha).
    rng : int, numpy.random.Generator or None
        Randomness for the bootstrap; the seed is recorded in the result.
    dof : int or None, optional
        Degrees of freedom of ``cov`` when it was estimated from the scatter of ``N`` per-turn
        coefficients (``dof = N − 1``); the frequentist methods and the Bayesian kernel then
        account for the estimated covariance (Hotelling), see the method modules.  Default: the
        estimate's own; ``dof=None`` treats the covariance as exact.
    turns : array_like, shape (N, 2), optional
        Per-turn ``(c, s)`` estimates; required by ``"bootstrap"``.
    harmonic, unit : optional
        Labels (harmonic order ``k``; signal unit).
    **options
        bayes: ``prior`` ("plane" or "amplitude"), ``posterior_points``; bootstrap: ``scheme``
        ("moving", "circular", "stationary"), ``block_length`` (default: Politis–White),
        ``replicates`` (10000), ``progress`` (tqdm bar; default when long), ``interval``
        ("percentile" only).

    Returns
    -------
    Limit
    """
    m = get(method)
    cl = check_confidence_level(confidence_level)
    est = as_estimate(c, s, cov, dof=dof, turns=turns, harmonic=harmonic, unit=unit)
    return m(est, cl, rng=rng, **options)


def upper_limit(fit, *, harmonic: int = 2, method: str = "feldman-cousins", confidence_level: float = 0.95,
                rng=None, **options) -> Limit:
    """Limit on harmonic ``harmonic`` of a scan fit: :func:`amplitude_limit` of ``fit.harmonic(k)``
    (its covariance, dof, per-turn series and unit); ``dof=`` in ``options`` overrides the fit's."""
    return amplitude_limit(fit.harmonic(harmonic), method=method, confidence_level=confidence_level, rng=rng,
                           **options)


def scalar_limit(value, sigma=None, *, method: str = "feldman-cousins", confidence_level: float = 0.95,
                 quantity: str = "κ", unit: str = "", nonnegative: bool = True) -> Limit:
    """Limit on one Gaussian parameter ``value ± sigma`` (or a :class:`ScalarEstimate`): unified,
    Neyman and Bayes with a boundary at zero when ``nonnegative``; ``"central"`` for signed ones."""
    est = value if isinstance(value, ScalarEstimate) else ScalarEstimate(value, sigma, quantity, unit, nonnegative)
    return get(method)(est, check_confidence_level(confidence_level))


def _row(lim: Limit) -> dict:
    return {
        "method": lim.method,
        "confidence_level": lim.confidence_level,
        "lower": np.nan if lim.lower is None else lim.lower,
        "upper": np.nan if lim.upper is None else lim.upper,
        "upper_peak_to_peak": np.nan if lim.upper_peak_to_peak is None else lim.upper_peak_to_peak,
        "unit": lim.unit,
        "empty": lim.empty,
        "estimate": lim.estimate,
        "sigma": lim.sigma,
        "prior": lim.prior,
        "scheme": lim.scheme,
        "block_length": lim.block_length,
        "replicates": lim.replicates,
        "seed": lim.seed,
        "dof": lim.dof,
        "notes": " | ".join(lim.notes),
    }


def limits_table(c, s=None, cov=None, *, methods=None, confidence_level: float = 0.95, rng=None, dof=KEEP,
                 turns=None, options=None, harmonic=None, unit=None):
    """Every method at once: a DataFrame with one row per method (amplitude limits).

    ``c`` is a harmonic estimate or the cosine coefficient of ``(c, s, cov)``.  ``methods=None``
    means all four when the per-turn series is known, else the three that need none.  ``options``
    maps a method name to its options, e.g. ``{"bayes": {"prior": "amplitude"}}``.  The
    :class:`Limit` objects are in ``table.attrs["limits"]`` (keyed by method).
    """
    import pandas as pd

    est = as_estimate(c, s, cov, dof=dof, turns=turns, harmonic=harmonic, unit=unit)
    if methods is None:
        methods = AMPLITUDE_METHODS if est.turns is not None else AMPLITUDE_METHODS[:3]
    methods = [method_name(m) for m in methods]
    options = {method_name(k): dict(v) for k, v in (options or {}).items()}
    gen_or_seed = rng
    if rng is None or isinstance(rng, (int, np.integer)):
        _, seed = make_rng(rng)
        gen_or_seed = seed
    cl = check_confidence_level(confidence_level)
    limits = {m: get(m)(est, cl, rng=gen_or_seed, **options.get(m, {})) for m in methods}
    table = pd.DataFrame([_row(lim) for lim in limits.values()])
    table = table.astype({"block_length": "Int64", "replicates": "Int64", "seed": "Int64", "dof": "Int64"})
    table.attrs["limits"] = limits
    return table


__all__ = [
    "METHODS",
    "AMPLITUDE_METHODS",
    "PRIORS",
    "SCHEMES",
    "Limit",
    "Posterior",
    "ScalarEstimate",
    "Significance",
    "amplitude_limit",
    "upper_limit",
    "scalar_limit",
    "limits_table",
    "detection_significance",
    "method_name",
    "unified_gaussian_interval",
]
