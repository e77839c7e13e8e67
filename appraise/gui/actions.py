"""Every command of the main window, created in one place.

The actions know nothing of what they do; the main window connects their
``triggered`` signals. :meth:`Actions.update_actions` decides, from the session's
state, what is enabled; the one exception is "Clear recent files", which the window
enables when it rebuilds the recent-files menu.
"""

from __future__ import annotations

from PySide6.QtCore import QObject
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import QStyle, QWidget

from .session import Session


def _keys(standard: QKeySequence.StandardKey, fallback: str) -> list[QKeySequence]:
    """The platform's standard key, or ``fallback`` where the platform has none."""
    keys = QKeySequence.keyBindings(standard)
    return keys if keys else [QKeySequence(fallback)]


class Actions(QObject):
    """The named actions of the workbench (attributes named after what they do)."""

    def __init__(self, window: QWidget) -> None:
        super().__init__(window)
        style = window.style()
        sk = QKeySequence.StandardKey
        sp = QStyle.StandardPixmap

        def make(text: str, tip: str, keys=(), icon: QStyle.StandardPixmap | None = None):
            a = QAction(text, window)
            a.setStatusTip(tip)
            a.setToolTip(tip)
            if keys:
                a.setShortcuts(list(keys))
            if icon is not None:
                a.setIcon(style.standardIcon(icon))
            window.addAction(a)  # shortcuts work even while menus are hidden
            return a

        self.open = make(
            "&Open…",
            "Open a sales file or a saved workfile",
            _keys(sk.Open, "Ctrl+O"),
            sp.SP_DialogOpenButton,
        )
        self.open_sample = make(
            "Open &sample data", "Open the invented sample town's sales, model and subject"
        )
        self.save = make(
            "&Save",
            "Save the valuation as a workfile",
            _keys(sk.Save, "Ctrl+S"),
            sp.SP_DialogSaveButton,
        )
        self.save_as = make(
            "Save &As…", "Save the valuation under a new name", _keys(sk.SaveAs, "Ctrl+Shift+S")
        )
        self.print = make(
            "&Print worksheet…", "Print the valuation worksheet", _keys(sk.Print, "Ctrl+P")
        )
        self.clear_recent = make("&Clear list", "Forget the recently opened files")
        self.quit = make("&Quit", "Close appraise", _keys(sk.Quit, "Ctrl+Q"))

        self.exclude = make(
            "E&xclude sale…",
            "Leave the selected sale out of the model, with a reason",
            [QKeySequence("Ctrl+E")],
            sp.SP_DialogDiscardButton,
        )
        self.include = make(
            "&Use sale again",
            "Put the selected sale back into the model",
            [QKeySequence("Ctrl+Shift+E")],
        )
        self.find = make("&Find sales", "Filter the sales table", _keys(sk.Find, "Ctrl+F"))
        self.preferences = make(
            "Pr&eferences…",
            "Currency, area unit, date order",
            _keys(sk.Preferences, "Ctrl+,"),
        )
        self.refit = make(
            "&Refit now",
            "Fit the model again without waiting",
            _keys(sk.Refresh, "F5"),
            sp.SP_BrowserReload,
        )
        self.about = make("&About appraise", "Version and what the program is for")
        self.help = make(
            "&Help contents",
            "How to write features, the role names, what the figures mean",
            _keys(sk.HelpContents, "F1"),
        )
        self.caution = make(
            "What the &estimate is (and is not)",
            "Read the caution that goes with every value",
            icon=sp.SP_MessageBoxInformation,
        )

    def update_actions(self, session: Session) -> None:
        """Enable exactly what makes sense in the session's current state."""
        has_data = session.sales is not None
        has_model = has_data and session.spec is not None
        self.save.setEnabled(has_model)
        self.save_as.setEnabled(has_model)
        self.refit.setEnabled(has_model)
        self.print.setEnabled(session.valuation is not None)
        row = session.selection
        used = has_data and row is not None and session.sale_record(row) is not None
        why = session.exclusion_for(row) if used else None
        self.exclude.setEnabled(used and (why is None or why.source == "user"))
        self.include.setEnabled(used and session.can_include(row))
