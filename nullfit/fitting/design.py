"""Design-matrix columns for a scan fit: harmonics in angle and the drift bases.

Model (``docs/conventions.md``)::

    y(t, θ) = drift(t) + Σ_k [c_k cos kθ + s_k sin kθ] (+ Σ_j d_j aux_j) + noise

Column conventions
------------------
* Harmonic columns come in the order ``cos k₁θ, sin k₁θ, cos k₂θ, sin k₂θ, …`` and are named
  ``c{k}``, ``s{k}`` (:func:`harmonic_columns`, :func:`harmonic_names`).
* Time is **always scaled to [−1, 1] before any basis is built** (:func:`scale_time`): a Unix
  time near 1.8e9 s raised to the third power loses every significant digit of a 1-s step,
  whereas Legendre polynomials of a scaled time stay orthogonal-ish and well conditioned.
* Drift bases (:class:`DriftSpec`):

  ``"per-turn"`` (``"per-turn:d"``)
      An offset and a slope (Legendre polynomials up to order ``d``, default 1) in the time
      *within each turn*, scaled to [−1, 1] over the turn.  These are never built as dense
      columns of a big matrix: the fit projects them out turn by turn (Frisch–Waugh–Lovell).
      :func:`dense_design` builds them densely only for small cross-checks.
  ``"poly:d"``
      Legendre polynomials ``P_0 … P_d`` of the scan time scaled to [−1, 1].
  ``"spline:h"``
      A clamped cubic B-spline in scaled time with uniform knot spacing ``h`` turns
      (``scipy.interpolate.BSpline``).  The basis sums to one, so it contains the offset.
  ``"none"``
      A constant offset only.

Knot spacing of the spline drift, and why the warning fires below one turn
--------------------------------------------------------------------------
A cubic spline with knot spacing ``h`` follows any oscillation whose period is longer than about
two knot intervals.  The kθ term has a period of ``1/k`` turn, so the spline starts to absorb it
once ``h`` approaches ``1/(2k)`` turn.  Worst-case (over phase) fraction of the centred kθ column
variance absorbed by the spline, computed with this module (64 readings per turn, 40 turns,
knots offset from the reference mark by 0.1 turn)::

    h [turns]   0.25   0.3    0.4    0.5    0.6    0.75   1.0    1.5    2.0    3.0
    1θ          1.000  0.999  0.962  0.972  0.104  0.037  0.022  0.014  0.011  0.008
    2θ          0.886  0.067  0.017  0.012  0.007  0.007  0.006  0.004  0.003  0.002

The edge sits at ``h = 1/(2k)`` turn; at ``h = 1/k`` turn (twice the edge) at most ~2 % is
absorbed (σ inflated by ≤ 1 %).  :func:`check_knot_spacing` therefore warns when
``h < 1/k_min`` turn for the lowest requested harmonic — ``h < 1`` turn for the default 1θ+2θ
fit — and the fit itself additionally reports the variance inflation of every harmonic column
(see ``nullfit.fit``).  ``tests/fitting/test_design.py`` recomputes the two ends of this table.
"""

from __future__ import annotations

import math
import re
import warnings
from dataclasses import dataclass

import numpy as np

from ..core.errors import AnalysisError, FitWarning, where
from ..reading.turn_numbering import TWO_PI

#: Degree of the spline drift basis (cubic).
SPLINE_DEGREE = 3
#: Smallest normalised eigenvalue of the centred harmonic Gram matrix accepted as "separable".
SEPARABILITY_MIN = 1e-6
#: Readings of a long log used by the coverage check (:func:`coverage_sample`).
SEPARABILITY_SAMPLE = 1 << 15


# ----------------------------------------------------------------------------- harmonics
def check_harmonics(harmonics) -> tuple[int, ...]:
    """Validate the requested harmonic orders: distinct positive integers, returned sorted."""
    if isinstance(harmonics, (int, np.integer)):
        harmonics = (int(harmonics),)
    try:
        ks = [int(k) for k in harmonics]
    except (TypeError, ValueError):
        raise ValueError(f"harmonics must be positive integers such as (1, 2), not {harmonics!r}") from None
    if not ks:
        raise ValueError("harmonics must name at least one harmonic order, e.g. (2,)")
    if any(k != float(h) for k, h in zip(ks, harmonics)) or any(k < 1 for k in ks):
        raise ValueError(f"harmonics must be positive integers such as (1, 2), not {tuple(harmonics)!r}")
    if len(set(ks)) != len(ks):
        raise ValueError(f"harmonics must be distinct, not {tuple(ks)!r}")
    return tuple(sorted(ks))


def harmonic_names(harmonics) -> tuple[str, ...]:
    """``("c1", "s1", "c2", "s2", …)`` in column order."""
    return tuple(n for k in harmonics for n in (f"c{k}", f"s{k}"))


def harmonic_columns(angle, harmonics) -> np.ndarray:
    """Columns ``cos kθ, sin kθ`` for each ``k`` in ``harmonics``, shape ``(n, 2K)``.

    ``cos θ`` and ``sin θ`` are evaluated once; higher orders follow from the recurrence
    ``e^{i(k+1)θ} = e^{ikθ} e^{iθ}`` (rounding grows like k·ε, negligible for the few
    harmonics of a scan).
    """
    return harmonic_rows(angle, check_harmonics(harmonics)).T


def harmonic_rows(angle, ks, out=None) -> np.ndarray:
    """As :func:`harmonic_columns` but transposed, shape ``(2K, n)`` (``ks`` already checked);
    ``out`` may be a preallocated ``(2K, n)`` array."""
    a = np.asarray(angle, dtype=float)
    if out is None:
        out = np.empty((2 * len(ks), a.size))
    c1, s1 = np.cos(a), np.sin(a)
    ck, sk = c1, s1
    want = {k: j for j, k in enumerate(ks)}
    for k in range(1, max(ks) + 1):
        if k > 1:
            ck, sk = ck * c1 - sk * s1, sk * c1 + ck * s1
        if k in want:
            j = want[k]
            out[2 * j] = ck
            out[2 * j + 1] = sk
    return out


def check_separable(angle, harmonics, *, marks: int | None = None, source: str | None = None) -> None:
    """Refuse (``AnalysisError``) when the angle coverage cannot separate the requested harmonics.

    * At ``M`` discrete marks per turn only orders ``k < M/2`` are identified: ``sin(Mθ/2)``
      vanishes at every mark and ``cos kθ`` equals ``cos (M−k)θ`` there (aliasing).
    * Otherwise the centred harmonic columns must be linearly independent: the smallest
      eigenvalue of their Gram matrix, normalised by the mean square of a full-coverage column
      (1/2), must exceed ``SEPARABILITY_MIN``.  Coverage is a property of the angles, so a long
      log is checked on a sample of ``SEPARABILITY_SAMPLE`` readings in contiguous runs
      (:func:`coverage_sample`; a strided sample could alias with the readings per turn).
    """
    ks = check_harmonics(harmonics)
    _check_marks(ks, marks, source)
    a = coverage_sample(np.asarray(angle, dtype=float))
    h = harmonic_rows(a, ks)
    h -= h.mean(axis=1, keepdims=True)
    g = h @ h.T / h.shape[1]
    ev = np.linalg.eigvalsh(g / 0.5)
    if ev[0] < SEPARABILITY_MIN:
        nuniq = np.unique(np.round(np.mod(a, TWO_PI), 6)).size
        _refuse(ks, source, f"{nuniq} distinct azimuth(s)", ev[0])


def check_separable_sums(sums, harmonics, *, marks: int | None = None, source: str | None = None) -> None:
    """:func:`check_separable` from sums over every reading: ``sums`` is the ``(2K + 1)²``
    matrix of the sums of products of ``[1, cos k₁θ, sin k₁θ, …]`` (a streamed log)."""
    ks = check_harmonics(harmonics)
    _check_marks(ks, marks, source)
    S = np.asarray(sums, dtype=float)
    n = S[0, 0]
    mu = S[0, 1:] / n
    g = S[1:, 1:] / n - np.outer(mu, mu)
    ev = np.linalg.eigvalsh(g / 0.5)
    if ev[0] < SEPARABILITY_MIN:
        _refuse(ks, source, f"{int(n)} readings" + (f" at {marks} marks" if marks else ""), ev[0])


def coverage_sample(a: np.ndarray) -> np.ndarray:
    """At most ``SEPARABILITY_SAMPLE`` readings of ``a`` for the coverage check: 64 contiguous
    runs, spread over the log with golden-ratio offsets (so that their phases within a turn do
    not repeat, whatever the readings per turn)."""
    n = a.size
    if n <= SEPARABILITY_SAMPLE:
        return a
    runs = 64
    run = SEPARABILITY_SAMPLE // runs
    stride = (n - run) // runs
    jitter = np.mod(np.arange(runs) * 0.6180339887498949, 1.0)
    starts = np.arange(runs) * stride + (jitter * max(stride - run, 0)).astype(np.int64)
    return a[(starts[:, None] + np.arange(run)).ravel()]


def _check_marks(ks, marks, source) -> None:
    if marks is not None and max(ks) >= marks / 2:
        bad = [k for k in ks if k >= marks / 2]
        raise AnalysisError(f"{where(source)}: the table was read at {marks} marks per turn, which identifies "
                        f"harmonics only up to k < {marks / 2:g}; cannot fit k = {', '.join(map(str, bad))}")


def _refuse(ks, source, what: str, ev0: float) -> None:
    raise AnalysisError(f"{where(source)}: angle coverage cannot separate the harmonics {ks} "
                        f"({what}; smallest normalised eigenvalue {ev0:.2e})")


# ----------------------------------------------------------------------------- time bases
def scale_time(t, lo: float, hi: float) -> np.ndarray:
    """Map times in ``[lo, hi]`` linearly onto ``[−1, 1]`` (always do this before a basis)."""
    t = np.asarray(t, dtype=float)
    if not hi > lo:
        return np.zeros_like(t)
    return (t - lo) * (2.0 / (hi - lo)) - 1.0


def legendre_columns(u, degree: int) -> np.ndarray:
    """Legendre polynomials ``P_0(u) … P_degree(u)`` of a scaled time ``u ∈ [−1, 1]``."""
    from numpy.polynomial import legendre

    if degree < 0:
        raise ValueError(f"polynomial degree must be >= 0, not {degree}")
    return legendre.legvander(np.asarray(u, dtype=float), int(degree))


def typical_turn_period(start_times, t_lo: float, t_hi: float, n_rows: int) -> float:
    """Typical duration of one turn (s): the median time between the starts of consecutive turns
    (``start_times``, one per turn); with fewer than three turns, the span ``t_hi − t_lo``
    stretched by ``n/(n−1)`` and divided by the number of turns."""
    st = np.asarray(start_times, dtype=float)
    if st.size >= 3:
        return float(np.median(np.diff(st)))
    span = (t_hi - t_lo) * n_rows / max(n_rows - 1, 1)
    return float(span / max(st.size, 1))


def spline_knots(n_intervals: int) -> np.ndarray:
    """Clamped cubic knot vector on the scaled time axis [−1, 1] with uniform interior knots."""
    n_intervals = max(1, int(n_intervals))
    inner = np.linspace(-1.0, 1.0, n_intervals + 1)
    return np.r_[np.full(SPLINE_DEGREE, -1.0), inner, np.full(SPLINE_DEGREE, 1.0)]


def spline_intervals(duration_s: float, turn_period_s: float, knot_turns: float) -> int:
    """Number of knot intervals for a knot spacing of ``knot_turns`` turns (at least one)."""
    if not (knot_turns > 0 and math.isfinite(knot_turns)):
        raise ValueError(f"spline knot spacing must be a positive number of turns, not {knot_turns!r}")
    if not turn_period_s > 0:
        return 1
    return max(1, int(round(duration_s / (knot_turns * turn_period_s))))


def spline_design_sparse(u, knots):
    """B-spline basis at scaled times ``u`` as a ``scipy.sparse`` CSR matrix (4 non-zeros per row)."""
    from scipy.interpolate import BSpline

    u = np.clip(np.asarray(u, dtype=float), knots[0], knots[-1])
    return BSpline.design_matrix(u, knots, SPLINE_DEGREE).tocsr()


def spline_columns(u, knots) -> np.ndarray:
    """Dense B-spline basis (for small designs and tests)."""
    return spline_design_sparse(u, knots).toarray()


def check_knot_spacing(knot_turns: float, harmonics, *, stacklevel: int = 3) -> bool:
    """Warn (``FitWarning``) when the spline knots are closer than ``1/k_min`` turn.

    See the module docstring for the table that justifies the rule.  Returns True if it warned.
    """
    kmin = min(check_harmonics(harmonics))
    if knot_turns < 1.0 / kmin:
        warnings.warn(
            f"spline knots every {knot_turns:g} turn(s) can absorb part of the {kmin}θ signal "
            f"(the drift model resolves periods down to ~2 knot intervals; keep ≥ {1.0 / kmin:g} turn)",
            FitWarning, stacklevel=stacklevel)
        return True
    return False


# ----------------------------------------------------------------------------- drift spec
@dataclass(frozen=True)
class DriftSpec:
    """A parsed drift model: ``kind`` in {"per-turn", "poly", "spline", "none"}."""

    kind: str
    degree: int = 0  # Legendre degree (per-turn: 1 = offset + slope; poly: d)
    knot_turns: float | None = None

    @property
    def label(self) -> str:
        if self.kind == "per-turn":
            return "per-turn" if self.degree == 1 else f"per-turn:{self.degree}"
        if self.kind == "poly":
            return f"poly:{self.degree}"
        if self.kind == "spline":
            return f"spline:{self.knot_turns:g}"
        return "none"

    @property
    def description(self) -> str:
        if self.kind == "per-turn":
            what = {0: "an offset", 1: "an offset and a slope"}.get(self.degree,
                                                                     f"a Legendre polynomial of degree {self.degree}")
            return f"{what} in each turn, projected out turn by turn"
        if self.kind == "poly":
            return f"Legendre polynomial of degree {self.degree} in time scaled to [−1, 1]"
        if self.kind == "spline":
            return f"cubic B-spline, knots every {self.knot_turns:g} turn(s)"
        return "constant offset only"


_DRIFT_RE = re.compile(r"^\s*(per-turn|perturn|turn|poly|polynomial|spline|none|offset)\s*(?::\s*([0-9.eE+-]+))?\s*$")


def per_turn_drift(drift, what: str = "demodulate"):
    """:func:`parse_drift` of a drift that must be fitted turn by turn (``"per-turn"`` or
    ``"per-turn:d"``); ``what`` says who needs it, for the message."""
    spec = parse_drift(drift)
    if spec.kind != "per-turn":
        raise ValueError(f"{what} fits drift turn by turn: drift must be 'per-turn' or 'per-turn:d', not {drift!r}")
    return spec


def parse_drift(drift="per-turn", *, degree: int = 3, knot_turns: float = 2.0) -> DriftSpec:
    """Parse ``"per-turn"``, ``"per-turn:d"``, ``"poly"``, ``"poly:3"``, ``"spline"``, ``"spline:2"``
    or ``"none"`` (``degree`` and ``knot_turns`` supply the defaults for ``"poly"``/``"spline"``)."""
    if isinstance(drift, DriftSpec):
        return drift
    m = _DRIFT_RE.match(str(drift).lower()) if isinstance(drift, str) else None
    if m is None:
        raise ValueError(f"drift must be 'per-turn', 'poly[:DEG]', 'spline[:TURNS]' or 'none', not {drift!r}")
    kind, arg = m.group(1), m.group(2)
    if kind in ("per-turn", "perturn", "turn"):
        d = 1 if arg is None else _int_arg(arg, "per-turn degree")
        if d > 3:
            raise ValueError(f"per-turn drift degree must be 0..3, not {d}")
        return DriftSpec("per-turn", d)
    if kind in ("poly", "polynomial"):
        d = int(degree) if arg is None else _int_arg(arg, "polynomial degree")
        if d < 0:
            raise ValueError(f"polynomial degree must be >= 0, not {d}")
        return DriftSpec("poly", d)
    if kind == "spline":
        h = float(knot_turns) if arg is None else float(arg)
        if not (h > 0 and math.isfinite(h)):
            raise ValueError(f"spline knot spacing must be a positive number of turns, not {h!r}")
        return DriftSpec("spline", SPLINE_DEGREE, h)
    return DriftSpec("none", 0)


def _int_arg(text: str, what: str) -> int:
    try:
        v = float(text)
    except ValueError:
        raise ValueError(f"{what} must be an integer, not {text!r}") from None
    if v != int(v) or v < 0:
        raise ValueError(f"{what} must be a non-negative integer, not {text!r}")
    return int(v)
