"""What a run's reading and fitting did to its rows, in one place for every output.

`fit` and `info` must agree on the counts they print, so both take them from here:

* rows **dropped while reading** (``Scan.dropped``: missing/non-finite values, repaired rows);
* rows in **partial turns**, kept in the scan but left out of the fit (``ScanFit.excluded_rows``);
* **direction changes** of the table (``Scan.n_reversals``);
* **gaps in time** (``Scan.gaps`` when the reader provides it; otherwise the steps longer than
  ten typical reading intervals, found here from the kept times);
* auxiliary channels read but not used by the fit.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

#: A step longer than this many typical (median) reading intervals is reported as a gap when the
#: reader did not report gaps itself (common practice: a plain multiple of the median step).
GAP_FACTOR = 10.0


def _turn_period_s(scan) -> float | None:
    turns = np.asarray(scan.turn)
    if turns.size < 2 or turns[-1] == turns[0]:
        return None
    starts = np.flatnonzero(np.r_[True, np.diff(turns) != 0])
    t0 = np.asarray(scan.time, dtype=float)[starts]
    if t0.size < 2:
        return None
    return float(np.median(np.diff(t0)))


def _gap_from_object(g) -> dict[str, Any]:
    """A gap reported by the reader (an object, a mapping or a tuple) as a plain dict."""
    if isinstance(g, dict):
        return dict(g)
    if hasattr(g, "to_dict"):
        return dict(g.to_dict())
    if hasattr(g, "__dataclass_fields__"):
        return {k: getattr(g, k) for k in g.__dataclass_fields__}
    if isinstance(g, (tuple, list)):
        return {f"field_{i}": v for i, v in enumerate(g)}
    return {"gap": str(g)}


def scan_gaps(scan) -> list[dict[str, Any]]:
    """The gaps in time of ``scan`` as dicts (``row``, ``seconds``, ``turns_lost`` where known).

    Uses the reader's own report (``scan.gaps``) when the Scan carries one; otherwise finds the
    steps longer than :data:`GAP_FACTOR` typical reading intervals."""
    if hasattr(scan, "gaps"):
        return [_gap_from_object(g) for g in (getattr(scan, "gaps", None) or ())]
    t = np.asarray(scan.time, dtype=float)
    if t.size < 3:
        return []
    dt = np.diff(t)
    typical = float(np.median(dt))
    if not typical > 0:
        return []
    period = _turn_period_s(scan)
    out = []
    for i in np.flatnonzero(dt > GAP_FACTOR * typical):
        size = float(dt[i])
        lost = None if not period else int(math.floor(size / period))
        out.append({"row": int(scan.rows[i + 1]), "seconds": size, "turns_lost": lost})
    return out


def gap_text(g: dict[str, Any]) -> str:
    """One gap in words: ``"before row 601: 2.592e+05 s (about 2880 turns)"``."""
    if "row" in g and "seconds" in g:
        lost = g.get("turns_lost")
        extra = "" if lost is None else f" (about {lost} turn{'s' if lost != 1 else ''})"
        return f"before row {g['row']}: {float(g['seconds']):.4g} s without readings{extra}"
    return ", ".join(f"{k} {v}" for k, v in g.items())


def plural(n: int, word: str) -> str:
    """``"1 turn"``, ``"3 turns"``."""
    return f"{n} {word}" + ("" if n == 1 else "s")


def reading_facts(scan, fit=None) -> dict[str, Any]:
    """The row counts every output shows (JSON keys; see the module docstring)."""
    d: dict[str, Any] = {
        "dropped_rows": int(scan.dropped_rows),
        "dropped": {why: int(c) for why, c in scan.dropped},
        "n_reversals": int(getattr(scan, "n_reversals", 0) or 0),
        "gaps": scan_gaps(scan),
    }
    if fit is not None:
        d["partial_turn_rows"] = int(fit.excluded_rows)
        d["excluded"] = {k: (list(v) if isinstance(v, tuple) else v) for k, v in dict(fit.excluded).items()}
    else:
        complete = np.asarray(scan.turn_complete)[np.asarray(scan.turn)]
        d["partial_turn_rows"] = int((~complete).sum())
    return d


def reading_rows(facts: dict[str, Any]) -> list[tuple[str, Any, str]]:
    """Summary rows for the counts of :func:`reading_facts`."""
    gaps = facts["gaps"]
    return [
        ("rows dropped while reading", facts["dropped_rows"], ""),
        ("rows in partial turns (not fitted)", facts["partial_turn_rows"], ""),
        ("direction changes of the table", facts["n_reversals"], ""),
        ("gaps in time", plural(len(gaps), "gap") if gaps else "none", ""),
    ]


def reading_notes(facts: dict[str, Any]) -> tuple[str, ...]:
    notes = tuple(f"dropped {c} row(s) while reading: {why}" for why, c in facts["dropped"].items() if c)
    notes += tuple(f"gap in time {gap_text(g)}" for g in facts["gaps"])
    if facts["n_reversals"]:
        notes += (f"the table changed direction {facts['n_reversals']} time(s); each turn is fitted in its own "
                  "sense",)
    return notes


def aux_status(scan, fit) -> list[str]:
    """Notes on auxiliary channels: which were read but not used, and why."""
    read = list(getattr(scan, "aux", {}) or {})
    used = list(getattr(fit, "aux_names", ()) or ())
    unused = [n for n in read if n not in used]
    if not unused:
        return []
    return [f"auxiliary channel(s) {', '.join(unused)} read but not used in the fit (not asked for: name them "
            "with aux=[...] to regress the signal on them)"]
