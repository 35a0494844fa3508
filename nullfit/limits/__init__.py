"""Upper limits (and intervals) on a harmonic amplitude ``A = hypot(c, s)``, by four routes.

The observed amplitude of a 2-D Gaussian estimate is never negative and is biased upward near
zero (Rice law for an isotropic covariance); "Â ± σ" is the wrong statement there.  This
package gives the statements that are right, so that they can be compared side by side:

``"feldman-cousins"`` (:mod:`.unified`)
    unified, likelihood-ratio ordered Neyman construction; ``[lower, upper]``, switching from
    an upper limit to a two-sided interval by itself; exact coverage (projection over the
    unknown phase for an anisotropic covariance).
``"neyman"`` (:mod:`.neyman`)
    classical one-sided limit ``P(Â ≤ Â_obs | A_up) = 1 − CL``; may be empty (reported).
``"bayes"`` (:mod:`.bayes`)
    credible upper limit, prior ``"plane"`` (uniform in c, s) or ``"amplitude"`` (uniform in A);
    the posterior is kept for plotting (``limit.posterior``).
``"bootstrap"`` (:mod:`.bootstrap`)
    block bootstrap of the per-turn coefficients, percentile upper limit (biased upward,
    stated).

All limits are on the *amplitude*; :attr:`Limit.upper_peak_to_peak` gives ``2·upper``.
Entry points: :func:`amplitude_limit` (an estimate from anywhere), :func:`upper_limit` (a scan
fit), :func:`limits_table` / :func:`limits_table_for_fit` (every method, one row each) and
:func:`detection_significance` (p-value under ``A = 0``).
"""

from __future__ import annotations

import math

import numpy as np

from ..conventions import check_confidence_level, make_rng
from .bayes import PRIORS
from .bootstrap import SCHEMES
from .covariance import check_dof, covariance_shape
from .result import Limit, Posterior
from .significance import Significance, detection_significance
from .unified import unified_gaussian_interval

METHODS = ("feldman-cousins", "neyman", "bayes", "bootstrap")
_ALIASES = {"fc": "feldman-cousins", "unified": "feldman-cousins", "feldman_cousins": "feldman-cousins"}
_OPTIONS = {
    "feldman-cousins": set(),
    "neyman": set(),
    "bayes": {"prior", "posterior_points"},
    "bootstrap": {"scheme", "block_length", "replicates", "progress", "interval"},
}
_COMMON = {"harmonic", "unit"}


def _method(method: str) -> str:
    m = _ALIASES.get(str(method).lower(), str(method).lower())
    if m not in METHODS:
        raise ValueError(f"method must be one of {', '.join(METHODS)}, not {method!r}")
    return m


def amplitude_limit(c, s, cov, *, method: str = "feldman-cousins", confidence_level: float = 0.95, rng=None,
                    dof=None, turns=None, **options) -> Limit:
    """Limit on the amplitude of an estimate ``(c, s)`` with covariance ``cov``.

    Parameters
    ----------
    c, s : float
        Cosine and sine coefficients of the harmonic (amplitude ``hypot(c, s)``).
    cov : array_like, shape (2, 2)
        Covariance of ``(c, s)``.
    method : {"feldman-cousins", "neyman", "bayes", "bootstrap"}
    confidence_level : float
        E.g. 0.95 (never alpha).
    rng : int, numpy.random.Generator or None
        Randomness for the bootstrap; the seed is recorded in the result.
    dof : int, optional
        Degrees of freedom of ``cov`` when it was estimated from the scatter of ``N`` per-turn
        coefficients (``dof = N − 1``); the frequentist methods and the Bayesian kernel then
        account for the estimated covariance (Hotelling), see the method modules.
    turns : array_like, shape (N, 2), optional
        Per-turn ``(c, s)`` estimates; required by ``"bootstrap"``.
    **options
        ``harmonic`` (int, for labels), ``unit`` (str); bayes: ``prior`` ("plane" or
        "amplitude"), ``posterior_points``; bootstrap: ``scheme`` ("moving", "circular",
        "stationary"), ``block_length`` (default: Politis–White), ``replicates`` (10000),
        ``progress`` (tqdm bar; default when long), ``interval`` ("percentile" only).

    Returns
    -------
    Limit
    """
    m = _method(method)
    cl = check_confidence_level(confidence_level)
    c, s = float(c), float(s)
    if not (math.isfinite(c) and math.isfinite(s)):
        raise ValueError("c and s must be finite numbers")
    shape = covariance_shape(cov)
    dof = check_dof(dof)
    unknown = set(options) - _OPTIONS[m] - _COMMON
    if unknown:
        raise TypeError(f"method {m!r} does not take option(s): {', '.join(sorted(unknown))}")
    harmonic = options.pop("harmonic", None)
    unit = options.pop("unit", "")
    amp = math.hypot(c, s)
    base = dict(method=m, confidence_level=cl, amplitude=amp, c=c, s=s, cov=shape.matrix, sigma=shape.sigma,
                harmonic=None if harmonic is None else int(harmonic), unit=str(unit), dof=dof)
    if m == "feldman-cousins":
        from .unified import feldman_cousins

        lo, up, notes = feldman_cousins(amp, shape, cl, dof)
        return Limit(lower=lo, upper=up, notes=notes, **base)
    if m == "neyman":
        from .neyman import neyman

        up, empty, notes = neyman(amp, shape, cl, dof)
        return Limit(lower=None if empty else 0.0, upper=up, empty=empty, notes=notes, **base)
    if m == "bayes":
        from .bayes import bayes

        prior = options.get("prior", "plane")
        up, post, notes = bayes(c, s, shape, cl, prior=prior, dof=dof,
                                posterior_points=int(options.get("posterior_points", 801)))
        return Limit(lower=0.0, upper=up, prior=prior, notes=notes, posterior=post, **base)
    from .bootstrap import bootstrap

    if turns is None:
        raise ValueError("the bootstrap needs the per-turn coefficients: pass turns=(N, 2) array of (c, s)")
    gen, seed = make_rng(rng)
    out = bootstrap(c, s, turns, cl, gen, **options)
    bcov = np.asarray(out["cov"], dtype=float)
    bsig = math.sqrt(0.5 * np.trace(bcov))
    notes = out["notes"] + (f"bootstrap σ = {bsig:.4g} (supplied covariance: σ = {shape.sigma:.4g})",)
    base.update(cov=tuple(tuple(float(v) for v in row) for row in bcov), sigma=bsig, dof=None)
    return Limit(lower=0.0, upper=out["upper"], block_length=out["block_length"], replicates=out["replicates"],
                 scheme=out["scheme"], seed=seed, notes=notes, **base)


def _fit_inputs(fit, harmonic: int):
    h = fit.harmonic(harmonic)
    cov = np.asarray(h.cov, dtype=float)
    turns = None
    per_turn = getattr(fit, "per_turn", None)
    if per_turn is not None:
        cols = [f"c{harmonic}", f"s{harmonic}"]
        if all(col in per_turn.columns for col in cols):
            turns = per_turn[cols].to_numpy(dtype=float)
    return float(h.cos), float(h.sin), cov, getattr(fit, "cov_dof", None), turns


def upper_limit(fit, *, harmonic: int = 2, method: str = "feldman-cousins", confidence_level: float = 0.95,
                rng=None, **options) -> Limit:
    """Limit on harmonic ``harmonic`` of a scan fit (uses ``fit.harmonic(k)``, ``fit.per_turn``,
    ``fit.cov_dof``).  ``dof`` in ``options`` overrides ``fit.cov_dof``; other options as in
    :func:`amplitude_limit`."""
    c, s, cov, dof, turns = _fit_inputs(fit, harmonic)
    dof = options.pop("dof", dof)
    if _method(method) == "bootstrap" and turns is None:
        raise ValueError(f"the bootstrap needs per-turn coefficients, but fit.per_turn is None "
                         f"or has no c{harmonic}/s{harmonic} columns")
    options.setdefault("harmonic", harmonic)
    return amplitude_limit(c, s, cov, method=method, confidence_level=confidence_level, rng=rng, dof=dof,
                           turns=turns, **options)


def _row(lim: Limit) -> dict:
    return {
        "method": lim.method,
        "confidence_level": lim.confidence_level,
        "lower": np.nan if lim.lower is None else lim.lower,
        "upper": np.nan if lim.upper is None else lim.upper,
        "upper_peak_to_peak": np.nan if lim.upper is None else lim.upper_peak_to_peak,
        "empty": lim.empty,
        "amplitude": lim.amplitude,
        "sigma": lim.sigma,
        "prior": lim.prior,
        "scheme": lim.scheme,
        "block_length": lim.block_length,
        "replicates": lim.replicates,
        "seed": lim.seed,
        "dof": lim.dof,
        "notes": " | ".join(lim.notes),
    }


def limits_table(c, s, cov, *, methods=None, confidence_level: float = 0.95, rng=None, dof=None, turns=None,
                 options=None, harmonic=None, unit: str = ""):
    """Every method at once: a DataFrame with one row per method (amplitude limits).

    ``methods=None`` means all four when ``turns`` is given, else the three that need no
    per-turn series.  ``options`` maps a method name to its options, e.g.
    ``{"bayes": {"prior": "amplitude"}, "bootstrap": {"scheme": "stationary"}}``.  The
    :class:`Limit` objects are in ``table.attrs["limits"]`` (keyed by method).
    """
    import pandas as pd

    if methods is None:
        methods = METHODS if turns is not None else METHODS[:3]
    methods = [_method(m) for m in methods]
    options = {_method(k): dict(v) for k, v in (options or {}).items()}
    gen_or_seed = rng
    if rng is None or isinstance(rng, (int, np.integer)):
        _, seed = make_rng(rng)
        gen_or_seed = seed
    limits = {}
    for m in methods:
        opts = dict(options.get(m, {}))
        if harmonic is not None:
            opts.setdefault("harmonic", harmonic)
        opts.setdefault("unit", unit)
        limits[m] = amplitude_limit(c, s, cov, method=m, confidence_level=confidence_level, rng=gen_or_seed,
                                    dof=dof, turns=turns if m == "bootstrap" else None, **opts)
    table = pd.DataFrame([_row(lim) for lim in limits.values()])
    table = table.astype({"block_length": "Int64", "replicates": "Int64", "seed": "Int64", "dof": "Int64"})
    table.attrs["limits"] = limits
    return table


def limits_table_for_fit(fit, *, harmonic: int = 2, methods=None, confidence_level: float = 0.95, rng=None,
                         options=None, unit: str = ""):
    """:func:`limits_table` for a scan fit (bootstrap included when ``fit.per_turn`` exists)."""
    c, s, cov, dof, turns = _fit_inputs(fit, harmonic)
    return limits_table(c, s, cov, methods=methods, confidence_level=confidence_level, rng=rng, dof=dof,
                        turns=turns, options=options, harmonic=harmonic, unit=unit)


def significance_for_fit(fit, *, harmonic: int = 2, rng=None, **options) -> Significance:
    """:func:`detection_significance` for harmonic ``harmonic`` of a scan fit (uses ``fit.cov_dof``)."""
    c, s, cov, dof, _ = _fit_inputs(fit, harmonic)
    options.setdefault("dof", dof)
    options.setdefault("harmonic", harmonic)
    return detection_significance(c, s, cov, rng=rng, **options)


__all__ = [
    "METHODS",
    "PRIORS",
    "SCHEMES",
    "Limit",
    "Posterior",
    "Significance",
    "amplitude_limit",
    "upper_limit",
    "limits_table",
    "limits_table_for_fit",
    "detection_significance",
    "significance_for_fit",
    "unified_gaussian_interval",
]
