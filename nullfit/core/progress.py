"""When a progress bar is shown by default: only for long work, and only on a terminal.

A bar written to a file or a pipe (a CI log, ``nullfit demo > out.txt 2> err.txt``) is a stream of
carriage returns, not information; every caller that draws one (runs of a run table, bootstrap
replicates, campaign logs, chunks of a stream) takes its default from :func:`show_progress`,
and an explicit ``progress=True``/``False`` always wins.
"""

from __future__ import annotations

import sys


def show_progress(progress: bool | None, long: bool = True) -> bool:
    """``progress`` when given; otherwise ``long`` and standard error is a terminal."""
    if progress is not None:
        return bool(progress)
    isatty = getattr(sys.stderr, "isatty", None)
    return bool(long and isatty is not None and isatty())
