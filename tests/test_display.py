"""Notebook display of a Derivation: the panel declaration and the data dictionary, escaped.
HTML is read back with the standard library's parser, Markdown rendered with markdown-it-py (a
CommonMark implementation) and read back the same way."""

from __future__ import annotations

from html.parser import HTMLParser

import pytest

import panelfx as pfx

EVIL = "<script>alert('x')</script>"


class _Cells(HTMLParser):
    """Text of every th/td cell, and every element name seen (the reference reading)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.cells: list[str] = []
        self.tags: list[str] = []
        self._in = False

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        if tag in ("td", "th"):
            self._in = True
            self.cells.append("")

    def handle_endtag(self, tag):
        if tag in ("td", "th"):
            self._in = False

    def handle_data(self, data):
        if self._in:
            self.cells[-1] += data


def _read(html: str) -> _Cells:
    p = _Cells()
    p.feed(html)
    p.close()
    return p


def _derivation() -> pfx.Derivation:
    return pfx.Derivation(pfx.lag(EVIL), pfx.baseline("a|b*c_d"), pfx.time_since_baseline(),
                          id=["site", "subject"], time="day", unit="W", description="invented <b>example</b>")


def test_html_shows_panel_and_dictionary():
    """id, time, unit and order, then one row per output: name, transform, past-only, unit, description."""
    d = _derivation()
    cells = _read(d._repr_html_()).cells
    assert cells[:8] == ["id", "site, subject", "time", "day", "unit", "W", "order", "none (no tied occasions)"]
    header = cells.index("column")
    assert cells[header:header + 5] == ["column", "transform", "past-only", "unit", "description"]
    rows = [cells[i:i + 5] for i in range(header + 5, len(cells), 5)]
    table = d.dictionary()
    assert [r[0] for r in rows] == table["column"].tolist()
    assert [r[1] for r in rows] == table["transform"].tolist()
    assert [r[2] for r in rows] == ["yes", "no", "yes"]
    assert rows[2][3] == "W (weeks)" and rows[0][3] == ""
    assert [r[4] for r in rows] == table["description"].tolist()


def test_html_escapes_every_piece_of_user_text():
    """A column named <script> is shown as text: no script element, the name read back intact."""
    d = _derivation()
    html = d._repr_html_()
    parsed = _read(html)
    assert "script" not in parsed.tags and "b" not in parsed.tags
    assert f"{EVIL}_lag1" in parsed.cells
    assert "<script>" not in html and "&lt;script&gt;" in html
    assert "invented &lt;b&gt;example&lt;/b&gt;" in html


def test_markdown_renders_the_same_cells_escaped():
    """Rendered by markdown-it-py (CommonMark with GFM tables): the same cells as the HTML view, the
    pipe in a column name does not split the cell, no HTML passes through."""
    markdown_it = pytest.importorskip("markdown_it")
    d = _derivation()
    rendered = markdown_it.MarkdownIt("commonmark").enable("table").render(d._repr_markdown_())
    parsed = _read(rendered)
    assert "script" not in parsed.tags and "b" not in parsed.tags
    html_cells = _read(d._repr_html_()).cells
    assert parsed.cells == html_cells[html_cells.index("column"):]
    assert "a|b*c_d_baseline" in parsed.cells
    assert "invented <b>example</b>" in rendered.replace("&lt;", "<").replace("&gt;", ">")


def test_display_lists_side_tables_and_time_unit():
    d = pfx.Derivation(pfx.as_of("labs", "alt", time="drawn"), id="pid", time="day", time_unit="D", order="seq")
    cells = _read(d._repr_html_()).cells
    assert cells[cells.index("time unit") + 1] == "D"
    assert cells[cells.index("order") + 1] == "seq"
    assert cells[cells.index("side tables") + 1] == "labs"
    assert cells[cells.index("reads") + 1] == "id and time only"
