"""appraise diagnose --sales-out and appraise report --tables / --sales-out on the sample:
one row per file row, the leave-one-out values those of the JSON (the command's own
contract), every table in one workbook."""

from __future__ import annotations

import csv
import json

import numpy as np
import openpyxl

from appraise.cli import main
from appraise.resources import sample_dir

SAMPLE = sample_dir()
SALES, MODEL = str(SAMPLE / "ashcombe_sales.csv"), str(SAMPLE / "ashcombe_model.toml")


def test_diagnose_writes_the_sales_with_their_results(tmp_path, capsys):
    out = tmp_path / "sales.csv"
    assert main(["diagnose", SALES, "--model", MODEL, "--json", "--sales-out", str(out)]) == 0
    d = json.loads(capsys.readouterr().out)
    with out.open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert rows[-1]["File row"].startswith("Caution:")
    body = rows[:-1]
    assert len(body) == 606  # sample_data/README.md: 606 rows in the file
    used = {int(r["File row"]): r for r in body if r["Used in the fit"] == "yes"}
    assert len(used) == d["n"]
    for s in d["sales"]:
        got = used[s["row"]]
        np.testing.assert_allclose(
            [float(got["Leave-one-out value"]), float(got["Leave-one-out 90% low"])],
            [s["loo_prediction"], s["loo_low"]],
            rtol=1e-12,
        )
        assert bool(got["Flags"]) == bool(s["flags"])


def test_report_writes_every_table_and_the_sales(tmp_path, capsys):
    pdf, book, sales = tmp_path / "w.pdf", tmp_path / "all.xlsx", tmp_path / "s.xlsx"
    code = main(
        [
            "report", SALES, "--model", MODEL, "--subject", str(SAMPLE / "subject.json"),
            "-o", str(pdf), "--tables", str(book), "--sales-out", str(sales), "--no-grid",
            "--page-size", "Letter",
        ]
    )  # fmt: skip
    assert code == 0
    out = capsys.readouterr().out
    assert "Letter" in out
    names = openpyxl.load_workbook(book).sheetnames
    for key in ("coefficients", "fit", "estimate", "collinearity", "ratio_study", "sales"):
        assert key in names
    assert openpyxl.load_workbook(sales)["sales"].max_row == 607
