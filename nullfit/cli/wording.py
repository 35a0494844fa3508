"""The command line's wording: library messages in command-line terms, warnings on one line."""

from __future__ import annotations

import re
import sys

#: Library keyword → command-line flag, for translating one-line messages (``angle_unit='rad'`` →
#: ``--angle-unit rad``).  Keywords without a flag are left as they are.
FLAGS = {
    "time": "--time", "angle": "--angle", "signal": "--signal", "angle_unit": "--angle-unit",
    "signal_unit": "--signal-unit", "manifest": "--manifest", "harmonics": "--harmonics", "drift": "--drift",
    "errors": "--errors", "confidence_level": "--cl", "speed_m_s": "--speed", "velocity": "--wind",
    "rng": "--seed", "seed": "--seed", "limits": "--limits", "aux": "--aux", "start_utc": "--start-utc",
    "mark_azimuth_deg": "--mark-azimuth", "table_sense": "--table-sense", "n_turns": "--turns",
    "samples_per_turn": "--per-turn", "marks": "--marks", "period_s": "--period", "sigma": "--noise-sigma",
    "ar1_coef": "--ar1", "flicker_alpha": "--flicker-alpha", "use_c0": "--use-c0", "combined": "--combined",
}

#: Whole phrases of library messages that have a command-line equivalent (applied first).
PHRASES = (
    ("pass apparatus=Apparatus(...) or give an [apparatus] table in the manifest",
     "give --arm-length and --wavelength, or an [apparatus] table in the manifest"),
    ("give Apparatus(signal=...) to match", "give [apparatus] signal in the manifest to match"),
    ("the scan has no absolute time (epoch_unix is None)", "the log has no absolute time"),
    ("or give the epoch in the manifest", "or give --start-utc (or start_utc in the manifest)"),
    ("(speed_m_s only)", "(--speed without --wind)"),
    ("Site(mark_azimuth_deg=...) / mark_azimuth_deg in [site]",
     "--mark-azimuth DEG (or mark_azimuth_deg in the manifest's [site])"),
    ("pass nonfinite='drop' to drop and count them", "leave out --strict to drop and count them"),
    ("use nullfit.upper_limit for a limit", "use --limits for a limit"),
    ("or pass nullfit.demodulate(scan)", ""),
    ("the manifest [time] start_utc", "--start-utc"),
    ("pass turns=(N, 2) array of (c, s)", "use --errors turns"),
    ("name them with aux=[...] to regress the signal on them",
     "name them with --aux COL[,COL] to regress the signal on them"),
    ("the table given as resume=", "the table"), ("resume= needs", "--resume needs"),
    ("a scheduler address", "--scheduler"),
)

_KEYWORD = re.compile(r"\b([a-z_][a-z0-9_]*)=('[^']*'|\"[^\"]*\"|[^\s,;)]+)")


def to_flags(message: str) -> str:
    """A library message in command-line terms: keywords become flags (see :data:`FLAGS`)."""
    for old, new in PHRASES:
        message = message.replace(old, new)

    def sub(m: re.Match) -> str:
        flag = FLAGS.get(m.group(1))
        if flag is None:
            return m.group(0)
        value = m.group(2).strip("'\"")
        if value == "True":  # a switch
            return flag
        return f"{flag} {value}" if value not in ("...", "None") else flag

    return _KEYWORD.sub(sub, message)


def show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """One line per warning, no source line: ``nullfit: warning: <message>``."""
    print(f"nullfit: warning: {to_flags(one_line(message))}", file=sys.stderr if file is None else file)


def one_line(err) -> str:
    if isinstance(err, OSError) and err.filename is not None and err.strerror:
        return f"{err.filename}: {err.strerror}"
    text = str(err).strip() or type(err).__name__
    return " ".join(text.split())


def to_user_text(text: str) -> str:
    """Library wording → command-line wording, line by line."""
    return "\n".join(to_flags(line) for line in text.splitlines())
