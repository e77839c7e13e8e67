"""The Neighbourhoods tab on the sample town: the analysis arrives from the pool thread
and the forest plot, the tables and the map show it. Numbers are checked against
``analyse_regions`` run directly (itself checked against statsmodels in
tests/engine/test_regions.py and tests/cli/test_regions_command.py)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from appraise.engine.regions import analyse_regions
from appraise.gui.regions_view import NO_REGIONS, RegionsView

WAIT_MS = 60_000


@pytest.fixture
def view(qtbot, session, sample_copy):
    v = RegionsView(session)
    qtbot.addWidget(v)
    v.show()
    session.load_with_companions(sample_copy)
    qtbot.waitUntil(
        lambda: (
            session.pending_tasks == 0
            and session.valuation is not None
            and v.analysis is not None
            and v.analysis.subject_region is not None
        ),
        timeout=WAIT_MS,
    )
    yield v
    v.runner.wait()


def test_effects_arrive_and_match_the_engine(view, session):
    ra = view.analysis
    ref = analyse_regions(session.fit, subject=session.valuation.subject)
    assert [e.level for e in ra.effects] == [e.level for e in ref.effects]
    for a, b in zip(ra.effects, ref.effects, strict=True):
        assert a.effect.value == pytest.approx(b.effect.value, rel=1e-12)
        assert a.effect.se == pytest.approx(b.effect.se, rel=1e-12)
    assert ra.subject_region == "Tanners Row"
    assert view.effects.rowCount() == 6
    first_column = [view.effects.item(r, 0).text() for r in range(6)]
    assert "Old Mill (reference)" in first_column
    assert "Tanners Row (subject)" in first_column
    assert view.pairs.rowCount() == 15  # C(6, 2)
    assert "F =" in view.summary.text()


def test_forest_plot_is_sorted_with_reference_and_subject_marked(view):
    ra = view.analysis
    rows = view.forest_rows(ra)
    xs = [r[1] for r in rows]
    assert xs == sorted(xs)
    # log response: the plot shows percentages e^b - 1
    top = ra.sorted_effects()[-1]
    assert xs[-1] == pytest.approx(100 * math.expm1(top.effect.value), rel=1e-12)
    labels = [r[0] for r in rows]
    ref_pos = labels.index("Old Mill (reference)")
    assert view.forest_points.data["symbol"][ref_pos] == "d"
    assert sum(1 for lab in labels if "(subject)" in lab) == 1
    for label, x, lo, hi in rows:
        assert lo <= x <= hi, label


def test_strata_and_map(view):
    ra = view.analysis
    # all sales, six regions, four price tiers
    assert view.strata.rowCount() == 1 + 6 + 4
    assert view.warnings.text().count("\n- ") == len(ra.warnings)
    assert "Holm" in view.pairs_note.text()
    east, north, effect = view.map_points(ra)
    assert len(east) == ra.n
    assert np.isfinite(effect).all()
    by_level = {e.level: e.effect.value for e in ra.effects}
    assert set(np.round(effect, 12)) == set(np.round(list(by_level.values()), 12))
    assert sum(len(item.data) for item in view.map_sales) == ra.n
    assert len(view.map_sales) == len(by_level)  # one colour, one scatter per region
    assert view.pages.count() == 6
    # price per unit of living area in each region, as the engine computes it
    assert view.area_prices.rowCount() == 6
    assert "$" in view.area_prices.item(0, 4).text()


def test_a_model_without_regions_says_so(qtbot, view, session):
    spec = session.spec
    from dataclasses import replace

    plain = replace(spec, features=tuple(f for f in spec.features if "region" not in f))
    session.set_model(plain)
    qtbot.waitUntil(lambda: view.summary.text() == NO_REGIONS, timeout=WAIT_MS)
    assert view.analysis is None


def test_the_map_draws_a_seeded_subsample_beyond_its_limit(view, monkeypatch):
    from appraise.gui import regions_view

    ra = view.analysis
    monkeypatch.setattr(regions_view, "MAP_MAX_DRAWN", 100)
    view._draw_map(ra)
    assert sum(len(item.data) for item in view.map_sales) == 100
    assert (
        f"100 of {ra.n:,} sales drawn (a seeded random sample)"
        in view.map.getPlotItem().titleLabel.text
    )


def test_a_map_of_many_regions_labels_the_largest_and_the_subjects(view, monkeypatch):
    from appraise.gui import regions_view

    ra = view.analysis
    monkeypatch.setattr(regions_view, "MAP_MAX_LABELS", 2)
    chosen = regions_view.labelled_centroids(ra)
    biggest = sorted(ra.centroids, key=lambda c: (-c.count, c.level))[:2]
    want = {c.level for c in biggest} | ({ra.subject_region} if ra.subject_region else set())
    assert {c.level for c in chosen} == want
    view._draw_map(ra)
    title = view.map.getPlotItem().titleLabel.text
    assert f"the centres of the {len(chosen)} regions with the most sales (of 6)" in title


def test_sparse_ticks_name_every_kth_region_and_the_marked_ones(monkeypatch):
    from appraise.gui import regions_view

    monkeypatch.setattr(regions_view, "MAX_TICK_LABELS", 10)
    labels = [f"T{i:03d}" for i in range(95)]
    labels[37] += " (subject)"
    labels[50] += " (reference)"
    ticks = regions_view.sparse_ticks(labels)
    named = [int(pos) for pos, _ in ticks]
    assert named == sorted({*range(0, 95, 10), 37, 50})
    assert all(labels[int(pos)] == text for pos, text in ticks)
    assert regions_view.sparse_ticks(labels[:10]) == [
        (float(i), t) for i, t in enumerate(labels[:10])
    ]
