"""The ``nullfit`` command.  Parsing and printing only: every result comes from the library.

One module per sub-command (``add_parser(sub)`` and ``run(args)``); shared option groups in
:mod:`.options`.  Exit codes: 0 success; 2 bad input, data that cannot support the analysis, or
usage (one line on stderr, never a traceback).  Heavy libraries are imported inside the handlers
so ``nullfit --help`` is instant.
"""

from __future__ import annotations

import argparse
import sys
import warnings

from . import compare
from . import demo
from . import fit
from . import info
from . import report
from . import sidereal
from . import simulate
from . import turns
from ..core.errors import raised_by_nullfit
from .options import EXIT_BAD_INPUT, UsageError
from .wording import one_line, show_warning, to_flags

#: Sub-commands in the order ``--help`` lists them (one line each, so that a new sub-command is a
#: one-line addition here and one import above).
COMMANDS = {
    "demo": demo,
    "info": info,
    "fit": fit,
    "compare": compare,
    "report": report,
    "simulate": simulate,
    "sidereal": sidereal,
    "turns": turns,
}


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="nullfit",
        description="Second-harmonic (2θ) amplitude, upper limits and expected-vs-bound ratios "
                    "from rotating-interferometer and resonator-pair scan logs.",
        epilog="Exit status: 0 on success, 2 on bad input (one line on stderr).",
    )
    p.add_argument("--version", action="store_true", help="print the version and exit")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    for module in COMMANDS.values():
        module.add_parser(sub)
    return p


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.version:
        from .. import __version__

        print(f"nullfit {__version__}")
        return 0
    if not args.command:
        parser.print_help()
        return 0
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default")  # every distinct warning once, as one line
            warnings.showwarning = show_warning
            return COMMANDS[args.command].run(args)
    except (UsageError, FileExistsError, FileNotFoundError, IsADirectoryError, NotADirectoryError,
            PermissionError) as err:
        print(f"nullfit: {to_flags(one_line(err))}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except ValueError as err:  # ScanError and AnalysisError are ValueErrors; so are nullfit's option checks
        if not raised_by_nullfit(err):
            raise  # a ValueError from inside a library is a bug, not bad input: keep its traceback
        print(f"nullfit: {to_flags(one_line(err))}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:  # pragma: no cover - e.g. `nullfit fit ... | head`
        return 0


__all__ = ["main", "build_parser", "COMMANDS", "UsageError", "EXIT_BAD_INPUT", "to_flags", "one_line"]
