"""User-facing wording: what the demo and the reports print in place of programming hints.

Library notes may point a programmer at a function ("use nullfit.upper_limit for a limit");
a report or the demo shows the same advice in words that fit the page they are on.
"""

from __future__ import annotations

from dataclasses import replace

#: (library phrase, user phrase), applied in order.
PHRASES = (
    ("use nullfit.upper_limit for a limit", "quote an upper limit instead (see the limits)"),
    ("for a sky-fixed hypothesis use combine_sky", "for a sky-fixed hypothesis see the sky-frame scale fit"),
    ("ScaleFit.limits(confidence_level)", "the limits on κ"),
    ("or pass nullfit.demodulate(scan)", ""),
    ("name them with aux=[...] to regress the signal on them", "name them as auxiliary channels to regress the "
                                                                 "signal on them"),
)


def plain(text: str) -> str:
    for old, new in PHRASES:
        text = text.replace(old, new)
    return text


def plain_summary(summary):
    """A `Summary` with its notes (and its sections' notes) in user wording."""
    return replace(summary, notes=tuple(plain(n) for n in summary.notes),
                   sections=tuple(plain_summary(s) for s in summary.sections),
                   rows=tuple((label, plain(v) if isinstance(v, str) else v, unit) for label, v, unit in summary.rows))
