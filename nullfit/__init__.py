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
    "simulate_scan": "simulate",
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
