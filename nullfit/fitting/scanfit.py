"""`ScanFit`: the immutable result of :func:`nullfit.fit_scan`."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from ..core.render import Described, Summary, fmt
from .design import harmonic_names
from .estimate import HarmonicEstimate


@dataclass(frozen=True, eq=False)
class ScanFit(Described):
    """Result of :func:`fit_scan` (immutable).

    ``coef``/``cov`` hold the harmonic block in the order ``c_{k1}, s_{k1}, c_{k2}, …``
    (``param_names``) in the log's signal units; :meth:`harmonic` returns one harmonic.
    ``dof`` is the number of degrees of freedom behind the covariance for turn/block
    errors (``None`` for the asymptotic HAC/OLS covariances).  ``residuals`` (``"ols"``,
    ``"hac"``) are aligned with the scan's rows, NaN where a row was not fitted.
    ``dependence`` is the turn-to-turn dependence check of the per-turn coefficients
    (:class:`nullfit.fitting.dependence.TurnDependence`) and what the errors did about it;
    ``block_turns`` the turns per block behind the covariance (1 = plain turn scatter).
    """

    harmonics: tuple[int, ...]
    coef: np.ndarray = field(repr=False)
    cov: np.ndarray = field(repr=False)
    dof: int | None
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
    unit: str = "fringe"
    source: str = "<data>"
    excluded: Mapping[str, Any] = field(default_factory=dict, repr=False)
    notes: tuple[str, ...] = field(default=(), repr=False)
    dependence: Any = field(default=None, repr=False)
    chi2_p: float | None = None

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
        """χ²/dof of the per-turn coefficients about their weighted mean, weighted by the pooled
        within-turn white-noise covariance (turn/block errors; see
        :func:`nullfit.fitting.turn_errors.scatter_chi2`): its mean is exactly 1 for white noise at
        any number of readings per turn; > 1 when noise is correlated beyond white or the signal
        varies from turn to turn (``chi2_p`` is the p-value).  ``None`` for ``"hac"``/``"ols"``
        (σ̂ comes from the residuals themselves, so the ratio would be 1 by construction)."""
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
        turns = None
        if self.per_turn is not None and f"c{k}" in self.per_turn.columns:
            turns = self.per_turn[[f"c{k}", f"s{k}"]].to_numpy(dtype=float)
        return HarmonicEstimate(k, float(self.coef[2 * j]), float(self.coef[2 * j + 1]), self.cov[sl, sl], self.dof,
                                self.unit, self.errors_description, turns, self.caveats, self.block_turns)

    @property
    def caveats(self) -> tuple[str, ...]:
        """Statements every limit built on this fit must carry (e.g. too few independent blocks)."""
        dep = self.dependence
        return (dep.caveat,) if dep is not None and dep.caveat else ()

    # ------------------------------------------------------------------ rendering
    def summary(self) -> Summary:
        u = self.unit
        rows = [
            ("source", self.source, ""),
            ("samples fitted", self.n_samples, ""),
            ("turns fitted", self.n_turns, ""),
            ("rows excluded (partial/unusable turns)", self.excluded_rows, ""),
            ("rows dropped while reading", self.scan_dropped_rows, ""),
            ("drift", f"{self.drift}: {self.drift_description}", ""),
            ("errors", self.errors_description, ""),
        ]
        if self.dof is not None:
            rows.append(("covariance degrees of freedom", self.dof, ""))
        if self.block_turns is not None and self.block_turns > 1:
            rows.append(("turns per block behind the covariance", self.block_turns, ""))
        if self.dependence is not None:
            rows.append(("turn-to-turn dependence", self.dependence.statement(), ""))
        if self.chi2_dof is not None:
            rows.append(("χ²/dof of per-turn scatter (1 = within-turn white noise)", self.chi2_dof,
                         f"({self.chi2_dof_n} dof, p = {fmt(self.chi2_p, 3)})"))
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
            "source": self.source, "unit": self.unit,
            "n_samples": self.n_samples, "n_turns": self.n_turns,
            "dropped_rows": self.dropped_rows, "scan_dropped_rows": self.scan_dropped_rows,
            "excluded_rows": self.excluded_rows, "excluded_turns": self.excluded_turns,
            "excluded": dict(self.excluded),
            "drift": self.drift, "drift_description": self.drift_description,
            "errors": self.errors, "errors_description": self.errors_description,
            "dof": self.dof, "hac_lags": self.hac_lags, "block_turns": self.block_turns,
            "residual_rms": self.residual_rms, "chi2": self.chi2, "chi2_dof_n": self.chi2_dof_n,
            "chi2_dof": self.chi2_dof, "chi2_p": self.chi2_p,
            "chi2_reference": self.settings.get("chi2_reference"),
            "dependence": None if self.dependence is None else self.dependence.to_dict(),
            "caveats": list(self.caveats),
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
        h = ", ".join(f"c{k}={fmt(self.harmonic(k).c)}, s{k}={fmt(self.harmonic(k).s)}" for k in self.harmonics)
        return (f"ScanFit({self.source!r}: {h} {self.unit}; drift={self.drift}, errors={self.errors}, "
                f"{self.n_turns} turns)")
