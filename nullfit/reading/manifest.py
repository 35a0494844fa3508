"""Reading the TOML manifest of a scan log (format: ``docs/manifest.md``).

A manifest describes a log: its column names and units, the start time in UTC when the time
column is relative, the apparatus, the site and free notes.  Every table and key is optional,
but what is there must be right: an unknown table or key, a wrong type, an impossible value or
two keys that contradict each other is refused with a one-line `ScanError` naming the file and
the key (with a suggestion when the key looks like a typo).  The file is only read.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, field
from datetime import date, datetime, time
from pathlib import Path
from typing import Any, Mapping

from ..core.conventions import ANGLE_UNITS, SIGNAL_UNITS
from ..core.errors import ScanError
from .timebase import ns_to_iso, utc_to_ns

TIME_UNITS = ("s", "iso")
TABLE_SENSES = ("clockwise", "counterclockwise")
#: Spellings of the table sense accepted (as nullfit.hypothesis.site.Site does), normalised to TABLE_SENSES.
SENSE_ALIASES = {"clockwise": "clockwise", "cw": "clockwise", "counterclockwise": "counterclockwise",
                 "anticlockwise": "counterclockwise", "ccw": "counterclockwise"}


@dataclass(frozen=True)
class Manifest:
    """Metadata of a scan log (normally read from a TOML manifest by
    :func:`read_manifest`; the format is in ``docs/manifest.md``).

    ``columns`` maps the roles ``time``/``angle``/``signal`` to column names, ``units`` the roles
    ``time`` (``"s"`` or ``"iso"``), ``angle`` (``"deg"``/``"rad"``) and ``signal``
    (``"fringe"``/``"fractional"``) to units; ``start_utc`` is a normalised ISO-8601 UTC string
    (``...Z``).  ``apparatus`` and ``site`` are the plain tables of the manifest; later modules
    turn them into objects.  Everything is optional.
    """

    columns: Mapping[str, str] = field(default_factory=dict)
    units: Mapping[str, str] = field(default_factory=dict)
    start_utc: str | None = None
    apparatus: Mapping[str, Any] = field(default_factory=dict)
    site: Mapping[str, Any] = field(default_factory=dict)
    run_id: str | None = None
    aux_columns: tuple[str, ...] = ()
    notes: str = ""
    path: str | None = None


#: ``arm_length_m`` must equal ``folds × physical_arm_m`` to this relative tolerance.
FOLD_RTOL = 1e-3

# kind of every key of every table: "str", "strlist", "datetime", "positive", "real",
# "posint", "sign" (+1 or -1), "sense", ("choice", values), ("range", lo, hi)
_SCHEMA: dict[str, dict[str, Any]] = {
    "scan": {"run_id": "str"},
    "columns": {"time": "str", "angle": "str", "signal": "str", "aux": "strlist"},
    "units": {"time": ("choice", TIME_UNITS), "angle": ("choice", ANGLE_UNITS),
              "signal": ("choice", SIGNAL_UNITS)},
    "time": {"start_utc": "datetime"},
    "apparatus": {"name": "str", "arm_length_m": "positive", "wavelength_m": "positive", "folds": "posint",
                  "physical_arm_m": "positive", "signal": ("choice", SIGNAL_UNITS), "readout_sign": "sign"},
    "site": {"name": "str", "latitude_deg": ("range", -90.0, 90.0), "longitude_deg": ("range", -180.0, 360.0),
             "elevation_m": "real", "mark_azimuth_deg": "real", "table_sense": "sense"},
    "notes": {"text": "str"},
}


def find_manifest(log_path) -> Path | None:
    """The manifest beside a log: same directory, same stem, suffix ``.toml`` (``run.csv`` →
    ``run.toml``); ``None`` when there is none."""
    p = Path(log_path)
    cand = p.with_suffix(".toml")
    return cand if cand != p and cand.is_file() else None


def _suggest(word: str, choices) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f"; did you mean {close[0]!r}?" if close else ""


def _typename(v: Any) -> str:
    return {bool: "a boolean", int: "an integer", float: "a number", str: "a string", list: "an array",
            dict: "a table"}.get(type(v), type(v).__name__)


def _check(src: str, table: str, key: str, kind, v: Any):
    """Validate one value; return it normalised."""
    loc = f"{src}: [{table}] {key}"
    shown = repr(v) if len(repr(v)) <= 60 else repr(v)[:57] + "..."
    if kind == "str":
        if not isinstance(v, str):
            raise ScanError(f"{loc} must be a string, not {_typename(v)} ({shown})")
        return v
    if kind == "strlist":
        if not isinstance(v, list) or not all(isinstance(x, str) for x in v):
            raise ScanError(f"{loc} must be an array of strings, not {shown}")
        if len(set(v)) != len(v):
            dup = next(x for x in v if v.count(x) > 1)
            raise ScanError(f"{loc} names column {dup!r} twice")
        return tuple(v)
    if kind == "datetime":
        return _start_utc(loc, v, shown)
    if isinstance(kind, tuple) and kind[0] == "choice":
        if not isinstance(v, str) or v not in kind[1]:
            raise ScanError(f"{loc} must be one of {', '.join(repr(c) for c in kind[1])}, not {shown}")
        return v
    if kind == "sense":
        norm = SENSE_ALIASES.get(v.strip().lower()) if isinstance(v, str) else None
        if norm is None:
            raise ScanError(f"{loc} must be 'clockwise' or 'counterclockwise' (or cw, ccw, anticlockwise), not {shown}")
        return norm
    if kind == "sign":
        if isinstance(v, bool) or v not in (1, -1) or not isinstance(v, int):
            raise ScanError(f"{loc} must be +1 or -1, not {shown}")
        return v
    if kind == "posint":
        if isinstance(v, bool) or not isinstance(v, int) or v < 1:
            raise ScanError(f"{loc} must be a whole number ≥ 1, not {shown}")
        return v
    # numbers
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise ScanError(f"{loc} must be a finite number, not {_typename(v)} ({shown})")
    v = float(v)
    if kind == "positive" and not v > 0:
        raise ScanError(f"{loc} must be positive, not {shown}")
    if isinstance(kind, tuple) and kind[0] == "range" and not kind[1] <= v <= kind[2]:
        raise ScanError(f"{loc} must lie in [{kind[1]:g}, {kind[2]:g}], not {shown}")
    return v


def _start_utc(loc: str, v: Any, shown: str) -> str:
    """Normalise a start time (ISO string or TOML datetime; naive means UTC) to ``...Z`` text."""
    if isinstance(v, datetime):
        value: Any = v
    elif isinstance(v, (date, time)):
        raise ScanError(f"{loc} needs a date and a time of day in UTC (e.g. 2026-03-14T21:05:00Z), not {shown}")
    elif isinstance(v, str):
        value = v.strip()
    else:
        raise ScanError(f"{loc} must be an ISO-8601 UTC time such as \"2026-03-14T21:05:00Z\", not {_typename(v)}")
    try:
        return ns_to_iso(utc_to_ns(value))
    except (ValueError, OverflowError):
        raise ScanError(f"{loc} = {shown} is not an ISO-8601 time between 1678 and 2261 "
                        "(e.g. \"2026-03-14T21:05:00Z\")") from None


def _read_text(path: Path, src: str, what: str) -> str:
    if not path.exists():
        raise ScanError(f"{src}: {what} not found")
    if path.is_dir():
        raise ScanError(f"{src}: is a directory, not a {what}")
    try:
        raw = path.read_bytes()
    except OSError as err:
        raise ScanError(f"{src}: cannot read the {what} ({err.strerror or err})") from None
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = raw[: err.start].count(b"\n") + 1
        raise ScanError(f"{src}, line {line}: byte 0x{raw[err.start]:02x} at offset {err.start} is not valid "
                        f"UTF-8; save the {what} as UTF-8") from None


def read_manifest(path) -> Manifest:
    """Read and validate a TOML manifest.

    Parameters
    ----------
    path : str or Path
        The manifest file.

    Returns
    -------
    Manifest
        ``columns`` (time/angle/signal names), ``aux_columns``, ``units``, ``start_utc``
        (normalised to ``YYYY-MM-DDTHH:MM:SS[.fff...]Z``), ``apparatus`` and ``site`` tables (numbers
        as floats), ``run_id``, ``notes`` and ``path``.

    Raises
    ------
    ScanError
        Missing or unreadable file, bytes that are not UTF-8, a TOML syntax error (with its line
        and column), an unknown table or key, a wrong type or value, or keys that contradict each
        other (two roles on one column; ``arm_length_m`` ≠ ``folds × physical_arm_m``;
        ``[units] signal`` ≠ ``[apparatus] signal``).
    """
    p = Path(path)
    src = str(path)
    text = _read_text(p, src, "manifest")
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise ScanError(f"{src}: TOML syntax error: {' '.join(str(err).split())}") from None

    clean: dict[str, dict[str, Any]] = {}
    for name, value in doc.items():
        if name not in _SCHEMA:
            if not isinstance(value, dict):
                home = next((t for t, keys in _SCHEMA.items() if name in keys), None)
                hint = f"; it belongs in the [{home}] table" if home else _suggest(name, _SCHEMA)
                raise ScanError(f"{src}: unknown top-level key {name!r}{hint}")
            raise ScanError(f"{src}: unknown table [{name}] (known: "
                            f"{', '.join(_SCHEMA)}){_suggest(name, _SCHEMA)}")
        if not isinstance(value, dict):
            raise ScanError(f"{src}: [{name}] must be a table, not {_typename(value)} ({name} = ...)")
        schema = _SCHEMA[name]
        clean[name] = {}
        for key, v in value.items():
            if key not in schema:
                raise ScanError(f"{src}: unknown key {key!r} in [{name}] (known: {', '.join(schema)})"
                                f"{_suggest(key, schema)}")
            clean[name][key] = _check(src, name, key, schema[key], v)

    cols = clean.get("columns", {})
    aux = cols.pop("aux", ())
    roles = {}
    for role, col in cols.items():
        if col in roles:
            raise ScanError(f"{src}: [columns] {roles[col]} and {role} both name column {col!r}")
        roles[col] = role
    for col in aux:
        if col in roles:
            raise ScanError(f"{src}: [columns] aux lists column {col!r}, which is already the {roles[col]} column")

    units = clean.get("units", {})
    app = clean.get("apparatus", {})
    if "signal" in units and "signal" in app and units["signal"] != app["signal"]:
        raise ScanError(f"{src}: [units] signal = {units['signal']!r} contradicts [apparatus] signal = "
                        f"{app['signal']!r}")
    if {"folds", "physical_arm_m", "arm_length_m"} <= app.keys():
        folded = app["folds"] * app["physical_arm_m"]
        if not math.isclose(folded, app["arm_length_m"], rel_tol=FOLD_RTOL):
            raise ScanError(f"{src}: [apparatus] arm_length_m = {app['arm_length_m']:g} m disagrees with folds × "
                            f"physical_arm_m = {app['folds']} × {app['physical_arm_m']:g} m = {folded:g} m "
                            "(arm_length_m is the effective, folded length)")

    return Manifest(
        columns=cols,
        units=units,
        start_utc=clean.get("time", {}).get("start_utc"),
        apparatus=app,
        site=clean.get("site", {}),
        run_id=clean.get("scan", {}).get("run_id"),
        aux_columns=tuple(aux),
        notes=clean.get("notes", {}).get("text", ""),
        path=src,
    )


def load_manifest(manifest, log_path=None) -> Manifest | None:
    """The manifest to use for a log: ``False`` → none; a `Manifest` → itself; ``None`` → the one
    beside ``log_path`` if there is one (:func:`find_manifest`); a path → :func:`read_manifest`."""
    if manifest is False:
        return None
    if isinstance(manifest, Manifest):
        return manifest
    if manifest is None:
        found = find_manifest(log_path) if log_path is not None else None
        return read_manifest(found) if found is not None else None
    return read_manifest(manifest)


def open_log(path, manifest) -> tuple[Path, str, Manifest | None]:
    """``(path, name for messages, manifest)`` of a log file that must exist (one-line
    :class:`ScanError` otherwise); the manifest as :func:`load_manifest` finds it, its errors
    naming the log it belongs to (it may have been found silently beside the log)."""
    p, src = Path(path), str(path)
    if not p.exists():
        raise ScanError(f"{src}: no such file")
    if p.is_dir():
        raise ScanError(f"{src}: is a directory, not a scan log")
    try:
        return p, src, load_manifest(manifest, p)
    except ScanError as err:
        raise ScanError(f"{err} (manifest of {src})") from None
