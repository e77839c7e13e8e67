"""The modelled spread: intervals that hold in every segment, not only on average.

A simulation with a known heteroskedastic truth (invented data, known answer): the error
standard deviation of log price grows with the property's size. The even-spread interval
is right on average and wrong at both ends; the modelled spread (Harvey's log-variance
regression with the jackknife conformal multiplier, engine/spread.py) holds in every fifth
of predicted price, on fresh draws and in the leave-one-out coverage of ``diagnose``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame

from appraise.engine.diagnostics import diagnose
from appraise.engine.errors import ModelFileError
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import ModelSpec, parse_model
from appraise.engine.spread import fit_spread

LEVEL = 0.90


def _draw(rng, n):
    area = rng.uniform(800, 3200, n)
    z = (area - 2000) / 700
    sd = np.exp(-2.3 + 0.45 * z)  # 0.05 for the smallest houses ... 0.19 for the largest
    logp = 11.0 + 0.0004 * area + rng.normal(0, 1, n) * sd
    return pd.DataFrame({"price": np.exp(logp), "area": area})


def _spec(spread):
    return ModelSpec(target="price", features=("area",), response="log", level=LEVEL, spread=spread)


def _replicated_coverage(spread, replicates=50, n=300, fresh=60, seed=1):
    """Coverage of the single-sale interval over ``replicates`` x ``fresh`` new draws
    (each replicate a new set of sales and a new fit), by fifth of predicted price (the
    fifths of each fit's own fitted values) and overall."""
    rng = np.random.default_rng(seed)
    inside, fifth = [], []
    for _ in range(replicates):
        sales, new = _draw(rng, n), _draw(rng, fresh)
        fit = fit_model(sales_from_frame(sales), _spec(spread))
        pred = fit.predict(new)
        lo, hi = pred.interval()
        inside.append(((new["price"] >= lo) & (new["price"] <= hi)).to_numpy())
        fifth.append(np.searchsorted(np.quantile(fit.fitted, [0.2, 0.4, 0.6, 0.8]), pred.fitted))
    inside, fifth = np.concatenate(inside), np.concatenate(fifth)
    return np.array([inside[fifth == k].mean() for k in range(5)]), float(inside.mean())


@pytest.fixture(scope="module")
def simulated():
    rng = np.random.default_rng(20261203)
    return _draw(rng, 1500), _draw(rng, 5000)


def test_modelled_spread_holds_in_every_fifth_over_3000_draws():
    by_fifth, overall = _replicated_coverage("modelled")
    # about 600 draws a fifth: a binomial s.e. of 1.2 points at 90%
    assert np.all(np.abs(by_fifth - LEVEL) <= 0.03), by_fifth
    assert abs(overall - LEVEL) <= 0.015


def test_even_spread_fails_the_same_segments():
    by_fifth, overall = _replicated_coverage("constant")
    assert abs(overall - LEVEL) <= 0.02  # right on average...
    assert by_fifth[0] > LEVEL + 0.05 and by_fifth[-1] < LEVEL - 0.1, by_fifth  # ...not by fifth


def test_leave_one_out_coverage_by_fifth_uses_the_modelled_spread(simulated):
    sales, _ = simulated
    fit = fit_model(sales_from_frame(sales), _spec("modelled"))
    d = diagnose(fit)
    inside = d.loo.inside
    fifth = pd.qcut(fit.fitted, 5, labels=False)
    by_fifth = np.array([inside[fifth == k].mean() for k in range(5)])
    assert np.all(np.abs(by_fifth - LEVEL) <= 0.04), by_fifth  # 300 sales a fifth: s.e. 1.7 points
    constant = diagnose(fit_model(sales_from_frame(sales), _spec("constant")))
    by_fifth_c = np.array([constant.loo.inside[fifth == k].mean() for k in range(5)])
    assert by_fifth_c[0] > LEVEL + 0.05 and by_fifth_c[-1] < LEVEL - 0.05


def test_a_sales_own_error_never_widens_its_own_interval(simulated):
    """Leave-one-out: the spread regression's hat-matrix shortcut equals refitting the
    spread regression without the sale (the price fit's residuals held, as documented)."""
    sales, _ = simulated
    fit = fit_model(sales_from_frame(sales), _spec("modelled"))
    h = fit.leverage()
    sm = fit.spread
    v = fit.resid**2 / (1 - h)
    lin = np.column_stack([np.ones(fit.n), (fit.fitted - sm.centre) / sm.width]) @ sm.gamma
    w = v / np.exp(lin)
    for i in (0, 17, 911):
        keep = np.ones(fit.n, dtype=bool)
        keep[i] = False
        other = fit_spread(
            fit.fitted[keep], fit.resid[keep], h[keep], fit.frame.loc[keep], df_resid=fit.df_resid
        )
        # the linear predictor does not depend on how the fitted value is standardised
        lin_other = np.array([1.0, (fit.fitted[i] - other.centre) / other.width]) @ other.gamma
        c_without_i = (w.sum() - w[i]) / (fit.n - 1)
        # rtol 1e-6, not 1e-9: the floor on near-zero squared residuals (1e-6 of their
        # mean) moves a little when a sale is removed
        assert_allclose(np.log(sm.loo_variance[i] / c_without_i), lin_other, rtol=1e-6)
    # a sale's own error is not in its spread: ten times the error, ten times the score
    wild = fit.resid.copy()
    wild[17] *= 10
    again = fit_spread(fit.fitted, wild, h, fit.frame, df_resid=fit.df_resid)
    assert_allclose(again.loo_variance[17], sm.loo_variance[17], rtol=0.02)
    assert again.loo_scores[17] > 9 * sm.loo_scores[17]


def test_model_file_settings_are_checked():
    spec = parse_model(
        'target = "price"\nfeatures = ["area"]\nspread = "modelled"\nspread_terms = ["age"]'
    )
    assert spec.spread == "modelled" and spec.spread_terms == ("age",)
    assert parse_model(spec.to_toml()) == spec
    with pytest.raises(ModelFileError, match="'spread'"):
        parse_model('target = "price"\nfeatures = ["area"]\nspread = "wide"')
    with pytest.raises(ModelFileError, match="spread_terms"):
        parse_model(
            'target = "price"\nfeatures = ["area"]\nspread = "constant"\nspread_terms = ["age"]'
        )


def test_spread_terms_enter_the_variance(simulated):
    sales, fresh = simulated
    sales = sales.assign(age=np.linspace(0, 80, len(sales)))
    fit = fit_model(
        sales_from_frame(sales),
        ModelSpec(target="price", features=("area",), response="log", spread_terms=("age",)),
    )
    assert fit.spread.names[-1] == "age"
    pred = fit.predict(fresh.assign(age=[np.nan] + [10.0] * (len(fresh) - 1)))
    assert not pred.ok[0] and "spread term" in pred.reasons[0]
    assert pred.ok[1:].all()
