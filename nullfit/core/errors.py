"""Whose fault is it?  The error and warning types every stage raises.

``ScanError``
    **Bad input**: the log or its manifest is wrong (a missing column, a time going backwards, a
    value that is not a number).  The message is one line naming the file, row and column where
    they apply, so the user can open the file and fix it.
``AnalysisError``
    **The data are valid but cannot support the analysis asked for**: too few turns to estimate
    a scatter, harmonics that the angle coverage cannot separate, a design the drift model
    absorbs.  The message says what the data lack and what would work instead.
``ScanWarning``
    Something in a log was repaired or dropped (and counted).
``FitWarning``
    A fit ran, but something about its design or its error estimate deserves attention.

Both error types are ``ValueError`` subclasses (existing ``except ValueError`` code keeps
working).  The command line turns either into one line on stderr and exit status 2.  Library
messages speak in library terms (keyword names); the command line translates them into its
flags.
"""

from __future__ import annotations


class ScanError(ValueError):
    """A scan log (or its manifest) cannot be used; the message is one line naming file, row and
    column where they apply."""


class AnalysisError(ValueError):
    """The data are valid, but cannot support the requested analysis (too few turns, coverage
    that cannot separate the harmonics, a singular design); the message names the cause and the
    alternatives."""


class ScanWarning(UserWarning):
    """Something in a scan log was repaired or dropped (and counted)."""


class FitWarning(UserWarning):
    """A fit ran, but something about its design or its error estimate deserves attention."""


def where(source: str | None, row: int | None = None, column: str | None = None) -> str:
    """``"file.csv, row 12, column 'angle_deg'"`` — the location prefix of every ScanError."""
    parts = [str(source) if source else "<data>"]
    if row is not None:
        parts.append(f"row {row}")
    if column is not None:
        parts.append(f"column {column!r}")
    return ", ".join(parts)


__all__ = ["ScanError", "AnalysisError", "ScanWarning", "FitWarning", "where"]


def raised_by_nullfit(err: BaseException) -> bool:
    """True when the innermost frame that raised ``err`` is nullfit's own code (a refusal worded for
    the user), not a library deep inside it (a bug, which must not be turned into a one-line note)."""
    tb, last = err.__traceback__, None
    while tb is not None:
        last, tb = tb, tb.tb_next
    if last is None:
        return True
    from pathlib import Path

    package = Path(__file__).resolve().parents[1]
    return Path(last.tb_frame.f_code.co_filename).resolve().is_relative_to(package)
