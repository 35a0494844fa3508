"""Synthetic rotation scans with a known truth (demo data, injection tests, coverage studies).

:func:`simulate_scan` returns a validated :class:`~nullfit.scan.Scan` and, beside it, a
:class:`Truth` that holds every ingredient of the signal; :func:`simulate_frame` returns the same
readings as the raw columns a logger would write (for CSV demo files).

Model
-----
The turntable turns at a constant rate, one turn per ``period_s`` seconds, and is read at equal
time steps.  The signal is (``docs/conventions.md``)::

    y_i = drift(t_i) + Σ_k [c_k cos kθ_i + s_k sin kθ_i] + noise_i + outlier_i

with ``c_k cos kθ + s_k sin kθ = A_k cos(k(θ − φ_k))`` (:mod:`nullfit.core.conventions`).

Angles
    *Continuous sampling* (``marks=None``): ``samples_per_turn`` readings per turn, reading ``i``
    at ``t_i = i·period_s/samples_per_turn`` and ``θ_i = start_angle_deg + sense·360°·i/samples_per_turn``.
    *Discrete marks* (``marks=M``): the table is read as each of ``M`` equally spaced marks
    (mark ``j`` at ``j·360°/M``, mark 0 the reference mark) passes the pointer, one reading every
    ``period_s/M`` seconds.  With ``repeat_start_mark=True`` the reference mark is read a second
    time at the end of every turn: the table stands at the reference mark for one reading interval,
    the first reading closes the turn and the second opens the next (a drift reference, not an
    extra azimuth), so a full cycle takes ``period_s·(M+1)/M`` and has ``M+1`` readings.  The
    first and last readings of the log are not repeated.  Harmonics ``k ≥ M/2`` alias (as in a
    real mark log); the simulator does not refuse them.
    The logged angle is ``θ mod 360°`` (``angles_mod_360=True``) or the continuous angle.

Drift (:class:`Drift`)
    ``offset + slope·t + quadratic·t² + W(t)``, ``t`` in seconds since the first reading and
    ``W`` a Gaussian random walk with ``W(0) = 0`` and increments of standard deviation
    ``walk_step`` between consecutive readings (of the gap-free grid).

Noise (:class:`Noise`)
    ``sigma`` is always the *marginal* standard deviation of one reading, so the three models have
    the same noise power.  ``"white"``: independent normal.  ``"ar1"``: stationary Gaussian AR(1),
    ``x_i = ρ x_{i−1} + e_i`` with ``ρ = ar1_coef`` per reading and innovations of standard
    deviation ``sigma·sqrt(1 − ρ²)`` (:func:`ar1_noise`).  ``"flicker"``: power spectral density
    ``∝ 1/f^α`` by spectral shaping (:func:`flicker_noise`).

Gaps and outliers
    ``gaps`` removes readings: a fraction (``round(gaps·n)`` readings drawn without replacement)
    or a list of ``(start_s, stop_s)`` windows in seconds since the first reading (readings with
    ``start_s ≤ t < stop_s`` are removed).  ``outliers=(fraction, size)`` adds ``±size`` (random
    sign, signal units) to ``round(fraction·n_kept)`` distinct kept readings.

Randomness: ``rng`` is an int seed, a ``numpy.random.Generator`` or None
(:func:`nullfit.core.conventions.make_rng`); the seed is recorded in the truth.  Noise, random walk,
gaps and outliers draw from four independent child streams (``Generator.spawn``), so switching
outliers or gaps on or off leaves the noise realisation unchanged.  Global state is never touched.
"""

from __future__ import annotations

import math
from typing import Any, Mapping, Sequence

import numpy as np

from ..core.conventions import SIGNAL_UNITS, make_rng
from ..reading.manifest import Manifest
from ..reading.scan import Scan
from .models import Drift, Harmonic, Noise, ar1_noise, flicker_noise
from .truth import Truth

DEFAULT_EPOCH_UNIX = 1_773_100_000
TIME_FORMATS = ("relative", "unix", "iso")
#: Column names of :func:`simulate_frame` (the defaults of docs/manifest.md where it has one).
SIGNAL_COLUMN = {"fringe": "fringe", "fractional": "frac_freq"}
TIME_COLUMN = {"relative": "time_s", "unix": "unix_s", "iso": "timestamp"}

_ON_MARK_TOL = 1e-9  # in steps: a reading this close to a mark lies on it


# ---------------------------------------------------------------------------------------------
# the simulator
# ---------------------------------------------------------------------------------------------
def _grid(n_turns, samples_per_turn, marks, repeat_start_mark, start_angle_deg, sense, period_s):
    """Times, true angles (deg), constructed turn numbers and completeness on the gap-free grid."""
    if marks is None:
        per = int(samples_per_turn)
        n = int(round(n_turns * per))
        step_deg = 360.0 / per
        q = start_angle_deg / step_deg * sense + np.arange(n)  # progress in steps, in the rotation sense
        closes = np.zeros(n, bool)
        dt = period_s / per
        t = np.arange(n) * dt
    else:
        per = int(marks)
        step_deg = 360.0 / per
        m0 = start_angle_deg / step_deg
        if abs(m0 - round(m0)) > _ON_MARK_TOL:
            raise ValueError(f"start_angle_deg={start_angle_deg!r} is not on a mark (marks every {step_deg:g}°)")
        m0 = int(round(m0)) * sense
        nsteps = int(round(n_turns * per))
        steps = m0 + np.arange(nsteps + (1 if repeat_start_mark else 0))
        if repeat_start_mark:
            # read every interior reference-mark passage twice: the first closes the turn, the repeat opens
            # the next; the first and last readings of the log are not repeated
            interior = (steps % per == 0) & (steps != steps[0]) & (steps != steps[-1])
            q = np.repeat(steps, np.where(interior, 2, 1)).astype(float)
            closes = np.zeros(q.size, bool)
            closes[np.flatnonzero(np.diff(q) == 0)] = True
        else:
            q = steps.astype(float)
            closes = np.zeros(q.size, bool)
        n = q.size
        t = np.arange(n) * (period_s / per)
    # the last reading closes its turn when it lies on the reference mark
    on_mark = np.abs(q / per - np.round(q / per)) <= _ON_MARK_TOL / per
    if n > 1 and on_mark[-1] and np.floor(q[-1] / per + _ON_MARK_TOL) > np.floor(q[0] / per + _ON_MARK_TOL):
        closes[-1] = True
    raw = np.floor(q / per + _ON_MARK_TOL).astype(np.int64) - closes
    turn = raw - raw[0]
    theta_deg = sense * q * step_deg
    # complete: every azimuth of the grid was read in the turn
    az = np.mod(np.round(q).astype(np.int64) if marks else np.round(q - q[0]).astype(np.int64), per)
    n_t = int(turn[-1]) + 1
    seen = np.zeros((n_t, per), bool)
    seen[turn, az] = True
    complete = seen.all(axis=1)
    return t, theta_deg, turn, complete


def _check_params(n_turns, period_s, samples_per_turn, marks, sense, signal_unit, epoch_unix):
    if not (isinstance(n_turns, (int, float, np.integer, np.floating)) and math.isfinite(n_turns) and n_turns > 0):
        raise ValueError(f"n_turns must be a positive number, not {n_turns!r}")
    if not (math.isfinite(period_s) and period_s > 0):
        raise ValueError(f"period_s must be positive, not {period_s!r}")
    if marks is None:
        if isinstance(samples_per_turn, bool) or not isinstance(samples_per_turn, (int, np.integer)) \
                or samples_per_turn < 3:
            raise ValueError(f"samples_per_turn must be an integer >= 3, not {samples_per_turn!r}")
    else:
        if isinstance(marks, bool) or not isinstance(marks, (int, np.integer)) or marks < 3:
            raise ValueError(f"marks must be an integer >= 3, not {marks!r}")
        if abs(n_turns * marks - round(n_turns * marks)) > 1e-9:
            raise ValueError(f"n_turns={n_turns!r} is not a whole number of marks ({marks} per turn)")
    if sense not in (1, -1):
        raise ValueError(f"sense must be +1 or -1, not {sense!r}")
    if signal_unit not in SIGNAL_UNITS:
        raise ValueError(f"signal_unit must be one of {SIGNAL_UNITS}, not {signal_unit!r}")
    if epoch_unix is not None and (isinstance(epoch_unix, bool) or not isinstance(epoch_unix, (int, np.integer))):
        raise ValueError(f"epoch_unix must be an integer number of Unix seconds or None, not {epoch_unix!r}")


def _gap_mask(gaps, t, gen) -> tuple[np.ndarray, Any]:
    n = t.size
    keep = np.ones(n, bool)
    if gaps is None:
        return keep, None
    if isinstance(gaps, (int, float, np.integer, np.floating)) and not isinstance(gaps, bool):
        frac = float(gaps)
        if not 0.0 <= frac < 1.0:
            raise ValueError(f"gaps as a fraction must lie in [0, 1), not {gaps!r}")
        k = int(round(frac * n))
        if n - k < 2:
            raise ValueError(f"gaps={gaps!r} would leave fewer than 2 readings")
        keep[gen.choice(n, size=k, replace=False)] = False
        return keep, frac
    windows = []
    try:
        for w in gaps:
            a, b = (float(v) for v in w)
            windows.append((a, b))
    except (TypeError, ValueError):
        raise ValueError("gaps must be a fraction in [0, 1) or a list of (start_s, stop_s) windows") from None
    for a, b in windows:
        if not (math.isfinite(a) and math.isfinite(b) and a < b):
            raise ValueError(f"gap window ({a!r}, {b!r}) must satisfy start_s < stop_s")
        keep &= ~((t >= a) & (t < b))
    if keep.sum() < 2:
        raise ValueError("the gap windows leave fewer than 2 readings")
    return keep, tuple(windows)


def _simulate(*, n_turns=20, period_s=60.0, samples_per_turn=64, marks=None, repeat_start_mark=False,
              harmonics=None, drift=None, noise="white", sigma=0.01, ar1_coef=None, flicker_alpha=None,
              outliers=None, gaps=None, start_angle_deg=0.0, sense=1, angles_mod_360=True,
              epoch_unix=DEFAULT_EPOCH_UNIX, signal_unit="fringe", rng=None) -> Truth:
    _check_params(n_turns, period_s, samples_per_turn, marks, sense, signal_unit, epoch_unix)
    if repeat_start_mark and marks is None:
        raise ValueError("repeat_start_mark=True needs marks (discrete mark readings)")
    if noise is None:
        noise, sigma = "white", 0.0
    if noise == "flicker" and flicker_alpha is None:
        flicker_alpha = 1.0
    noise_model = Noise(str(noise), float(sigma), None if ar1_coef is None else float(ar1_coef),
                        None if flicker_alpha is None else float(flicker_alpha))
    drift = Drift.coerce(drift)
    harm = tuple(Harmonic.from_amplitude_phase(k, *ap) for k, ap in sorted((harmonics or {}).items()))
    out_frac, out_size = (0.0, 0.0) if outliers is None else (float(outliers[0]), float(outliers[1]))
    if not 0.0 <= out_frac < 1.0 or not math.isfinite(out_size):
        raise ValueError(f"outliers must be (fraction in [0, 1), finite size), not {outliers!r}")
    gen, seed = make_rng(rng)
    g_noise, g_walk, g_gaps, g_out = gen.spawn(4)

    t, theta_deg, turn, complete = _grid(n_turns, samples_per_turn, marks, repeat_start_mark,
                                         float(start_angle_deg), int(sense), float(period_s))
    n = t.size
    theta = np.deg2rad(theta_deg)

    if noise_model.sigma == 0.0:
        eps = np.zeros(n)
    elif noise_model.kind == "white":
        eps = noise_model.sigma * g_noise.standard_normal(n)
    elif noise_model.kind == "ar1":
        eps = ar1_noise(n, noise_model.ar1_coef, noise_model.sigma, g_noise)
    else:
        eps = flicker_noise(n, noise_model.flicker_alpha, noise_model.sigma, g_noise)
    d = drift.polynomial(t)
    if drift.walk_step > 0:
        steps = g_walk.standard_normal(n)
        steps[0] = 0.0
        d = d + drift.walk_step * np.cumsum(steps)
    h = np.zeros(n)
    for hk in harm:
        h = h + hk.values(theta)

    keep, gap_spec = _gap_mask(gaps, t, g_gaps)
    nk = int(keep.sum())
    n_out = int(round(out_frac * nk))
    out_rows = np.sort(g_out.choice(nk, size=n_out, replace=False)) if n_out else np.zeros(0, np.int64)
    out_sig = np.zeros(nk)
    if n_out:
        out_sig[out_rows] = out_size * np.where(g_out.random(n_out) < 0.5, -1.0, 1.0)

    # the logged angle: round away float noise (719.99999999999 -> 720) before reducing modulo 360
    logged = np.round(theta_deg, 9)
    if angles_mod_360:
        logged = np.mod(logged, 360.0) + 0.0  # + 0.0 turns -0.0 into 0.0

    return Truth(
        harmonics=harm, drift=drift, noise=noise_model, seed=seed, n_turns=float(n_turns),
        period_s=float(period_s), samples_per_turn=None if marks else int(samples_per_turn),
        marks=None if marks is None else int(marks), repeat_start_mark=bool(repeat_start_mark),
        start_angle_deg=float(start_angle_deg), sense=int(sense), angles_mod_360=bool(angles_mod_360),
        epoch_unix=None if epoch_unix is None else int(epoch_unix), unit=signal_unit,
        outlier_fraction=out_frac, outlier_size=out_size, gaps=gap_spec, n_grid=n,
        kept=keep, time=t[keep], theta=theta[keep], angle_logged_deg=logged[keep],
        harmonic_signal=h[keep], drift_signal=d[keep], noise_signal=eps[keep], outlier_signal=out_sig,
        turn=turn[keep], turn_complete=complete, outlier_rows=out_rows.astype(np.int64),
    )


def simulate_scan(
    *,
    n_turns: float = 20,
    period_s: float = 60.0,
    samples_per_turn: int = 64,
    marks: int | None = None,
    repeat_start_mark: bool = False,
    harmonics: Mapping[int, tuple[float, float]] | None = None,
    drift: Drift | Mapping[str, float] | None = None,
    noise: str | None = "white",
    sigma: float = 0.01,
    ar1_coef: float | None = None,
    flicker_alpha: float | None = None,
    outliers: tuple[float, float] | None = None,
    gaps: float | Sequence[tuple[float, float]] | None = None,
    start_angle_deg: float = 0.0,
    sense: int = 1,
    angles_mod_360: bool = True,
    epoch_unix: int | None = DEFAULT_EPOCH_UNIX,
    signal_unit: str = "fringe",
    run_id: str | None = None,
    rng=None,
) -> tuple[Scan, Truth]:
    """Simulate one rotation scan with a known truth (see the module docstring for the model).

    Parameters
    ----------
    n_turns : float
        Turns of the table (a whole number of marks in mark mode).
    period_s : float
        Seconds per turn of the rotating table.
    samples_per_turn : int
        Readings per turn for continuous sampling (ignored when ``marks`` is given).
    marks : int, optional
        Read the table at this many equally spaced marks per turn instead.
    repeat_start_mark : bool
        With ``marks``: read the reference mark again at the end of every turn (the table stands
        at it for one reading interval).
    harmonics : mapping ``{k: (amplitude, phase_deg)}``
        Terms ``A_k cos(k(θ − φ_k))``; amplitudes (not peak-to-peak) in signal units.
    drift : Drift or mapping with keys ``offset, slope, quadratic, walk_step``
        ``offset + slope·t + quadratic·t² + random walk``; ``t`` in s since the first reading.
    noise : {"white", "ar1", "flicker"} or None
        Noise model (None: no noise).
    sigma : float
        Marginal standard deviation of the noise of one reading (signal units); 0 for none.
    ar1_coef : float
        Lag-one coefficient per reading for ``noise="ar1"`` (required there).
    flicker_alpha : float
        Spectral exponent for ``noise="flicker"``: PSD ∝ 1/f^α (default 1).
    outliers : (fraction, size), optional
        Add ``±size`` to ``round(fraction·n_kept)`` distinct readings.
    gaps : float or list of (start_s, stop_s), optional
        Remove a random fraction of readings, or the readings inside time windows (s since start).
    start_angle_deg : float
        Table angle of the first reading (a mark in mark mode); a start off the reference mark
        makes the first and last turns partial.
    sense : +1 or -1
        Rotation sense: the angle increases (+1) or decreases (−1) with time.
    angles_mod_360 : bool
        Log the angle modulo 360° (True) or continuously (False).
    epoch_unix : int or None
        Unix seconds (UTC) of the first reading; None for a scan with relative time only.
    signal_unit : {"fringe", "fractional"}
        Fractions of a fringe, or fractional frequency Δν/ν.
    run_id : str, optional
        Recorded in the scan's metadata.
    rng : int, numpy.random.Generator or None
        Seed or generator (:func:`nullfit.core.conventions.make_rng`); the seed is in the truth.

    Returns
    -------
    (Scan, Truth)
        The validated scan (built with :meth:`Scan.from_arrays`) and its truth; ``scan.time``
        is ``truth.time`` and ``scan.signal`` is ``truth.signal``.
    """
    truth = _simulate(n_turns=n_turns, period_s=period_s, samples_per_turn=samples_per_turn, marks=marks,
                      repeat_start_mark=repeat_start_mark, harmonics=harmonics, drift=drift, noise=noise,
                      sigma=sigma, ar1_coef=ar1_coef, flicker_alpha=flicker_alpha, outliers=outliers, gaps=gaps,
                      start_angle_deg=start_angle_deg, sense=sense, angles_mod_360=angles_mod_360,
                      epoch_unix=epoch_unix, signal_unit=signal_unit, rng=rng)
    seed_note = f"seed={truth.seed}" if truth.seed is not None else "seed held by the caller's Generator"
    meta = Manifest(units={"time": "s", "angle": "deg", "signal": signal_unit}, run_id=run_id,
                    notes=f"synthetic scan from nullfit.simulate.simulate_scan ({seed_note})")
    scan = Scan.from_arrays(truth.time, truth.angle_logged_deg, truth.signal, angle_unit="deg",
                            epoch_unix=truth.epoch_unix, signal_unit=signal_unit, source="<simulated>",
                            meta=meta)
    return scan, truth


def simulate_frame(*, time_format: str = "relative", **kwargs):
    """The readings of :func:`simulate_scan` as the raw columns a logger writes.

    Takes the keywords of :func:`simulate_scan` (except ``run_id``) and ``time_format``:
    ``"relative"`` (column ``time_s``: seconds since ``epoch_unix``, the first reading at 0),
    ``"unix"`` (``unix_s``: Unix seconds, float) or ``"iso"`` (``timestamp``: ISO-8601 UTC strings
    with microseconds and a trailing ``Z``).  The angle column ``angle_deg`` holds the angle as
    logged (modulo 360° or continuous); the signal column is ``fringe`` or ``frac_freq``
    (``signal_unit="fractional"``).  The same keywords and seed give the same readings as
    :func:`simulate_scan`.

    Returns
    -------
    (pandas.DataFrame, Truth)
    """
    import pandas as pd

    if time_format not in TIME_FORMATS:
        raise ValueError(f"time_format must be one of {TIME_FORMATS}, not {time_format!r}")
    kwargs.pop("run_id", None)
    truth = _simulate(**kwargs)
    if time_format != "relative" and truth.epoch_unix is None:
        raise ValueError(f"time_format={time_format!r} needs an epoch_unix")
    if time_format == "relative":
        tcol = truth.time.copy()
    elif time_format == "unix":
        tcol = truth.epoch_unix + truth.time
    else:
        us = np.round(truth.time * 1e6).astype(np.int64).astype("timedelta64[us]")
        stamps = np.datetime64(int(truth.epoch_unix), "s").astype("datetime64[us]") + us
        tcol = np.char.add(np.datetime_as_string(stamps, unit="us"), "Z")
    df = pd.DataFrame({TIME_COLUMN[time_format]: tcol, "angle_deg": truth.angle_logged_deg,
                       SIGNAL_COLUMN[truth.unit]: truth.signal})
    return df, truth
