"""One definition of the sale plots, drawn by the window and by the worksheet."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np
import pandas as pd
import pytest
from sales_factory import sales_from_frame

from appraise import pipeline
from appraise.report import plotdata
from appraise.report.plotdata import TITLES, region_groups, sale_plots, sale_points
from appraise.resources import SAMPLE_MODEL, SAMPLE_SALES, SAMPLE_SUBJECT, sample_dir


@pytest.fixture(scope="module")
def sample():
    folder = sample_dir()
    sales = pipeline.load(folder / SAMPLE_SALES)
    run = pipeline.analyse(
        sales, pipeline.read_model(folder / SAMPLE_MODEL), subject=folder / SAMPLE_SUBJECT
    )
    return run.fit, run.valuation


def test_window_and_worksheet_draw_the_same_plots(qapp, sample):
    from appraise.gui import plots as gui_plots
    from appraise.qtrender.figures import worksheet_figures

    fit, val = sample
    pts = sale_points(fit)
    defs = sale_plots(pts, fit, val)
    window = [
        gui_plots.price_area_figure(fit, val, points=pts),
        gui_plots.predicted_actual_figure(fit, val, points=pts),
        gui_plots.residual_figure(fit, val, points=pts),
        gui_plots.location_figure(fit, val, points=pts),
    ]
    for d, w in zip(defs, window, strict=True):
        assert w.kind == d.kind
        assert w.plot.titleLabel.text == d.title == TITLES[d.kind]
        assert w.plot.getAxis("bottom").labelText == d.x_axis.label
        assert w.plot.getAxis("left").labelText == d.y_axis.label
    printed = worksheet_figures(fit, val)
    assert [f.caption for f in printed] == [d.caption for d in defs]
    # the sample has coordinates: the map is in km to scale, with the subject and rings
    where = defs[3]
    assert where.equal_aspect and where.x_axis.label == "East (km)"
    assert where.subject is not None and where.subject.rings_km


def test_left_out_sales_are_predicted_through_the_one_path(sample):
    from appraise.engine.sales import Exclusion

    fit, _ = sample
    rows = [int(r) for r in fit.rows[:3]]
    refit = pipeline.fit(fit.sales, fit.spec, [Exclusion(r, None, "checked by hand") for r in rows])
    pts = sale_points(refit)
    out = np.flatnonzero(np.isin(pts.rows, rows))
    assert not pts.used[out].any() and np.isfinite(pts.fitted[out]).all()
    pred = refit.predict(refit.sales.frame.iloc[out])
    assert np.allclose(pts.fitted[out], pred.estimate, rtol=1e-12)


def test_many_regions_are_pooled_beyond_the_readable_number():
    region = np.array([f"R{i:02d}" for i in range(11) for _ in range(11 - i)], dtype=object)
    groups = region_groups(region)
    kept = sorted(set(groups))
    assert len(kept) == plotdata.MAX_REGION_COLOURS
    assert "other (5 regions)" in kept
    assert "R00" in kept and "R10" not in kept  # the largest keep their own colour


def test_large_tables_are_drawn_as_a_seeded_subsample(monkeypatch):
    monkeypatch.setattr(plotdata, "MAX_DRAWN", 50)
    rng = np.random.default_rng(1)
    frame = pd.DataFrame({"price": rng.uniform(1e5, 5e5, 400), "area": rng.uniform(800, 3000, 400)})
    pts = sale_points(sales=sales_from_frame(frame, {"price": "price", "living_area": "area"}))
    first, second = pts.drawn(), pts.drawn()
    assert len(first) == 50 and np.array_equal(first, second)
    d = plotdata.price_area_plot(pts)
    assert d.note == "50 of 400 sales drawn (a seeded random sample)"
