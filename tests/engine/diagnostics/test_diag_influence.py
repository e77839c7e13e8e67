"""Per-sale influence measures against statsmodels and against brute-force refits."""

from __future__ import annotations

import tomllib

import numpy as np
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import OLSInfluence

from appraise.engine.diagnostics.influence import flag_sales, influence, thresholds
from appraise.engine.diagnostics.settings import DiagnosticSettings
from appraise.engine.errors import CollinearityError
from appraise.engine.modelspec import parse_model


@pytest.fixture(scope="module")
def windsor_influence(windsor_design):
    X, y, _, _ = windsor_design
    ours = influence(X, y)
    ref = OLSInfluence(sm.OLS(y, X).fit())
    return ours, ref


def test_leverage_matches_statsmodels(windsor_influence):
    ours, ref = windsor_influence
    # statsmodels OLSInfluence.hat_matrix_diag on the Windsor data (Ecdat/Housing)
    assert_allclose(ours.leverage, ref.hat_matrix_diag, rtol=1e-8)


def test_studentized_residuals_match_statsmodels(windsor_influence):
    ours, ref = windsor_influence
    # statsmodels OLSInfluence.resid_studentized_internal / _external, Windsor data
    assert_allclose(ours.student_internal, ref.resid_studentized_internal, rtol=1e-8)
    assert_allclose(ours.student_external, ref.resid_studentized_external, rtol=1e-8)


def test_cooks_distance_and_dffits_match_statsmodels(windsor_influence):
    ours, ref = windsor_influence
    # statsmodels OLSInfluence.cooks_distance[0] and .dffits[0], Windsor data
    assert_allclose(ours.cooks_distance, ref.cooks_distance[0], rtol=1e-8)
    assert_allclose(ours.dffits, ref.dffits[0], rtol=1e-8)


def test_press_matches_statsmodels(windsor_influence):
    ours, ref = windsor_influence
    # statsmodels OLSInfluence.ess_press (sum of squared PRESS residuals), Windsor data
    assert_allclose(ours.press(), ref.ess_press, rtol=1e-8)


def test_loo_predictions_and_press_match_brute_force_refits(hprice1):
    # Brute force: refit without each sale with numpy's lstsq and predict it.
    X = sm.add_constant(hprice1[["lotsize", "sqrft", "bdrms"]].to_numpy(float))
    y = hprice1["price"].to_numpy(float)
    ours = influence(X, y)
    brute = np.empty(len(y))
    s_loo = np.empty(len(y))
    for i in range(len(y)):
        keep = np.arange(len(y)) != i
        b, ssr, *_ = np.linalg.lstsq(X[keep], y[keep], rcond=None)
        brute[i] = X[i] @ b
        s_loo[i] = np.sqrt(ssr[0] / (keep.sum() - X.shape[1]))
    assert_allclose(ours.loo_prediction, brute, rtol=1e-9)
    assert_allclose(ours.press(), np.sum((y - brute) ** 2), rtol=1e-9)
    assert_allclose(ours.loo_sigma, s_loo, rtol=1e-9)


def test_sale_alone_in_a_level_has_no_loo_and_is_flagged():
    # A column that is non-zero for one sale only gives that sale leverage exactly 1
    # (the hat matrix projects onto a space containing that unit vector).
    rng = np.random.default_rng(3)
    n = 40
    X = np.column_stack([np.ones(n), rng.normal(size=n), np.zeros(n)])
    X[7, 2] = 1.0
    y = X[:, 1] * 2 + rng.normal(size=n)
    infl = influence(X, y)
    assert_allclose(infl.leverage[7], 1.0, atol=1e-12)
    assert np.isnan(infl.loo_error[7]) and np.isnan(infl.student_external[7])
    assert np.isfinite(infl.loo_error[np.arange(n) != 7]).all()
    flags = flag_sales(
        infl, thresholds(n, 3, DiagnosticSettings()), np.arange(2, n + 2), [None] * n
    )
    own = [f for f in flags if "own_fit" in f.codes]
    assert [f.row for f in own] == [9]


def test_rank_deficient_design_is_refused_naming_a_column():
    rng = np.random.default_rng(0)
    a, b = rng.normal(size=(2, 30))
    X = np.column_stack([np.ones(30), a, b, a + 2 * b])
    with pytest.raises(CollinearityError) as err:
        influence(X, rng.normal(size=30))
    assert len(err.value.terms) == 1


def test_planted_outlier_is_flagged_and_its_exclusion_line_parses(hprice1):
    X = sm.add_constant(hprice1[["lotsize", "sqrft", "bdrms"]].to_numpy(float))
    y = hprice1["price"].to_numpy(float).copy()
    y[10] += 400.0  # several residual standard deviations away
    infl = influence(X, y)
    n, p = X.shape
    ids = [f"S-{i:03d}" for i in range(n)]
    flags = flag_sales(infl, thresholds(n, p, DiagnosticSettings()), np.arange(2, n + 2), ids)
    flag = next(f for f in flags if f.sale_id == "S-010")
    assert "outlier" in flag.codes and "cooks" in flag.codes
    cooks = [infl.cooks_distance[f.position] for f in flags]
    assert cooks == sorted(cooks, reverse=True)  # most influential first
    # The block pastes into a model file and is read back by the model-file parser.
    text = 'target = "price"\nfeatures = ["sqrft"]\n' + flag.model_file_line()
    spec = parse_model(text)
    assert spec.exclude[0].sale_id == "S-010"
    assert spec.exclude[0].reason == flag.reason
    assert "studentized residual" in flag.reason
    assert tomllib.loads(flag.model_file_line())["exclude"][0]["id"] == "S-010"
    ex = flag.exclusion()
    assert (ex.row, ex.sale_id, ex.source) == (12, "S-010", "user")


def test_thresholds_follow_the_settings():
    t = thresholds(200, 8, DiagnosticSettings(leverage_multiple=2.0, dffits_multiple=2.0))
    assert t.leverage == pytest.approx(2 * 8 / 200)  # Hoaglin and Welsch 2p/n (memory)
    assert t.cooks == pytest.approx(4 / 200)  # 4/n (common practice)
    assert t.dffits == pytest.approx(2 * np.sqrt(8 / 200))  # Belsley, Kuh, Welsch (memory)
    assert np.isnan(thresholds(200, 8, DiagnosticSettings()).dffits)  # off by default


def test_dffits_tracks_cooks_distance(windsor_influence):
    # Identity DFFITS^2 = p * D * s^2 / s_(i)^2 (follows from the definitions; this is why
    # DFFITS is not a separate flag by default). Checked on statsmodels' own values.
    _, ref = windsor_influence
    s2 = ref.results.scale
    p = ref.k_vars
    s_loo2 = ref.sigma2_not_obsi
    assert_allclose(ref.dffits[0] ** 2, p * ref.cooks_distance[0] * s2 / s_loo2, rtol=1e-8)


def test_flag_reasons_of_a_large_fit_have_no_scientific_notation():
    # 200,000 sales: the limits 3p/n and 4/n are 0.000045 and 0.00002; a reason must read
    # them as a person does, not as 4.5e-05 or 0.000 (simulated, a planted far sale).
    rng = np.random.default_rng(2)
    n = 200_000
    X = np.column_stack([np.ones(n), rng.normal(size=n), rng.normal(size=n)])
    X[7, 1] = 40.0  # far attributes: leverage and Cook's distance flag it
    y = X @ np.array([1.0, 0.5, -0.2]) + rng.normal(0, 0.1, n)
    y[7] += 3.0
    infl = influence(X, y)
    limits = thresholds(n, 3, DiagnosticSettings())
    flags = flag_sales(infl, limits, np.arange(2, n + 2), [None] * n)
    first = next(f for f in flags if f.position == 7)
    text = first.reason
    assert "leverage" in text and "Cook's distance" in text
    assert "e-0" not in text and "> 0.000)" not in text
    assert "> 0.000045)" in text and "> 0.00002)" in text  # 3*3/200,000 and 4/200,000
