"""'Export tables': every table of the worksheet in one workbook (a sheet each) or as
CSVs, the raw numbers kept (checked against statsmodels on Wooldridge's hprice1)."""

from __future__ import annotations

import csv

import numpy as np
import openpyxl
import pandas as pd
import pytest
import statsmodels.api as sm
from hprice_case import LINEAR, fit_and_value, write_hprice_csv

from appraise.engine.diagnostics import diagnose
from appraise.report.sales_export import sales_results_table
from appraise.report.tables import all_tables, export_all_tables, float_text
from appraise.report.worksheet import build_worksheet


@pytest.fixture(scope="module")
def worksheet(tmp_path_factory):
    path = write_hprice_csv(tmp_path_factory.mktemp("export_all"))
    fit, val = fit_and_value(path, LINEAR)
    diag = diagnose(fit)
    return path, fit, diag, build_worksheet(fit, val, diagnostics=diag)


EXPECTED = {"coefficients", "fit", "estimate", "collinearity", "ratio_study", "flagged"}


def test_one_workbook_holds_every_table(worksheet, tmp_path):
    path, fit, diag, ws = worksheet
    extra = (sales_results_table(fit, diag),)
    (out,) = export_all_tables(ws, tmp_path / "tables.xlsx", extra=extra)
    wb = openpyxl.load_workbook(out)
    names = set(wb.sheetnames)
    assert EXPECTED <= names and "sales" in names
    assert len(names) == len(all_tables(ws, extra))
    sheet = wb["coefficients"]
    header = [c.value for c in sheet[1]]
    coef = {
        r[0]: r[header.index("Coefficient")] for r in sheet.iter_rows(min_row=2, values_only=True)
    }
    df = pd.read_csv(path)
    ref = sm.OLS(df["price"], sm.add_constant(df[["lotsize", "sqrft", "bdrms"]])).fit().params
    np.testing.assert_allclose(
        [coef["Intercept"], coef["lotsize"], coef["sqrft"], coef["bdrms"]],
        [ref["const"], ref["lotsize"], ref["sqrft"], ref["bdrms"]],
        rtol=1e-9,
    )


def test_a_folder_of_csvs_one_per_table(worksheet, tmp_path):
    _, _, _, ws = worksheet
    written = export_all_tables(ws, tmp_path / "csv")
    stems = {p.stem for p in written}
    assert EXPECTED <= stems and all(p.suffix == ".csv" for p in written)
    with (tmp_path / "csv" / "fit.csv").open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["Item", "Value"] and any(r[0] == "R-squared" for r in rows)


def test_floats_are_written_positionally_and_read_back_exactly():
    for x in (-1.26986e-05, 8.57e-11, 1e22, 0.1 + 0.2, -3.0):
        text = float_text(x)
        assert "e" not in text.lower()
        assert float(text) == x
