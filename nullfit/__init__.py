"""nullfit: second-harmonic amplitudes, upper limits and expected-signal ratios from rotation scans.

The public names are imported lazily, so ``import nullfit`` (and ``nullfit --help``) stays fast;
the heavy libraries load on first use of the function that needs them.

Data flows one way::

    log ──read_scan──▶ Scan ──fit_scan──▶ ScanFit ──upper_limit──▶ Limit ──┐
    Apparatus + Site + velocity ──expected_signal──▶ ExpectedSignal ──────┴─▶ compare_runs ─▶ plots, report
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

# public name -> module that defines it
_EXPORTS = {
    # conventions
    "amplitude_phase": "conventions",
    "peak_to_peak": "conventions",
    "SPEED_OF_LIGHT": "conventions",
    # scans
    "Scan": "scan",
    "ScanError": "scan",
    "ScanWarning": "scan",
    "Manifest": "scan",
    "read_scan": "logfile",
    "read_manifest": "manifest",
    "find_manifest": "manifest",
    "number_turns": "scan",
    # synthetic scans
    "simulate_scan": "simulate",
    "simulate_frame": "simulate",
    "Truth": "simulate",
    "Drift": "simulate",
    # fitting
    "fit_scan": "fit",
    "ScanFit": "fit",
    "demodulate": "turns",
    "HarmonicEstimate": "fit",
    "FitWarning": "design",
    # limits
    "Limit": "limits",
    "amplitude_limit": "limits",
    "upper_limit": "limits",
    "limits_table": "limits",
    "limits_table_for_fit": "limits",
    "detection_significance": "limits",
    "significance_for_fit": "limits",
    "Significance": "limits",
    "Posterior": "limits",
    "unified_gaussian_interval": "limits",
    # the hypothesis side
    "Apparatus": "apparatus",
    "Site": "sky",
    "parse_velocity": "sky",
    "horizontal_velocity": "sky",
    "sidereal_time_deg": "sky",
    "orbital": "sky",
    "rotation": "sky",
    "cmb": "sky",
    "custom": "sky",
    "lab_wind": "sky",
    "EarthOrientationWarning": "sky",
    "ExpectedSignal": "expected",
    "expected_signal": "expected",
    "expected_for_scan": "expected",
    # one run, many runs
    "analyse": "analysis",
    "RunAnalysis": "analysis",
    "compare_runs": "runs",
    "combine_lab": "runs",
    "combine_sky": "runs",
    # diagnostics
    "allan_deviation": "allan",
}

__all__ = sorted(_EXPORTS) + ["__version__"]


def __getattr__(name: str):
    try:
        module = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module 'nullfit' has no attribute {name!r}") from None
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return __all__
