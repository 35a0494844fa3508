"""Many runs side by side: the run table (:func:`compare_runs`).

One row per run — date, apparatus, the hypothesis's expected 2θ amplitude and peak-to-peak, the
upper limit as amplitude and as peak-to-peak, the ratio expected/bound (amplitude over
amplitude; identical to peak-to-peak over peak-to-peak) and the speed bound.
"""


from __future__ import annotations

from pathlib import Path
from typing import Any, Iterable

import numpy as np

from ..core.conventions import check_confidence_level, make_rng, peak_to_peak


# --------------------------------------------------------------------------- inputs
def _analyses(runs, *, rng=None, progress=None, **kw) -> tuple[list, int]:
    """Turn paths, Scans and RunAnalysis objects into RunAnalysis objects (one child seed each)."""
    from ..reading.files import read_scan
    from ..reading.scan import Scan
    from .analysis import RunAnalysis, analyse, child_seeds

    runs = list(runs)
    if not runs:
        raise ValueError("no runs given")
    if isinstance(rng, np.random.Generator):
        seed = int(rng.integers(2**62))
    else:
        _, seed = make_rng(rng)
    seeds = child_seeds(seed, len(runs))
    out = []
    from tqdm import tqdm

    show = progress if progress is not None else len(runs) > 3
    for r, s in tqdm(list(zip(runs, seeds)), desc="runs", unit="run", disable=not show, leave=False):
        if isinstance(r, RunAnalysis):
            out.append(r)
            continue
        scan = r if isinstance(r, Scan) else read_scan(Path(r))
        out.append(analyse(scan, rng=s, **kw))
    return out, seed


def compare_runs(runs: Iterable, *, speed_m_s: float | None = 30_000.0, velocity=None, apparatus=None, site=None,
                 method: str = "feldman-cousins", confidence_level: float = 0.95, harmonics=(1, 2),
                 drift="per-turn", errors="turns", rng=None, progress=None):
    """The run table: one row per run (paths, Scans or `RunAnalysis` objects).

    Each run uses its own manifest's apparatus and site unless ``apparatus``/``site`` are given.
    ``velocity`` (a preset or spec string, see :func:`nullfit.sky.parse_velocity`) projects the
    hypothesis on the sky at each run's site and time; without it the wind is a fixed in-plane
    wind of ``speed_m_s``.  The table's ``attrs`` record the settings and the master seed.
    A progress bar (stderr) shows for more than three runs unless ``progress=False``.
    """
    import pandas as pd

    cl = check_confidence_level(confidence_level)
    analyses, seed = _analyses(runs, rng=rng, speed_m_s=speed_m_s, velocity=velocity, apparatus=apparatus,
                               site=site, limits=(method,), confidence_level=cl, harmonics=harmonics,
                               drift=drift, errors=errors, progress=progress)
    rows = [run_row(a) for a in analyses]
    table = pd.DataFrame(rows)
    table.attrs.update({"seed": seed, "confidence_level": cl, "method": method, "speed_m_s": speed_m_s,
                        "drift": drift, "errors": errors})
    return table


def run_row(a) -> dict[str, Any]:
    """One row of the run table for a `RunAnalysis` that has a limit (and possibly a hypothesis)."""
    lim = a.primary_limit
    h = a.fit.harmonic(a.harmonic)
    e = a.expected
    app = a.apparatus
    date = a.scan.epoch_iso[:10] if a.scan.epoch_iso else None
    upper = None if lim is None else lim.upper
    return {
        "run": a.run_id,
        "date_utc": date,
        "unit": a.scan.unit,
        "arm_length_m": None if app is None else app.arm_length_m,
        "wavelength_m": None if app is None else app.wavelength_m,
        "hypothesis": None if e is None else e.hypothesis_label,
        "speed_m_s": a.settings.get("speed_m_s"),
        "expected_amplitude": None if e is None else e.amplitude,
        "expected_peak_to_peak": None if e is None else e.peak_to_peak,
        "limit_method": None if lim is None else lim.method,
        "confidence_level": None if lim is None else lim.confidence_level,
        "upper_amplitude": upper,
        "upper_peak_to_peak": None if upper is None else peak_to_peak(upper),
        "ratio_expected_to_bound": a.ratio,
        "speed_bound_m_s": a.speed_bound_m_s,
        f"c{a.harmonic}": h.c,
        f"s{a.harmonic}": h.s,
        f"sigma_c{a.harmonic}": h.sigma_c,
        f"sigma_s{a.harmonic}": h.sigma_s,
        "observed_amplitude": h.amplitude,
        "n_turns": a.fit.n_turns,
        "dropped_rows": a.fit.dropped_rows,
        "seed": a.seed,
    }
