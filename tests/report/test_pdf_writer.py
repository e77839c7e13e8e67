"""The PDF writer on a hand-built worksheet: a valid PDF with header, footer, page
size, embedded figures and the cautions, read back with pypdf."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from pdf_text import image_xobjects, page_texts, squeeze  # noqa: E402
from pypdf import PdfReader  # noqa: E402
from worksheet_samples import HOSTILE, sample_worksheet  # noqa: E402

from appraise.qtrender.figures import Series, scatter_chart  # noqa: E402
from appraise.qtrender.pdf import write_pdf  # noqa: E402
from appraise.report.cautions import FULL_CAUTIONS, ONE_LINE_CAUTION, SHORT_CAUTION  # noqa: E402
from appraise.report.content import Figure  # noqa: E402

# Paper sizes in PostScript points (1/72 in): ISO 216 A4 is 210 x 297 mm,
# ANSI Letter is 8.5 x 11 in.
A4_PT = (210 / 25.4 * 72, 297 / 25.4 * 72)
LETTER_PT = (612.0, 792.0)


@pytest.fixture(scope="module")
def chart_png() -> bytes:
    rng = np.random.default_rng(7)
    x = rng.uniform(800, 3000, 40)
    return scatter_chart(
        [Series(x, 150 * x + rng.normal(0, 2e4, 40), "Sales")],
        title="Price against area",
        xlabel="Living area (ft2)",
        ylabel="Sale price",
        money_y=True,
    )


@pytest.fixture(scope="module")
def pdf_path(tmp_path_factory, chart_png):
    path = tmp_path_factory.mktemp("pdf") / "sheet.pdf"
    pages = write_pdf(sample_worksheet(figure_png=chart_png), path)
    return path, pages


def test_is_a_pdf_with_the_pages_reported(pdf_path):
    path, pages = pdf_path
    assert path.read_bytes().startswith(b"%PDF-")
    assert len(PdfReader(str(path)).pages) == pages
    assert pages >= 3  # the appendix and the full cautions each start a new page


def test_every_page_has_header_and_page_x_of_y_footer(pdf_path):
    path, pages = pdf_path
    for i, text in enumerate(page_texts(path), start=1):
        assert "Valuation worksheet: Old Mill" in text
        assert "Effective date: 2026-06-30" in text
        assert f"Page {i} of {pages}" in text
        assert "Workfile wf-0042" in text
        assert squeeze(ONE_LINE_CAUTION) in text


def test_caution_on_first_page_and_in_full_on_the_last(pdf_path):
    path, _ = pdf_path
    texts = page_texts(path)
    assert squeeze(SHORT_CAUTION) in texts[0]
    last = texts[-1]
    for _heading, body in FULL_CAUTIONS:
        assert squeeze(body) in last


def test_figure_is_embedded_as_an_image_at_full_resolution(pdf_path, chart_png):
    path, _ = pdf_path
    images = image_xobjects(path)
    fig = Figure(chart_png, "x")
    assert (fig.width, fig.height) == (1600, 1000)
    assert (fig.width, fig.height) in images


@pytest.mark.parametrize(("size", "expected"), [("A4", A4_PT), ("Letter", LETTER_PT)])
def test_page_size_setting(tmp_path, size, expected):
    path = tmp_path / f"{size}.pdf"
    write_pdf(sample_worksheet(), path, page_size=size)
    box = PdfReader(str(path)).pages[0].mediabox
    np.testing.assert_allclose([float(box.width), float(box.height)], expected, atol=0.5)


def test_hostile_text_is_printed_as_text(tmp_path):
    path = tmp_path / "hostile.pdf"
    write_pdf(sample_worksheet(region=HOSTILE), path)
    assert HOSTILE in page_texts(path)[0]
