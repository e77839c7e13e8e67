"""The checks plots beyond the drawn-sales limit: a seeded subsample of the plain sales,
every flagged sale, and a title that says so; the flagged table formats rows when asked.

The limit is lowered to 100 so that the sample's 598 checked sales count as many (a
county's million would take the engine, not the plot, most of the test's time).
"""

from __future__ import annotations

import numpy as np

import appraise.gui.diagnostics_plots as diagnostics_plots
import appraise.report.plotdata as plotdata
from appraise.gui.diagnostics_plots import influence_figure, ratio_figure
from appraise.gui.diagnostics_tables import LazyRows, TextTableModel, flagged_cells


def _drawn(sp) -> dict[str, np.ndarray]:
    return {s.name(): np.asarray(s.data["data"], dtype=np.int64) for s in sp.scatters}


def test_checks_plots_draw_a_seeded_subsample_and_every_flag(qtbot, sample_analysis, monkeypatch):
    d = sample_analysis[0].diagnostics
    flagged_rows = {f.row for f in d.flags}
    assert 0 < len(flagged_rows) < 100 < d.n
    whole = influence_figure(d)
    assert sum(len(v) for v in _drawn(whole).values()) > 100  # below the limit: every sale

    monkeypatch.setattr(plotdata, "MAX_DRAWN", 100)
    monkeypatch.setattr(diagnostics_plots, "MAX_DRAWN", 100)
    for figure in (influence_figure, ratio_figure):
        sp = figure(d)
        drawn = _drawn(sp)
        every = np.concatenate(list(drawn.values()))
        plain = next(v for k, v in drawn.items() if k.startswith("Sales"))
        flags = next(v for k, v in drawn.items() if k.startswith("Flagged"))
        assert set(flags.tolist()) == flagged_rows  # every flagged sale is drawn
        assert len(plain) <= 100 and len(every) <= 100 + len(flagged_rows)
        assert f"of {d.n:,} sales drawn, a seeded random sample" in sp.plot.titleLabel.text
        assert f"Flagged ({len(flagged_rows)})" in drawn  # counts are of all sales
        again = _drawn(figure(d))  # seeded: the same sales on every redraw
        assert all(np.array_equal(again[k], v) for k, v in drawn.items())
        # the ring still finds a sale that is not drawn
        hidden = next(int(r) for r in d.rows if int(r) not in set(every.tolist()))
        assert sp.position(hidden) is not None


def test_flagged_rows_are_made_when_asked(sample_analysis):
    d = sample_analysis[0].diagnostics
    made: list[int] = []
    expected = flagged_cells(d)

    def make(k: int):
        made.append(k)
        return expected[k]

    model = TextTableModel(("Row", "Sale", "Why"))
    model.set_rows(LazyRows(len(expected), make))
    assert model.rowCount() == len(expected) and made == []
    last = len(expected) - 1
    assert model.data(model.index(last, 1)) == expected[last][1]
    assert model.data(model.index(last, 2)) == expected[last][2]
    assert made == [last]  # made once, then kept


def test_sale_plots_of_a_large_file_collect_their_points_on_the_pool(
    qtbot, session, sample_copy, monkeypatch
):
    from conftest import WAIT_MS

    import appraise.gui.plots as plots

    monkeypatch.setattr(plotdata, "MAX_DRAWN", 100)  # the sample's 600 sales count as many
    monkeypatch.setattr(plots, "MAX_DRAWN", 100)
    view = plots.PlotsView(session)
    qtbot.addWidget(view)
    view.show()
    with qtbot.waitSignals([session.fitFinished, session.valuationChanged], timeout=WAIT_MS):
        session.load_with_companions(sample_copy)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)
    view._drawn_for = ()  # forget what was drawn: the current inputs are collected afresh...
    view.redraw()
    assert view.collecting  # ...on the pool thread: redraw() returned before the points
    qtbot.waitUntil(lambda: not view.collecting and len(view.figures) == 4, timeout=WAIT_MS)
    price_area = view.figures[0]
    drawn = {int(r) for sc in price_area.scatters for r in sc.data["data"]}
    assert 0 < len(drawn) <= 100
    assert "100 of 600 sales drawn (a seeded random sample)" in price_area.plot.titleLabel.text
    expected = plotdata.sale_points(session.fit, user_exclusions=session.user_exclusions)
    assert set(expected.rows[expected.drawn()].tolist()) >= drawn
    view.wait_for_points()


def test_shared_style_lookup_gives_pyqtgraphs_atlas_positions(qapp, monkeypatch):
    import pyqtgraph as pg

    from appraise.gui.plot_items import SaleScatter, sale_scatter

    rng = np.random.default_rng(8)
    x, y, rows = rng.normal(size=5_000), rng.normal(size=5_000), np.arange(5_000)
    styles = [
        dict(colour="#0072B2"),
        dict(colour="#D55E00", symbol="d"),
        dict(colour="#888888", hollow=True),
    ]
    fast = [sale_scatter(x, y, rows, tip=lambda **_k: "", **st) for st in styles]
    monkeypatch.setattr(SaleScatter, "UNIFORM_FROM", 10**9)  # pyqtgraph's own lookup
    slow = [sale_scatter(x, y, rows, tip=lambda **_k: "", **st) for st in styles]
    for a, b in zip(fast, slow, strict=True):
        assert np.array_equal(a.data["sourceRect"], b.data["sourceRect"])
        assert (a.data["sourceRect"]["w"] > 0).all()
        assert a._maxSpotPxWidth == b._maxSpotPxWidth
    # a point with a style of its own: pyqtgraph's lookup, as a plain scatter does it
    monkeypatch.setattr(SaleScatter, "UNIFORM_FROM", 64)
    brushes = [pg.mkBrush("#0072B2" if i % 2 else "#D55E00") for i in range(len(x))]
    own = SaleScatter(x=x, y=y, data=rows, brush=brushes, pen=None, size=7)
    plain = pg.ScatterPlotItem(x=x, y=y, data=rows, brush=brushes, pen=None, size=7)
    assert np.array_equal(own.data["sourceRect"], plain.data["sourceRect"])


def test_beyond_the_flag_limit_a_seeded_sample_of_flags_is_drawn(
    qapp, sample_analysis, monkeypatch
):
    d = sample_analysis[0].diagnostics
    monkeypatch.setattr(plotdata, "MAX_DRAWN", 100)
    monkeypatch.setattr(diagnostics_plots, "MAX_DRAWN", 100)
    monkeypatch.setattr(diagnostics_plots, "MAX_FLAGS_DRAWN", 3)
    sp = influence_figure(d)
    drawn = _drawn(sp)
    flags = next(v for k, v in drawn.items() if k.startswith("Flagged"))
    assert 3 <= len(flags) < len(d.flags)  # the 3 chosen, and any the plain sample caught
    assert f"{len(flags)} of the {len(d.flags)} flagged" in sp.plot.titleLabel.text
    assert np.array_equal(_drawn(influence_figure(d))["Flagged" + f" ({len(d.flags)})"], flags)


def test_positions_by_row_in_file_order_and_shuffled():
    # The file-order shortcut and the sorted search must find the same positions.
    from types import SimpleNamespace

    from appraise.gui.diagnostics_plots import positions_by_row

    rows = np.arange(2, 2_002) * 3
    shuffled = np.random.default_rng(1).permutation(rows)
    for held in (rows, shuffled):
        find = positions_by_row(SimpleNamespace(rows=held))
        assert [find(int(r)) for r in held[::97]] == list(range(0, len(held), 97))
        assert find(4) is None and find(int(rows[-1]) + 3) is None and find(1) is None
