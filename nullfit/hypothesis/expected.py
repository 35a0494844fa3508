r"""The signal a hypothesis predicts for one scan: amplitude and phase, averaged two ways.

Over a scan the wind changes: the in-plane speed ``v_h(t)`` and the table-frame phase ``φ(t)``
of its axis follow the Earth's rotation (and, slowly, its orbit).  The predicted term is
``A(t) cos(2(θ − φ(t)))``, i.e. coefficients

.. math::

    c_2(t) + i\,s_2(t) = A(t)\, e^{2iφ(t)}.

Two averages answer two different questions:

* the **mean predicted amplitude** ``⟨A(t)⟩`` — how large the effect is at a typical moment of
  the scan (what a very short scan would see, on average);
* the **phase-coherent mean** ``⟨c_2 + i s_2⟩ = ⟨A e^{2iφ}⟩`` and its modulus — what a
  least-squares fit of *constant* ``(c_2, s_2)`` to the whole scan actually measures.  A fit of
  a fixed harmonic to a signal whose phase turns averages the turning phasor: contributions
  with different ``φ`` partly cancel, so ``|⟨A e^{2iφ}⟩| ≤ ⟨A⟩`` (triangle inequality), with
  equality only if the wind axis does not turn in the table frame.  For a full sidereal day
  the coherent mean keeps only the part of the signal fixed in the lab frame.

A bound from a fit must therefore be compared with the **coherent** amplitude
(:attr:`ExpectedSignal.amplitude`); the mean amplitude is shown beside it so a reader sees how
much the turning wind costs.  Both come with their peak-to-peak values (twice the amplitude),
explicitly labelled.  The coherent mean weights every sample equally, as an unweighted fit with
even angle coverage does.

A lab-frame hypothesis (:class:`nullfit.hypothesis.velocities.LabWind`: speed ``v`` along a fixed table angle, or
direction unspecified) needs no site or time: ``A = wind_amplitude(v)`` throughout, and the two
averages coincide.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Any, Mapping

import numpy as np

from .apparatus import Apparatus
from ..core.conventions import SIGNAL_UNITS, amplitude_phase, cos_sin_from_amplitude_phase, peak_to_peak
from .earth import unix_times
from .horizontal import horizontal_velocity
from .site import Site
from .velocities import LabWind, Velocity, parse_velocity
from ..core.render import Described, Summary

__all__ = ["ExpectedSignal", "expected_signal", "expected_for_scan"]


def _iso(unix: float | None) -> str | None:
    if unix is None:
        return None
    return datetime.fromtimestamp(unix, tz=timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")


def _safe_ratio(num: float, den: float) -> float:
    if den > 0:
        return num / den
    return math.inf if num > 0 else math.nan


@dataclass(frozen=True)
class ExpectedSignal(Described):
    """What a velocity hypothesis predicts for one scan in one apparatus (see module docstring).

    All amplitudes are in the apparatus's unit (fringe or Δν/ν) and are *amplitudes* of the 2θ
    term; the ``*_peak_to_peak`` properties are twice as large.  Phases are table angles in
    degrees, ``[0, 180)``, such that the term is ``A cos(2(θ − φ))``; they are None when the
    site has no reference-mark azimuth (or a lab wind has no direction).

    Attributes
    ----------
    apparatus, site
        Inputs (site None for a lab-frame hypothesis without one).
    hypothesis, hypothesis_label
        :func:`nullfit.hypothesis.velocities.parse_velocity` spec and a readable description.
    frame
        ``"sky"`` (velocity projected at site and time) or ``"lab"`` (fixed in-plane wind).
    speed_override_m_s
        Speed imposed on the preset's direction, if any.
    n_times, start_unix, end_unix, duration_s
        The scan's samples and time span (start/end None without absolute time).
    speed_mean_m_s
        Mean full (3-D) speed of the hypothesis over the scan (lab: the in-plane speed).
    speed_h_mean_m_s, speed_h_min_m_s, speed_h_max_m_s
        In-plane speed ``v_h`` over the scan.
    mean_amplitude, amplitude_min, amplitude_max
        ``⟨A(t)⟩`` and its range.
    coherent_amplitude, coherent_c2, coherent_s2, coherent_phase_deg
        The phase-coherent mean ``⟨c₂ + i s₂⟩`` — what a fit measures (c₂, s₂ include the
        apparatus's readout sign).
    n_nodes
        Number of times at which the sky geometry was evaluated (None for a lab wind).
    """

    apparatus: Apparatus
    site: Site | None
    hypothesis: str
    hypothesis_label: str
    frame: str
    speed_override_m_s: float | None
    n_times: int
    start_unix: float | None
    end_unix: float | None
    duration_s: float | None
    speed_mean_m_s: float
    speed_h_mean_m_s: float
    speed_h_min_m_s: float
    speed_h_max_m_s: float
    mean_amplitude: float
    amplitude_min: float
    amplitude_max: float
    coherent_amplitude: float
    coherent_c2: float | None
    coherent_s2: float | None
    coherent_phase_deg: float | None
    n_nodes: int | None

    # ---------------------------------------------------------------- derived values
    @property
    def unit(self) -> str:
        return self.apparatus.unit

    @property
    def amplitude(self) -> float:
        """The expected 2θ amplitude to set against a bound: the phase-coherent one."""
        return self.coherent_amplitude

    @property
    def peak_to_peak(self) -> float:
        """Peak-to-peak of :attr:`amplitude` (shift between orientations 90° apart)."""
        return peak_to_peak(self.coherent_amplitude)

    @property
    def coherent_peak_to_peak(self) -> float:
        return peak_to_peak(self.coherent_amplitude)

    @property
    def mean_peak_to_peak(self) -> float:
        return peak_to_peak(self.mean_amplitude)

    @property
    def coherence(self) -> float:
        """``coherent_amplitude / mean_amplitude`` in [0, 1]: 1 if the wind axis does not turn."""
        return _safe_ratio(self.coherent_amplitude, self.mean_amplitude)

    def ratio(self, amplitude_upper: float, *, which: str = "coherent") -> float:
        """Expected **amplitude** / upper limit on the **amplitude** (like with like).

        Equal to the ratio of the two peak-to-peak values.  ``which="mean"`` uses the mean
        instantaneous amplitude instead of the coherent one.
        """
        a_up = float(amplitude_upper)
        if not a_up > 0:
            raise ValueError("amplitude_upper must be positive")
        if which == "coherent":
            return self.coherent_amplitude / a_up
        if which == "mean":
            return self.mean_amplitude / a_up
        raise ValueError(f"which must be 'coherent' or 'mean', not {which!r}")

    @property
    def reference_speed_m_s(self) -> float:
        """Speed that :meth:`speed_bound` scales: the hypothesis's mean 3-D speed (lab: in-plane)."""
        return self.speed_mean_m_s

    def speed_bound(self, amplitude_upper: float) -> float:
        """Upper limit on the hypothesis's speed, direction history kept.

        Every predicted amplitude scales as speed², so scaling the velocity by ``s`` scales
        the coherent amplitude by ``s²``: the bound is
        ``reference_speed_m_s · sqrt(A_up / coherent_amplitude)``.  For a lab wind this equals
        :meth:`nullfit.apparatus.Apparatus.speed_bound`.
        """
        a_up = float(amplitude_upper)
        if a_up < 0:
            raise ValueError("amplitude_upper must be non-negative")
        return self.reference_speed_m_s * math.sqrt(_safe_ratio(a_up, self.coherent_amplitude))

    def rms_bound(self, amplitude_upper: float) -> float:
        """Upper limit on ``|β − δ − ½|`` (Robertson–Mansouri–Sexl): ``½ A_up / coherent_amplitude``.

        Meaningful when the hypothesis is the lab's velocity relative to the preferred frame
        (e.g. ``cmb+orbital+earth-rotation``).
        """
        a_up = float(amplitude_upper)
        if a_up < 0:
            raise ValueError("amplitude_upper must be non-negative")
        return 0.5 * _safe_ratio(a_up, self.coherent_amplitude)

    # ---------------------------------------------------------------- description
    def to_dict(self) -> dict:
        return {
            "hypothesis": self.hypothesis,
            "hypothesis_label": self.hypothesis_label,
            "frame": self.frame,
            "speed_override_m_s": self.speed_override_m_s,
            "unit": self.unit,
            "amplitude": self.coherent_amplitude,
            "peak_to_peak": self.coherent_peak_to_peak,
            "coherent_amplitude": self.coherent_amplitude,
            "coherent_peak_to_peak": self.coherent_peak_to_peak,
            "coherent_c2": self.coherent_c2,
            "coherent_s2": self.coherent_s2,
            "coherent_phase_deg": self.coherent_phase_deg,
            "mean_amplitude": self.mean_amplitude,
            "mean_peak_to_peak": self.mean_peak_to_peak,
            "amplitude_min": self.amplitude_min,
            "amplitude_max": self.amplitude_max,
            "coherence": self.coherence,
            "speed_mean_m_s": self.speed_mean_m_s,
            "speed_h_mean_m_s": self.speed_h_mean_m_s,
            "speed_h_min_m_s": self.speed_h_min_m_s,
            "speed_h_max_m_s": self.speed_h_max_m_s,
            "n_times": self.n_times,
            "start_unix": self.start_unix,
            "end_unix": self.end_unix,
            "start_utc": _iso(self.start_unix),
            "end_utc": _iso(self.end_unix),
            "duration_s": self.duration_s,
            "n_nodes": self.n_nodes,
            "apparatus": self.apparatus.to_dict(),
            "site": None if self.site is None else self.site.to_dict(),
        }

    def __repr__(self) -> str:
        return (f"ExpectedSignal({self.hypothesis_label}: amplitude {self.amplitude:.4g} {self.unit}, "
                f"peak-to-peak {self.peak_to_peak:.4g})")

    def summary(self) -> Summary:
        u = self.unit
        rows = [
            ("hypothesis", self.hypothesis, ""),
            ("frame", self.frame, ""),
        ]
        if self.speed_override_m_s is not None:
            rows.append(("speed imposed on the preset", self.speed_override_m_s, "m/s"))
        if self.start_unix is not None:
            rows.append(("scan start", _iso(self.start_unix), "UTC"))
        if self.duration_s is not None:
            rows.append(("scan duration", self.duration_s, "s"))
        rows += [
            ("mean speed (3-D)" if self.frame == "sky" else "in-plane speed", self.speed_mean_m_s, "m/s"),
            ("in-plane speed v_h, mean", self.speed_h_mean_m_s, "m/s"),
            ("in-plane speed v_h, min / max", f"{self.speed_h_min_m_s:.6g} / {self.speed_h_max_m_s:.6g}", "m/s"),
            ("expected amplitude, phase-coherent (a fit measures this)", self.coherent_amplitude, u),
            ("expected peak-to-peak, phase-coherent (2 × amplitude)", self.coherent_peak_to_peak, u),
            ("mean instantaneous amplitude", self.mean_amplitude, u),
            ("mean instantaneous peak-to-peak (2 × amplitude)", self.mean_peak_to_peak, u),
            ("coherence (coherent / mean amplitude)", self.coherence, ""),
            ("phase φ of predicted (c₂, s₂), table angle", self.coherent_phase_deg, "deg"),
            ("c₂ (phase-coherent)", self.coherent_c2, u),
            ("s₂ (phase-coherent)", self.coherent_s2, u),
        ]
        notes = [
            "term = A cos(2(θ − φ)); peak-to-peak between orientations 90° apart = 2 × amplitude; "
            "with readout sign +1, φ is the table angle at which arm 1 lies along the wind axis",
            f"apparatus: L = {self.apparatus.arm_length_m} m (effective), λ = {self.apparatus.wavelength_m} m, "
            f"signal {self.apparatus.signal}, readout sign {self.apparatus.readout_sign:+d}",
            self.hypothesis_label,
        ]
        if self.frame == "sky" and self.site is not None and not self.site.has_mark:
            notes.append("site has no reference-mark azimuth: amplitudes only, no table-frame phase")
        if self.n_nodes is not None and self.n_nodes < self.n_times:
            notes.append(f"sky geometry evaluated at {self.n_nodes} nodes, linearly interpolated to {self.n_times} samples")
        sections = () if self.site is None else (self.site.summary(),)
        return Summary(title="Expected signal", rows=tuple(rows), notes=tuple(notes), sections=sections)


def _as_apparatus(apparatus) -> Apparatus:
    if isinstance(apparatus, Apparatus):
        return apparatus
    if isinstance(apparatus, Mapping):
        return Apparatus.from_mapping(apparatus)
    raise TypeError("apparatus must be an Apparatus or an [apparatus] mapping")


def _as_site(site) -> Site | None:
    if site is None or isinstance(site, Site):
        return site
    if isinstance(site, Mapping):
        return Site.from_mapping(site) if site else None
    raise TypeError("site must be a Site, an [site] mapping or None")


def _lab_signal(apparatus, site, wind: LabWind, epoch_unix, time_s, times) -> ExpectedSignal:
    if wind.speed_m_s is None:
        raise ValueError("a lab-frame wind needs a speed: pass speed_m_s")
    amp = float(apparatus.wind_amplitude(wind.speed_m_s))
    phase = wind.phase_deg(site)
    c2 = s2 = None
    if phase is not None:
        c2, s2 = cos_sin_from_amplitude_phase(apparatus.readout_sign * amp, phase, 2)
        phase = amplitude_phase(c2, s2, 2)[1]
    n, start, end, duration = 0, None, None, None
    if times is not None or epoch_unix is not None:
        epoch, rel = unix_times(times, epoch_unix, time_s)
        n, start, end = rel.size, epoch + float(rel.min()), epoch + float(rel.max())
        duration = end - start
    elif time_s is not None:
        rel = np.atleast_1d(np.asarray(time_s, dtype=float))
        n, duration = rel.size, float(np.ptp(rel)) if rel.size else None
    v = wind.speed_m_s
    return ExpectedSignal(
        apparatus=apparatus, site=site, hypothesis=wind.spec, hypothesis_label=wind.label, frame="lab",
        speed_override_m_s=None, n_times=n, start_unix=start, end_unix=end, duration_s=duration,
        speed_mean_m_s=v, speed_h_mean_m_s=v, speed_h_min_m_s=v, speed_h_max_m_s=v,
        mean_amplitude=amp, amplitude_min=amp, amplitude_max=amp, coherent_amplitude=amp,
        coherent_c2=c2, coherent_s2=s2, coherent_phase_deg=phase, n_nodes=None,
    )


def expected_signal(apparatus, site=None, times=None, velocity: Velocity | LabWind | str | None = None, *,
                    epoch_unix=None, time_s=None, speed_m_s: float | None = None,
                    node_spacing_s: float | None = 60.0) -> ExpectedSignal:
    """Expected 2θ signal of a velocity hypothesis for one scan.

    Parameters
    ----------
    apparatus
        :class:`~nullfit.apparatus.Apparatus` (or its manifest mapping).
    site
        :class:`~nullfit.hypothesis.velocities.Site` (or mapping); needed for sky velocities, optional for a
        lab wind given by table angle.
    times
        Unix seconds (UTC, float array) or astropy ``Time``.  For precision with long scans give
        ``epoch_unix`` (integer-valued Unix seconds) and ``time_s`` (seconds after it) instead.
    velocity
        A sky :class:`~nullfit.hypothesis.velocities.Velocity`, a :class:`~nullfit.hypothesis.velocities.LabWind`, or a
        :func:`~nullfit.hypothesis.velocities.parse_velocity` string (``"orbital"``, ``"cmb+orbital+earth-rotation"``,
        ``"lab:speed=30000,angle=0"``, ...).  None with ``speed_m_s`` means a lab wind of that
        in-plane speed in an unspecified direction (amplitude only).
    speed_m_s
        Impose this speed: on a sky preset, keep its direction history and fix the magnitude;
        on a lab wind, set its in-plane speed.
    node_spacing_s
        Sky geometry node spacing (see :func:`nullfit.hypothesis.velocities.horizontal_velocity`); None = exact.

    Returns
    -------
    ExpectedSignal
    """
    apparatus = _as_apparatus(apparatus)
    site = _as_site(site)
    if velocity is None:
        if speed_m_s is None:
            raise ValueError("give a velocity hypothesis (e.g. 'orbital', 'cmb', 'lab:angle=0') and/or speed_m_s")
        velocity = LabWind(speed_m_s)
    velocity = parse_velocity(velocity)
    if isinstance(velocity, LabWind):
        if speed_m_s is not None:
            velocity = velocity.with_speed(speed_m_s)
        return _lab_signal(apparatus, site, velocity, epoch_unix, time_s, times)

    override = None
    if speed_m_s is not None:
        override = float(speed_m_s)
        velocity = velocity.with_speed(override)
    if site is None:
        raise ValueError(f"the sky velocity {velocity.spec!r} needs a Site (latitude, longitude) to project onto the table plane")
    if times is None and epoch_unix is None:
        raise ValueError(f"the sky velocity {velocity.spec!r} needs absolute times: times (Unix s) or epoch_unix + time_s")
    hv = horizontal_velocity(site, times, velocity, epoch_unix=epoch_unix, time_s=time_s, node_spacing_s=node_spacing_s)
    k = float(apparatus.wind_amplitude(1.0))  # amplitude per (m/s)² of in-plane speed
    vh = hv.speed_h_m_s
    amp_t = k * vh**2
    if site.has_mark:
        v0, v90 = hv.table_components()
    else:  # any fixed in-plane axes give the same |⟨(v0 + i v90)²⟩|
        v0, v90 = hv.north, hv.east
    z = k * np.mean((v0 + 1j * v90) ** 2)
    c2 = s2 = phase = None
    if site.has_mark:
        c2, s2 = apparatus.readout_sign * float(z.real), apparatus.readout_sign * float(z.imag)
        phase = amplitude_phase(c2, s2, 2)[1]
    rel = hv.time_s
    start, end = hv.epoch_unix + float(rel.min()), hv.epoch_unix + float(rel.max())
    return ExpectedSignal(
        apparatus=apparatus, site=site, hypothesis=velocity.spec, hypothesis_label=velocity.label, frame="sky",
        speed_override_m_s=override, n_times=rel.size, start_unix=start, end_unix=end,
        duration_s=float(rel.max() - rel.min()),
        speed_mean_m_s=float(np.mean(hv.speed_m_s)), speed_h_mean_m_s=float(np.mean(vh)),
        speed_h_min_m_s=float(vh.min()), speed_h_max_m_s=float(vh.max()),
        mean_amplitude=float(np.mean(amp_t)), amplitude_min=float(amp_t.min()), amplitude_max=float(amp_t.max()),
        coherent_amplitude=float(abs(z)), coherent_c2=c2, coherent_s2=s2, coherent_phase_deg=phase,
        n_nodes=hv.n_nodes,
    )


def expected_for_scan(scan: Any, velocity: Velocity | LabWind | str | None = None, *, apparatus=None, site=None,
                      speed_m_s: float | None = None, node_spacing_s: float | None = 60.0) -> ExpectedSignal:
    """:func:`expected_signal` for a scan object.

    Uses ``scan.time`` (seconds after ``scan.epoch_unix``), ``scan.epoch_unix`` (Unix seconds
    or None) and, unless given here, ``scan.meta.apparatus`` / ``scan.meta.site`` (manifest
    mappings, possibly empty).  If the scan has a ``unit`` ("fringe"/"fractional") it
    must match the apparatus's signal (a manifest table without ``signal`` takes the scan's).  A sky velocity needs ``epoch_unix`` and a site; a lab wind
    (``velocity=None`` with ``speed_m_s``, or ``"lab:..."``) needs neither.
    """
    meta = getattr(scan, "meta", None)
    scan_unit = getattr(scan, "unit", None)
    if apparatus is None:
        app_map = dict(getattr(meta, "apparatus", None) or {})
        if not app_map:
            raise ValueError("no apparatus: pass apparatus=Apparatus(...) or give an [apparatus] table in the manifest")
        if "signal" not in app_map and scan_unit in SIGNAL_UNITS:
            app_map["signal"] = scan_unit
        apparatus = Apparatus.from_mapping(app_map)
    apparatus = _as_apparatus(apparatus)
    if scan_unit in SIGNAL_UNITS and scan_unit != apparatus.signal:
        raise ValueError(
            f"the scan's signal is {scan_unit!r} but the apparatus predicts a {apparatus.signal!r} signal; "
            "give Apparatus(signal=...) to match, or convert with fringe_to_fractional/fractional_to_fringe"
        )
    if site is None:
        site = _as_site(getattr(meta, "site", None) or None)
    epoch = getattr(scan, "epoch_unix", None)
    time_s = np.asarray(scan.time, dtype=float)
    hyp = LabWind(speed_m_s) if velocity is None and speed_m_s is not None else velocity
    if hyp is not None and not isinstance(parse_velocity(hyp), LabWind) and epoch is None:
        raise ValueError(
            "the scan has no absolute time (epoch_unix is None): a sky velocity needs it; "
            "use a lab-frame wind (speed_m_s only) or give the epoch in the manifest"
        )
    return expected_signal(apparatus, site, None, velocity, epoch_unix=epoch, time_s=time_s,
                           speed_m_s=speed_m_s, node_spacing_s=node_spacing_s)
