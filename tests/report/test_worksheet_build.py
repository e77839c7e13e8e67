"""build_worksheet on a real fit: the printed numbers are the ones statsmodels gives,
the sections come in the promised order, and nothing needs Qt."""

from __future__ import annotations

import hashlib
import math
from datetime import UTC, datetime

import numpy as np
import pytest
from hprice_case import (
    LINEAR,
    LOG,
    fit_and_value,
    leave_one_out_predictions,
    statsmodels_prediction,
    write_hprice_csv,
)
from worksheet_samples import HOSTILE

from appraise.engine.diagnostics import diagnose
from appraise.engine.modelspec import ModelSpec
from appraise.engine.sales import Exclusion
from appraise.report.cautions import FULL_CAUTIONS, SHORT_CAUTION
from appraise.report.content import Facts, Notice, Paragraph, SignatureBlock
from appraise.report.html import render_html
from appraise.report.labels import term_label
from appraise.report.numbers import money
from appraise.report.settings import ReportSettings
from appraise.report.worksheet import build_worksheet

WHEN = datetime(2026, 7, 1, 9, 30, tzinfo=UTC)


@pytest.fixture(scope="module")
def csv_path(tmp_path_factory):
    return write_hprice_csv(tmp_path_factory.mktemp("hprice"))


def _estimate_rows(ws) -> dict[str, str]:
    return dict(ws.table("estimate").rows)


def test_linear_estimate_and_interval_match_statsmodels_and_wooldridge(csv_path):
    fit, val = fit_and_value(csv_path, LINEAR)
    ws = build_worksheet(fit, val, generated=WHEN)
    rows = _estimate_rows(ws)
    point, lo, hi, _ = statsmodels_prediction(csv_path, log=False, level=0.95)
    assert rows["Estimated price"] == money(point)
    assert rows["95% prediction interval: low"] == money(lo)
    assert rows["95% prediction interval: high"] == money(hi)
    # Wooldridge, Introductory Econometrics, data set hprice1 ( lotsize 10,000, sqrft 2,300, bdrms 4; recomputed with
    # statsmodels): y-hat 336.7067, 95% PI [216.8209, 456.5924] in $1000s.
    assert rows["Estimated price"] == "$336,707"
    assert rows["95% prediction interval: low"] == "$216,821"
    assert rows["95% prediction interval: high"] == "$456,592"
    # ...and the 95% interval for the mean [322.0417, 351.3716] (same source).
    assert rows["95% interval for the average price of similar properties: low"] == "$322,042"
    assert rows["95% interval for the average price of similar properties: high"] == "$351,372"
    assert rows["Interval level"] == "95%"


def test_log_response_prints_mean_and_median(csv_path):
    fit, val = fit_and_value(csv_path, LOG)
    rows = _estimate_rows(build_worksheet(fit, val, generated=WHEN))
    point, lo, hi, resid = statsmodels_prediction(csv_path, log=True, level=0.95)
    smear = float(np.mean(np.exp(resid)))  # Duan (1983) smearing factor
    assert rows["Estimated price (median, exp of the log prediction)"] == money(math.exp(point))
    assert rows["Estimated price (mean, smearing retransformation)"] == money(
        math.exp(point) * smear
    )
    assert rows["95% prediction interval: low"] == money(math.exp(lo))
    assert rows["95% prediction interval: high"] == money(math.exp(hi))
    # Wooldridge hprice1 log model, recomputed with statsmodels: smearing factor 1.01635, e^y-hat 336.328 ($1000s), 95% interval
    # [232.209, 487.133] -- within a dollar of the printed figures.
    assert abs(math.exp(point) / 1000 - 336.328) < 0.001
    assert abs(smear - 1.01635) < 1e-5
    assert abs(math.exp(lo) / 1000 - 232.209) < 0.001
    assert abs(math.exp(hi) / 1000 - 487.133) < 0.001


def test_coefficients_table_holds_the_statsmodels_estimates(csv_path):
    fit, val = fit_and_value(csv_path, LINEAR)
    table = build_worksheet(fit, val, generated=WHEN).table("coefficients")
    raw = {r[0]: r[1] for r in table.values}
    # Wooldridge Example (hprice1, price in $1000s): -21.770, 0.0020677, 0.12278, 13.853;
    # here price is in dollars, so every coefficient is 1000 times larger.
    np.testing.assert_allclose(
        [raw["Intercept"], raw["lotsize"], raw["sqrft"], raw["bdrms"]],
        [-21770.0, 2.0677, 122.78, 13853.0],
        rtol=5e-4,
    )
    assert table.columns[5:7] == ("95% low", "95% high")
    assert "classical" in table.note


def test_coefficient_interval_headers_say_the_level_they_were_computed_at(csv_path):
    # the prediction level is 90% here; the coefficient intervals are computed at 95%
    # (engine.fitting.COEF_CI_LEVEL), and their headers must say 95%, as must the export
    from dataclasses import replace

    fit, val = fit_and_value(csv_path, replace(LINEAR, level=0.90))
    assert fit.spec.level == 0.90
    table = build_worksheet(fit, val, generated=WHEN).table("coefficients")
    assert table.columns[5:7] == ("95% low", "95% high")


def test_sections_order_cautions_first_and_last(csv_path):
    fit, val = fit_and_value(csv_path, LINEAR)
    ws = build_worksheet(fit, val, generated=WHEN)
    keys = [s.key for s in ws.sections]
    assert keys[0] == "summary" and keys[-1] == "cautions"
    summary_notices = [b for b in ws.sections[0].blocks if isinstance(b, Notice)]
    assert summary_notices[0].items == (SHORT_CAUTION,)
    last = [b.text for b in ws.sections[-1].blocks if isinstance(b, Paragraph)]
    for heading, body in FULL_CAUTIONS:
        assert any(heading in t and body in t for t in last)
    cert = ws.section("certification")
    assert isinstance(cert.blocks[0], SignatureBlock) and cert.new_page
    assert ws.effective_date == "2026-06-30"


def test_data_section_names_file_hash_and_counts(csv_path):
    fit, val = fit_and_value(
        csv_path, LINEAR, user_exclusions=(Exclusion(5, None, "sold to a relative", None, "user"),)
    )
    ws = build_worksheet(fit, val, generated=WHEN)
    sha = hashlib.sha256(csv_path.read_bytes()).hexdigest()  # the file's own hash, via hashlib
    data = ws.section("data")
    facts = dict(next(b for b in data.blocks if isinstance(b, Facts)).rows)
    assert facts["Source file"] == "hprice1.csv"
    assert facts["Rows read"] == "88"
    assert facts["Rows used in the fit"] == "87"
    assert facts["Rows excluded"].startswith("1 (1 by the user")
    assert any(isinstance(b, Paragraph) and sha in b.text for b in data.blocks)
    excl = ws.table("exclusions")
    assert excl.values == ((5, "H-004", "the user", "", "sold to a relative"),)
    assert ws.workfile_id == f"{sha[:8]}-{LINEAR.sha256()[:8]}"


def test_model_section_shows_expansion_and_reference(csv_path):
    spec = ModelSpec(
        target="price",
        features=("log(sqrft)", "onehot(region, ref='Other')"),
        derived={"unused": "bdrms + 1"},
        level=0.9,
        cov_type="HC1",
    )
    fit, val = fit_and_value(csv_path, spec)
    ws = build_worksheet(fit, val, generated=WHEN)
    feats = {r[0]: r for r in ws.table("features").rows}
    expr, kind, columns, ref = feats["onehot(region, ref='Other')"]
    assert kind == "onehot" and ref == "Other"
    assert columns == ", ".join(term_label(c) for c in fit.design.groups[1].columns)
    assert columns == "region: Colonial"  # the level without the print-out brackets
    assert ws.table("derived").rows == (("unused", "bdrms + 1"),)
    assert "HC1" in ws.table("coefficients").note
    # No effective date in the model: the worksheet says it used the date prepared.
    assert ws.effective_date.startswith("2026-07-01")


def test_hostile_region_name_is_escaped_in_the_real_worksheet(tmp_path):
    csv = write_hprice_csv(tmp_path, region_names=(HOSTILE, "Other"))
    spec = ModelSpec(target="price", features=("sqrft", "onehot(region, ref='Other')"))
    fit, val = fit_and_value(csv, spec, subject={"sqrft": 2000, "region": HOSTILE})
    html = render_html(build_worksheet(fit, val, generated=WHEN))
    assert "<script" not in html.lower()
    assert "&lt;script&gt;" in html


def test_diagnostics_section_reports_ratio_study_with_ranges(csv_path):
    fit, val = fit_and_value(csv_path, LINEAR)
    diag = diagnose(fit)
    ws = build_worksheet(fit, val, diagnostics=diag, generated=WHEN)
    table = ws.table("ratio_study")
    by_label = {r[0]: r for r in table.values}
    # COD from its IAAO definition, 100 * mean(|r - median r|) / median r, with
    # r = leave-one-out prediction / price and the predictions from n statsmodels refits.
    r = leave_one_out_predictions(csv_path) / np.asarray(fit.price)
    cod = 100 * np.mean(np.abs(r - np.median(r))) / np.median(r)
    assert by_label["COD"][1] == pytest.approx(cod, rel=1e-9)
    assert (
        by_label["COD"][2] == "5 to 15"
    )  # IAAO Standard on Ratio Studies (2013), single-family range
    assert ws.table("flagged") is not None
    # Diagnostic warnings (the Breusch-Pagan finding for hprice1) reach the Warnings section.
    warnings = ws.section("warnings").blocks[0].items
    assert any("Breusch-Pagan" in w for w in warnings)


def test_settings_currency_and_page_size(csv_path):
    fit, val = fit_and_value(csv_path, LINEAR)
    ws = build_worksheet(
        fit, val, settings=ReportSettings(currency="EUR ", page_size="Letter"), generated=WHEN
    )
    assert ws.page_size == "Letter"
    assert _estimate_rows(ws)["Estimated price"] == "EUR 336,707"
