"""Market-conditions index from the model's time terms.

Simulated data with known truth (the only invented data here): log price rises by a
nominal 0.6% a month (log slope 0.006); the estimated index must hold the true index
exp(0.006 * months) inside its band, and the monthly rate exp(b) - 1 must be near 0.6%.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from sales_factory import sales_from_frame
from scipy import stats

from appraise import pipeline
from appraise.engine.fitting import fit_model
from appraise.engine.market import NO_TIME_NOTE, market_index, time_groups
from appraise.engine.modelspec import parse_model

SLOPE = 0.006


def _sales(seed: int = 7, n: int = 400) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    start = np.datetime64("2023-01-01")
    days = rng.integers(0, 3 * 365, n)
    dates = start + days.astype("timedelta64[D]")
    area = rng.uniform(1000, 3000, n)
    months = (dates - np.datetime64("2025-12-31")) / np.timedelta64(1, "D") / (365.2425 / 12)
    logp = 11.5 + 0.0004 * area + SLOPE * months + rng.normal(0, 0.08, n)
    return pd.DataFrame(
        {"id": [f"S{i}" for i in range(n)], "price": np.exp(logp), "area": area, "date": dates}
    )


MODEL = """target = "price"
response = "log"
level = 0.95
effective_date = "2025-12-31"
features = ["area", "months"]
[derived]
months = "months_between(date, '2025-12-31')"
"""

ROLES = {"price": "price", "sale_date": "date", "sale_id": "id"}


@pytest.fixture(scope="module")
def sim_fit():
    return fit_model(sales_from_frame(_sales(), ROLES), parse_model(MODEL))


def test_index_holds_the_nominal_trend_within_its_band(sim_fit):
    subject = pd.DataFrame({"area": [2000.0], "date": [pd.Timestamp("2025-12-31")]})
    idx = market_index(sim_fit, subject, "2025-12-31")
    assert idx.has_time and idx.groups == ("months",)
    months = np.array([(d - pd.Timestamp("2025-12-31")).days / (365.2425 / 12) for d in idx.dates])
    truth = np.exp(SLOPE * months)
    assert np.all(idx.low <= truth) and np.all(truth <= idx.high)
    assert idx.index[months == 0] == pytest.approx(1.0)
    assert idx.monthly_rate == pytest.approx(np.expm1(SLOPE), abs=0.0015)
    # the band is the coefficient's: at 12 months back, exp(-12 b +- t * 12 se(b))
    b = sim_fit.params[list(sim_fit.names).index("months")]
    se = np.sqrt(sim_fit.cov_params[-1, -1])
    i12 = np.argmin(np.abs(months + 12))
    assert_allclose(idx.index[i12], np.exp(b * months[i12]), rtol=1e-9)
    tq = stats.t.ppf(0.975, sim_fit.df_resid)
    assert_allclose(np.log(idx.high[i12] / idx.index[i12]), tq * abs(months[i12]) * se, rtol=1e-9)
    assert_allclose(idx.se[i12], abs(months[i12]) * se, rtol=1e-9)
    assert idx.extrapolated is False


def test_grid_time_adjustment_brings_a_sale_to_the_effective_date(sim_fit):
    subject = {"area": 2000.0}
    result, table = pipeline.grid(sim_fit, subject, effective_date="2025-12-31")
    for c in result.comparables:
        t = c.adjustments[0]
        assert t.market_conditions and t.group == "months"
        b = sim_fit.params[-1]
        assert_allclose(t.response_change, b * c.months, rtol=1e-9)
        assert_allclose(t.amount, c.sale_price * np.expm1(b * c.months), rtol=1e-9)


def test_effective_date_outside_the_sales_is_extrapolated(sim_fit):
    result, _ = pipeline.grid(sim_fit, {"area": 2000.0}, effective_date="2027-06-30")
    assert result.market.extrapolated
    assert any("extrapolated" in w for w in result.warnings)


def test_hinge_and_poly_of_months_are_time_terms():
    toml = MODEL.replace(
        '["area", "months"]', '["area", "poly(months, degree=2)", "hinge(months, -6)"]'
    )
    fit = fit_model(sales_from_frame(_sales(), ROLES), parse_model(toml))
    assert {g.expression for g in time_groups(fit)} == {
        "poly(months, degree=2)",
        "hinge(months, -6)",
    }
    result, _ = pipeline.grid(fit, {"area": 2000.0}, effective_date="2025-12-31")
    assert result.groups[:2] == ("poly(months, degree=2)", "hinge(months, -6)")
    assert result.market.has_time


def test_no_time_term_applies_none():
    toml = MODEL.replace('["area", "months"]', '["area"]')
    fit = fit_model(sales_from_frame(_sales(), ROLES), parse_model(toml))
    result, _ = pipeline.grid(fit, {"area": 2000.0}, effective_date="2025-12-31")
    assert not result.market.has_time
    assert NO_TIME_NOTE in result.warnings
    assert not any(a.market_conditions for c in result.comparables for a in c.adjustments)
    assert_allclose(result.market.index, 1.0)
