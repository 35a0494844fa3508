"""Turn-to-turn dependence of the per-turn coefficients: the check and the block length it implies.

Turn-scatter errors (``errors="turns"``) treat the per-turn coefficients ``b_1 … b_N`` as
independent draws around their mean.  Slow wander of the apparatus (temperature, tilt) makes
consecutive turns alike; the scatter then understates the error of the mean by the square root
of the *integrated autocorrelation time* ``τ = 1 + 2 Σ_{t≥1} ρ(t)`` (σ̂ ≈ 0.16 σ for an AR(1)
series with ρ = 0.95, where τ = 39).  This module measures that, per series (``c1``, ``s1``,
``c2`` …):

lag-1 autocorrelation ``r₁``
    sample autocorrelation (denominator ``N``, series demeaned), standard error ``≈ 1/√N`` for
    independent turns.
Ljung–Box portmanteau test
    ``Q = N (N + 2) Σ_{k=1}^{h} r_k² / (N − k)`` against χ² with ``h`` degrees of freedom,
    ``h = min(10, N // 5)`` (the lag rule and statistic of statsmodels' ``acorr_ljungbox``, which
    the tests use as the reference).  The series are tested together by a Bonferroni bound:
    ``p = min(1, n_series · min_i p_i)``; dependence is *detected* when ``p < level`` (0.05).
    At least :data:`MIN_TURNS_CHECK` turns are needed.
integrated autocorrelation time ``τ̂``
    Sokal's automatic window: ``τ̂(M) = 1 + 2 Σ_{t=1}^{M} r_t`` with ``M`` the smallest lag for
    which ``M ≥ 5 τ̂(M)`` (a common practice in Monte Carlo error analysis).  When no such ``M``
    exists below ``N/2`` the window is "not reached" and ``τ̂`` is a lower bound.  The effective
    number of independent turns is ``N_eff = N / max(τ̂, 1)``.

The errors that follow (:func:`block_rule`, used by :mod:`nullfit.fitting.turn_errors`): when
dependence is detected with ``τ̂ > 1``, the scatter is taken over consecutive blocks of
``B = ceil(BLOCK_TAUS · τ̂)`` turns (batch means), with at least :data:`MIN_BLOCKS` blocks; the
covariance then has ``n_blocks − 1`` degrees of freedom and every interval uses Student-t /
Hotelling with them.  Batch means of independent turns are exactly calibrated for any ``B``
(only degrees of freedom are lost), so widening costs power, never coverage.  With ``B = 6 τ̂``
the variance of a batch mean is biased low by about ``1/12`` for AR(1) dependence (the bias
is ``≈ Σ_t |t| ρ(t) / (τ B)``); the measured coverages are in ``docs/limits.md``.

When fewer than :data:`CALIBRATION_BLOCKS` independent blocks remain (``min(n_blocks, N_eff)``
with dependence detected), the coverage of anything built on the covariance cannot be checked
from the data: such results carry a caveat (``TurnDependence.caveat``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..core.render import Described, Summary, fmt

#: Significance level of the portmanteau test that switches the errors to blocks.
LEVEL = 0.05
#: Fewest turns on which the check runs (the Ljung–Box test then has 2 lags).
MIN_TURNS_CHECK = 10
#: Block length in units of the integrated autocorrelation time.
BLOCK_TAUS = 6.0
#: Fewest blocks the block rule leaves (the covariance then has 4 dof).
MIN_BLOCKS = 5
#: Below this many independent blocks the result cannot be calibrated (caveat on every limit).
CALIBRATION_BLOCKS = 10
#: Sokal window constant.
SOKAL_C = 5.0
#: Lags computed directly (a dot product each) before the FFT of the whole series is needed: the
#: check first looks for the Sokal window within them (it is found there unless τ̂ ≳ 5 turns).
DIRECT_LAGS = 32


def autocorrelation(x, max_lag: int) -> np.ndarray:
    """Sample autocorrelations ``r_0 … r_max_lag`` of each column of ``x`` (``(N, p)`` or ``(N,)``).

    Demeaned, denominator ``N`` (``r_0 = 1``); a constant column gives NaN.  Up to
    :data:`DIRECT_LAGS` lags each lag is one dot product per column (``N`` multiply-adds); beyond,
    by FFT zero-padded to at least ``2N − 1`` points (so the correlation is linear, not circular),
    at the next length with small prime factors.  The two agree to rounding.
    """
    x = np.asarray(x, dtype=float)
    one = x.ndim == 1
    if one:
        x = x[:, None]
    n = x.shape[0]
    d = (x - x.mean(axis=0)).T
    if max_lag <= min(DIRECT_LAGS, n - 1):
        d = np.ascontiguousarray(d)
        ac = np.empty((max_lag + 1, d.shape[0]))
        for j, v in enumerate(d):
            for t in range(max_lag + 1):
                ac[t, j] = v[t:] @ v[:n - t]
    else:
        from scipy import fft

        nfft = fft.next_fast_len(max(2 * n - 1, 2), real=True)
        f = fft.rfft(d, nfft, axis=-1)
        ac = fft.irfft(f * np.conj(f), nfft, axis=-1)[:, : max_lag + 1].T
    with np.errstate(invalid="ignore", divide="ignore"):
        r = ac / ac[0]
    return r[:, 0] if one else r


def ljung_box_lags(n: int) -> int:
    """Lags of the portmanteau test: ``min(10, n // 5)`` (statsmodels' default)."""
    return int(min(10, n // 5))


def ljung_box(r: np.ndarray, n: int, lags: int):
    """Ljung–Box ``Q`` and its χ²(``lags``) p-value from autocorrelations ``r`` (rows = lags)."""
    from scipy import stats

    k = np.arange(1, lags + 1)
    rk = r[1:lags + 1]
    if rk.ndim == 2:
        k = k[:, None]
    q = n * (n + 2) * np.sum(rk ** 2 / (n - k), axis=0)
    return q, stats.chi2.sf(q, lags)


def integrated_time(r: np.ndarray, n: int, c: float = SOKAL_C):
    """Integrated autocorrelation time per column by Sokal's automatic window.

    Returns ``(tau, window, reached)``: ``τ̂(M) = 1 + 2 Σ_{t ≤ M} r_t`` at the smallest ``M`` with
    ``M ≥ c τ̂(M)`` (searched up to ``N/2``); where none exists, ``M = N/2`` and ``reached`` is
    False (then ``τ̂`` understates the dependence).  ``τ̂`` is not clipped (it can fall below 1
    for negatively correlated turns).
    """
    r = np.asarray(r, dtype=float)
    if r.ndim == 1:
        r = r[:, None]
    top = max(1, min(r.shape[0] - 1, n // 2))
    cs = 1.0 + 2.0 * np.cumsum(r[1:top + 1], axis=0)
    m = np.arange(1, top + 1)[:, None]
    ok = m >= c * cs
    reached = ok.any(axis=0)
    idx = np.where(reached, ok.argmax(axis=0), top - 1)
    tau = cs[idx, np.arange(cs.shape[1])]
    return tau, idx + 1, reached


@dataclass(frozen=True, eq=False)
class TurnDependence(Described):
    """The turn-to-turn dependence check of the per-turn coefficients, and what the errors did.

    Per series (``names``): lag-1 autocorrelation ``lag1``, Ljung–Box ``q`` and ``p_values`` at
    ``lags`` lags, integrated autocorrelation time ``tau`` (Sokal window ``window``, ``reached``).
    ``p_value`` is the Bonferroni-combined p-value; ``detected`` when it is below ``level``.
    ``n_eff = N / max(τ̂_max, 1)``.  ``action`` says what the errors did: ``"none"`` (turn
    scatter, no dependence detected), ``"widened"`` (blocks of ``block_turns`` turns),
    ``"warned"`` (dependence detected, turn scatter kept on request), ``"given"`` (blocks chosen
    by the caller), ``"ignored"`` (a joint HAC/OLS fit: dependence reported, not followed),
    ``"not checked"``.
    """

    n_turns: int
    names: tuple[str, ...] = ()
    checked: bool = False
    reason: str = ""
    lags: int = 0
    lag1: tuple[float, ...] = ()
    q: tuple[float, ...] = ()
    p_values: tuple[float, ...] = ()
    p_value: float | None = None
    level: float = LEVEL
    tau: tuple[float, ...] = ()
    window: tuple[int, ...] = ()
    reached: tuple[bool, ...] = ()
    n_gaps: int = 0
    action: str = "not checked"
    block_turns: int = 1
    n_blocks: int = 0
    suggested_block_turns: int = 1

    # ---------------------------------------------------------------- derived
    @property
    def detected(self) -> bool:
        return bool(self.checked and self.p_value is not None and self.p_value < self.level)

    @property
    def positive(self) -> bool:
        """Dependence detected with ``τ̂ > 1``: the turn scatter understates the error."""
        return self.detected and self.tau_max is not None and self.tau_max > 1.0

    @property
    def tau_max(self) -> float | None:
        return max(self.tau) if self.tau else None

    @property
    def n_eff(self) -> float | None:
        """Effective number of independent turns ``N / max(τ̂_max, 1)``."""
        if not self.tau:
            return None
        return self.n_turns / max(self.tau_max, 1.0)

    @property
    def n_independent(self) -> float | None:
        """Effective number of independent blocks behind the covariance: ``min(n_blocks, N_eff)``."""
        if self.n_eff is None:
            return None
        return min(float(self.n_blocks or self.n_turns), self.n_eff)

    @property
    def calibrated(self) -> bool:
        """False when dependence was detected (or kept on request) and fewer than
        :data:`CALIBRATION_BLOCKS` independent blocks remain."""
        if not self.positive:
            return True
        if self.action in ("warned", "ignored"):
            return False
        return self.n_independent is not None and self.n_independent >= CALIBRATION_BLOCKS

    @property
    def caveat(self) -> str | None:
        """The note every limit built on this covariance carries, or None."""
        if self.calibrated:
            return None
        if self.action == "warned":
            return (f"turn-to-turn dependence detected (Ljung–Box p = {self.p_value:.2g}, τ̂ = "
                    f"{self.tau_max:.3g} turns) but the turn scatter was kept (dependence='warn'): the "
                    "covariance is too small and this result cannot be calibrated")
        if self.action == "ignored":
            return (f"turn-to-turn dependence detected (Ljung–Box p = {self.p_value:.2g}, τ̂ = {self.tau_max:.3g} "
                    "turns) and not covered by the joint-fit errors: this result cannot be calibrated "
                    "(use errors='turns')")
        return (f"only ≈ {self.n_independent:.3g} independent blocks behind the covariance (turn-to-turn "
                f"dependence, τ̂ = {self.tau_max:.3g} turns): its coverage cannot be calibrated from these data "
                "— quote it with that caveat, or take a longer scan")

    def statement(self) -> str:
        """One line for fit summaries: what was measured and what the errors did."""
        if not self.checked:
            return f"turn-to-turn dependence not checked: {self.reason}"
        what = (f"lag-1 autocorrelation {', '.join(f'{n} {fmt(v, 2)}' for n, v in zip(self.names, self.lag1))}; "
                f"Ljung–Box ({self.lags} lags) p = {fmt(self.p_value, 2)}; τ̂ = {fmt(self.tau_max, 3)} turns, "
                f"N_eff ≈ {fmt(self.n_eff, 3)}")
        if self.action == "widened":
            act = (f"dependence detected: errors widened to blocks of {self.block_turns} turns "
                   f"({self.n_blocks} blocks, {self.n_blocks - 1} dof)")
        elif self.action == "warned":
            act = "DEPENDENCE DETECTED: turn scatter kept on request (dependence='warn'); σ too small"
        elif self.action == "ignored":
            act = "DEPENDENCE DETECTED: not covered by the joint-fit errors (use errors='turns')"
        elif self.action == "given":
            act = f"blocks of {self.block_turns} turns as given"
            if self.detected and self.block_turns < self.suggested_block_turns:
                act += f" (shorter than the {self.suggested_block_turns} turns the check suggests)"
        elif self.detected:
            act = "dependence detected but negative (τ̂ ≤ 1): the turn scatter is conservative"
        else:
            act = "no dependence detected: turn scatter"
        return f"{what} — {act}"

    def to_dict(self) -> dict:
        return {
            "checked": self.checked, "reason": self.reason or None, "n_turns": self.n_turns,
            "series": list(self.names), "lag1_autocorrelation": dict(zip(self.names, map(float, self.lag1))),
            "ljung_box_lags": self.lags, "ljung_box_q": dict(zip(self.names, map(float, self.q))),
            "ljung_box_p": dict(zip(self.names, map(float, self.p_values))),
            "p_value": self.p_value, "level": self.level, "detected": self.detected,
            "tau_int": dict(zip(self.names, map(float, self.tau))),
            "tau_window": dict(zip(self.names, map(int, self.window))),
            "tau_window_reached": dict(zip(self.names, map(bool, self.reached))),
            "n_eff": self.n_eff, "n_gaps": self.n_gaps, "action": self.action,
            "block_turns": self.block_turns, "n_blocks": self.n_blocks,
            "suggested_block_turns": self.suggested_block_turns,
            "n_independent": self.n_independent, "calibrated": self.calibrated, "caveat": self.caveat,
        }

    def summary(self) -> Summary:
        rows = [("turns", self.n_turns, "")]
        if self.checked:
            for n, r1, p, t in zip(self.names, self.lag1, self.p_values, self.tau):
                rows.append((f"{n}: lag-1 autocorrelation / Ljung–Box p / τ̂", f"{fmt(r1, 3)} / {fmt(p, 3)} / "
                             f"{fmt(t, 3)}", ""))
            rows += [("combined p (Bonferroni)", self.p_value, ""), ("N_eff", self.n_eff, "turns"),
                     ("errors", self.action, "")]
        notes = [self.statement()]
        if self.caveat:
            notes.append(self.caveat)
        return Summary("Turn-to-turn dependence", tuple(rows), tuple(notes))

    def __repr__(self) -> str:
        if not self.checked:
            return f"TurnDependence(not checked: {self.reason})"
        return (f"TurnDependence(N={self.n_turns}, p={self.p_value:.3g}, τ̂={self.tau_max:.3g}, "
                f"action={self.action}, blocks of {self.block_turns})")

    def with_action(self, action: str, block_turns: int, n_blocks: int) -> "TurnDependence":
        return replace(self, action=action, block_turns=int(block_turns), n_blocks=int(n_blocks))


def count_gaps(turn=None, time_mid=None) -> int:
    """Gaps between consecutive fitted turns: a jump in the turn numbers, or (without them) a
    spacing of the turn mid-times above 1.5 times their median spacing."""
    if turn is not None and len(turn) > 1:
        return int(np.count_nonzero(np.diff(np.asarray(turn)) > 1))
    if time_mid is not None and len(time_mid) > 2:
        dt = np.diff(np.asarray(time_mid, dtype=float))
        return int(np.count_nonzero(dt > 1.5 * np.median(dt)))
    return 0


def check_dependence(series, names=None, *, turn=None, time_mid=None, level: float = LEVEL) -> TurnDependence:
    """Measure the turn-to-turn dependence of per-turn coefficient series ``(N, p)``.

    ``turn`` (turn numbers) or ``time_mid`` (turn mid-times), both optional, only count gaps
    (:func:`count_gaps`): the check runs over the fitted turns in order, as if consecutive.
    Columns that are constant are left out.
    """
    x = np.asarray(series, dtype=float)
    if x.ndim == 1:
        x = x[:, None]
    n, p = x.shape
    names = tuple(names) if names is not None else tuple(f"x{j}" for j in range(p))
    gaps = count_gaps(turn, time_mid)
    if n < MIN_TURNS_CHECK:
        return TurnDependence(n, names, False, f"fewer than {MIN_TURNS_CHECK} turns ({n})", n_gaps=gaps)
    xt = np.ascontiguousarray(x.T)  # one series per row: the passes below run along memory
    if not (np.isfinite(xt.sum()) or np.all(np.isfinite(xt))):  # a finite sum has finite terms
        return TurnDependence(n, names, False, "non-finite per-turn coefficients", n_gaps=gaps)
    keep = np.ptp(xt, axis=1) > 0
    if not keep.any():
        return TurnDependence(n, names, False, "constant per-turn coefficients", n_gaps=gaps)
    if not keep.all():
        xt, names = xt[keep], tuple(nm for nm, k in zip(names, keep) if k)
    x = xt.T
    h = ljung_box_lags(n)
    # the window is the smallest lag M with M ≥ c τ̂(M): found among the first lags, it is the
    # window of the whole series; only when it is not there are all N/2 lags needed
    r = autocorrelation(x, min(n // 2, max(h, DIRECT_LAGS)))
    tau, win, reached = integrated_time(r, n)
    if not reached.all() and r.shape[0] - 1 < n // 2:
        r = autocorrelation(x, max(h, n // 2))
        tau, win, reached = integrated_time(r, n)
    q, pv = ljung_box(r, n, h)
    p_comb = float(min(1.0, len(names) * float(pv.min())))
    dep = TurnDependence(n, names, True, "", h, tuple(map(float, r[1])), tuple(map(float, q)),
                         tuple(map(float, pv)), p_comb, float(level), tuple(map(float, tau)),
                         tuple(map(int, win)), tuple(map(bool, reached)), gaps)
    return replace(dep, suggested_block_turns=block_rule(dep)[0])


def block_rule(dep: TurnDependence) -> tuple[int, int]:
    """``(block_turns, n_blocks)`` the errors use: 1 turn per block unless dependence is detected
    with ``τ̂ > 1``, then ``ceil(BLOCK_TAUS · τ̂)`` turns, at most ``N // MIN_BLOCKS`` (blocks of
    near-equal length, see :func:`block_edges`)."""
    n = dep.n_turns
    if not dep.positive:
        return 1, n
    b = int(math.ceil(BLOCK_TAUS * dep.tau_max))
    b = max(1, min(b, n // MIN_BLOCKS))
    return b, n // b


def block_edges(n: int, n_blocks: int) -> np.ndarray:
    """Start indices (and the end) of ``n_blocks`` consecutive blocks of near-equal length."""
    return (np.arange(n_blocks + 1) * n) // n_blocks
