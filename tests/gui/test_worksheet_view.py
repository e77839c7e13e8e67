"""The worksheet tab: preview, Export PDF and Print show what ``appraise report`` writes."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import re  # noqa: E402

import pytest  # noqa: E402
from conftest import WAIT_MS  # noqa: E402
from pypdf import PdfReader  # noqa: E402

from appraise.cli import main  # noqa: E402
from appraise.gui.worksheet_view import EMPTY_TEXT, WorksheetView  # noqa: E402
from appraise.report.cautions import SHORT_CAUTION  # noqa: E402

STAMP = re.compile(r"Prepared:? \d{4}-\d{2}-\d{2} \d{2}:\d{2}:\d{2}[+-]\d{2}:\d{2}")


def _dollars(x: float) -> str:
    """Whole dollars with separators, formatted here independently of appraise."""
    return f"${x:,.0f}"


def _pdf_text(path) -> tuple[int, str]:
    pages = PdfReader(str(path)).pages
    return len(pages), " ".join(" ".join((p.extract_text() or "").split()) for p in pages)


@pytest.fixture
def loaded_view(qtbot, session, sample_copy):
    view = WorksheetView(session)
    qtbot.addWidget(view)
    view.show()
    with qtbot.waitSignals([session.fitFinished, session.valuationChanged], timeout=WAIT_MS):
        session.load_with_companions(sample_copy)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)
    qtbot.waitUntil(
        lambda: (
            view.current_worksheet is not None
            and view.current_worksheet.section("diagnostics") is not None
            and view.current_worksheet.section("sales-comparison") is not None
        ),
        timeout=WAIT_MS,
    )
    return view


def test_empty_session_shows_why_and_disables_output(qtbot, session):
    view = WorksheetView(session)
    qtbot.addWidget(view)
    view.show()
    assert view.refresh() is None
    assert view.state.text() == EMPTY_TEXT
    assert not view.pdf_button.isEnabled() and not view.print_button.isEnabled()


def test_preview_shows_estimate_interval_and_caution(loaded_view, session):
    val = session.valuation
    text = " ".join(loaded_view.preview.toPlainText().split())
    assert _dollars(val.estimate) in text
    assert f"{_dollars(val.low)} to {_dollars(val.high)}" in text
    assert " ".join(SHORT_CAUTION.split()) in text
    assert loaded_view.pdf_button.isEnabled()


def test_export_pdf_is_the_same_as_the_command_line(loaded_view, sample_copy, tmp_path):
    gui_pdf = tmp_path / "gui.pdf"
    cli_pdf = tmp_path / "cli.pdf"
    loaded_view.export_pdf(gui_pdf)
    folder = sample_copy.parent
    code = main(
        [
            "report",
            str(sample_copy),
            "--model",
            str(folder / "ashcombe_model.toml"),
            "--subject",
            str(folder / "subject.json"),
            "-o",
            str(cli_pdf),
        ]
    )
    assert code == 0
    gui_pages, gui_text = _pdf_text(gui_pdf)
    cli_pages, cli_text = _pdf_text(cli_pdf)
    # Identical apart from the time each was prepared.
    assert gui_pages == cli_pages
    assert STAMP.sub("", gui_text) == STAMP.sub("", cli_text)


def test_print_to_a_printer_paints_every_page(loaded_view, tmp_path):
    from PySide6.QtPrintSupport import QPrinter

    printer = QPrinter(QPrinter.PrinterMode.HighResolution)
    printer.setOutputFormat(QPrinter.OutputFormat.PdfFormat)
    out = tmp_path / "printed.pdf"
    printer.setOutputFileName(str(out))
    pages = loaded_view.print_to(printer)
    del printer  # finishes the file
    count, text = _pdf_text(out)
    assert count == pages
    assert f"Page {pages} of {pages}" in text


def test_letter_paper_from_the_view(loaded_view, tmp_path):
    loaded_view.page_size.setCurrentText("Letter")
    out = tmp_path / "letter.pdf"
    loaded_view.export_pdf(out)
    box = PdfReader(str(out)).pages[0].mediabox
    # US Letter is 8.5 x 11 in = 612 x 792 pt.
    assert abs(float(box.width) - 612) < 0.5 and abs(float(box.height) - 792) < 0.5
