"""Coverage of the leave-one-out intervals by segment (fifths of predicted price, region,
a chosen term), checked against a direct count and on a simulation with a known uneven
spread (invented data: the spread grows in one region)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sales_factory import sales_from_frame

from appraise.engine.diagnostics import DiagnosticSettings, diagnose
from appraise.engine.diagnostics.coverage import coverage_by_segment, fifths
from appraise.engine.errors import AppraiseError
from appraise.engine.fitting import fit_model
from appraise.engine.modelspec import ModelSpec


def test_fifths_split_the_ranks_evenly():
    labels = fifths(np.arange(10.0)[::-1])
    assert list(labels) == [
        "5 of 5 (highest)", "5 of 5 (highest)", "4 of 5", "4 of 5", "3 of 5",
        "3 of 5", "2 of 5", "2 of 5", "1 of 5 (lowest)", "1 of 5 (lowest)",
    ]  # fmt: skip


def test_counts_match_a_direct_count():
    rng = np.random.default_rng(5)
    inside = rng.random(400) < 0.9
    usable = rng.random(400) < 0.97
    region = rng.choice(["North", "South", None], 400)
    c = coverage_by_segment(inside, usable, {"region": region}, level=0.9, spread="constant")
    for s in c.segments:
        keep = usable & (region == s.label)
        assert s.n == keep.sum() and s.inside == inside[keep].sum()
    assert {s.label for s in c.segments} == {"North", "South"}  # None is left out


def _uneven(n=900, seed=3):
    rng = np.random.default_rng(seed)
    region = rng.choice(["Calm", "Mid", "Wild"], n)
    sd = np.select([region == "Calm", region == "Mid"], [0.05, 0.10], 0.25)
    area = rng.uniform(900, 3000, n)
    price = np.exp(11 + 0.0004 * area + rng.normal(0, 1, n) * sd)
    return pd.DataFrame({"price": price, "area": area, "district": region})


def test_diagnose_reports_the_region_where_the_even_interval_fails():
    frame = _uneven()
    spec = ModelSpec(
        target="price", features=("area", "onehot(district)"), response="log", spread="constant"
    )
    d = diagnose(fit_model(sales_from_frame(frame, roles={"region": "district"}), spec))
    by_region = {s.label: s for s in d.coverage.segments if s.by == "region"}
    assert by_region["Wild"].coverage < 0.85 and by_region["Calm"].coverage > 0.95
    assert by_region["Wild"].outside(0.9) and by_region["Calm"].outside(0.9)
    assert any("region Wild" in w and "too narrow" in w for w in d.warnings)
    j = d.to_dict()["overall"]["accuracy"]["coverage_by_segment"]
    assert j["spread"] == "constant" and j["nominal"] == 0.9
    assert {"by", "segment", "n", "coverage", "outside", "thin"} <= set(j["segments"][0])
    assert j["worst"]["by"] == "region"


def test_the_modelled_spread_with_the_region_as_a_spread_term_fixes_it():
    frame = _uneven()
    spec = ModelSpec(
        target="price",
        features=("area", "onehot(district)"),
        response="log",
        spread_terms=("onehot(district)",),
    )
    d = diagnose(fit_model(sales_from_frame(frame, roles={"region": "district"}), spec))
    for s in d.coverage.segments:
        # 300 sales a region: a binomial s.e. of 1.7 points at 90%
        assert abs(s.coverage - 0.9) < 0.05, (s.by, s.label, s.coverage)
    assert d.coverage.spread == "modelled"


def test_a_chosen_term_splits_by_fifths_or_levels():
    frame = _uneven()
    fit = fit_model(sales_from_frame(frame), ModelSpec(target="price", features=("area",)))
    d = diagnose(fit, DiagnosticSettings(coverage_term="area"))
    assert [s.label for s in d.coverage.segments if s.by == "area"][0] == "1 of 5 (lowest)"
    d = diagnose(fit, DiagnosticSettings(coverage_term="district"))
    assert {s.label for s in d.coverage.segments if s.by == "district"} == {"Calm", "Mid", "Wild"}
    d = diagnose(fit, DiagnosticSettings(coverage_term="log(area)"))
    assert sum(s.n for s in d.coverage.segments if s.by == "log(area)") == fit.n
    with pytest.raises(AppraiseError, match="coverage term"):
        diagnose(fit, DiagnosticSettings(coverage_term="no_such_column"))


def test_fifths_and_segments_as_pandas_groups_them():
    # Reference: pandas' rank(method="first") for the fifths (ties in order of
    # appearance) and a groupby over the labels as text for the counts.
    rng = np.random.default_rng(5)
    values = np.round(rng.normal(0, 1, 1_003), 1)  # many ties
    values[[4, 40, 400]] = np.nan
    ok = np.isfinite(values)
    ranks = pd.Series(values[ok]).rank(method="first").to_numpy()
    k = np.minimum((5 * (ranks - 1) / ok.sum()).astype(int), 4)
    names = ["1 of 5 (lowest)", "2 of 5", "3 of 5", "4 of 5", "5 of 5 (highest)"]
    assert fifths(values)[ok].tolist() == [names[i] for i in k]
    assert all(v is None for v in fifths(values)[~ok])

    labels = np.array(rng.choice(["East", "West", None, 3, "3"], 1_003).tolist(), dtype=object)
    inside = rng.random(1_003) < 0.9
    usable = rng.random(1_003) < 0.97
    got = coverage_by_segment(inside, usable, {"r": labels}, level=0.9, spread="constant")
    keep = usable & np.array([v is not None for v in labels])
    frame = pd.DataFrame({"label": labels[keep].astype(str), "inside": inside[keep]})
    want = [
        (str(lab), len(g), int(g["inside"].sum())) for lab, g in frame.groupby("label", sort=True)
    ]
    assert [(s.label, s.n, s.inside) for s in got.segments] == want
