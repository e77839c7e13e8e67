"""Render a :class:`~appraise.report.content.Worksheet` to one HTML document.

The markup is deliberately plain (tables with attributes, a small style sheet)
so that the same document reads well in a browser and is laid out faithfully by
Qt's rich-text engine, which prints the PDF. Every piece of text from the
content is escaped: a region called ``<script>`` prints as text.
"""

from __future__ import annotations

import base64
from collections.abc import Callable
from dataclasses import dataclass, field
from html import escape as _html_escape

from .content import Facts, Figure, Notice, Paragraph, SignatureBlock, Table, Worksheet
from .safe_text import terminal_text

ImageSource = Callable[[int, Figure], str]
"""``(index, figure) -> src`` for the ``<img>`` of the figure at that index."""

BREAK = ' style="page-break-before: always"'


def escape(text: str, quote: bool = True) -> str:
    """HTML-escaped text with control characters (an ESC or BEL from a sale id, a
    bidirectional override) shown as visible escapes like ``\\x1b``, as on the terminal:
    HTML may not carry them, and a reader of the worksheet must see what the file held."""
    return _html_escape(terminal_text(str(text)), quote)


@dataclass(frozen=True)
class PageBreaks:
    """Extra page breaks chosen by a paged renderer (the PDF writer keeps rows and short
    tables together with them); a browser needs none.

    ``sections``: indexes of sections that start a page. ``blocks``: ``(block, row)``
    pairs, ``block`` counting every block of the worksheet in order: row 0 breaks
    before the block (its title included), row ``r`` of a table or facts list breaks
    before its ``r``-th row (the table goes on under its header on the new page).
    """

    sections: frozenset[int] = field(default_factory=frozenset)
    blocks: frozenset[tuple[int, int]] = field(default_factory=frozenset)

    def rows_of(self, block: int) -> frozenset[int]:
        return frozenset(r for b, r in self.blocks if b == block)


STYLE = """
body { font-family: 'DejaVu Sans', 'Helvetica', 'Arial', sans-serif; font-size: 9.5pt;
       color: #1a1a1a; }
h1 { font-size: 16pt; margin-bottom: 2pt; }
h2 { font-size: 12.5pt; margin-top: 14pt; margin-bottom: 4pt; color: #223355; }
h3 { font-size: 10.5pt; margin-top: 8pt; margin-bottom: 3pt; }
p.meta { color: #444444; margin-top: 0; }
table.data { border-collapse: collapse; margin-bottom: 4pt; font-size: 8.5pt; }
table.data th { background-color: #e6ebf2; font-weight: bold; }
table.facts td.label { color: #444444; }
p.note { font-size: 8.5pt; color: #444444; }
p.caption { font-size: 8.5pt; color: #333333; margin-bottom: 10pt; }
p.fill { margin-top: 10pt; }
"""


def data_uri(index: int, figure: Figure) -> str:
    """A ``data:`` URI holding the figure's PNG, for a self-contained HTML file."""
    return "data:image/png;base64," + base64.b64encode(figure.png).decode("ascii")


def render_html(
    worksheet: Worksheet,
    *,
    image_src: ImageSource = data_uri,
    image_width: int = 680,
    breaks: PageBreaks | None = None,
) -> str:
    """The worksheet as an HTML document (a ``str``).

    Parameters
    ----------
    worksheet:
        The content to render.
    image_src:
        Gives each figure's ``src``: by default a base64 ``data:`` URI; the PDF
        writer passes resource names it registers with its document instead.
    image_width:
        Width of each figure in CSS pixels (the height keeps the aspect ratio).
    breaks:
        Extra page breaks (:class:`PageBreaks`), for print.
    """
    breaks = breaks or PageBreaks()
    out: list[str] = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{escape(worksheet.title)}</title>",
        f"<style>{STYLE}</style>",
        "</head><body>",
        f"<h1>{escape(worksheet.title)}</h1>",
        '<p class="meta">'
        f"Effective date of value: <b>{escape(worksheet.effective_date)}</b>"
        f" &nbsp;&middot;&nbsp; Workfile: {escape(worksheet.workfile_id)}"
        + (
            f" &nbsp;&middot;&nbsp; Prepared: {escape(worksheet.generated)}"
            if worksheet.generated
            else ""
        )
        + "</p>",
    ]
    figure_index = 0
    block_index = 0
    for s, section in enumerate(worksheet.sections):
        brk = BREAK if section.new_page or s in breaks.sections else ""
        out.append(f"<h2{brk}>{escape(section.title)}</h2>")
        for block in section.blocks:
            rows = breaks.rows_of(block_index)
            block_index += 1
            if isinstance(block, Figure):
                fig = _figure(block, image_src(figure_index, block), image_width)
                out.append(fig.replace("<p ", f"<p{BREAK} ", 1) if 0 in rows else fig)
                figure_index += 1
            elif isinstance(block, Table | Facts):
                out.append(_table(block, rows) if isinstance(block, Table) else _facts(block, rows))
            else:
                html = _block(block)
                out.append(html.replace("<", f"<div{BREAK}></div><", 1) if 0 in rows else html)
    out.append("</body></html>")
    return "\n".join(out)


def _block(block: object) -> str:
    if isinstance(block, Paragraph):
        return f"<p>{_text(block.text)}</p>"
    if isinstance(block, Facts):
        return _facts(block)
    if isinstance(block, Table):
        return _table(block)
    if isinstance(block, Notice):
        return _notice(block)
    if isinstance(block, SignatureBlock):
        return _signature(block)
    raise TypeError(f"cannot render {type(block).__name__}")


def _text(s: str) -> str:
    """Escape and keep line breaks."""
    return escape(s).replace("\n", "<br>")


def _facts(block: Facts, breaks: frozenset[int] = frozenset()) -> str:
    first = BREAK if 0 in breaks else ""
    parts = [f"<h3{first}>{escape(block.title)}</h3>"] if block.title else []
    opening = '<table class="facts" cellspacing="0" cellpadding="2"{}>'
    parts.append(opening.format("" if block.title else first))
    for r, (label, value) in enumerate(block.rows):
        if r and r in breaks:
            parts.append("</table>" + opening.format(BREAK))
        parts.append(
            f'<tr><td class="label" style="padding-right: 14px">{_text(label)}</td>'
            f"<td>{_text(value)}</td></tr>"
        )
    parts.append("</table>")
    return "\n".join(parts)


def _table(table: Table, breaks: frozenset[int] = frozenset()) -> str:
    first = BREAK if 0 in breaks else ""
    parts = [f"<h3{first}>{escape(table.title)}</h3>"] if table.title else []
    opening = '<table class="data" border="1" cellspacing="0" cellpadding="3"{}>'
    parts.append(opening.format("" if table.title else first))
    head = "".join(
        f'<th align="{_align(table, j)}">{escape(c)}</th>' for j, c in enumerate(table.columns)
    )
    parts.append(f"<thead><tr>{head}</tr></thead><tbody>")
    for r, row in enumerate(table.rows):
        if r and r in breaks:  # the rest on a new page, under its header again
            parts.append(
                f"</tbody></table>{opening.format(BREAK)}<thead><tr>{head}</tr></thead><tbody>"
            )
        cells = "".join(
            f'<td align="{_align(table, j)}">{_cell(table, j, c)}</td>' for j, c in enumerate(row)
        )
        parts.append(f"<tr>{cells}</tr>")
    parts.append("</tbody></table>")
    if table.note:
        parts.append(f'<p class="note">{_text(table.note)}</p>')
    return "\n".join(parts)


def _cell(table: Table, j: int, text: str) -> str:
    """A cell's text; in a right-aligned (number) column the spaces do not break, so
    ``< 0.0001`` or ``$1,200 (SE $80)`` never wraps inside itself."""
    html = _text(text)
    return html.replace(" ", "&nbsp;") if table.alignment(j) == "r" else html


def _align(table: Table, j: int) -> str:
    return "right" if table.alignment(j) == "r" else "left"


def _notice(block: Notice) -> str:
    colour = {"caution": "#fff3dc", "warning": "#fde8e4", "note": "#eef3f8"}[block.kind]
    body = [f"<b>{escape(block.title)}</b>"] if block.title else []
    if len(block.items) == 1:
        body.append(f"<p>{_text(block.items[0])}</p>")
    else:
        body.append("<ul>" + "".join(f"<li>{_text(i)}</li>" for i in block.items) + "</ul>")
    return (
        f'<table class="notice" width="100%" border="0" cellspacing="0" cellpadding="6">'
        f'<tr><td class="{block.kind}" bgcolor="{colour}">{"".join(body)}</td></tr></table>'
    )


def _signature(block: SignatureBlock) -> str:
    parts = [f"<p>{_text(block.statement)}</p>"]
    parts.append('<table class="facts" cellspacing="0" cellpadding="6" width="100%">')
    for label in block.fields:
        parts.append(
            f'<tr><td class="label" width="40%">{escape(label)}</td><td>{"_" * 34}</td></tr>'
        )
    parts.append("</table>")
    return "\n".join(parts)


def _figure(figure: Figure, src: str, width: int) -> str:
    height = round(width * figure.height / figure.width) if figure.width else width
    return (
        f'<p align="center"><img src="{escape(src)}" width="{width}" height="{height}" '
        f'alt="{escape(figure.caption)}"></p>'
        f'<p class="caption">{_text(figure.caption)}</p>'
    )
