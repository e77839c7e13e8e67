"""The window fits a 1366 x 768 laptop, and no tab squeezes the side panels."""

from __future__ import annotations

from conftest import open_and_wait

from appraise.gui.main_window import DOCK_MIN_WIDTH, PREFERRED_SIZE, MainWindow
from appraise.gui.session import Session


def test_window_is_no_larger_than_the_screen(qtbot, prefs):
    w = MainWindow(Session(), prefs)
    qtbot.addWidget(w)
    avail = w.screen().availableGeometry()
    assert w.width() <= min(PREFERRED_SIZE[0], avail.width())
    assert w.height() <= min(PREFERRED_SIZE[1], avail.height())
    w.session.shutdown()


def test_side_panels_keep_their_width_on_every_tab_at_1366_by_768(qtbot, window, sample_copy):
    window.resize(1366, 768)
    open_and_wait(qtbot, window, sample_copy, companions=True)
    for i in range(window.centre_tabs.count()):
        window.centre_tabs.setCurrentIndex(i)
        qtbot.wait(50)
        assert window.width() <= 1366, window.centre_tabs.tabText(i)
        assert window.data_tabs.width() >= DOCK_MIN_WIDTH["data"]
        assert window.subject_view.width() >= DOCK_MIN_WIDTH["subject"]


def test_size_and_place_are_remembered(qtbot, prefs):
    first = MainWindow(Session(), prefs)
    qtbot.addWidget(first)
    first.show()
    # the off-screen test screen is 800 x 800: a height differing from the default
    # (the screen's available height less the frame) shows the saved size is used; the
    # width is clamped by Qt to the screen and the window's minimum, so it is not checked
    default_height = first.height()
    first.resize(1300, 600)
    qtbot.wait(20)
    assert first.height() == 600 != default_height
    first.close()
    assert prefs.window_geometry() is not None
    again = MainWindow(Session(), prefs)
    qtbot.addWidget(again)
    assert again.height() == 600
    for w in (first, again):
        w.session.shutdown()
