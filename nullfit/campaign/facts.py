"""What a run's reading and fitting did to its rows, in one place for every output.

`fit` and `info` must agree on the counts they print, so both take them from here:

* rows **dropped while reading** (``Scan.dropped``: missing/non-finite values, repaired rows);
* rows in **partial turns**, kept in the scan but left out of the fit (``ScanFit.excluded_rows``);
* **direction changes** of the table (``Scan.n_reversals``);
* **gaps in time** (``Scan.gaps``, found by the reader);
* auxiliary channels read but not used by the fit.
"""

from __future__ import annotations

from typing import Any


def scan_gaps(scan) -> list[dict[str, Any]]:
    """The gaps in time the reader found (``Scan.gaps``, see :mod:`nullfit.reading.events`) as
    dicts: ``row`` (first reading after the gap), ``after_row``, ``start_s``, ``duration_s``,
    ``turns_lost``."""
    return [g.to_dict() for g in getattr(scan, "gaps", ())]


def gap_text(g: dict[str, Any]) -> str:
    """One gap in words: ``"before row 601: 2.592e+05 s without readings (about 2880 turns)"``."""
    lost = g.get("turns_lost")
    extra = "" if lost is None else f" (about {plural(int(round(lost)), 'turn')})"
    return f"before row {g['row']}: {float(g['duration_s']):.4g} s without readings{extra}"


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
        d["partial_turn_rows"] = int(scan.partial_turn_rows)
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


def aux_status(scan, fit, used=()) -> list[str]:
    """Notes on auxiliary channels: which were read but not used, and why (``used``: channels
    used outside the fit, e.g. by a turn-level coupling correction)."""
    read = list(getattr(scan, "aux", {}) or {})
    used = list(getattr(fit, "aux_names", ()) or ()) + list(used)
    unused = [n for n in read if n not in used]
    if not unused:
        return []
    return [f"auxiliary channel(s) {', '.join(unused)} read but not used in the fit (not asked for: name them "
            "with aux=[...] to regress the signal on them)"]
