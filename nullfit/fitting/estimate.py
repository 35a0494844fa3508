"""`HarmonicEstimate`: the cos kθ and sin kθ coefficients of one harmonic with their covariance."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..core.conventions import amplitude_phase, check_confidence_level, peak_to_peak
from ..core.render import Described, Summary, fmt

#: A harmonic whose amplitude is below this many σ gets the Rice-bias note.
RICE_SNR = 3.0


@dataclass(frozen=True, eq=False)
class HarmonicEstimate(Described):
    """The ``cos kθ`` and ``sin kθ`` coefficients ``(c, s)`` of one harmonic with their 2×2
    covariance — what every limit method and significance test takes.

    ``amplitude`` and ``phase_deg`` follow :func:`nullfit.core.conventions.amplitude_phase`: the
    term is ``A cos(k(θ − φ))``, ``φ`` in ``[0, 360/k)`` degrees; ``peak_to_peak = 2·A``.  Near
    zero, ``amplitude ± sigma_amplitude`` is biased upward (Rice): quote a limit instead.

    ``dof`` is the number of degrees of freedom behind ``cov`` when it was estimated from the
    scatter of turns or blocks (``N − 1``), ``None`` when it is treated as known.  ``turns`` holds
    the per-turn ``(c, s)`` pairs ``(N, 2)`` the estimate came from, when there are any (the block
    bootstrap resamples them).  ``k`` may be ``None`` for a bare ``(c, s)`` pair (no phase).
    ``caveats`` are statements every limit built on the estimate repeats in its notes (e.g. that
    its coverage cannot be calibrated, or that it was corrected for a coupled channel);
    ``block_turns`` is the number of consecutive turns per block behind ``cov`` (1 = turn
    scatter; the bootstrap uses it as the shortest block it resamples).
    """

    k: int | None
    c: float
    s: float
    cov: np.ndarray = field(repr=False)
    dof: int | None = None
    unit: str = ""
    method: str = ""
    turns: np.ndarray | None = field(default=None, repr=False)
    caveats: tuple[str, ...] = field(default=(), repr=False)
    block_turns: int | None = None

    def __post_init__(self):
        cov = np.array(self.cov, dtype=float)
        if cov.shape != (2, 2):
            raise ValueError(f"cov must be the 2x2 covariance of (c, s), got shape {cov.shape}")
        cov.setflags(write=False)
        object.__setattr__(self, "cov", cov)
        object.__setattr__(self, "c", float(self.c))
        object.__setattr__(self, "s", float(self.s))
        if self.k is not None:
            object.__setattr__(self, "k", int(self.k))
        if self.turns is not None:
            t = np.array(self.turns, dtype=float)
            if t.ndim != 2 or t.shape[1] != 2:
                raise ValueError(f"turns must be an (N, 2) array of per-turn (c, s), got shape {t.shape}")
            t.setflags(write=False)
            object.__setattr__(self, "turns", t)
        object.__setattr__(self, "caveats", tuple(str(c) for c in self.caveats))
        if self.block_turns is not None:
            object.__setattr__(self, "block_turns", int(self.block_turns))

    @property
    def sigma_c(self) -> float:
        return float(math.sqrt(self.cov[0, 0]))

    @property
    def sigma_s(self) -> float:
        return float(math.sqrt(self.cov[1, 1]))

    @property
    def sigma(self) -> float:
        """RMS standard deviation of ``c`` and ``s``: ``sqrt(trace(cov)/2)``."""
        return float(math.sqrt(0.5 * float(np.trace(self.cov))))

    @property
    def correlation(self) -> float:
        den = math.sqrt(self.cov[0, 0] * self.cov[1, 1])
        return float(self.cov[0, 1] / den) if den > 0 else math.nan

    @property
    def amplitude(self) -> float:
        return float(math.hypot(self.c, self.s))

    @property
    def phase_deg(self) -> float | None:
        if self.k is None:
            return None
        return amplitude_phase(self.c, self.s, self.k)[1]

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
        g = np.array([self.c, self.s]) / a
        return float(math.sqrt(max(g @ self.cov @ g, 0.0)))

    @property
    def sigma_peak_to_peak(self) -> float:
        return 2.0 * self.sigma_amplitude

    @property
    def sigma_phase_deg(self) -> float | None:
        """Delta-method σ of the phase in degrees (meaningless near zero amplitude)."""
        if self.k is None:
            return None
        a2 = self.c ** 2 + self.s ** 2
        if a2 == 0:
            return math.inf
        h = np.array([-self.s, self.c]) / a2
        return float(math.degrees(math.sqrt(max(h @ self.cov @ h, 0.0))) / self.k)

    @property
    def snr(self) -> float:
        """Amplitude over the mean per-coefficient σ, ``A / sqrt(tr C / 2)``."""
        s = self.sigma
        return self.amplitude / s if s > 0 else math.inf

    @property
    def t2(self) -> float:
        """Wald / Hotelling statistic ``dᵀ C⁻¹ d`` of ``(c, s)`` against zero."""
        d = np.array([self.c, self.s])
        try:
            return float(d @ np.linalg.solve(self.cov, d))
        except np.linalg.LinAlgError:
            return math.nan

    @property
    def p_value_zero(self) -> float | None:
        """p-value of "no kθ term": Hotelling's T² → F(2, ν−1) scaled by (ν−1)/(2ν) when the
        covariance has ``ν = dof`` degrees of freedom, else χ² with 2 dof."""
        from scipy import stats

        if self.dof is None:
            return float(stats.chi2.sf(self.t2, 2))
        nu = self.dof
        if nu < 2:
            return None
        return float(stats.f.sf(self.t2 * (nu - 1) / (2 * nu), 2, nu - 1))

    @property
    def near_zero(self) -> bool:
        return self.snr < RICE_SNR

    def interval(self, which: str = "c", confidence_level: float = 0.95) -> tuple[float, float]:
        """Two-sided interval for ``"c"`` or ``"s"``: Student-t with ``dof`` degrees of freedom
        when the covariance was estimated from few turns, else normal."""
        from scipy import stats

        cl = check_confidence_level(confidence_level)
        if which not in ("c", "s"):
            raise ValueError(f"which must be 'c' or 's', not {which!r}")
        v, s = (self.c, self.sigma_c) if which == "c" else (self.s, self.sigma_s)
        q = stats.t.ppf(0.5 + cl / 2, self.dof) if self.dof else stats.norm.ppf(0.5 + cl / 2)
        return float(v - q * s), float(v + q * s)

    def rows(self) -> tuple:
        u = self.unit
        k = "" if self.k is None else self.k
        r = [
            (f"cos {k}θ coefficient c{k}", f"{fmt(self.c)} ± {fmt(self.sigma_c)}", u),
            (f"sin {k}θ coefficient s{k}", f"{fmt(self.s)} ± {fmt(self.sigma_s)}", u),
            (f"corr(c{k}, s{k})", self.correlation, ""),
            (f"amplitude A{k}", f"{fmt(self.amplitude)} ± {fmt(self.sigma_amplitude)}", u),
            (f"peak-to-peak 2·A{k}", f"{fmt(self.peak_to_peak)} ± {fmt(self.sigma_peak_to_peak)}", u),
        ]
        if self.k is not None:
            r.append((f"phase φ{k} (arm 1 at maximum)", f"{fmt(self.phase_deg)} ± {fmt(self.sigma_phase_deg)}", "deg"))
        r.append((f"p-value (no {k}θ term)", self.p_value_zero, ""))
        return tuple(r)

    def notes(self) -> tuple[str, ...]:
        if not self.near_zero:
            return self.caveats
        return self.caveats + (f"A{self.k or ''} is only {self.snr:.2g} σ from zero: the naive amplitude ± σ is biased upward "
                "(Rice distribution) and the phase is ill-defined; quote an upper limit "
                "(nullfit.upper_limit) instead.",)

    def summary(self) -> Summary:
        return Summary(f"{self.k or ''}θ harmonic", self.rows(), self.notes())

    def __repr__(self) -> str:
        k = "" if self.k is None else self.k
        dof = "" if self.dof is None else f", dof={self.dof}"
        return (f"HarmonicEstimate({k}θ: c{k}={fmt(self.c)}, s{k}={fmt(self.s)} {self.unit}, "
                f"σ(c)={fmt(self.sigma_c)}, σ(s)={fmt(self.sigma_s)}{dof})")

    def to_dict(self) -> dict:
        return {"k": self.k, "c": self.c, "s": self.s, "cov": self.cov.tolist(),
                "sigma_c": self.sigma_c, "sigma_s": self.sigma_s,
                "amplitude": self.amplitude, "sigma_amplitude": self.sigma_amplitude,
                "peak_to_peak": self.peak_to_peak, "phase_deg": self.phase_deg,
                "sigma_phase_deg": self.sigma_phase_deg, "p_value_zero": self.p_value_zero,
                "dof": self.dof, "n_turns": None if self.turns is None else int(self.turns.shape[0]),
                "near_zero": self.near_zero, "unit": self.unit, "method": self.method,
                "block_turns": self.block_turns, "caveats": list(self.caveats)}


def region_scale(confidence_level: float, dof=None, region: str = "chi2") -> float:
    """Squared Mahalanobis radius ``q`` of the confidence region ``dᵀ C⁻¹ d ≤ q``.

    ``"chi2"``: ``q = χ²₂⁻¹(CL)`` (the covariance taken as known).  ``"hotelling"``: with a
    covariance estimated from ``dof + 1`` turns, ``q = 2·dof/(dof − 1) · F⁻¹(CL; 2, dof − 1)``
    (Hotelling's T², as in :mod:`nullfit.limits.covariance`).
    """
    from scipy import stats

    cl = check_confidence_level(confidence_level)
    if region == "chi2":
        return float(stats.chi2.ppf(cl, 2))
    if region == "hotelling":
        if dof is None or dof < 2:
            raise ValueError("region='hotelling' needs a covariance with dof >= 2 (turn or block errors)")
        return float(2.0 * dof / (dof - 1) * stats.f.ppf(cl, 2, dof - 1))
    raise ValueError(f"region must be 'chi2' or 'hotelling', not {region!r}")


def ellipse_axes(cov, q: float):
    """``(semi_major, semi_minor, angle_deg)`` of ``dᵀ C⁻¹ d = q`` (angle of the major axis from
    the c axis, counterclockwise)."""
    vals, vecs = np.linalg.eigh(np.asarray(cov, dtype=float))
    vals = np.maximum(vals, 0.0)
    major = vecs[:, 1]
    return (math.sqrt(q * vals[1]), math.sqrt(q * vals[0]), math.degrees(math.atan2(major[1], major[0])))
