"""One self-contained HTML report: summaries, tables, embedded figures and provenance.

Every user-provided string (file names, notes from a manifest, run ids) is escaped.
Figures are embedded as base64 PNG so the file stands alone.
"""

from __future__ import annotations

import base64
import html
import io
from typing import Any

from .wording import plain_summary


_STYLE = """
body { font-family: Georgia, 'DejaVu Serif', serif; max-width: 60rem; margin: 2rem auto; color: #1d1d1b;
       line-height: 1.45; padding: 0 1rem; }
h1 { font-weight: normal; border-bottom: 3px double #5b4a2f; padding-bottom: .3rem; }
h2 { font-weight: normal; color: #5b4a2f; margin-top: 2.2rem; }
table { border-collapse: collapse; margin: .6rem 0; font-size: .92rem; }
th, td { padding: .2rem .7rem; border-bottom: 1px solid #d8d2c4; }
th { text-align: left; font-weight: 600; }
figure { margin: 1.2rem 0; }
figcaption { font-size: .9rem; color: #4a4a45; }
.nullfit-summary { margin: .8rem 0; }
.note { font-size: .9rem; color: #4a4a45; }
code { font-size: .88rem; }
"""


def figure_to_png_base64(fig, dpi: int = 110) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, bbox_inches="tight")
    return base64.b64encode(buf.getvalue()).decode("ascii")


def _block(item) -> str:
    """HTML for one report item: a Described/Summary, a DataFrame, or plain text (in user wording)."""
    if hasattr(item, "summary") and callable(item.summary) and not hasattr(item, "to_html"):
        return plain_summary(item.summary()).as_html()
    if hasattr(item, "as_html"):
        return plain_summary(item).as_html()
    if hasattr(item, "_repr_html_") and not hasattr(item, "to_html"):
        return item._repr_html_()
    if hasattr(item, "to_html"):  # pandas DataFrame: escape=True is pandas' default
        return item.to_html(index=False, escape=True, float_format=lambda v: f"{v:.4g}", border=0)
    return f"<p>{html.escape(str(item))}</p>"


def _prov_html(prov: dict) -> str:
    e = html.escape
    rows = []
    for key in ("created_utc",):
        rows.append(f"<tr><th>{e(key)}</th><td>{e(str(prov.get(key)))}</td></tr>")
    labels = {"versions": "version", "settings": "setting", "seeds": "seed", "dropped_rows": "rows"}
    for group in ("versions", "settings", "seeds", "dropped_rows"):
        for k, v in prov.get(group, {}).items():
            if isinstance(v, dict):
                v = ", ".join(f"{kk}: {vv}" for kk, vv in v.items()) or "none"
            rows.append(f"<tr><th>{e(labels[group])}: {e(str(k))}</th><td><code>{e(str(v))}</code></td></tr>")
    for f in prov.get("inputs", []):
        rows.append(f"<tr><th>input</th><td><code>{e(f['path'])}</code><br>SHA-256 <code>{e(f['sha256'])}</code>"
                    f" ({f['bytes']} bytes)</td></tr>")
    return "<table>" + "".join(rows) + "</table>"


def render_report(title: str, sections: list[tuple[str, list]], *, figures: list[tuple[str, Any]] = (),
                  provenance_info: dict | None = None, intro: str = "") -> str:
    """Render a complete HTML document.

    ``sections`` is a list of ``(heading, items)``; items are results (anything with
    ``_repr_html_``), DataFrames, or text.  ``figures`` is a list of ``(caption, matplotlib Figure)``.
    """
    e = html.escape
    out = ["<!DOCTYPE html>", "<html lang='en'><head><meta charset='utf-8'>",
           f"<title>{e(title)}</title><style>{_STYLE}</style></head><body>", f"<h1>{e(title)}</h1>"]
    if intro:
        out.append(f"<p class='note'>{e(intro)}</p>")
    for heading, items in sections:
        out.append(f"<h2>{e(heading)}</h2>")
        out += [_block(it) for it in items]
    if figures:
        out.append("<h2>Figures</h2>")
        for caption, fig in figures:
            data = figure_to_png_base64(fig)
            out.append(f"<figure><img alt='{e(caption)}' src='data:image/png;base64,{data}' style='max-width:100%'>"
                       f"<figcaption>{e(caption)}</figcaption></figure>")
    if provenance_info is not None:
        out.append("<h2>Provenance</h2>")
        out.append(_prov_html(provenance_info))
    out.append("</body></html>")
    return "\n".join(out)
