"""Detection significance of an observed harmonic amplitude: the p-value under ``A = 0``.

Statistic: the observed amplitude ``Â``; ``p = P(Â ≥ Â_obs | A = 0)``.

* isotropic covariance ``σ² I``: Rayleigh law, ``p = exp(−Â²/(2σ²))`` (``"rayleigh"``);
* anisotropic/correlated: ``Â² = s1² z1² + s2² z2²`` with standard normal ``z``; its tail is
  integrated exactly over the angle, ``p = (2π s1 s2)⁻¹ ∫₀^{2π} e^{−α(ψ)Â²/2}/α(ψ) dψ``,
  ``α = cos²ψ/s1² + sin²ψ/s2²`` (``"integration"``), or estimated by simulation
  (``"simulation"``, seed recorded);
* covariance estimated from ``N = dof + 1`` turns: the Hotelling test of ``μ = 0`` on the
  Mahalanobis statistic ``T² = x̂ᵀ cov⁻¹ x̂ ~ 2 dof/(dof − 1) · F(2, dof − 1)`` (``"hotelling"``,
  exact for Gaussian turns).  With a known isotropic covariance ``T² = Â²/σ²`` and this
  reduces to the Rayleigh p-value as ``dof → ∞``.

``z`` is the one-sided Gaussian equivalent ``Φ⁻¹(1 − p)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from ..core.conventions import make_rng
from ..core.render import Described, Summary
from .amplitude_dist import aniso_sf
from .covariance import covariance_shape
from .inputs import KEEP, as_estimate

METHODS = ("auto", "rayleigh", "integration", "simulation", "hotelling")


@dataclass(frozen=True, eq=False)
class Significance(Described):
    """p-value of an observed amplitude under the no-signal hypothesis ``A = 0``."""

    p_value: float
    z: float
    amplitude: float
    sigma: float
    method: str
    statistic: str
    cov: np.ndarray = field(repr=False)
    dof: int | None = None
    n_sim: int | None = None
    seed: int | None = None
    harmonic: int | None = None
    unit: str = ""
    notes: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {
            "p_value": self.p_value,
            "z": self.z,
            "amplitude": self.amplitude,
            "sigma": self.sigma,
            "method": self.method,
            "statistic": self.statistic,
            "cov": np.asarray(self.cov).tolist(),
            "dof": self.dof,
            "n_sim": self.n_sim,
            "seed": self.seed,
            "harmonic": self.harmonic,
            "unit": self.unit,
            "notes": list(self.notes),
        }

    def __repr__(self) -> str:
        return f"Significance(p = {self.p_value:.3g} for A = 0, z = {self.z:.3g}; {self.method})"

    def summary(self) -> Summary:
        k = f"{self.harmonic}θ " if self.harmonic else ""
        rows = [
            ("observed amplitude Â", self.amplitude, self.unit),
            ("sigma = sqrt(trace(cov)/2)", self.sigma, self.unit),
            ("statistic", self.statistic, ""),
            ("method", self.method, ""),
            ("p-value (A = 0)", self.p_value, ""),
            ("one-sided z", self.z, "σ"),
        ]
        if self.dof is not None:
            rows.append(("covariance dof (turns − 1)", self.dof, ""))
        if self.n_sim is not None:
            rows += [("simulations", self.n_sim, ""), ("seed", self.seed, "")]
        return Summary(title=f"Detection significance of the {k}amplitude", rows=tuple(rows), notes=self.notes)


def _simulate(s1, s2, a, n_sim, rng):
    hits = 0
    done = 0
    while done < n_sim:
        r = min(1_000_000, n_sim - done)
        z = rng.standard_normal((r, 2))
        hits += int(np.count_nonzero((s1 * z[:, 0]) ** 2 + (s2 * z[:, 1]) ** 2 >= a * a))
        done += r
    return hits / n_sim


def detection_significance(c, s=None, cov=None, *, rng=None, method: str = "auto", dof=KEEP,
                           n_sim: int = 200_000, harmonic=None, unit=None) -> Significance:
    """p-value of the amplitude ``hypot(c, s)`` under ``A = 0`` (see module docstring).

    ``c`` is a harmonic estimate (``fit.harmonic(2)``; its dof and unit are used) or the cosine
    coefficient of a bare ``(c, s, cov)``."""
    if method not in METHODS:
        raise ValueError(f"method must be one of {', '.join(METHODS)}, not {method!r}")
    est = as_estimate(c, s, cov, dof=dof, harmonic=harmonic, unit=unit)
    c, s, dof, harmonic, unit = est.c, est.s, est.dof, est.k, est.unit
    shape = covariance_shape(est.cov)
    amp = math.hypot(c, s)
    if method == "auto":
        method = "hotelling" if dof is not None else ("rayleigh" if shape.isotropic else "integration")
    notes = []
    seed = None
    sims = None
    statistic = "amplitude Â"
    s1, s2 = shape.unit_axes()
    a = amp / shape.sigma
    if method == "hotelling":
        if dof is None:
            raise ValueError("method='hotelling' needs dof (number of turns − 1)")
        x = np.array([c, s])
        t2 = float(x @ np.linalg.solve(shape.array, x))
        p = float(stats.f.sf(t2 * (dof - 1) / (2.0 * dof), 2, dof - 1))
        statistic = "Mahalanobis T² = x̂ᵀ cov⁻¹ x̂"
        notes.append(f"Hotelling test: T² = {t2:.4g} ~ 2·{dof}/{dof - 1}·F(2, {dof - 1}) under A = 0 "
                     f"(covariance estimated from {dof + 1} turns)")
    elif method == "rayleigh":
        if not shape.isotropic:
            raise ValueError("method='rayleigh' needs an isotropic covariance; use 'integration' or 'simulation'")
        p = math.exp(-0.5 * a * a)
        notes.append("Rayleigh law of Â under A = 0 (isotropic covariance)")
    elif method == "integration":
        p = float(aniso_sf(a, 0.0, 0.0, s1, s2))
        notes.append(f"tail of Â under A = 0 integrated exactly over the angle (σ_minor/σ_major = {shape.rho:.3f})")
    else:
        gen, seed = make_rng(rng)
        sims = int(n_sim)
        p = _simulate(s1, s2, a, sims, gen)
        err = math.sqrt(max(p * (1 - p), 1.0 / sims) / sims)
        notes.append(f"p-value by simulation of Â under A = 0: {sims} draws, standard error {err:.2g}")
    if dof is not None and method != "hotelling":
        notes.append("covariance treated as exact although dof was given; method='hotelling' accounts for it")
    z = float(stats.norm.isf(p)) if p > 0 else math.inf
    return Significance(p_value=p, z=z, amplitude=amp, sigma=shape.sigma, method=method, statistic=statistic,
                        cov=shape.array, dof=dof, n_sim=sims, seed=seed, harmonic=harmonic, unit=unit,
                        notes=tuple(notes))
