"""Simulations with a known truth: interval coverage at the nominal rate.

Data are drawn from a known hedonic model (an invented truth, not real sales): price
depends on living area, distance, their interaction and a three-level region. For each
of 2,000 draws the model is fitted through the project's own model file and a fresh
sale of a new subject is drawn from the truth. Over the draws:

* each true coefficient lies inside its 95% confidence interval about 95% of the time;
* the fresh sale lies inside the 90% prediction interval about 90% of the time.

With 2,000 draws the standard error of an empirical rate near 0.90 is 0.0067, so the
2.5-point tolerance is close to four standard errors: a wrong interval (for example the
interval for the mean, which covers far less) fails, a right one passes with any seed.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sales_factory import sales_from_frame

from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import parse_model
from appraise.engine.valuation import value_subject

DRAWS = 2_000
N = 60
TRUE = {"Intercept": 11.2, "area": 3.1e-4, "dist": -0.021, "area * dist": -1.5e-5,
        "region[East]": 0.08, "region[West]": -0.12}  # fmt: skip
SIGMA = 0.12
LEVELS = np.array(["Centre", "East", "West"])


def _mean(area, dist, region):
    return (
        TRUE["Intercept"] + TRUE["area"] * area + TRUE["dist"] * dist
        + TRUE["area * dist"] * area * dist
        + TRUE["region[East]"] * (region == "East") + TRUE["region[West]"] * (region == "West")
    )  # fmt: skip


def _draw(rng, n):
    area = rng.uniform(800, 3200, n)
    dist = rng.uniform(0.2, 9.0, n)
    region = LEVELS[rng.integers(0, 3, n)]
    return area, dist, region


@pytest.mark.parametrize("response", ["log", "linear"])
def test_coverage_of_coefficient_and_prediction_intervals(response):
    rng = np.random.default_rng(20261201 if response == "log" else 7)
    spec = parse_model(
        f'target = "price"\nresponse = "{response}"\nlevel = 0.90\n'
        'features = ["area", "dist", "area * dist", "onehot(region, ref=\'Centre\')"]'
    )
    names = None
    coef_hits = np.zeros(len(TRUE))
    pred_hits = 0
    for _ in range(DRAWS):
        area, dist, region = _draw(rng, N)
        mu = _mean(area, dist, region)
        eps = rng.normal(0, SIGMA, N)
        # log response: the truth is linear in log price; linear response: in price itself
        # (scaled so the noise is comparable).
        price = np.exp(mu + eps) if response == "log" else 1e5 * (mu + eps)
        fit = fit_model(
            sales_from_frame(
                pd.DataFrame({"price": price, "area": area, "dist": dist, "region": region})
            ),
            spec,
        )
        names = fit.names
        truth = np.array([TRUE[nm] for nm in names]) * (1 if response == "log" else 1e5)
        lo = np.array([t.ci_low for t in fit.terms])
        hi = np.array([t.ci_high for t in fit.terms])
        coef_hits += (lo <= truth) & (truth <= hi)

        a0, d0, r0 = _draw(rng, 1)
        mu0 = _mean(a0, d0, r0)[0]
        y0 = mu0 + rng.normal(0, SIGMA)
        new_sale = np.exp(y0) if response == "log" else 1e5 * y0
        v = value_subject(fit, pd.DataFrame({"area": a0, "dist": d0, "region": r0}))
        pred_hits += v.low <= new_sale <= v.high

    coef_rate = coef_hits / DRAWS
    pred_rate = pred_hits / DRAWS
    assert names == ("Intercept", "area", "dist", "area * dist", "region[East]", "region[West]")
    assert np.all(np.abs(coef_rate - 0.95) < 0.025), dict(zip(names, coef_rate, strict=True))
    assert abs(pred_rate - 0.90) < 0.025, pred_rate
