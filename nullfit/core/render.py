"""Self-describing results: one small renderer shared by every result object.

A result object (``ScanFit``, ``Limit``, ...) implements two methods:

* ``to_dict()`` -> a JSON-able ``dict`` (plain floats, ints, str, bool, None, lists, dicts);
* ``summary()`` -> a :class:`Summary`: a title, rows of ``(label, value, unit)`` and notes.

and inherits from :class:`Described`, which turns those into ``__str__`` (text),
``_repr_html_`` (notebook HTML, every string escaped) and ``to_json()``.
"""

from __future__ import annotations

import html
import json
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np


def fmt(value: Any, digits: int = 4) -> str:
    """Format a number with ``digits`` significant digits; other values with ``str``."""
    if value is None:
        return "—"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        v = float(value)
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        if v == 0:
            return "0"
        if 1e-3 <= abs(v) < 1e5:
            return f"{v:.{digits}g}"
        return f"{v:.{digits - 1}e}"
    return str(value)


@dataclass(frozen=True)
class Summary:
    """A rendered description: title, ``(label, value, unit)`` rows, and notes."""

    title: str
    rows: tuple[tuple[str, Any, str], ...] = ()
    notes: tuple[str, ...] = ()
    sections: tuple["Summary", ...] = field(default=())

    def as_text(self) -> str:
        lines = [self.title, "=" * len(self.title)]
        lines += _text_rows(self.rows)
        for sec in self.sections:
            lines += ["", sec.title, "-" * len(sec.title)]
            lines += _text_rows(sec.rows)
            lines += [f"  note: {n}" for n in sec.notes]
        if self.notes:
            lines.append("")
            lines += [f"note: {n}" for n in self.notes]
        return "\n".join(lines)

    def as_html(self) -> str:
        e = html.escape
        out = [f'<div class="nullfit-summary"><strong>{e(self.title)}</strong>']
        out.append(_html_rows(self.rows))
        for sec in self.sections:
            out.append(f"<em>{e(sec.title)}</em>")
            out.append(_html_rows(sec.rows))
            out += [f"<p style='margin:0'><small>{e(n)}</small></p>" for n in sec.notes]
        if self.notes:
            out.append("<ul>" + "".join(f"<li>{e(n)}</li>" for n in self.notes) + "</ul>")
        out.append("</div>")
        return "\n".join(out)

    def __str__(self) -> str:
        return self.as_text()

    def _repr_html_(self) -> str:
        return self.as_html()


def _text_rows(rows) -> list[str]:
    if not rows:
        return []
    width = max(len(r[0]) for r in rows)
    return [f"  {label:<{width}}  {fmt(value)}{(' ' + unit) if unit else ''}" for label, value, unit in rows]


def _html_rows(rows) -> str:
    if not rows:
        return ""
    e = html.escape
    body = "".join(
        f"<tr><th style='text-align:left'>{e(label)}</th><td style='text-align:right'>{e(fmt(value))}</td>"
        f"<td style='text-align:left'>{e(unit)}</td></tr>"
        for label, value, unit in rows
    )
    return f"<table>{body}</table>"


def jsonable(obj: Any) -> Any:
    """Convert numpy scalars/arrays and tuples into plain JSON-able Python objects."""
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return jsonable(obj.tolist())
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    return obj


class Described:
    """Mixin: text, HTML and JSON renderings from ``summary()`` and ``to_dict()``."""

    def summary(self) -> Summary:  # pragma: no cover - abstract
        raise NotImplementedError

    def to_dict(self) -> dict:  # pragma: no cover - abstract
        raise NotImplementedError

    def to_json(self, **kwargs) -> str:
        return json.dumps(jsonable(self.to_dict()), **kwargs)

    def __str__(self) -> str:
        return self.summary().as_text()

    def _repr_html_(self) -> str:
        return self.summary().as_html()
