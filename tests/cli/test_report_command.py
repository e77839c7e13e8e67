"""``appraise report`` end to end on the shipped sample data: the PDF and HTML carry
the same estimate and bounds as ``appraise value --json``; the tables match
``appraise fit --json``; bad output paths are user errors (exit 2)."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import csv  # noqa: E402
import json  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import openpyxl  # noqa: E402
import pytest  # noqa: E402
from pypdf import PdfReader  # noqa: E402

from appraise.cli import main  # noqa: E402

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"
INPUTS = [
    str(SAMPLE / "ashcombe_sales.csv"),
    "--model",
    str(SAMPLE / "ashcombe_model.toml"),
    "--subject",
    str(SAMPLE / "subject.json"),
]


def _dollars(x: float) -> str:
    """Whole dollars with separators, formatted here independently of appraise."""
    return f"-${abs(x):,.0f}" if x < 0 else f"${x:,.0f}"


def _json_of(capsys, argv) -> dict:
    capsys.readouterr()
    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)


@pytest.fixture(scope="module")
def run_report(tmp_path_factory):
    out = tmp_path_factory.mktemp("report")
    argv = [
        "report",
        *INPUTS,
        "-o",
        str(out / "ws.pdf"),
        "--html",
        str(out / "ws.html"),
        "--tables-dir",
        str(out / "tables"),
        "--page-size",
        "Letter",
    ]
    code = main(argv)
    return code, out


def test_report_matches_value_json(run_report, capsys):
    code, out = run_report
    assert code == 0
    value = _json_of(capsys, ["value", *INPUTS, "--json"])
    reader = PdfReader(str(out / "ws.pdf"))
    text = " ".join(" ".join((p.extract_text() or "").split()) for p in reader.pages)
    html = (out / "ws.html").read_text(encoding="utf-8")
    expected = [
        _dollars(value["estimate"]),
        _dollars(value["median"]),
        _dollars(value["interval"]["low"]),
        _dollars(value["interval"]["high"]),
    ]
    for s in expected:
        assert s in text
        assert s in html
    level = f"{100 * value['interval']['level']:g}%"
    assert f"{level} prediction interval {expected[2]} to {expected[3]}" in text
    # US Letter, 8.5 x 11 in = 612 x 792 pt.
    box = reader.pages[0].mediabox
    np.testing.assert_allclose([float(box.width), float(box.height)], [612, 792], atol=0.5)
    assert "<script" not in html.lower()


def test_tables_match_fit_json(run_report, capsys):
    _, out = run_report
    fit = _json_of(
        capsys,
        [
            "fit",
            str(SAMPLE / "ashcombe_sales.csv"),
            "--model",
            str(SAMPLE / "ashcombe_model.toml"),
            "--json",
        ],
    )
    with (out / "tables" / "coefficients.csv").open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[0][:3] == ["Term", "Coefficient", "Std. error"]
    by_name = {r[0]: r for r in rows[1:]}
    assert len(by_name) == len(fit["terms"])
    for t in fit["terms"]:
        row = by_name[t["name"]]
        np.testing.assert_allclose(
            [float(row[1]), float(row[2])], [t["coef"], t["se"]], rtol=1e-12, atol=0
        )
    wb = openpyxl.load_workbook(out / "tables" / "exclusions.xlsx")
    ws = wb["exclusions"]
    assert ws.max_row - 1 == len(fit["excluded"])
    file_rows = sorted(int(ws.cell(r, 1).value) for r in range(2, ws.max_row + 1))
    assert file_rows == sorted(e["row"] for e in fit["excluded"])
    for name in ("coefficients.csv", "coefficients.xlsx", "exclusions.csv", "exclusions.xlsx"):
        assert (out / "tables" / name).is_file()


def test_missing_output_folder_is_a_user_error(tmp_path, capsys):
    code = main(["report", *INPUTS, "--no-diagnostics", "-o", str(tmp_path / "nope" / "ws.pdf")])
    err = capsys.readouterr().err
    assert code == 2
    assert "Traceback" not in err
    assert "folder does not exist" in err and len(err.strip().splitlines()) == 1


def test_output_must_be_a_pdf(tmp_path, capsys):
    code = main(["report", *INPUTS, "-o", str(tmp_path / "ws.docx")])
    assert code == 2
    assert ".pdf" in capsys.readouterr().err


def test_help_lists_the_options(capsys):
    assert main(["report", "--help"]) == 0
    out = capsys.readouterr().out
    for option in ("--html", "--page-size", "--tables-dir", "--model", "--subject"):
        assert option in out
