"""Print layout: no table row split across pages, short tables and headings kept with
what follows, a split table leaving at least KEEP_ROWS rows on each page, words never
broken inside. Measured on Qt's own layout of the printed document and, for the sample
worksheet, on the PDF read back with pypdf."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest  # noqa: E402
from pdf_text import page_texts  # noqa: E402
from PySide6.QtCore import QSizeF  # noqa: E402

from appraise.qtrender.pdf import (  # noqa: E402
    KEEP_ROWS,
    SHORT_TABLE_ROWS,
    build_document,
    write_pdf,
)
from appraise.report.content import Facts, Paragraph, Section, Table, Worksheet  # noqa: E402

WIDTH, HEIGHT = 600.0, 700.0


def _rows(doc):
    """(table number, header rows, [(top, bottom) per body row]) for every top-level table."""
    from PySide6.QtGui import QTextTable

    layout = doc.documentLayout()
    out = []
    frames = [f for f in doc.rootFrame().childFrames() if isinstance(f, QTextTable)]
    for k, t in enumerate(frames):
        head = t.format().headerRowCount()
        rows = []
        for r in range(head, t.rows()):
            cells = [t.cellAt(r, c) for c in range(t.columns())]
            top = min(
                layout.blockBoundingRect(c.firstCursorPosition().block()).top() for c in cells
            )
            bottom = max(
                layout.blockBoundingRect(c.lastCursorPosition().block()).bottom() for c in cells
            )
            rows.append((top, bottom))
        out.append((k, head, rows))
    return out


def _page(y: float) -> int:
    return int(y // HEIGHT)


def _worksheet() -> Worksheet:
    long_rows = tuple(
        (f"term_{i}", "a fairly long description of what this row holds " * (1 + 5 * (i % 4)))
        for i in range(45)
    )
    short = tuple((f"s{i}", f"{i}") for i in range(6))
    filler = tuple(Paragraph("Filler text to move the next table down. " * 6) for _ in range(7))
    return Worksheet(
        title="Layout",
        effective_date="2026-06-30",
        workfile_id="test",
        sections=(
            Section("a", "Long table", (Table("long", "", ("Term", "Text"), long_rows),)),
            Section("b", "Short table", (*filler, Table("short", "Short", ("A", "B"), short))),
            Section(
                "c",
                "Facts",
                (Facts(()), *filler, Facts(tuple((f"label {i}", "v") for i in range(10)))),
            ),
        ),
    )


def test_rows_and_short_tables_stay_on_one_page():
    ws = _worksheet()
    plain = build_document(ws, text_width=WIDTH)
    plain.setPageSize(QSizeF(WIDTH, HEIGHT))
    before = [(top, bottom) for _, _, rows in _rows(plain) for top, bottom in rows]
    # the test is only worth something if the naive layout does split a row
    assert any(_page(t) != _page(b - 1) for t, b in before)
    doc = build_document(ws, text_width=WIDTH, page_height=HEIGHT)
    tables = _rows(doc)
    for _, _, rows in tables:
        for top, bottom in rows:
            assert _page(top) == _page(bottom - 1)
        pages = [_page(t) for t, _ in rows]
        if len(rows) <= SHORT_TABLE_ROWS:
            assert len(set(pages)) == 1
        for p in set(pages):
            assert pages.count(p) >= min(KEEP_ROWS, len(rows))


def test_headings_are_kept_with_what_follows():
    doc = build_document(_worksheet(), text_width=WIDTH, page_height=HEIGHT)
    layout = doc.documentLayout()
    block = doc.begin()
    while block.isValid():
        if block.blockFormat().headingLevel() in (2, 3) and block.next().isValid():
            here = layout.blockBoundingRect(block)
            after = layout.blockBoundingRect(block.next())
            assert _page(here.top()) == _page(after.bottom() - 1), block.text()
        block = block.next()


@pytest.fixture(scope="module")
def sample_pdf(tmp_path_factory, sample_analysis):
    _, ws = sample_analysis
    path = tmp_path_factory.mktemp("pdf") / "w.pdf"
    write_pdf(ws, path, page_size="Letter")
    return ws, path


def test_sample_pdf_prints_every_term_whole_on_one_page(sample_pdf):
    ws, path = sample_pdf
    pages = page_texts(path)
    coef = ws.table("coefficients")
    for row in coef.rows:
        # the term, its coefficient and its effect are on the same page
        hits = [p for p in pages if row[1] in p and row[-1].split(" ")[0] in p]
        assert hits, row[0]
    words = {w for r in coef.rows for w in r[0].replace(":", " ").split()}
    text = " ".join(pages)
    for w in words:
        if len(w) > 3 and w.isalpha():
            assert w in text, w  # never broken inside a word


def test_a_figure_keeps_its_caption():
    from worksheet_samples import solid_png

    from appraise.report.content import Figure

    filler = tuple(Paragraph("Filler text to move the figure down. " * 8) for _ in range(6))
    ws = Worksheet(
        title="Figures",
        effective_date="2026-06-30",
        workfile_id="test",
        sections=(
            Section(
                "f",
                "Figures",
                (*filler, Figure(solid_png(800, 500), "The caption of the figure. " * 4)),
            ),
        ),
    )

    def pages_of_figure_and_caption(doc):
        lay = doc.documentLayout()
        block = doc.begin()
        while block.isValid():
            if "\ufffc" in block.text():  # the image's object character
                caption = block.next()
                assert caption.text().startswith("The caption")
                return (
                    _page(lay.blockBoundingRect(block).top()),
                    _page(lay.blockBoundingRect(caption).bottom() - 1),
                )
            block = block.next()
        raise AssertionError("no figure in the document")

    naive = build_document(ws, text_width=WIDTH)
    naive.setPageSize(QSizeF(WIDTH, HEIGHT))
    first, second = pages_of_figure_and_caption(naive)
    assert first != second  # left alone, the caption would open the next page
    first, second = pages_of_figure_and_caption(
        build_document(ws, text_width=WIDTH, page_height=HEIGHT)
    )
    assert first == second
