"""Run astropy offline: bundled Earth-orientation data only, never a download, never a hang.

By default astropy refreshes its IERS Earth-orientation table and its leap-second table from the
internet when the bundled copies look old, and *raises* when it cannot
(``interpolating from IERS_Auto using predictive values that are more than 30 days old``).
A laboratory PC without internet then either waits for a network timeout or fails.  nullfit
therefore wraps every astropy time/frame computation in :func:`offline_astropy`, which
temporarily sets

* ``astropy.utils.iers.conf.auto_download = False`` — use the bundled IERS-A/B tables
  (package ``astropy-iers-data``) and the bundled leap-second file, no download attempt;
* ``astropy.utils.iers.conf.auto_max_age = None`` — do not refuse predictive values because
  the bundled table is old;
* ``astropy.utils.iers.conf.iers_degraded_accuracy = "warn"`` — times outside the table are
  converted with the edge values (a warning, not an error);
* ``astropy.utils.data.conf.allow_internet = False`` — a second lock on every download path.

The settings are restored on exit, so nullfit does not change the user's own astropy
configuration.  Inside the block astropy's scattered warnings about table range and
"dubious year" are collected into one :class:`EarthOrientationWarning` that says what it means
for nullfit: beyond the table UT1 − UTC is held at its edge value, which turns a sky direction
by 15″ per second of UT1 error — negligible for a 2θ phase, but stated.
"""

from __future__ import annotations

import contextlib
import warnings

__all__ = ["EarthOrientationWarning", "offline_astropy", "check_eop_range"]


class EarthOrientationWarning(UserWarning):
    """Times fall outside the bundled Earth-orientation (IERS) or leap-second tables."""


_EPHEMERIS_MESSAGE = (
    "dates outside 1900-2100: the builtin Earth ephemeris (ERFA epv00) is designed for that "
    "range; the orbital velocity elsewhere is less accurate"
)


def _range_message() -> str:
    first, last = _table_span()
    return (
        f"times outside the bundled IERS Earth-orientation/leap-second tables ({first} to {last} "
        "covered): UT1 − UTC is held at the table's edge value; a sky direction then turns by "
        "15 arcsec per second of UT1 error (|UT1 − UTC| < 0.9 s while leap seconds are kept), "
        "negligible for a 2θ phase"
    )


@contextlib.contextmanager
def offline_astropy():
    """Context manager: astropy with bundled data only (see module docstring).

    Yields nothing.  Warnings astropy/erfa raise about table or ephemeris range are replaced
    by :class:`EarthOrientationWarning` (each distinct message once, also when nested); every
    other warning passes through unchanged.
    """
    from astropy.utils import iers
    from astropy.utils.data import conf as data_conf

    try:  # erfa is astropy's dependency; its warning class marks "dubious year"
        from erfa import ErfaWarning
    except ImportError:  # pragma: no cover
        ErfaWarning = None  # type: ignore[assignment]

    with contextlib.ExitStack() as stack:
        stack.enter_context(iers.conf.set_temp("auto_download", False))
        stack.enter_context(iers.conf.set_temp("auto_max_age", None))
        stack.enter_context(iers.conf.set_temp("iers_degraded_accuracy", "warn"))
        stack.enter_context(data_conf.set_temp("allow_internet", False))
        caught = stack.enter_context(warnings.catch_warnings(record=True))
        warnings.simplefilter("always")
        try:
            yield
        finally:
            # ExitStack unwinds after this block; re-emit outside the recording filter.
            pending = list(caught)
    messages: list[str] = []
    for w in pending:
        text = str(w.message)
        is_erfa = ErfaWarning is not None and issubclass(w.category, ErfaWarning)
        if issubclass(w.category, EarthOrientationWarning):
            msg = text
        elif issubclass(w.category, (iers.IERSDegradedAccuracyWarning, iers.IERSWarning)) or (
            is_erfa and "dubious year" in text
        ):
            msg = _range_message()
        elif is_erfa and "1900-2100" in text:
            msg = _EPHEMERIS_MESSAGE
        else:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
            continue
        if msg not in messages:
            messages.append(msg)
    for msg in messages:
        warnings.warn(msg, EarthOrientationWarning, stacklevel=3)


def _table_mjd_span() -> tuple[float, float]:
    """First and last MJD of the Earth-orientation table in use (bundled data only)."""
    from astropy.utils import iers

    with iers.conf.set_temp("auto_download", False), iers.conf.set_temp("auto_max_age", None):
        mjd = iers.earth_orientation_table.get()["MJD"]
        return float(getattr(mjd[0], "value", mjd[0])), float(getattr(mjd[-1], "value", mjd[-1]))


def _table_span() -> tuple[str, str]:
    """First and last dates (ISO) of the Earth-orientation table in use."""
    from astropy.time import Time

    lo, hi = _table_mjd_span()
    return Time(lo, format="mjd").iso[:10], Time(hi, format="mjd").iso[:10]


def check_eop_range(time) -> bool:
    """Warn (:class:`EarthOrientationWarning`) if ``time`` lies outside the IERS table in use.

    With downloads off astropy's auto-updating table clips to its edge values silently, so
    nullfit checks the range itself.  Call it inside :func:`offline_astropy`.  Returns True
    when every time is covered.
    """
    import numpy as np

    lo, hi = _table_mjd_span()
    t_mjd = np.atleast_1d(time.utc.mjd)
    inside = bool(t_mjd.min() >= lo and t_mjd.max() <= hi)
    if not inside:
        warnings.warn(_range_message(), EarthOrientationWarning, stacklevel=3)
    return inside
