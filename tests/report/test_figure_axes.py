"""Printed charts' tick labels are written out (pyqtgraph's own labels use %g, which
prints 1e+06 for a million)."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from appraise.qtrender.figures import plain_axis_class  # noqa: E402
from appraise.qtrender.qtapp import ensure_app  # noqa: E402


def test_tick_labels_never_use_scientific_notation():
    ensure_app()
    import pyqtgraph as pg

    stock = pg.AxisItem("bottom")
    stock.enableAutoSIPrefix(False)
    assert "e+06" in stock.tickStrings([1e6], 1.0, 1e6)[0]  # what the stock axis prints
    axis = plain_axis_class()(orientation="bottom")
    assert axis.tickStrings([1e6, 2.5e6], 1.0, 5e5) == ["1,000,000", "2,500,000"]
    assert axis.tickStrings([0.00001, 0.00002], 1.0, 0.00001) == ["0.00001", "0.00002"]
    assert axis.tickStrings([12500.0], 1.0, 500.0) == ["12,500"]
