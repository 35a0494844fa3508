"""nullfit: second-harmonic amplitudes, upper limits and expected-signal ratios from rotation scans.

The public names are imported lazily, so ``import nullfit`` (and ``nullfit --help``) stays fast;
the heavy libraries load on first use of the function that needs them.

The subpackages are the stages of the analysis, and data flow one way through them::

    reading ──▶ fitting ──▶ limits ──┐
    (log → Scan)  (Scan → ScanFit)   (→ Limit)   ├──▶ campaign ──▶ figures, output (report, demo)
    hypothesis (apparatus, site, velocities, expected signal) ┘   (runs, tables, combinations)

``core`` holds what every stage shares (conventions, rendering, error types, provenance);
``simulation`` makes synthetic scans with a known truth.  A module only imports from its own
stage or from stages before it (``tests/test_layout.py`` checks this, and that there are no
import cycles).
"""

from __future__ import annotations

import importlib
import sys

__version__ = "0.1.0"

# public name -> module that defines it
_EXPORTS = {
    # core
    "amplitude_phase": "core.conventions",
    "peak_to_peak": "core.conventions",
    "SPEED_OF_LIGHT": "core.conventions",
    "ScanError": "core.errors",
    "AnalysisError": "core.errors",
    "ScanWarning": "core.errors",
    "FitWarning": "core.errors",
    # reading
    "Scan": "reading.scan",
    "Manifest": "reading.manifest",
    "read_scan": "reading.files",
    "read_manifest": "reading.manifest",
    "find_manifest": "reading.manifest",
    "number_turns": "reading.turn_numbering",
    # synthetic scans
    "simulate_scan": "simulation.scans",
    "simulate_frame": "simulation.scans",
    "Truth": "simulation.truth",
    "Drift": "simulation.models",
    # fitting
    "fit_scan": "fitting.fit",
    "ScanFit": "fitting.scanfit",
    "HarmonicEstimate": "fitting.estimate",
    "demodulate": "fitting.demodulate",
    "fit_stream": "fitting.stream",
    "demodulate_stream": "fitting.stream",
    "fit_path": "fitting.stream",
    "fit_coupling": "fitting.coupling",
    "CouplingFit": "fitting.coupling_result",
    "allan_deviation": "fitting.allan",
    "AllanDeviation": "fitting.allan",
    # limits
    "Limit": "limits",
    "ScalarEstimate": "limits",
    "amplitude_limit": "limits",
    "upper_limit": "limits",
    "scalar_limit": "limits",
    "limits_table": "limits",
    "detection_significance": "limits",
    "Significance": "limits",
    "Posterior": "limits",
    "unified_gaussian_interval": "limits",
    # the hypothesis side
    "Apparatus": "hypothesis.apparatus",
    "Site": "hypothesis.site",
    "parse_velocity": "hypothesis.velocities",
    "horizontal_velocity": "hypothesis.horizontal",
    "HorizontalVelocity": "hypothesis.horizontal",
    "sidereal_time_deg": "hypothesis.earth",
    "EarthOrientationWarning": "hypothesis.offline",
    "ExpectedSignal": "hypothesis.expected",
    "expected_signal": "hypothesis.expected",
    "expected_for_scan": "hypothesis.expected",
    # one run, many runs
    "analyse": "campaign.analysis",
    "RunAnalysis": "campaign.analysis",
    "compare_runs": "campaign.runs",
    "demodulate_campaign": "campaign.dataset",
    "TurnTable": "campaign.turn_table",
    "combine_lab": "campaign.combine",
    "combine_sky": "campaign.combine",
    "LabCombination": "campaign.combine",
    "ScaleFit": "campaign.combine",
    # the sky: sidereal and annual analysis of a campaign into SME / RMS parameters
    "fit_sky": "campaign.sky",
    "SkyFit": "campaign.sky_result",
    "published_sky_bounds": "campaign.sky_bounds",
    "simulate_sky_turns": "campaign.sky_simulate",
    "simulate_sky_campaign": "simulation.sky",
    "campaign_schedule": "simulation.sky",
    "inject_sky": "simulation.sky",
}

# public subpackage aliases: ``nullfit.sidereal`` is ``nullfit.hypothesis.sidereal`` (the model)
_MODULE_ALIASES = {"sidereal": "hypothesis.sidereal"}

__all__ = sorted(_EXPORTS) + sorted(_MODULE_ALIASES) + ["__version__"]


class _AliasFinder:
    """Lets ``import nullfit.sidereal`` (before any attribute access) load the aliased package itself.

    Only the names in ``_MODULE_ALIASES`` are answered; the target is imported when asked for, so
    ``import nullfit`` stays light, and the alias and its target are one module object.  A submodule
    through the alias is refused with the real name: the import system would otherwise load a
    second copy, or bind the submodule over the package's function of the same name.
    """

    def __init__(self):
        self._specs = {}

    def find_spec(self, fullname, path=None, target=None):
        head, _, rest = fullname.partition(".")
        alias, _, below = rest.partition(".")
        if head != __name__ or alias not in _MODULE_ALIASES:
            return None
        if below:
            real = f"{__name__}.{_MODULE_ALIASES[alias]}.{below}"
            raise ModuleNotFoundError(f"{__name__}.{alias} is an alias of a package; import {real} instead",
                                      name=fullname)
        from importlib.machinery import ModuleSpec

        return ModuleSpec(fullname, self)

    def create_module(self, spec):
        value = _alias(spec.name.rpartition(".")[2])
        self._specs[value.__name__] = value.__spec__  # the import system overwrites it; put it back
        return value

    def exec_module(self, module):
        module.__spec__ = self._specs.pop(module.__name__, module.__spec__)


def _alias(name: str):
    value = importlib.import_module(f".{_MODULE_ALIASES[name]}", __name__)
    sys.modules.setdefault(f"{__name__}.{name}", value)
    globals()[name] = value
    return value


if not any(isinstance(f, _AliasFinder) for f in sys.meta_path):
    sys.meta_path.insert(0, _AliasFinder())  # ahead of the path finder, which would load a second copy


def __getattr__(name: str):
    if name in _MODULE_ALIASES:
        return _alias(name)
    try:
        module = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module 'nullfit' has no attribute {name!r}") from None
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return __all__
