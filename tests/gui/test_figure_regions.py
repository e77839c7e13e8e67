"""Worksheet figures colour the sales by region exactly as the app's plots do."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

from appraise.engine.fitting import fit_model  # noqa: E402
from appraise.engine.importing import load_sales  # noqa: E402
from appraise.engine.modelspec import load_model  # noqa: E402
from appraise.gui.plot_items import region_styles  # noqa: E402
from appraise.qtrender.figures import region_series  # noqa: E402
from appraise.qtrender.palette import rgba  # noqa: E402
from appraise.report.plotdata import sale_points  # noqa: E402

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"


def test_one_series_per_region_with_the_apps_colours():
    fit = fit_model(
        load_sales(SAMPLE / "ashcombe_sales.csv"), load_model(SAMPLE / "ashcombe_model.toml")
    )
    region = fit.sales.roles.column("region")
    pts = sale_points(fit)
    used = pts.used.copy()
    # x holds each sale's position in the fit's frame, so a series can be traced back
    at = np.full(len(pts), -1.0)
    at[np.flatnonzero(used)] = np.arange(used.sum())
    series = region_series(pts, at, at, used)
    levels = sorted(fit.frame[region].unique())
    assert [s.label for s in series] == levels  # sample_data/README.md: six neighbourhoods
    assert sum(len(s.x) for s in series) == fit.n
    app = region_styles(levels)
    for s in series:
        assert s.colour[:3] == rgba(app[s.label].colour)[:3]
        assert s.symbol == app[s.label].symbol
        assert set(fit.frame.loc[s.x.astype(int), region]) == {s.label}
