"""Leave-one-out intervals and k-fold cross-validation against refits done independently."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from sklearn.linear_model import LinearRegression

from appraise.engine.diagnostics.crossval import assign_folds, kfold, leave_one_out
from appraise.engine.diagnostics.influence import influence


@pytest.fixture(scope="module")
def small(hprice1):
    """The first 30 sales of Wooldridge's hprice1: price ~ lotsize + sqrft + bdrms."""
    d = hprice1.iloc[:30]
    X = sm.add_constant(d[["lotsize", "sqrft", "bdrms"]].to_numpy(float))
    return X, d["price"].to_numpy(float)


def _brute_loo_intervals(X, y, level):
    """Refit without each sale; statsmodels get_prediction gives its prediction interval."""
    low, high, pred = (np.empty(len(y)) for _ in range(3))
    for i in range(len(y)):
        keep = np.arange(len(y)) != i
        res = sm.OLS(y[keep], X[keep]).fit()
        frame = res.get_prediction(X[i : i + 1]).summary_frame(alpha=1 - level)
        pred[i] = frame["mean"].iloc[0]
        low[i] = frame["obs_ci_lower"].iloc[0]
        high[i] = frame["obs_ci_upper"].iloc[0]
    return pred, low, high


@pytest.mark.parametrize("level", [0.80, 0.90, 0.95])
def test_loo_interval_equals_refit_prediction_interval(small, level):
    X, y = small
    ours = leave_one_out(influence(X, y), y, response="linear", smearing=1.0, level=level)
    pred, low, high = _brute_loo_intervals(X, y, level)
    # statsmodels get_prediction(...).summary_frame obs_ci_* on each refit without the sale
    assert_allclose(ours.price_prediction, pred, rtol=1e-9)
    assert_allclose(ours.low, low, rtol=1e-9)
    assert_allclose(ours.high, high, rtol=1e-9)
    inside = (y >= low) & (y <= high)
    assert ours.coverage == pytest.approx(inside.mean())
    assert (ours.inside == inside).all()


def test_log_response_interval_and_price_prediction(small):
    X, price = small
    y = np.log(price)
    infl = influence(X, y)
    smear = float(np.mean(np.exp(infl.resid)))  # Duan (1983) smearing factor
    ours = leave_one_out(infl, price, response="log", smearing=smear, level=0.9)
    pred, low, high = _brute_loo_intervals(X, y, 0.9)
    # the log-scale refit interval, exponentiated; the point is exp(pred) times smearing
    assert_allclose(ours.low, np.exp(low), rtol=1e-9)
    assert_allclose(ours.high, np.exp(high), rtol=1e-9)
    assert_allclose(ours.price_prediction, np.exp(pred) * smear, rtol=1e-9)
    err = ours.price_prediction - price
    assert ours.rmse_price == pytest.approx(np.sqrt(np.mean(err**2)))
    assert ours.mdape == pytest.approx(100 * np.median(np.abs(err) / price))


def test_coverage_near_nominal_when_the_model_is_true():
    # Simulated data from the model itself: the LOO interval is exact (a t pivot), so the
    # coverage over many sales is close to the nominal level (binomial sd about 0.7 pt).
    rng = np.random.default_rng(11)
    n = 2000
    X = np.column_stack([np.ones(n), rng.normal(size=(n, 4))])
    y = X @ np.array([1.0, 0.5, -0.2, 0.3, 0.0]) + rng.normal(size=n)
    ours = leave_one_out(influence(X, y), y, response="linear", smearing=1.0, level=0.9)
    assert abs(ours.coverage - 0.9) < 0.03


def test_kfold_matches_scikit_learn_on_the_same_folds(hprice1):
    X = hprice1[["lotsize", "sqrft", "bdrms"]].to_numpy(float)
    Xc = sm.add_constant(X)
    price = hprice1["price"].to_numpy(float)
    ours = kfold(Xc, price, price, response="linear", folds=5, seed=4)
    # scikit-learn LinearRegression fitted on the same training folds
    ref = np.empty(len(price))
    for f in range(5):
        test = ours.fold == f
        model = LinearRegression().fit(X[~test], price[~test])
        ref[test] = model.predict(X[test])
    assert_allclose(ours.price_prediction, ref, rtol=1e-9)
    assert ours.rmse_price == pytest.approx(np.sqrt(np.mean((ref - price) ** 2)))
    assert ours.mdape == pytest.approx(100 * np.median(np.abs(ref - price) / price))


def test_kfold_log_response_uses_each_training_folds_smearing(hprice1):
    X = hprice1[["lotsize", "sqrft", "bdrms"]].to_numpy(float)
    price = hprice1["price"].to_numpy(float)
    ours = kfold(sm.add_constant(X), np.log(price), price, response="log", folds=4, seed=1)
    ref = np.empty(len(price))
    for f in range(4):
        test = ours.fold == f
        model = LinearRegression().fit(X[~test], np.log(price[~test]))
        smear = np.mean(np.exp(np.log(price[~test]) - model.predict(X[~test])))  # Duan (1983)
        ref[test] = np.exp(model.predict(X[test])) * smear
    assert_allclose(ours.price_prediction, ref, rtol=1e-9)


def test_folds_are_seeded_balanced_and_reproducible():
    a = assign_folds(103, 10, seed=7)
    assert (a == assign_folds(103, 10, seed=7)).all()
    assert not (a == assign_folds(103, 10, seed=8)).all()
    counts = np.bincount(a, minlength=10)
    assert counts.min() == 10 and counts.max() == 11


def test_level_present_only_in_the_held_out_fold_is_not_guessed():
    rng = np.random.default_rng(5)
    n = 60
    X = np.column_stack([np.ones(n), rng.normal(size=n), np.zeros(n)])
    X[12, 2] = 1.0  # a category level only this sale has
    y = 3 + X[:, 1] + 2 * X[:, 2] + rng.normal(scale=0.1, size=n)
    res = kfold(X, y, y, response="linear", folds=5, seed=0)
    assert np.isnan(res.price_prediction[12])
    assert res.n_unpredictable == 1 and res.n_predicted == n - 1
