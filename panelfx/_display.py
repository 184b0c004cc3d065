"""Rich notebook display of a :class:`~panelfx.Derivation`: its panel and its data dictionary.

Jupyter calls ``_repr_html_`` (and renderers without HTML ``_repr_markdown_``).  Every piece
of text comes from the user (column names, descriptions), so every cell is escaped: a
column named ``<script>`` shows as text and never runs.
"""

from __future__ import annotations

import html
from typing import Any

__all__ = ["derivation_html", "derivation_markdown"]

#: Columns of the displayed dictionary: (heading, dictionary column).
SHOWN = (("column", "column"), ("transform", "transform"), ("past-only", "past_only"), ("unit", "time_unit"),
         ("description", "description"))


def _panel_rows(d: Any) -> list[tuple[str, str]]:
    ids = d.id_cols
    rows = [("id", ", ".join(ids)), ("time", d.time)]
    rows.append(("unit", d.unit if d.unit is not None else "D (days) for datetime times, else the time's own units"))
    if d.time_unit is not None:
        rows.append(("time unit", d.time_unit))
    rows.append(("order", d.order if d.order is not None else "none (no tied occasions)"))
    rows.append(("reads", ", ".join(d.inputs()) or "id and time only"))
    if d.tables():
        rows.append(("side tables", ", ".join(d.tables())))
    return rows


def _cells(d: Any) -> list[list[str]]:
    table = d.dictionary()
    out = []
    for rec in table.to_dict("records"):
        row = []
        for _, key in SHOWN:
            value = rec[key]
            row.append(("yes" if value else "no") if key == "past_only" else ("" if value is None else str(value)))
        out.append(row)
    return out


def derivation_html(d: Any) -> str:
    """An HTML block: a title with the description, the panel declaration, the dictionary table."""
    e = html.escape
    title = "panelfx.Derivation" + (f": {e(d.description)}" if d.description else "")
    parts = [f'<div class="panelfx-derivation"><p><strong>{title}</strong> '
             f"({len(d.transforms)} transform{'s' if len(d.transforms) != 1 else ''}, "
             f"{len(d.outputs())} output{'s' if len(d.outputs()) != 1 else ''})</p>",
             '<table class="panelfx-panel"><tbody>']
    parts += [f'<tr><th style="text-align:left">{e(k)}</th><td style="text-align:left">{e(v)}</td></tr>'
              for k, v in _panel_rows(d)]
    parts.append('</tbody></table><table class="panelfx-dictionary"><thead><tr>')
    parts += [f'<th style="text-align:left">{e(h)}</th>' for h, _ in SHOWN]
    parts.append("</tr></thead><tbody>")
    for row in _cells(d):
        parts.append("<tr>" + "".join(f'<td style="text-align:left">{e(c)}</td>' for c in row) + "</tr>")
    parts.append("</tbody></table></div>")
    return "".join(parts)


_MD_SPECIAL = str.maketrans({c: "\\" + c for c in "\\`*_[]|"})


def _md(text: str) -> str:
    """Text safe in a Markdown table cell: HTML escaped (Markdown passes raw HTML through),
    Markdown punctuation and the cell separator ``|`` backslash-escaped, line breaks as spaces."""
    return html.escape(text, quote=False).translate(_MD_SPECIAL).replace("\n", " ")


def derivation_markdown(d: Any) -> str:
    """The same as :func:`derivation_html`, as Markdown."""
    title = "**panelfx.Derivation**" + (f": {_md(d.description)}" if d.description else "")
    lines = [title, ""]
    lines += [f"- {_md(k)}: {_md(v)}" for k, v in _panel_rows(d)]
    lines += ["", "| " + " | ".join(h for h, _ in SHOWN) + " |", "|" + "---|" * len(SHOWN)]
    lines += ["| " + " | ".join(_md(c) for c in row) + " |" for row in _cells(d)]
    return "\n".join(lines) + "\n"
