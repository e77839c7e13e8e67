"""VIF, generalized VIF and the scaled condition number against independent computations."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import variance_inflation_factor

from appraise.engine.diagnostics.collinearity import (
    TermGroupRef,
    collinearity,
    condition_number,
    vifs,
)


def test_vif_matches_statsmodels_with_intercept(windsor_design):
    X, _, _, _ = windsor_design
    ours = vifs(X)
    # statsmodels variance_inflation_factor(exog, j) regresses column j on the others
    ref = [variance_inflation_factor(X, j) for j in range(1, X.shape[1])]
    assert np.isnan(ours[0])  # the intercept has none
    assert_allclose(ours[1:], ref, rtol=1e-9)


# statsmodels warns about the raw (unscaled) hprice1 columns; expected for this check
@pytest.mark.filterwarnings("ignore:The design matrix is poorly conditioned")
def test_vif_matches_statsmodels_without_intercept(hprice1):
    X = hprice1[["lotsize", "sqrft", "bdrms"]].to_numpy(float)
    # without a constant the auxiliary R^2 is uncentred, as in statsmodels'
    # variance_inflation_factor with standardize=False (its default since 0.15
    # standardizes, which centres the columns)
    ref = [variance_inflation_factor(X, j, standardize=False) for j in range(3)]
    assert_allclose(vifs(X), ref, rtol=1e-9)


def _det_formula_gvif(X, group):
    """Fox and Monette (1992): det(R11) det(R22) / det(R), R the correlation matrix of
    the non-intercept columns, computed here from numpy's corrcoef."""
    R = np.corrcoef(X[:, 1:], rowvar=False)
    g = [j - 1 for j in group]
    rest = [j for j in range(R.shape[0]) if j not in g]
    return np.linalg.det(R[np.ix_(g, g)]) * np.linalg.det(R[np.ix_(rest, rest)]) / np.linalg.det(R)


def _design_with_groups(seed=2, n=300):
    """Intercept, x, x^2 (a polynomial pair), z, and a three-level category correlated with x."""
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n) + 2
    z = 0.6 * x + rng.normal(size=n)
    level = np.digitize(x + rng.normal(scale=0.8, size=n), [1.5, 2.5])
    X = np.column_stack([np.ones(n), x, x**2, z, level == 1, level == 2]).astype(float)
    groups = (
        TermGroupRef("poly(x, 2)", "poly", (1, 2)),
        TermGroupRef("z", "plain", (3,)),
        TermGroupRef("onehot(level)", "onehot", (4, 5)),
    )
    names = ("Intercept", "x", "x^2", "z", "level[1]", "level[2]")
    return X, names, groups


def test_gvif_of_groups_matches_the_determinant_formula():
    X, names, groups = _design_with_groups()
    res = collinearity(X, names, groups)
    by_term = {t.expression: t for t in res.terms}
    for g in groups:
        assert_allclose(by_term[g.expression].gvif, _det_formula_gvif(X, g.columns), rtol=1e-8)
        t = by_term[g.expression]
        assert t.df == len(g.columns)
        assert_allclose(t.gvif_root, t.gvif ** (1 / (2 * t.df)), rtol=1e-12)


def test_gvif_of_one_column_is_its_vif():
    X, names, groups = _design_with_groups()
    res = collinearity(X, names, groups)
    z = next(t for t in res.terms if t.expression == "z")
    # statsmodels variance_inflation_factor on the same column
    assert_allclose(z.gvif, variance_inflation_factor(X, 3), rtol=1e-9)


def test_gvif_is_invariant_to_recoding_the_group():
    # Fox and Monette (1992): GVIF does not depend on how a group's columns are coded.
    # Centring the polynomial (x - 2, (x - 2)^2 spans the same space with the intercept)
    # and switching the category's reference level leave each group's GVIF unchanged,
    # while the single-column VIFs of the polynomial change a great deal.
    X, names, groups = _design_with_groups()
    x = X[:, 1]
    lvl0 = 1 - X[:, 4] - X[:, 5]
    X2 = np.column_stack([X[:, 0], x - 2, (x - 2) ** 2, X[:, 3], lvl0, X[:, 5]])
    a = {t.expression: t.gvif for t in collinearity(X, names, groups).terms}
    b = {t.expression: t.gvif for t in collinearity(X2, names, groups).terms}
    for k in a:
        assert_allclose(a[k], b[k], rtol=1e-8)
    assert not np.allclose(vifs(X)[1:3], vifs(X2)[1:3], rtol=0.1)


def test_condition_number_matches_numpy_on_unit_length_columns(windsor_design):
    X, _, _, names = windsor_design
    res = condition_number(X, names, threshold=30)
    # numpy's 2-norm condition number of X with columns scaled to unit length (Belsley)
    assert_allclose(res.number, np.linalg.cond(X / np.linalg.norm(X, axis=0)), rtol=1e-9)
    assert not res.exceeds  # Windsor design: about 17.5 (computed with numpy above)


def test_near_dependence_is_found_and_named():
    rng = np.random.default_rng(9)
    n = 200
    a, b, c = rng.normal(size=(3, n))
    d = a + b + rng.normal(scale=1e-3, size=n)
    X = np.column_stack([np.ones(n), a, b, c, d])
    names = ("Intercept", "a", "b", "c", "d")
    groups = tuple(TermGroupRef(nm, "plain", (j,)) for j, nm in enumerate(names) if j)
    res = collinearity(X, names, groups)
    cond = res.condition
    assert cond.exceeds
    assert_allclose(cond.number, np.linalg.cond(X / np.linalg.norm(X, axis=0)), rtol=1e-9)
    assert set(cond.dependences[0].columns) == {"a", "b", "d"}
    flagged = {t.expression for t in res.terms if t.flagged}
    assert flagged == {"a", "b", "d"}
    assert any("condition number" in w for w in res.warnings)


def test_flags_use_the_given_limits():
    X, names, groups = _design_with_groups()
    lenient = collinearity(X, names, groups, vif_limit=1e9, gvif_root_limit=1e9)
    strict = collinearity(X, names, groups, vif_limit=1.0, gvif_root_limit=1.0)
    assert not any(t.flagged for t in lenient.terms)
    assert all(t.flagged for t in strict.terms)


def test_hprice1_vifs_are_modest(hprice1):
    # Wooldridge hprice1 lotsize, sqrft, bdrms: statsmodels gives VIFs near 1 to 1.5,
    # well below 10: no term flagged.
    X = sm.add_constant(hprice1[["lotsize", "sqrft", "bdrms"]].to_numpy(float))
    groups = tuple(
        TermGroupRef(n, "plain", (j,)) for j, n in enumerate(["lotsize", "sqrft", "bdrms"], 1)
    )
    res = collinearity(X, ("Intercept", "lotsize", "sqrft", "bdrms"), groups)
    ref = [variance_inflation_factor(X, j) for j in (1, 2, 3)]
    assert_allclose([t.gvif for t in res.terms], ref, rtol=1e-9)
    assert not any(t.flagged for t in res.terms)
