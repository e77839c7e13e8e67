"""Print a worksheet to PDF (or any paged Qt device, such as a printer) with Qt's own
rich-text engine: the same HTML as :func:`appraise.report.html.render_html`, with
the figures registered as document resources.

Each page gets a header (title, effective date) and a footer (workfile id,
``Page x of y``, a one-line caution). Layout happens at 96 logical pixels per
inch; the painter scales to the device's resolution, so text stays vector text
and the figures keep their full pixel size.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from ..engine.errors import ReportError
from ..report.cautions import ONE_LINE_CAUTION
from ..report.content import Facts, Figure, Notice, SignatureBlock, Table, Worksheet
from ..report.html import PageBreaks, render_html
from .qtapp import ensure_app

LOGICAL_DPI = 96.0
MM = LOGICAL_DPI / 25.4  # logical pixels per millimetre


@dataclass(frozen=True)
class PageMargins:
    """Margins in millimetres; the header and footer sit inside top and bottom."""

    left: float = 18.0
    right: float = 18.0
    top: float = 22.0
    bottom: float = 22.0


def figure_resource(index: int, figure: Figure) -> str:
    """Resource name under which figure ``index`` is registered with the document."""
    return f"appraise-figure-{index}.png"


KEEP_ROWS = 3
"""A table split across pages keeps at least this many rows on each side."""

SHORT_TABLE_ROWS = 12
"""A table of at most this many rows is never split: it moves to the next page whole."""

MAX_BREAK_PASSES = 60
"""Layout passes spent placing page breaks (one break per pass) before giving up."""


def build_document(
    worksheet: Worksheet, *, text_width: float | None = None, page_height: float | None = None
):
    """A ``QTextDocument`` holding the worksheet, figures registered as resources.

    ``text_width`` (logical pixels) sets the layout width, and figures are sized
    to fit it. With ``page_height`` the document is paged at that height and page
    breaks are placed so that no table row, short table or heading is split from
    what follows it (:func:`keep_together_breaks`); without it (a screen preview)
    the document is one long page.
    """
    ensure_app()
    from PySide6.QtGui import QImage

    width = text_width or 640.0
    images = []
    for i, fig in enumerate(worksheet.figures()):
        image = QImage.fromData(fig.png, "PNG")
        if image.isNull():
            raise ReportError(f"figure {i + 1} ({fig.caption[:40]}) could not be decoded")
        images.append(image)
    doc = _document(worksheet, width, images, PageBreaks())
    if page_height is None:
        return doc
    doc.setPageSize(_size(width, page_height))
    breaks = PageBreaks()
    for _ in range(MAX_BREAK_PASSES):
        more = next_break(doc, worksheet, page_height, breaks)
        if more is None:
            break
        breaks = more
        doc = _document(worksheet, width, images, breaks)
        doc.setPageSize(_size(width, page_height))
    return doc


def _size(width: float, height: float):
    from PySide6.QtCore import QSizeF

    return QSizeF(width, height)


def _document(worksheet: Worksheet, width: float, images, breaks: PageBreaks):
    from PySide6.QtCore import QUrl
    from PySide6.QtGui import QTextDocument, QTextOption

    doc = QTextDocument()
    doc.setDefaultFont(plain_font(9.5))
    option = doc.defaultTextOption()
    option.setWrapMode(QTextOption.WrapMode.WordWrap)  # never break inside a word
    doc.setDefaultTextOption(option)
    doc.setTextWidth(width)
    for i, (fig, image) in enumerate(zip(worksheet.figures(), images, strict=True)):
        doc.addResource(
            QTextDocument.ResourceType.ImageResource, QUrl(figure_resource(i, fig)), image
        )
    doc.setHtml(
        render_html(
            worksheet, image_src=figure_resource, image_width=int(width * 0.96), breaks=breaks
        )
    )
    doc.setMetaInformation(QTextDocument.MetaInformation.DocumentTitle, worksheet.title)
    return doc


def _tables_of(worksheet: Worksheet, breaks: PageBreaks) -> list[tuple[int, int, int]]:
    """For each top-level table Qt builds, in order: (block index, first row, rows)."""
    out = []
    for b, block in enumerate(worksheet.blocks()):
        if isinstance(block, Facts) and not block.rows:
            continue  # an empty list: Qt builds no table for it
        if isinstance(block, Table | Facts):
            cuts = sorted(r for r in breaks.rows_of(b) if 0 < r < len(block.rows))
            starts = [0, *cuts]
            ends = [*cuts, len(block.rows)]
            out.extend((b, a, e - a) for a, e in zip(starts, ends, strict=True))
        elif isinstance(block, Notice | SignatureBlock):
            out.append((b, 0, 1 if isinstance(block, Notice) else len(block.fields)))
    return out


def next_break(doc, worksheet: Worksheet, page_height: float, breaks: PageBreaks):
    """The breaks with one more: the first place (top to bottom) where a table row
    spans two pages, a short table is split, a split table leaves fewer than
    :data:`KEEP_ROWS` rows on a page, a figure is parted from its caption, or a heading
    ends a page; None when there is none.
    """
    from PySide6.QtGui import QTextTable

    layout = doc.documentLayout()

    def page(y: float) -> int:
        return int(y // page_height)

    problems: list[tuple[float, str, tuple[int, int]]] = []
    frames = [f for f in doc.rootFrame().childFrames() if isinstance(f, QTextTable)]
    for frame, (b, first, _n) in zip(frames, _tables_of(worksheet, breaks), strict=False):
        head = frame.format().headerRowCount()
        rows = []
        for r in range(head, frame.rows()):
            top, bottom = math.inf, -math.inf
            for c in range(frame.columns()):
                cell = frame.cellAt(r, c)
                top = min(top, layout.blockBoundingRect(cell.firstCursorPosition().block()).top())
                bottom = max(
                    bottom, layout.blockBoundingRect(cell.lastCursorPosition().block()).bottom()
                )
            rows.append((first + r - head, top, bottom))
        if not rows:
            continue
        frame_rect = layout.frameBoundingRect(frame)
        total = len(worksheet_block(worksheet, b).rows) if _has_rows(worksheet, b) else len(rows)
        starts_page = frame_rect.top() % page_height < 24.0
        if page(rows[0][1]) != page(rows[-1][2] - 1) and not starts_page:
            if total <= SHORT_TABLE_ROWS and frame_rect.height() < page_height * 0.8:
                problems.append((frame_rect.top(), "short", (b, first)))
                continue
        for k, (r, top, bottom) in enumerate(rows):
            if page(top) != page(bottom - 1):
                problems.append((top, "row", (b, r)))
                break
            if k and page(top) != page(rows[k - 1][1]):  # the page turns before row r
                before, after = k, len(rows) - k
                if before < KEEP_ROWS and not starts_page:
                    problems.append((rows[0][1], "orphan", (b, first)))
                elif after < KEEP_ROWS and len(rows) > 2 * KEEP_ROWS:
                    problems.append((top, "widow", (b, rows[-KEEP_ROWS][0])))
                break
    section, titled = -1, _titled_blocks(worksheet)
    h3 = -1
    figures = [b for b, x in enumerate(worksheet.blocks()) if isinstance(x, Figure)]
    figure = -1
    block = doc.begin()
    while block.isValid():
        if "\ufffc" in block.text() and block.next().isValid():  # an image, then its caption
            figure += 1
            top = layout.blockBoundingRect(block).top()
            caption_bottom = layout.blockBoundingRect(block.next()).bottom()
            if figure < len(figures) and page(top) != page(caption_bottom - 1):
                problems.append((top, "figure", (figures[figure], 0)))
        level = block.blockFormat().headingLevel()
        if level in (2, 3):
            if level == 2:
                section += 1
            else:
                h3 += 1
            nxt = block.next()
            if nxt.isValid():
                y = layout.blockBoundingRect(block).top()
                y_next = layout.blockBoundingRect(nxt).bottom()
                if page(y) != page(y_next - 1) and y % page_height > 24.0:
                    if level == 2:
                        problems.append((y, "section", (-1, section)))
                    elif h3 < len(titled):
                        problems.append((y, "title", (titled[h3], 0)))
        block = block.next()
    problems = [p for p in problems if not _known(breaks, p)]
    if not problems:
        return None
    _y, kind, (b, r) = min(problems)
    if kind != "section" and r == 0 and b in _first_blocks(worksheet):
        kind, r = "section", _first_blocks(worksheet)[b]  # move the section's title along
    if kind == "section":
        if r in breaks.sections:
            return None
        return PageBreaks(breaks.sections | {r}, breaks.blocks)
    return PageBreaks(breaks.sections, breaks.blocks | {(b, r)})


def _first_blocks(worksheet: Worksheet) -> dict[int, int]:
    """Block index of each section's first block -> the section's index."""
    out, b = {}, 0
    for s, section in enumerate(worksheet.sections):
        if section.blocks:
            out[b] = s
        b += len(section.blocks)
    return out


def _known(breaks: PageBreaks, problem) -> bool:
    _y, kind, (b, r) = problem
    if kind == "section":
        return r in breaks.sections
    return (b, r) in breaks.blocks


def worksheet_block(worksheet: Worksheet, index: int):
    return list(worksheet.blocks())[index]


def _has_rows(worksheet: Worksheet, index: int) -> bool:
    return isinstance(worksheet_block(worksheet, index), Table | Facts)


def _titled_blocks(worksheet: Worksheet) -> list[int]:
    """Indexes of the blocks printed under an ``<h3>`` title, in order."""
    return [
        b
        for b, block in enumerate(worksheet.blocks())
        if isinstance(block, Table | Facts) and block.title
    ]


def plain_font(points: float, *, fixed_pixels: bool = False):
    """The worksheet font with ligatures and kerning off, so that text copied or
    extracted from the PDF reads "certified", not "certi\ufb01ed".

    ``fixed_pixels`` sizes it in logical pixels (``points`` at 96 per inch) instead of
    points, for text painted straight onto a device whose painter is already scaled.
    """
    from PySide6.QtGui import QFont

    font = QFont("DejaVu Sans")
    if fixed_pixels:
        font.setPixelSize(max(1, round(points * LOGICAL_DPI / 72.0)))
    else:
        font.setPointSizeF(points)
    font.setFeature(QFont.Tag("liga"), 0)
    font.setFeature(QFont.Tag("kern"), 0)
    return font


def page_size_of(name: str):
    from PySide6.QtGui import QPageSize

    sizes = {"A4": QPageSize.PageSizeId.A4, "Letter": QPageSize.PageSizeId.Letter}
    if name not in sizes:
        raise ReportError(f"page size must be one of {', '.join(sizes)}, not {name!r}")
    return QPageSize(sizes[name])


def paint_pages(worksheet: Worksheet, device, margins: PageMargins = PageMargins()) -> int:
    """Lay the worksheet out for ``device`` (a ``QPdfWriter`` or ``QPrinter``) and paint
    every page with its header and footer. Returns the number of pages."""
    from PySide6.QtCore import QRectF, QSizeF
    from PySide6.QtGui import QPainter

    scale = device.logicalDpiX() / LOGICAL_DPI
    page_w = device.width() / scale
    page_h = device.height() / scale
    body = QRectF(
        margins.left * MM,
        margins.top * MM,
        page_w - (margins.left + margins.right) * MM,
        page_h - (margins.top + margins.bottom) * MM,
    )
    if body.width() < 100 or body.height() < 100:
        raise ReportError("the page is too small for the margins")
    doc = build_document(worksheet, text_width=body.width(), page_height=body.height())
    doc.setPageSize(QSizeF(body.width(), body.height()))
    pages = doc.pageCount()

    painter = QPainter()
    if not painter.begin(device):
        raise ReportError("cannot start painting on the output device")
    try:
        for i in range(pages):
            if i > 0 and not device.newPage():
                raise ReportError("cannot start a new page on the output device")
            painter.save()
            painter.scale(scale, scale)
            painter.save()
            painter.translate(body.left(), body.top() - i * body.height())
            doc.drawContents(painter, QRectF(0, i * body.height(), body.width(), body.height()))
            painter.restore()
            _header_footer(painter, worksheet, i + 1, pages, page_w, page_h, body)
            painter.restore()
    finally:
        painter.end()
    return pages


def _header_footer(painter, worksheet: Worksheet, page: int, pages: int, page_w, page_h, body):
    from PySide6.QtCore import QPointF, QRectF, Qt
    from PySide6.QtGui import QColor, QFontMetricsF, QPen

    left, right = body.left(), body.right()
    head_font = plain_font(8.5, fixed_pixels=True)
    small = plain_font(7.0, fixed_pixels=True)
    painter.setPen(QPen(QColor(40, 40, 40)))

    # header: title left, effective date right, a rule below
    painter.setFont(head_font)
    fm = QFontMetricsF(head_font)
    date_text = f"Effective date: {worksheet.effective_date}"
    date_w = fm.horizontalAdvance(date_text)
    title_room = body.width() - date_w - 12
    title = fm.elidedText(worksheet.title, Qt.TextElideMode.ElideRight, max(title_room, 40))
    base = body.top() - 5 * MM
    painter.drawText(QPointF(left, base), title)
    painter.drawText(QPointF(right - date_w, base), date_text)
    painter.setPen(QPen(QColor(150, 150, 150), 0.6))
    painter.drawLine(QPointF(left, base + 2 * MM), QPointF(right, base + 2 * MM))

    # footer: a rule, workfile id left, page x of y right, the caution below
    top = body.bottom() + 5 * MM
    painter.drawLine(QPointF(left, top), QPointF(right, top))
    painter.setPen(QPen(QColor(40, 40, 40)))
    line1 = top + 1.5 * MM + fm.ascent()
    page_text = f"Page {page} of {pages}"
    painter.drawText(QPointF(left, line1), f"Workfile {worksheet.workfile_id}")
    painter.drawText(QPointF(right - fm.horizontalAdvance(page_text), line1), page_text)
    painter.setFont(small)
    painter.setPen(QPen(QColor(90, 90, 90)))
    painter.drawText(
        QRectF(left, line1 + 1.5 * MM, body.width(), 9 * MM),
        int(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop | Qt.TextFlag.TextWordWrap),
        ONE_LINE_CAUTION,
    )


def write_pdf(
    worksheet: Worksheet,
    path: str | Path,
    *,
    page_size: str | None = None,
    resolution: int = 600,
) -> int:
    """Write the worksheet as a PDF file; returns the number of pages.

    ``page_size`` (``"A4"`` or ``"Letter"``) overrides the worksheet's own.
    """
    ensure_app()
    from PySide6.QtCore import QMarginsF
    from PySide6.QtGui import QPageLayout, QPdfWriter

    from .. import __version__

    p = Path(path)
    if not p.parent.exists():
        raise ReportError("the folder does not exist", file=str(p))
    writer = QPdfWriter(str(p))
    writer.setResolution(resolution)
    writer.setPageSize(page_size_of(page_size or worksheet.page_size))
    writer.setPageOrientation(QPageLayout.Orientation.Portrait)
    writer.setPageMargins(QMarginsF(0, 0, 0, 0), QPageLayout.Unit.Millimeter)
    writer.setTitle(worksheet.title)
    writer.setCreator(f"appraise {__version__}")
    pages = paint_pages(worksheet, writer)
    del writer  # flushes and closes the file
    if not p.is_file() or p.stat().st_size == 0:
        raise ReportError("the PDF could not be written", file=str(p))
    return pages
