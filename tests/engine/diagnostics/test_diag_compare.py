"""Model comparison: ranking, price-scale information criteria, different samples."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame
from scipy import stats
from sklearn.linear_model import LinearRegression
from sklearn.model_selection import LeaveOneOut, cross_val_predict

from appraise.engine.diagnostics import compare_models
from appraise.engine.diagnostics.compare import price_scale_ic
from appraise.engine.errors import AppraiseError
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import parse_model

LINEAR = 'target = "price"\nfeatures = ["lotsize", "sqrft", "bdrms"]'
LOGS = 'target = "price"\nresponse = "log"\nfeatures = ["log(lotsize)", "log(sqrft)", "bdrms"]'


@pytest.fixture(scope="module")
def fits(hprice1):
    sales = sales_from_frame(hprice1)
    return fit_model(sales, parse_model(LINEAR)), fit_model(sales, parse_model(LOGS))


def _sklearn_loo_rmse(hprice1, log: bool) -> float:
    """Leave-one-out RMSE in price units with scikit-learn's LeaveOneOut refits."""
    price = hprice1["price"].to_numpy(float)
    if log:
        X = np.column_stack(
            [np.log(hprice1["lotsize"]), np.log(hprice1["sqrft"]), hprice1["bdrms"]]
        )
        y = np.log(price)
        full = LinearRegression().fit(X, y)
        smear = np.mean(np.exp(y - full.predict(X)))  # Duan (1983), full-sample factor
        pred = np.exp(cross_val_predict(LinearRegression(), X, y, cv=LeaveOneOut())) * smear
    else:
        X = hprice1[["lotsize", "sqrft", "bdrms"]].to_numpy(float)
        pred = cross_val_predict(LinearRegression(), X, price, cv=LeaveOneOut())
    return float(np.sqrt(np.mean((pred - price) ** 2)))


def test_ranked_by_loo_rmse_checked_with_scikit_learn(hprice1, fits):
    comp = compare_models(fits, ["linear", "logs"])
    ref = {"linear": _sklearn_loo_rmse(hprice1, False), "logs": _sklearn_loo_rmse(hprice1, True)}
    for row in comp.rows:
        assert_allclose(row.loo_rmse, ref[row.label], rtol=1e-9)
    assert [r.label for r in comp.rows] == sorted(ref, key=ref.get)
    assert [r.rank for r in comp.rows] == [1, 2]
    assert any("price scale" in w for w in comp.warnings)  # linear and log side by side
    assert not any("different sales" in w for w in comp.warnings)


def test_price_scale_aic_is_the_lognormal_likelihood(fits):
    _, logfit = fits
    aic_p, bic_p = price_scale_ic(logfit)
    # scipy's log-normal density of the price with the ML sigma (SSR/n), as statsmodels' llf
    sigma_ml = np.sqrt(np.mean(logfit.resid**2))
    llf = np.sum(stats.lognorm.logpdf(logfit.price, s=sigma_ml, scale=np.exp(logfit.fitted)))
    k = logfit.p  # statsmodels' OLS AIC counts the p coefficients, not sigma
    assert_allclose(aic_p, -2 * llf + 2 * k, rtol=1e-10)
    assert_allclose(bic_p, -2 * llf + np.log(logfit.n) * k, rtol=1e-10)
    linfit, _ = fits
    assert price_scale_ic(linfit) == (linfit.aic, linfit.bic)


def test_different_samples_are_reported(hprice1):
    frame = hprice1.copy()
    frame["garage"] = (np.arange(len(frame)) % 2).astype(float)
    frame.loc[[3, 17, 40], "garage"] = np.nan  # model B needs it: three sales drop out
    sales = sales_from_frame(frame)
    a = fit_model(sales, parse_model(LINEAR))
    b = fit_model(sales, parse_model('target = "price"\nfeatures = ["sqrft", "garage"]'))
    assert (a.n, b.n) == (88, 85)
    comp = compare_models([a, b], ["A", "B"])
    assert {r.label: r.n for r in comp.rows} == {"A": 88, "B": 85}
    text = next(w for w in comp.warnings if "different sales" in w)
    assert "A: n = 88" in text and "B: n = 85" in text
    assert all(str(r) in text for r in (5, 19, 42))  # file rows of positions 3, 17, 40


def test_labels_must_match(fits):
    with pytest.raises(AppraiseError):
        compare_models(fits, ["only one"])
