"""Many runs side by side: the run table (:func:`compare_runs`).

One row per run — date, apparatus, the hypothesis's expected 2θ amplitude and peak-to-peak, the
upper limit as amplitude and as peak-to-peak, the ratio expected/bound (amplitude over
amplitude; identical to peak-to-peak over peak-to-peak) and the speed bound.

A run whose apparatus is unknown (no ``[apparatus]`` in its manifest and none given) still gets
its limit; its expected, ratio and speed-bound columns stay empty and its ``note`` says why.
Runs known only by a quoted bound join the table through ``bounds=`` (:mod:`.bounds`).
"""


from __future__ import annotations

from pathlib import Path
from typing import Any, Iterable

import numpy as np

from ..core.conventions import check_confidence_level, make_rng, peak_to_peak
from ..core.progress import show_progress


# --------------------------------------------------------------------------- inputs
def _has_apparatus(scan, apparatus) -> bool:
    return apparatus is not None or bool(getattr(scan.meta, "apparatus", None))


def _analyses(runs, *, rng=None, progress=None, **kw) -> tuple[list, list, int]:
    """Turn paths, Scans and RunAnalysis objects into RunAnalysis objects (one child seed each);
    runs without an apparatus are analysed without the hypothesis (a note per run)."""
    from ..reading.files import read_scan
    from ..reading.scan import Scan
    from .analysis import RunAnalysis, analyse, child_seeds

    runs = list(runs)
    if isinstance(rng, np.random.Generator):
        seed = int(rng.integers(2**62))
    else:
        _, seed = make_rng(rng)
    seeds = child_seeds(seed, max(len(runs), 1))
    out, notes = [], []
    from tqdm import tqdm

    show = show_progress(progress, len(runs) > 3)
    for r, s in tqdm(list(zip(runs, seeds)), desc="runs", unit="run", disable=not show, leave=False):
        if isinstance(r, RunAnalysis):
            out.append(r)
            notes.append("")
            continue
        scan = r if isinstance(r, Scan) else read_scan(Path(r))
        run_kw = dict(kw)
        note = ""
        if not _has_apparatus(scan, kw.get("apparatus")) and (kw.get("speed_m_s") is not None
                                                              or kw.get("velocity") is not None):
            run_kw.update(speed_m_s=None, velocity=None)
            note = ("no apparatus (arm_length_m, wavelength_m) for this run: expected signal, ratio and speed "
                    "bound left empty")
        out.append(analyse(scan, rng=s, **run_kw))
        notes.append(note)
    return out, notes, seed


def compare_runs(runs: Iterable, *, speed_m_s: float | None = 30_000.0, velocity=None, apparatus=None, site=None,
                 method: str = "feldman-cousins", confidence_level: float = 0.95, harmonics=(1, 2),
                 drift="per-turn", errors="turns", rng=None, progress=None, bounds=None):
    """The run table: one row per run (paths, Scans or `RunAnalysis` objects).

    Each run uses its own manifest's apparatus and site unless ``apparatus``/``site`` are given.
    ``velocity`` (a preset or spec string, see :func:`nullfit.sky.parse_velocity`) projects the
    hypothesis on the sky at each run's site and time; without it the wind is a fixed in-plane
    wind of ``speed_m_s``.  The table's ``attrs`` record the settings and the master seed.
    A progress bar (stderr) shows for more than three runs unless ``progress=False``.

    ``bounds`` (a CSV path or DataFrame, columns in ``docs/bounds.md``) adds runs known only by a
    quoted bound: expected amplitude from their apparatus at their ``speed_m_s`` (default
    ``speed_m_s`` here), the bound converted to an amplitude (a peak-to-peak bound is halved)
    before the ratio and the speed bound.  A run without an apparatus keeps empty expected/ratio
    columns, with the reason in ``note``.
    """
    import pandas as pd

    from .bounds import bound_row, read_bounds

    cl = check_confidence_level(confidence_level)
    runs = list(runs)
    quoted = [] if bounds is None else read_bounds(bounds, default_speed_m_s=speed_m_s)
    if not runs and not quoted:
        raise ValueError("no runs given")
    analyses, notes, seed = _analyses(runs, rng=rng, speed_m_s=speed_m_s, velocity=velocity,
                                      apparatus=apparatus, site=site, limits=(method,), confidence_level=cl,
                                      harmonics=harmonics, drift=drift, errors=errors, progress=progress)
    rows = []
    for a, note in zip(analyses, notes):
        row = run_row(a)
        row["note"] = "; ".join(n for n in (note, *[f"{m}: {w}" for m, w in a.failed.items()]) if n)
        rows.append(row)
    for b in quoted:
        row = bound_row(b)
        row["note"] = (f"quoted {b['bound_kind']} bound {b['bound']:g} (row {b['row']} of {b['source']})"
                       + ("; halved to an amplitude" if b["bound_kind"] == "peak-to-peak" else ""))
        rows.append(row)
    table = pd.DataFrame(rows)
    table.attrs.update({"seed": seed, "confidence_level": cl, "method": method, "speed_m_s": speed_m_s,
                        "drift": drift, "errors": errors})
    return table


def run_row(a) -> dict[str, Any]:
    """One row of the run table for a `RunAnalysis` that has a limit (and possibly a hypothesis)."""
    lim = a.primary_limit
    h = a.estimate if getattr(a, "estimate", None) is not None else a.fit.harmonic(a.harmonic)
    e = a.expected
    app = a.apparatus
    date = a.scan.epoch_iso[:10] if a.scan.epoch_iso else None
    upper = None if lim is None else lim.upper
    return {
        "run": a.run_id,
        "source": "analysed",
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
        "corrected_for": getattr(a, "corrected_for", None),
        "n_turns": a.fit.n_turns,
        "dropped_rows": a.scan.dropped_rows,
        "partial_turn_rows": a.fit.excluded_rows,
        "seed": a.seed,
    }
