"""The whole worksheet for a real fit, printed to PDF and read back with pypdf: the
estimate, both interval bounds exactly as the tables print them, the level, the data
and model hashes, the caution, and the figures as images."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import hashlib  # noqa: E402
from datetime import UTC, datetime  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from hprice_case import LOG, fit_and_value, write_hprice_csv  # noqa: E402
from pdf_text import image_xobjects, page_texts, squeeze  # noqa: E402

from appraise.engine.diagnostics import diagnose  # noqa: E402
from appraise.qtrender.figures import SUBJECT_COLOUR, worksheet_figures  # noqa: E402
from appraise.qtrender.pdf import write_pdf  # noqa: E402
from appraise.report.cautions import SHORT_CAUTION  # noqa: E402
from appraise.report.worksheet import build_worksheet  # noqa: E402


@pytest.fixture(scope="module")
def printed(tmp_path_factory):
    folder = tmp_path_factory.mktemp("ws")
    csv = write_hprice_csv(folder)
    fit, val = fit_and_value(csv, LOG)
    figures = worksheet_figures(fit, val)
    ws = build_worksheet(
        fit,
        val,
        diagnostics=diagnose(fit),
        figures=figures,
        generated=datetime(2026, 7, 1, tzinfo=UTC),
    )
    pdf = folder / "worksheet.pdf"
    pages = write_pdf(ws, pdf)
    return {"csv": csv, "fit": fit, "ws": ws, "pdf": pdf, "pages": pages, "figures": figures}


def test_pdf_text_has_estimate_bounds_level_hash_and_caution(printed):
    ws = printed["ws"]
    text = " ".join(page_texts(printed["pdf"]))
    rows = dict(ws.table("estimate").rows)
    for label in (
        "Estimated price (mean, smearing retransformation)",
        "Estimated price (median, exp of the log prediction)",
        "95% prediction interval: low",
        "95% prediction interval: high",
    ):
        assert rows[label].startswith("$")
        assert f"{label} {rows[label]}" in text
    assert "Interval level 95%" in text
    data_sha = hashlib.sha256(printed["csv"].read_bytes()).hexdigest()
    assert data_sha in text
    assert printed["fit"].spec.sha256() in text
    assert squeeze(SHORT_CAUTION) in text


def test_first_page_summary_carries_estimate_and_caution(printed):
    first = page_texts(printed["pdf"])[0]
    rows = dict(printed["ws"].table("estimate").rows)
    low, high = rows["95% prediction interval: low"], rows["95% prediction interval: high"]
    assert f"95% prediction interval {low} to {high}" in first
    assert squeeze(SHORT_CAUTION) in first
    assert "Effective date: 2026-06-30" in first


def test_figures_are_in_the_pdf(printed):
    images = image_xobjects(printed["pdf"])
    # predicted/actual, residuals, price/area; no map (hprice1 has no coordinates)
    assert len(printed["figures"]) == 3
    assert len(images) >= 3
    for fig in printed["figures"]:
        assert (fig.width, fig.height) in images


def test_price_area_chart_marks_the_subject(printed):
    from PySide6.QtGui import QImage

    fig = next(f for f in printed["figures"] if f.key == "price-area")
    image = QImage.fromData(fig.png, "PNG").convertToFormat(QImage.Format.Format_RGB888)
    ptr = image.constBits()
    arr = np.frombuffer(ptr, dtype=np.uint8).reshape(image.height(), image.bytesPerLine())
    rgb = arr[:, : image.width() * 3].reshape(image.height(), image.width(), 3).astype(int)
    near = np.abs(rgb - np.array(SUBJECT_COLOUR[:3])).sum(axis=2) < 40
    assert near.sum() > 200  # the subject's star and interval bar are drawn in its colour
    assert fig.width == 1600
