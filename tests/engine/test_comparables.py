"""Comparable selection: similarity measures, filters, pins and the guidance warnings.

The distance check uses the haversine with R = 6371.0088 km (IUGG mean radius, from
memory); one degree of latitude is then 2 * pi * R / 360 = 111.195 km (hand arithmetic).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sales_factory import sales_from_frame

from appraise.engine.comparables import SelectionSettings, candidates, select
from appraise.engine.errors import SubjectError
from appraise.engine.fitting import fit_model
from appraise.engine.grid import subject_at
from appraise.engine.modelspec import parse_model

MODEL = 'target = "price"\nfeatures = ["area"]'
ROLES = {
    "price": "price",
    "sale_id": "id",
    "sale_date": "date",
    "latitude": "lat",
    "longitude": "lon",
    "region": "hood",
}


@pytest.fixture(scope="module")
def fit():
    rng = np.random.default_rng(3)
    n = 30
    area = rng.uniform(1200, 2400, n)
    frame = pd.DataFrame(
        {
            "id": [f"S{i:02d}" for i in range(n)],
            "price": 40_000 + 150 * area + rng.normal(0, 8000, n),
            "area": area,
            "date": pd.Timestamp("2025-12-31") - pd.to_timedelta(np.arange(n) * 30, unit="D"),
            "lat": 44.0 + np.arange(n) * 0.01,
            "lon": np.full(n, -71.0),
            "hood": np.where(np.arange(n) % 2 == 0, "North", "South"),
        }
    )
    return fit_model(sales_from_frame(frame, ROLES), parse_model(MODEL))


def _subject(fit, area=1800.0):
    s = pd.DataFrame({"area": [area], "lat": [44.0], "lon": [-71.0], "hood": ["North"]})
    return subject_at(fit, s, "2025-12-31")


def test_similarity_measures(fit):
    t = candidates(fit, _subject(fit), "2025-12-31")
    assert t.loc[1, "distance_km"] == pytest.approx(0.01 * 2 * np.pi * 6371.0088 / 360, rel=1e-9)
    assert t.loc[0, "months"] == pytest.approx(0.0)
    assert t.loc[1, "months"] == pytest.approx(30 / (365.2425 / 12), rel=1e-9)
    assert list(t["same_region"][:4]) == [True, False, True, False]
    # gross share: |150-ish slope x area difference| / price for a one-term model
    b = fit.params[1]
    expect = np.abs(b * (1800.0 - fit.frame["area"].to_numpy())) / fit.price
    np.testing.assert_allclose(t["gross_pct"], expect, rtol=1e-9)


def test_default_selection_best_scores_and_warnings(fit):
    settings = SelectionSettings()
    t = candidates(fit, _subject(fit), "2025-12-31", settings)
    sel = select(t, settings)
    assert len(sel.rows) == 4
    best = t.sort_values("score", kind="stable")["pos"].tolist()[:4]
    assert list(sel.rows) == best


def test_filters_and_pins(fit):
    settings = SelectionSettings(max_km=5.0, max_months=6.0, same_region_only=True)
    t = candidates(fit, _subject(fit), "2025-12-31", settings)
    ok = t[t["eligible"]]
    assert (ok["distance_km"] <= 5).all() and (ok["months"].abs() <= 6).all()
    assert ok["same_region"].all()
    sel = select(t, settings)
    # S00, S02, S04: North, sold 0-4 months before, 0-4.4 km away (S06 is 6.7 km away)
    assert set(sel.sale_ids) == {"S00", "S02", "S04"}
    assert any("at least 3" in w for w in select(t, settings, chosen=["S00", "S02"]).warnings)
    pinned = select(t, settings, pinned=["S29"])
    assert pinned.sale_ids[0] == "S29" and len(pinned.rows) == 4
    assert any("more than 12 months" in w for w in pinned.warnings)
    few = select(t, SelectionSettings(count=2))
    assert any("at least 3" in w for w in few.warnings)
    with pytest.raises(SubjectError, match="not among the sales"):
        select(t, settings, pinned=["NOPE"])


def test_settings_round_trip():
    s = SelectionSettings(max_km=2.5, max_months=9, same_region_only=True, count=5)
    assert SelectionSettings.from_dict(s.to_dict()) == s


def test_workfile_round_trip_of_comparables_and_weights(tmp_path, fit):
    import dataclasses
    import json

    from appraise import pipeline
    from appraise.engine.comparables import ComparablesChoice
    from appraise.engine.settings import ImportSettings
    from appraise.engine.workfile import load_workfile, make_state, save_workfile

    choice = ComparablesChoice(
        effective_date="2025-12-31",
        filters=SelectionSettings(max_km=3.0, max_months=9.0, same_region_only=True, count=5),
        pinned=("S29",),
        chosen=("S29", "S00", "S02"),
        weights=(0.2, 0.5, 0.3),
        comments=(("S29", "older sale, kept for its floor plan"),),
        net_limit=0.12,
        gross_limit=0.3,
    )
    sales_file = tmp_path / "sales.csv"
    frame = fit.frame.drop(columns=["_row"])
    frame.to_csv(sales_file, index=False)
    sales = pipeline.load(sales_file, roles=None)
    sales = dataclasses.replace(sales, roles=fit.sales.roles)
    state = make_state(
        sales=sales,
        spec=fit.spec,
        subject={"area": 1800},
        import_settings=ImportSettings(),
        workfile_path=tmp_path / "w.appraise",
        comparables=choice.to_dict(),
    )
    path = tmp_path / "w.appraise"
    save_workfile(path, state)
    back = load_workfile(path)
    assert ComparablesChoice.from_dict(back.comparables) == choice
    # the grid rebuilt from the reopened choice is the same grid
    r1, _ = pipeline.grid(
        fit,
        {"area": 1800, "lat": 44.0, "lon": -71.0, "hood": "North"},
        effective_date=choice.effective_date,
        comps=choice.chosen,
        weights=choice.weights,
    )
    c2 = ComparablesChoice.from_dict(json.loads(path.read_text())["comparables"])
    r2, _ = pipeline.grid(
        fit,
        {"area": 1800, "lat": 44.0, "lon": -71.0, "hood": "North"},
        effective_date=c2.effective_date,
        comps=c2.chosen,
        weights=c2.weights,
    )
    assert r1.to_dict() == r2.to_dict()
    # an older workfile without the key still opens, with no choices
    doc = json.loads(path.read_text())
    del doc["comparables"]
    path.write_text(json.dumps(doc))
    assert load_workfile(path).comparables is None
    assert ComparablesChoice.from_dict(None) == ComparablesChoice()
