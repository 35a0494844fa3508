"""Runs known only by their quoted bound: a small CSV table beside the analysed runs.

A published or archived run often survives only as "the 2θ shift was below X".  Such a row enters
the run table (:func:`nullfit.compare_runs` with ``bounds=``) beside the analysed runs: its
expected amplitude under the classical wind hypothesis follows from its apparatus, and its
ratio expected/bound compares **like with like** — a bound quoted as peak-to-peak (the shift
between orientations 90° apart, ``2·A``) is halved to an amplitude before the ratio and the speed
bound are computed.  The columns are documented in ``docs/bounds.md``:

``run, arm_length_m, wavelength_m, signal, bound, bound_kind, confidence_level, speed_m_s``

Bad rows raise a `ScanError` naming the file, the data row (counted from 1, header not counted)
and the column.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

from ..core.conventions import amplitude_from_peak_to_peak, peak_to_peak
from ..core.errors import ScanError, where

COLUMNS = ("run", "arm_length_m", "wavelength_m", "signal", "bound", "bound_kind", "confidence_level", "speed_m_s")
BOUND_KINDS = ("amplitude", "peak-to-peak")
SIGNALS = ("fringe", "fractional")


def _number(text, src, row, col, *, required: bool, positive: bool = True) -> float | None:
    t = "" if text is None else str(text).strip()
    if not t or t.lower() == "nan":
        if required:
            raise ScanError(f"{where(src, row, col)}: missing value")
        return None
    try:
        v = float(t)
    except ValueError:
        raise ScanError(f"{where(src, row, col)}: {t!r} is not a number") from None
    if not math.isfinite(v) or (positive and v <= 0):
        raise ScanError(f"{where(src, row, col)}: must be a finite positive number, not {t}")
    return v


def read_bounds(table, *, default_speed_m_s: float | None = None) -> list[dict[str, Any]]:
    """The rows of a quoted-bounds table (a CSV path or a DataFrame), checked, as plain dicts.

    ``speed_m_s`` may be left empty in a row; it then takes ``default_speed_m_s`` (a row with
    neither is refused)."""
    import pandas as pd

    if isinstance(table, pd.DataFrame):
        df, src = table.astype(str).where(table.notna(), ""), "<bounds table>"
    else:
        p = Path(table)
        src = str(table)
        if not p.is_file():
            raise ScanError(f"{src}: no such file")
        try:
            df = pd.read_csv(p, dtype=str, keep_default_na=False, skipinitialspace=True)
        except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as err:
            raise ScanError(f"{src}: not a readable CSV table ({' '.join(str(err).split())[:160]})") from None
    df.columns = [str(c).strip() for c in df.columns]
    missing = [c for c in COLUMNS if c not in df.columns and c != "speed_m_s"]
    if missing:
        raise ScanError(f"{where(src, None, missing[0])}: no such column (a bounds table has the columns "
                        f"{', '.join(COLUMNS)})")
    if df.empty:
        raise ScanError(f"{src}: the bounds table has no data rows")
    out = []
    for i, rec in enumerate(df.to_dict("records"), start=1):
        run = str(rec["run"]).strip()
        if not run:
            raise ScanError(f"{where(src, i, 'run')}: missing value")
        signal = str(rec["signal"]).strip() or "fringe"
        if signal not in SIGNALS:
            raise ScanError(f"{where(src, i, 'signal')}: must be fringe or fractional, not {signal!r}")
        kind = str(rec["bound_kind"]).strip()
        if kind not in BOUND_KINDS:
            raise ScanError(f"{where(src, i, 'bound_kind')}: must be amplitude or peak-to-peak, not {kind!r}")
        need_geometry = signal == "fringe"
        arm = _number(rec["arm_length_m"], src, i, "arm_length_m", required=need_geometry)
        lam = _number(rec["wavelength_m"], src, i, "wavelength_m", required=need_geometry)
        bound = _number(rec["bound"], src, i, "bound", required=True)
        cl = _number(rec["confidence_level"], src, i, "confidence_level", required=False)
        if cl is not None and not 0 < cl < 1:
            raise ScanError(f"{where(src, i, 'confidence_level')}: must lie strictly between 0 and 1 "
                            f"(e.g. 0.95), not {cl:g}")
        speed = _number(rec.get("speed_m_s", ""), src, i, "speed_m_s", required=False)
        if speed is None:
            speed = default_speed_m_s
        if speed is None:
            raise ScanError(f"{where(src, i, 'speed_m_s')}: missing value (and no default speed was given)")
        out.append({"run": run, "arm_length_m": arm, "wavelength_m": lam, "signal": signal, "bound": bound,
                    "bound_kind": kind, "confidence_level": cl, "speed_m_s": speed, "row": i, "source": src})
    return out


def bound_row(b: dict[str, Any]) -> dict[str, Any]:
    """One run-table row for a quoted bound (same columns as an analysed run's row)."""
    from ..hypothesis.apparatus import Apparatus

    app = Apparatus(b["arm_length_m"], b["wavelength_m"], signal=b["signal"])
    upper = b["bound"] if b["bound_kind"] == "amplitude" else amplitude_from_peak_to_peak(b["bound"])
    expected = float(app.wind_amplitude(b["speed_m_s"]))
    return {
        "run": b["run"],
        "source": "quoted bound",
        "date_utc": None,
        "unit": b["signal"],
        "arm_length_m": b["arm_length_m"],
        "wavelength_m": b["wavelength_m"],
        "hypothesis": f"lab-frame wind in the table plane, {b['speed_m_s']:g} m/s, direction unspecified",
        "speed_m_s": b["speed_m_s"],
        "expected_amplitude": expected,
        "expected_peak_to_peak": peak_to_peak(expected),
        "limit_method": "quoted",
        "quoted_bound": b["bound"],
        "quoted_bound_kind": b["bound_kind"],
        "confidence_level": b["confidence_level"],
        "upper_amplitude": upper,
        "upper_peak_to_peak": peak_to_peak(upper),
        "ratio_expected_to_bound": expected / upper,
        "speed_bound_m_s": float(app.speed_bound(upper)),
    }
