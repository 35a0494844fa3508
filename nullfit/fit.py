"""The scan fit: drift + harmonics (+ auxiliary nuisance terms) with a choice of honest errors.

Model (``shared/DESIGN.md``)::

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
        ``N − 1`` degrees of freedom (``ScanFit.cov_dof``): intervals then use Student-t
        (one coefficient) and Hotelling's T² (cos and sin jointly), and the fit warns below
        10 turns.  Requires per-turn drift.
    ``"blocks"`` (``block_turns=B``)
        As ``"turns"``, but the scatter is that of the means of consecutive blocks of ``B``
        turns (``cov_dof`` = number of blocks − 1): use it when the noise is correlated over
        more than a turn.
    ``"hac"``
        Joint least-squares fit with a Newey–West covariance: Bartlett kernel, lag ``L`` chosen
        by the Newey–West (1994) rule of thumb ``L = floor(4 (n/100)^(2/9))`` unless
        ``hac_lags`` is given, and the small-sample factor ``n/(n − p)`` (``p`` counts every
        fitted parameter, including the per-turn drift terms).  This is the definition of
        statsmodels' ``OLS(...).fit(cov_type="HAC", cov_kwds={"maxlags": L,
        "use_correction": True})``; ``tests/test_fit_hac.py`` checks it to 1e-8.
    ``"ols"``
        Joint fit, white-noise covariance ``σ̂² (XᵀX)⁻¹`` with ``σ̂² = RSS/(n − p)``.  It
        *under-covers* whenever the noise is correlated or drift is left over — shown by
        ``tests/test_fit_calibration.py``; use it only as a reference.

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
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from .conventions import amplitude_phase, check_confidence_level, peak_to_peak
from .design import (FitWarning, check_harmonics, check_knot_spacing, check_separable, harmonic_names,
                     parse_drift, spline_design_sparse, spline_intervals, spline_knots,
                     typical_turn_period)
from .scan import ScanError, where
from .summary import Described, Summary, fmt
from .turns import TurnEngine, stacked_inverse

#: Warn when the covariance rests on fewer independent turns (or blocks) than this.
FEW_TURNS = 10
#: Warn when a harmonic column's variance inflation factor exceeds this (common practice: VIF > 10).
VIF_WARN = 10.0
#: Warn when the condition number of the equilibrated normal matrix exceeds this: the
#: coefficients then keep fewer than ~8 significant digits.
COND_WARN = 1e8
#: A harmonic whose amplitude is below this many σ gets the Rice-bias note.
RICE_SNR = 3.0

ERRORS = ("turns", "blocks", "hac", "ols")


# ============================================================================ helpers
def newey_west_lags(n: int) -> int:
    """Newey–West (1994) rule of thumb for the Bartlett kernel: ``floor(4 (n/100)^(2/9))``
    (statsmodels uses the same default)."""
    return int(math.floor(4.0 * (n / 100.0) ** (2.0 / 9.0)))


class BartlettMeat:
    """Streaming Newey–West "meat" ``S = Σ_{|j|≤L} (1 − |j|/(L+1)) Γ_j`` of a score series.

    ``Γ_j = Σ_t u_t u_{t−j}ᵀ`` (sums, not means, as in statsmodels).  Instead of L+1 lagged
    products it uses the identity ::

        Σ_{|j|≤L} (L+1−|j|) Γ_j = Σ_e v_e v_eᵀ,     v_e = Σ_{s=e−L}^{e} u_s,

    over all windows of length L+1 that overlap the series (u = 0 outside it): a pair
    ``(s, s')`` with ``|s − s'| ≤ L`` lies in exactly ``L + 1 − |s − s'|`` such windows.
    The moving sums come from a cumulative sum per chunk (cost O(n p + n p²), independent of L).
    Feed the scores in time order with :meth:`add`, then call :meth:`finish`.
    """

    def __init__(self, p: int, lags: int):
        self.L = int(lags)
        self.p = int(p)
        self.S = np.zeros((p, p))
        self.tail = np.zeros((p, self.L))

    def add(self, U: np.ndarray, *, rows_first: bool = True) -> None:
        """Add scores ``U`` of shape ``(m, p)`` (or ``(p, m)`` with ``rows_first=False``)."""
        U = np.asarray(U, dtype=float)
        if rows_first:
            U = U.T
        if self.L == 0:
            self.S += U @ U.T
            return
        m = U.shape[1]
        ext = np.concatenate([self.tail, U], axis=1)
        C = np.empty((self.p, ext.shape[1] + 1))
        C[:, 0] = 0.0
        np.cumsum(ext, axis=1, out=C[:, 1:])
        W = C[:, self.L + 1:] - C[:, :m]
        self.S += W @ W.T
        self.tail = ext[:, -self.L:].copy()

    def finish(self) -> np.ndarray:
        if self.L:
            self.add(np.zeros((self.p, self.L)), rows_first=False)
            self.tail = np.zeros((self.p, self.L))
        return self.S / (self.L + 1)


def _solve_spd(A: np.ndarray, B: np.ndarray):
    """Solve ``A X = B`` for a symmetric positive (semi)definite ``A`` after equilibration;
    returns ``(X, A⁻¹, condition number of the equilibrated A)``."""
    d = np.sqrt(np.diag(A))
    if not (d > 0).all():
        raise np.linalg.LinAlgError("a column of the design is identically zero")
    As = A / d[:, None] / d[None, :]
    ev = np.linalg.eigvalsh(As)
    cond = float(ev[-1] / ev[0]) if ev[0] > 0 else math.inf
    Ainv = np.linalg.inv(As) / d[:, None] / d[None, :]
    Ainv = 0.5 * (Ainv + Ainv.T)
    return Ainv @ B, Ainv, cond


def _minus_combination(y: np.ndarray, coef: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """``y − Σ_j coef_j rows_j`` (a new array)."""
    out = y.copy()
    for c, r in zip(coef, rows):
        out -= c * r
    return out


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


# ============================================================================ results
@dataclass(frozen=True, eq=False)
class HarmonicEstimate(Described):
    """The ``cos kθ`` and ``sin kθ`` coefficients of one harmonic with their 2×2 covariance.

    ``amplitude`` and ``phase_deg`` follow ``nullfit.conventions.amplitude_phase``: the term is
    ``A cos(k(θ − φ))``, ``φ`` in ``[0, 360/k)`` degrees; ``peak_to_peak = 2·A``.  Near zero,
    ``amplitude ± sigma_amplitude`` is biased upward (Rice): use ``nullfit.upper_limit``.
    """

    k: int
    cos: float
    sin: float
    cov: np.ndarray = field(repr=False)
    cov_dof: int | None = None
    signal_unit: str = "fringe"
    method: str = ""

    @property
    def sigma_cos(self) -> float:
        return float(math.sqrt(self.cov[0, 0]))

    @property
    def sigma_sin(self) -> float:
        return float(math.sqrt(self.cov[1, 1]))

    @property
    def correlation(self) -> float:
        den = math.sqrt(self.cov[0, 0] * self.cov[1, 1])
        return float(self.cov[0, 1] / den) if den > 0 else math.nan

    @property
    def amplitude(self) -> float:
        return amplitude_phase(self.cos, self.sin, self.k)[0]

    @property
    def phase_deg(self) -> float:
        return amplitude_phase(self.cos, self.sin, self.k)[1]

    @property
    def peak_to_peak(self) -> float:
        """Peak-to-peak shift ``2·A`` (between orientations 90° apart for k = 2)."""
        return float(peak_to_peak(self.amplitude))

    @property
    def sigma_amplitude(self) -> float:
        """Delta-method σ of the amplitude (meaningful only well away from zero)."""
        a = self.amplitude
        if a == 0:
            return float(math.sqrt(0.5 * np.trace(self.cov)))
        g = np.array([self.cos, self.sin]) / a
        return float(math.sqrt(max(g @ self.cov @ g, 0.0)))

    @property
    def sigma_peak_to_peak(self) -> float:
        return 2.0 * self.sigma_amplitude

    @property
    def sigma_phase_deg(self) -> float:
        """Delta-method σ of the phase in degrees (meaningless near zero amplitude)."""
        a2 = self.cos ** 2 + self.sin ** 2
        if a2 == 0:
            return math.inf
        h = np.array([-self.sin, self.cos]) / a2
        return float(math.degrees(math.sqrt(max(h @ self.cov @ h, 0.0))) / self.k)

    @property
    def snr(self) -> float:
        """Amplitude over the mean per-coefficient σ, ``A / sqrt(tr C / 2)``."""
        s = math.sqrt(0.5 * float(np.trace(self.cov)))
        return self.amplitude / s if s > 0 else math.inf

    @property
    def t2(self) -> float:
        """Wald / Hotelling statistic ``dᵀ C⁻¹ d`` of (cos, sin) against zero."""
        d = np.array([self.cos, self.sin])
        try:
            return float(d @ np.linalg.solve(self.cov, d))
        except np.linalg.LinAlgError:
            return math.nan

    @property
    def p_value_zero(self) -> float | None:
        """p-value of "no kθ term": Hotelling's T² → F(2, ν−1) scaled by (ν−1)/(2ν) when the
        covariance has ``ν = cov_dof`` degrees of freedom, else χ² with 2 dof."""
        from scipy import stats

        if self.cov_dof is None:
            return float(stats.chi2.sf(self.t2, 2))
        nu = self.cov_dof
        if nu < 2:
            return None
        return float(stats.f.sf(self.t2 * (nu - 1) / (2 * nu), 2, nu - 1))

    @property
    def near_zero(self) -> bool:
        return self.snr < RICE_SNR

    def interval(self, which: str = "cos", confidence_level: float = 0.95) -> tuple[float, float]:
        """Two-sided interval for ``"cos"`` or ``"sin"``: Student-t with ``cov_dof`` degrees of
        freedom when the covariance was estimated from few turns, else normal."""
        from scipy import stats

        cl = check_confidence_level(confidence_level)
        if which not in ("cos", "sin"):
            raise ValueError(f"which must be 'cos' or 'sin', not {which!r}")
        v, s = (self.cos, self.sigma_cos) if which == "cos" else (self.sin, self.sigma_sin)
        q = stats.t.ppf(0.5 + cl / 2, self.cov_dof) if self.cov_dof else stats.norm.ppf(0.5 + cl / 2)
        return float(v - q * s), float(v + q * s)

    def rows(self) -> tuple:
        u = self.signal_unit
        k = self.k
        r = [
            (f"cos {k}θ coefficient c{k}", f"{fmt(self.cos)} ± {fmt(self.sigma_cos)}", u),
            (f"sin {k}θ coefficient s{k}", f"{fmt(self.sin)} ± {fmt(self.sigma_sin)}", u),
            (f"corr(c{k}, s{k})", self.correlation, ""),
            (f"amplitude A{k}", f"{fmt(self.amplitude)} ± {fmt(self.sigma_amplitude)}", u),
            (f"peak-to-peak 2·A{k}", f"{fmt(self.peak_to_peak)} ± {fmt(self.sigma_peak_to_peak)}", u),
            (f"phase φ{k} (arm 1 at maximum)", f"{fmt(self.phase_deg)} ± {fmt(self.sigma_phase_deg)}", "deg"),
            (f"p-value (no {k}θ term)", self.p_value_zero, ""),
        ]
        return tuple(r)

    def notes(self) -> tuple[str, ...]:
        if not self.near_zero:
            return ()
        return (f"A{self.k} is only {self.snr:.2g} σ from zero: the naive amplitude ± σ is biased upward "
                "(Rice distribution) and the phase is ill-defined; quote an upper limit "
                "(nullfit.upper_limit) instead.",)

    def summary(self) -> Summary:
        return Summary(f"{self.k}θ harmonic", self.rows(), self.notes())

    def to_dict(self) -> dict:
        return {"k": self.k, "cos": self.cos, "sin": self.sin, "cov": np.asarray(self.cov).tolist(),
                "sigma_cos": self.sigma_cos, "sigma_sin": self.sigma_sin,
                "amplitude": self.amplitude, "sigma_amplitude": self.sigma_amplitude,
                "peak_to_peak": self.peak_to_peak, "phase_deg": self.phase_deg,
                "sigma_phase_deg": self.sigma_phase_deg, "p_value_zero": self.p_value_zero,
                "cov_dof": self.cov_dof, "near_zero": self.near_zero, "signal_unit": self.signal_unit}


@dataclass(frozen=True, eq=False)
class ScanFit(Described):
    """Result of :func:`fit_scan` (immutable).

    ``coef``/``cov`` hold the harmonic block in the order ``c_{k1}, s_{k1}, c_{k2}, …``
    (``param_names``) in the log's signal units; :meth:`harmonic` returns one harmonic.
    ``cov_dof`` is the number of degrees of freedom behind the covariance for turn/block
    errors (``None`` for the asymptotic HAC/OLS covariances).  ``residuals`` (``"ols"``,
    ``"hac"``) are aligned with the scan's rows, NaN where a row was not fitted.
    """

    harmonics: tuple[int, ...]
    coef: np.ndarray = field(repr=False)
    cov: np.ndarray = field(repr=False)
    cov_dof: int | None
    n_samples: int
    n_turns: int
    dropped_rows: int
    scan_dropped_rows: int
    excluded_rows: int
    excluded_turns: int
    drift: str
    errors: str
    settings: Mapping[str, Any] = field(repr=False)
    residual_rms: float = math.nan
    chi2: float | None = None
    chi2_dof_n: int | None = None
    residuals: np.ndarray | None = field(default=None, repr=False)
    per_turn: Any = field(default=None, repr=False)
    aux_names: tuple[str, ...] = ()
    aux_coef: np.ndarray | None = field(default=None, repr=False)
    aux_cov: np.ndarray | None = field(default=None, repr=False)
    variance_inflation: Mapping[str, float] | None = field(default=None, repr=False)
    condition_number: float | None = None
    hac_lags: int | None = None
    block_turns: int | None = None
    signal_unit: str = "fringe"
    source: str = "<data>"
    excluded: Mapping[str, Any] = field(default_factory=dict, repr=False)
    notes: tuple[str, ...] = field(default=(), repr=False)

    # ------------------------------------------------------------------ access
    @property
    def param_names(self) -> tuple[str, ...]:
        return harmonic_names(self.harmonics)

    @property
    def coefficients(self) -> dict[str, float]:
        return {n: float(v) for n, v in zip(self.param_names, self.coef)}

    @property
    def sigmas(self) -> dict[str, float]:
        return {n: float(math.sqrt(v)) for n, v in zip(self.param_names, np.diag(self.cov))}

    @property
    def chi2_dof(self) -> float | None:
        """χ²/dof of the per-turn coefficients about their mean, each turn weighted by its own
        white-noise covariance (turn/block errors): ≈ 1 when within-turn white noise explains
        the turn-to-turn scatter, > 1 when noise is correlated or the signal varies from turn to
        turn.  ``None`` for ``"hac"``/``"ols"`` (σ̂ comes from the residuals themselves, so
        the ratio would be 1 by construction)."""
        if self.chi2 is None or not self.chi2_dof_n:
            return None
        return self.chi2 / self.chi2_dof_n

    @property
    def errors_description(self) -> str:
        return str(self.settings.get("errors_description", self.errors))

    @property
    def drift_description(self) -> str:
        return str(self.settings.get("drift_description", self.drift))

    def harmonic(self, k: int) -> HarmonicEstimate:
        """The ``k``θ coefficients, covariance, amplitude and phase."""
        if k not in self.harmonics:
            raise KeyError(f"harmonic {k} was not fitted (fitted: {self.harmonics})")
        j = self.harmonics.index(k)
        sl = slice(2 * j, 2 * j + 2)
        cov = np.array(self.cov[sl, sl], dtype=float)
        cov.setflags(write=False)
        return HarmonicEstimate(k, float(self.coef[2 * j]), float(self.coef[2 * j + 1]), cov, self.cov_dof,
                                self.signal_unit, self.errors_description)

    # ------------------------------------------------------------------ rendering
    def summary(self) -> Summary:
        u = self.signal_unit
        rows = [
            ("source", self.source, ""),
            ("samples fitted", self.n_samples, ""),
            ("turns fitted", self.n_turns, ""),
            ("rows excluded (partial/unusable turns)", self.excluded_rows, ""),
            ("rows dropped while reading", self.scan_dropped_rows, ""),
            ("drift", f"{self.drift}: {self.drift_description}", ""),
            ("errors", self.errors_description, ""),
        ]
        if self.cov_dof is not None:
            rows.append(("covariance degrees of freedom", self.cov_dof, ""))
        if self.chi2_dof is not None:
            rows.append(("χ²/dof of per-turn scatter", self.chi2_dof, f"({self.chi2_dof_n} dof)"))
        rows.append(("residual rms", self.residual_rms, u))
        for name, c, s in zip(self.aux_names, self.aux_coef if self.aux_coef is not None else (),
                              np.sqrt(np.diag(self.aux_cov)) if self.aux_cov is not None else ()):
            rows.append((f"aux {name}", f"{fmt(c)} ± {fmt(s)}", f"{u} per unit"))
        # per-harmonic sections; their Rice notes are already among the fit's notes
        sections = tuple(Summary(f"{k}θ harmonic", self.harmonic(k).rows()) for k in self.harmonics)
        return Summary(f"Scan fit: {self.source}", tuple(rows), self.notes, sections)

    def to_dict(self) -> dict:
        harms = {str(k): self.harmonic(k).to_dict() for k in self.harmonics}
        d = {
            "source": self.source, "signal_unit": self.signal_unit,
            "n_samples": self.n_samples, "n_turns": self.n_turns,
            "dropped_rows": self.dropped_rows, "scan_dropped_rows": self.scan_dropped_rows,
            "excluded_rows": self.excluded_rows, "excluded_turns": self.excluded_turns,
            "excluded": dict(self.excluded),
            "drift": self.drift, "drift_description": self.drift_description,
            "errors": self.errors, "errors_description": self.errors_description,
            "cov_dof": self.cov_dof, "hac_lags": self.hac_lags, "block_turns": self.block_turns,
            "residual_rms": self.residual_rms, "chi2": self.chi2, "chi2_dof_n": self.chi2_dof_n,
            "param_names": list(self.param_names), "coef": np.asarray(self.coef).tolist(),
            "cov": np.asarray(self.cov).tolist(),
            "harmonics": harms,
            "aux": {n: {"coef": float(c), "sigma": float(math.sqrt(v))}
                    for n, c, v in zip(self.aux_names, self.aux_coef if self.aux_coef is not None else (),
                                       np.diag(self.aux_cov) if self.aux_cov is not None else ())},
            "variance_inflation": dict(self.variance_inflation) if self.variance_inflation else None,
            "condition_number": self.condition_number,
            "settings": dict(self.settings),
            "notes": list(self.notes),
        }
        return d

    def __repr__(self) -> str:
        h = ", ".join(f"A{k}={fmt(self.harmonic(k).amplitude)}±{fmt(self.harmonic(k).sigma_amplitude)}"
                      for k in self.harmonics)
        return (f"ScanFit({self.source!r}: {h} {self.signal_unit}; drift={self.drift}, errors={self.errors}, "
                f"{self.n_turns} turns, {self.n_samples} samples)")


# ============================================================================ the fit
def fit_scan(scan, *, harmonics=(1, 2), drift="per-turn", errors="turns", degree: int = 3,
             knot_turns: float = 2.0, aux=None, hac_lags: int | None = None, block_turns: int | None = None,
             complete_only: bool = True) -> ScanFit:
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
    complete_only : bool
        Leave partial turns out (counted, never silently).  With ``False`` they enter the fit;
        with turn/block errors each partial turn then weighs as much as a complete one in the
        mean, so prefer the default.

    Returns
    -------
    ScanFit

    Raises
    ------
    ScanError
        When the angle coverage cannot separate the requested harmonics, or no usable turn
        is left.
    ValueError
        For unknown options, or turn/block errors combined with a non-per-turn drift.
    """
    ks = check_harmonics(harmonics)
    spec = parse_drift(drift, degree=degree, knot_turns=knot_turns)
    kind, hac_lags, block_turns = parse_errors(errors, hac_lags=hac_lags, block_turns=block_turns)
    if isinstance(aux, str):
        aux = (aux,)
    aux = tuple(aux or ())
    if kind in ("turns", "blocks") and spec.kind != "per-turn":
        raise ValueError(f"errors={kind!r} estimates the covariance from per-turn demodulation, which removes "
                         f"drift turn by turn: use drift='per-turn', or errors='hac' with drift={spec.label!r}")
    check_separable(scan.angle, ks, marks=scan.marks, source=scan.source)
    if spec.kind == "spline":
        check_knot_spacing(spec.knot_turns, ks, stacklevel=3)
    if kind in ("turns", "blocks"):
        res = _fit_turns(scan, ks, spec, aux, complete_only, block_turns if kind == "blocks" else 1)
    else:
        res = _fit_joint(scan, ks, spec, aux, complete_only, kind, hac_lags)
    res["complete_only"] = bool(complete_only)
    res["hac_lags_given"] = hac_lags is not None
    return _finish(scan, ks, spec, kind, res)


# ---------------------------------------------------------------------------- turns / blocks
def _fit_turns(scan, ks, spec, aux, complete_only, block_turns):
    """Turn (or block) errors: mean of the per-turn coefficients and their scatter.

    Without aux terms, turn ``i`` gives ``b_i`` (:func:`nullfit.demodulate`); the estimate is
    ``b̄ = Σ b_i / N`` and each turn's contribution to ``b̄ − β`` is ``z_i = (b_i − b̄)/N``.

    With aux terms (one global coefficient vector δ, per-turn harmonics), after projecting the
    per-turn drift out of every column (Schur complements ``Q_i`` of the per-turn normal
    matrices): ``b_i = b⁰_i − P_i δ̂`` with ``b⁰_i = Q_hh⁻¹ r_h`` and ``P_i = Q_hh⁻¹ Q_ha``;
    ``δ̂ = (Σ M_i)⁻¹ Σ g⁰_i`` with ``M_i = Q_aa − Q_ah P_i`` and ``g⁰_i = r_a − Q_ah b⁰_i``.
    Linearising, ``b̄ − β = Σ_i [(b_i − β)/N − P̄ (Σ M)⁻¹ g_i]`` with ``g_i = g⁰_i − M_i δ̂``, so
    turn ``i`` contributes ``z_i = (b_i − b̄)/N − P̄ (ΣM)⁻¹ g_i`` (and ``(ΣM)⁻¹ g_i`` to δ̂).

    Blocks of ``B`` consecutive turns sum their ``z_i`` into ``Z_b``; the covariance is
    ``n_b/(n_b − 1) Σ_b Z_b Z_bᵀ`` — for equal blocks without aux exactly the sample covariance
    of the block means divided by ``n_b`` (``B = 1``: of the turns, divided by ``N``).
    """
    nd = spec.degree + 1
    nh = 2 * len(ks)
    eng = TurnEngine(scan, ks, degree=spec.degree, aux=aux, complete_only=complete_only, min_samples=nd + nh + 1)
    na = eng.n_aux
    delta = None
    infl_extra = None
    if na:
        G = eng.grams()
        Gdd_inv, ok_d = stacked_inverse(G[:, :nd, :nd])
        Pi = Gdd_inv @ G[:, :nd, nd:]
        S = G[:, nd:, nd:] - G[:, nd:, :nd] @ Pi  # per-turn Schur complement over [H, A, y]
        Q_hh_inv, ok_h = stacked_inverse(S[:, :nh, :nh])
        ok = ok_d & ok_h
        if not ok.all():
            eng.drop_turns(~ok, "turns whose per-turn system is singular")
            S, Q_hh_inv = S[ok], Q_hh_inv[ok]
        Q_ha, Q_aa = S[:, :nh, nh:nh + na], S[:, nh:nh + na, nh:nh + na]
        r_h, r_a = S[:, :nh, -1], S[:, nh:nh + na, -1]
        b0 = np.einsum("sij,sj->si", Q_hh_inv, r_h)
        P = Q_hh_inv @ Q_ha  # (N, nh, na)
        Mi = Q_aa - np.swapaxes(Q_ha, 1, 2) @ P
        g0 = r_a - np.einsum("sji,sj->si", Q_ha, b0)
        Msum = Mi.sum(axis=0)
        delta, Minv, _ = _solve_spd(Msum, g0.sum(axis=0))
        g = g0 - np.einsum("sij,j->si", Mi, delta)
        infl_extra = (P.mean(axis=0), Minv, g)
    pt = eng.demodulate(delta=delta)
    if not pt.ok.all():
        bad = ~pt.ok
        if na:  # cannot happen: the same turns were screened above
            raise ScanError(f"{where(scan.source)}: per-turn systems became singular after the aux correction")
        eng.drop_turns(bad, "turns whose per-turn system is singular")
        pt = type(pt)(eng, pt.coef[~bad], pt.cov[~bad], pt.rss[~bad], pt.ok[~bad], delta)
    N = eng.seg.n
    b = pt.harm
    mean = b.mean(axis=0)
    z = (b - mean) / N
    if na:
        Pbar, Minv, g = infl_extra
        zd = g @ Minv.T  # influence of each turn on the aux coefficients
        z = np.concatenate([z - zd @ Pbar.T, zd], axis=1)
    n_blocks = -(-N // block_turns)
    if n_blocks < 2:
        left = f" (left out: {eng.excluded_text()})" if eng.excluded else ""
        raise ScanError(f"{where(scan.source)}: {N} usable turn(s) make {n_blocks} block(s); the scatter needs "
                        f"at least 2{left}")
    blk = np.arange(N) // block_turns
    Z = np.zeros((n_blocks, z.shape[1]))
    np.add.at(Z, blk, z)
    cov_all = n_blocks / (n_blocks - 1) * (Z.T @ Z)
    # χ² of per-turn coefficients about their mean, with their own white-noise covariances
    Cinv, okc = stacked_inverse(pt.cov)
    dev = b - mean
    chi2 = float(np.einsum("si,sij,sj->", dev[okc], Cinv[okc], dev[okc]))
    chi2_n = int(nh * (okc.sum() - 1))
    rss = float(np.nansum(pt.rss))
    per_turn = pt.frame()
    return dict(eng=eng, coef=mean, cov=cov_all[:nh, :nh], cov_dof=n_blocks - 1, n_blocks=n_blocks,
                aux_coef=None if not na else delta / eng.aux_scale,
                aux_cov=None if not na else cov_all[nh:, nh:] / np.outer(eng.aux_scale, eng.aux_scale),
                chi2=chi2, chi2_n=chi2_n, rss=rss, residuals=None, per_turn=per_turn, vif=None, cond=None,
                n_params=None, block_turns=block_turns)


# ---------------------------------------------------------------------------- joint (ols / hac)
def _fit_joint(scan, ks, spec, aux, complete_only, kind, hac_lags):
    """Joint least squares (drift projected out), then OLS or HAC covariance.

    Pass 1 accumulates the normal equations chunk by chunk and projects the drift block out
    (per turn, dense Legendre, or banded B-spline).  Pass 2 forms the residuals and the scores
    ``x̃_t e_t`` of the harmonic/aux columns after partialling out the drift; by
    Frisch–Waugh–Lovell their sandwich equals the harmonic block of the full-design sandwich.
    """
    mode = spec.kind  # per-turn | poly | none | spline
    if mode == "per-turn":
        eng = TurnEngine(scan, ks, degree=spec.degree, drift_mode="turn", aux=aux, complete_only=complete_only,
                         min_samples=spec.degree + 2)
    elif mode in ("poly", "none"):
        eng = TurnEngine(scan, ks, degree=spec.degree if mode == "poly" else 0, drift_mode="global", aux=aux,
                         complete_only=complete_only)
    else:
        eng = TurnEngine(scan, ks, degree=None, aux=aux, complete_only=complete_only)
    eng.cache_harmonics()  # two passes over the data: keep cos kθ, sin kθ if they fit the budget
    nh, na, nd = eng.n_harm, eng.n_aux, eng.n_drift
    pz = nh + na
    zs = slice(nd, nd + pz)

    # -------- pass 1: normal equations, drift projected out
    if mode == "per-turn":
        G = eng.grams()
        Gdd_inv, ok = stacked_inverse(G[:, :nd, :nd])
        if not ok.all():
            eng.drop_turns(~ok, "turns whose drift terms are singular")
            G, Gdd_inv = G[ok], Gdd_inv[ok]
        Pi = Gdd_inv @ G[:, :nd, nd:]  # (N, nd, pz+1): drift coefficients of each z column and y, per turn
        S = (G[:, nd:, nd:] - G[:, nd:, :nd] @ Pi).sum(axis=0)
        z_sum = G[:, 0, zs].sum(axis=0)
        z_sq = np.einsum("sii->i", G[:, zs, zs])
        n_drift_params = nd * eng.seg.n
    elif mode == "spline":
        n = eng.n_rows
        period = typical_turn_period(scan.time[eng.seg.start], eng.t_lo, eng.t_hi, n)
        knots = spline_knots(spline_intervals(eng.t_hi - eng.t_lo, period, spec.knot_turns))
        nb = knots.size - 4
        DD = None
        DZ = np.zeros((nb, pz + 1))
        ZZ = np.zeros((pz + 1, pz + 1))
        for ch in eng.chunks():
            X = eng.columns(ch, y_center="global")
            B = spline_design_sparse(eng.scaled_time(ch), knots)
            DD = (B.T @ B) if DD is None else DD + B.T @ B
            DZ += np.asarray(B.T @ X.T)
            ZZ += X @ X.T
        Pi = _banded_solve(DD, DZ, scan.source)
        S = ZZ - DZ.T @ Pi
        z_sum = DZ[:, :pz].sum(axis=0)  # the B-splines sum to one
        z_sq = np.diag(ZZ)[:pz]
        n_drift_params = nb
    else:
        GG = np.zeros((eng.q, eng.q))
        for ch in eng.chunks():
            X = eng.columns(ch, y_center="global")
            GG += X @ X.T
        Pi, _, _ = _solve_spd(GG[:nd, :nd], GG[:nd, nd:])
        S = GG[nd:, nd:] - GG[nd:, :nd] @ Pi
        z_sum = GG[0, zs]
        z_sq = np.diag(GG)[zs]
        n_drift_params = nd
    n = eng.n_rows
    Q, r = S[:pz, :pz], S[:pz, pz]
    try:
        beta, Qinv, cond = _solve_spd(Q, r)
    except np.linalg.LinAlgError:
        raise ScanError(f"{where(scan.source)}: the design is singular (a harmonic or aux column is fully "
                        "absorbed by the drift model)") from None
    n_params = n_drift_params + pz
    dof = n - n_params
    if dof <= 0:
        raise ScanError(f"{where(scan.source)}: {n} readings cannot fit {n_params} parameters")
    vif = (z_sq - z_sum ** 2 / n) * np.diag(Qinv)

    # -------- pass 2: residuals and scores
    L = None
    meat = None
    if kind == "hac":
        L = newey_west_lags(n) if hac_lags is None else hac_lags
        meat = BartlettMeat(pz, L)
    gamma = Pi[..., pz] - Pi[..., :pz] @ beta  # drift coefficients given beta (per turn or global)
    resid = np.full(scan.n_samples, np.nan)
    rss = 0.0
    # (level-1/level-2 products are written as numpy loops over the few columns: tiny BLAS
    # calls are slow when a multithreaded BLAS competes for busy cores)
    for ch in eng.chunks():
        xt = None
        if mode == "per-turn":
            X = eng.columns(ch)
            e = _minus_combination(X[-1], beta, X[zs])
            g_rows = gamma[ch.i0:ch.i1][ch.sidx]
            for d in range(nd):
                e -= X[d] * g_rows[:, d]
            if meat is not None:
                P_rows = Pi[ch.i0:ch.i1, :, :pz][ch.sidx]  # (m, nd, pz)
                xt = X[zs].copy()
                for d in range(nd):
                    xt -= X[d] * P_rows[:, d, :].T
        elif mode == "spline":
            X = eng.columns(ch, y_center="global")
            B = spline_design_sparse(eng.scaled_time(ch), knots)
            e = _minus_combination(X[pz], beta, X[:pz]) - B @ gamma
            if meat is not None:
                xt = X[:pz] - np.asarray(B @ Pi[:, :pz]).T
        else:
            X = eng.columns(ch, y_center="global")
            e = _minus_combination(X[-1], np.concatenate([gamma, beta]), X[:-1])
            if meat is not None:
                xt = np.empty((pz, X.shape[1]))
                for j in range(pz):
                    xt[j] = _minus_combination(X[nd + j], Pi[:, j], X[:nd])
        resid[ch.a:ch.b] = e
        rss += float(np.einsum("i,i->", e, e))
        if meat is not None:
            xt *= e
            meat.add(xt, rows_first=False)
    if kind == "hac":
        cov_all = Qinv @ meat.finish() @ Qinv * (n / dof)
    else:
        cov_all = Qinv * (rss / dof)
    cov_all = 0.5 * (cov_all + cov_all.T)
    names = list(harmonic_names(ks)) + list(eng.aux_names)
    return dict(eng=eng, coef=beta[:nh], cov=cov_all[:nh, :nh], cov_dof=None,
                aux_coef=None if not na else beta[nh:] / eng.aux_scale,
                aux_cov=None if not na else cov_all[nh:, nh:] / np.outer(eng.aux_scale, eng.aux_scale),
                chi2=None, chi2_n=None, rss=rss, residuals=resid, per_turn=None,
                vif=dict(zip(names, map(float, vif))), cond=cond, n_params=n_params, hac_lags=L, dof=dof)


def _banded_solve(DD, RHS, source):
    """Solve the banded SPD system of the cubic B-spline drift (bandwidth 3) for ``RHS``."""
    from scipy.linalg import cho_solve_banded, cholesky_banded

    nb = RHS.shape[0]
    u = 3
    diag0 = DD.diagonal(0)
    if np.any(diag0 <= 0):
        raise ScanError(f"{where(source)}: a spline knot interval holds no data (a gap in the log?); "
                        "use a wider knot spacing or drift='per-turn'")
    ab = np.zeros((u + 1, nb))
    for k in range(u + 1):
        ab[u - k, k:] = DD.diagonal(k)
    try:
        c = cholesky_banded(ab, lower=False)
    except np.linalg.LinAlgError:
        raise ScanError(f"{where(source)}: the spline drift basis is singular over the data (gaps?); "
                        "use a wider knot spacing") from None
    return cho_solve_banded((c, False), RHS)


# ---------------------------------------------------------------------------- assembling the result
def _finish(scan, ks, spec, kind, res) -> ScanFit:
    eng = res["eng"]
    nh = 2 * len(ks)
    notes: list[str] = []
    excluded = {why: {"turns": t, "rows": r} for why, (t, r) in eng.excluded.items()}
    if eng.excluded:
        notes.append(f"left out: {eng.excluded_text()} — not used in the fit")
    for why, c in scan.dropped:
        notes.append(f"{c} row(s) dropped while reading the log: {why}")
    lags = res.get("hac_lags")
    settings: dict[str, Any] = {"drift": spec.label, "drift_description": spec.description,
                                "errors": kind, "complete_only": res["complete_only"], "aux": list(eng.aux_names)}
    if kind == "turns":
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
    if kind in ("turns", "blocks"):
        nu = res["cov_dof"]
        units = "turns" if kind == "turns" else "blocks"
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
                   + f": their σ are inflated by √VIF; choose a smoother drift model")
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
        harmonics=ks, coef=coef, cov=cov, cov_dof=res["cov_dof"], n_samples=n_used, n_turns=eng.seg.n,
        dropped_rows=scan.dropped_rows + eng.excluded_rows, scan_dropped_rows=scan.dropped_rows,
        excluded_rows=eng.excluded_rows, excluded_turns=eng.excluded_turns, drift=spec.label, errors=kind,
        settings=settings, residual_rms=float(math.sqrt(res["rss"] / n_used)), chi2=res["chi2"],
        chi2_dof_n=res["chi2_n"], residuals=resid, per_turn=res["per_turn"], aux_names=eng.aux_names,
        aux_coef=res["aux_coef"], aux_cov=res["aux_cov"], variance_inflation=vif, condition_number=res.get("cond"),
        hac_lags=lags, block_turns=res.get("block_turns") if kind == "blocks" else None,
        signal_unit=scan.signal_unit, source=scan.source, excluded=excluded, notes=tuple(notes))


__all__ = ["fit_scan", "ScanFit", "HarmonicEstimate", "BartlettMeat", "newey_west_lags", "parse_errors", "ERRORS"]
