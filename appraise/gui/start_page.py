"""The first screen: what to open, the files opened lately, and what to do next.

Shown in the centre of the window while no sales are loaded. It only asks; the window
does the opening (it connects the signals below to its own open commands).
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QFrame,
    QHBoxLayout,
    QLabel,
    QListWidget,
    QListWidgetItem,
    QPushButton,
    QVBoxLayout,
    QWidget,
)

from appraise.report.cautions import ONE_LINE_CAUTION

from .preferences import Preferences

NEXT_STEPS = (
    "1. Open a sales file (CSV, Excel or Parquet), check the column roles on the left, "
    "then add features in the Model tab; the model refits as you type.",
    "2. Fill in the subject on the right to see its value and interval, then read the "
    "Checks tab and print the worksheet.",
)
"""The two lines of "what to do next" on the start page."""


class StartPage(QWidget):
    """Buttons to open sales, a workfile or the sample, and the list of recent files.

    Signals
    -------
    openSalesRequested(), openWorkfileRequested(), sampleRequested()
    recentRequested(str)
        The path of a recent file the user chose.
    """

    openSalesRequested = Signal()
    openWorkfileRequested = Signal()
    sampleRequested = Signal()
    recentRequested = Signal(str)

    def __init__(self, prefs: Preferences, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("startPage")
        self._prefs = prefs

        title = QLabel("<h1>appraise</h1>")
        subtitle = QLabel(
            "Value a property from comparable sales with a hedonic regression "
            "model you can read and check."
        )
        subtitle.setWordWrap(True)

        self.open_sales_button = QPushButton("Open a &sales file…")
        self.open_sales_button.setObjectName("startOpenSales")
        self.open_sales_button.clicked.connect(self.openSalesRequested)
        self.open_workfile_button = QPushButton("Open a &workfile…")
        self.open_workfile_button.setObjectName("startOpenWorkfile")
        self.open_workfile_button.clicked.connect(self.openWorkfileRequested)
        self.sample_button = QPushButton("Try the sample &town (Ashcombe Vale)")
        self.sample_button.setObjectName("startSample")
        self.sample_button.setToolTip("An invented town's 600 sales with a model and a subject")
        self.sample_button.clicked.connect(self.sampleRequested)
        buttons = QVBoxLayout()
        for b in (self.open_sales_button, self.open_workfile_button, self.sample_button):
            b.setMinimumHeight(34)
            buttons.addWidget(b)
        buttons.addStretch(1)

        self.recent = QListWidget()
        self.recent.setObjectName("startRecent")
        self.recent.itemActivated.connect(self._recent_chosen)
        self.recent_empty = QLabel("No files opened yet.")
        self.recent_empty.setStyleSheet("color: #555555;")
        recent_box = QVBoxLayout()
        recent_box.addWidget(QLabel("<b>Recent files</b> (double-click to open)"))
        recent_box.addWidget(self.recent, 1)
        recent_box.addWidget(self.recent_empty)

        columns = QHBoxLayout()
        columns.addLayout(buttons, 1)
        columns.addSpacing(24)
        columns.addLayout(recent_box, 2)

        self.next_steps = QLabel("<b>What to do next</b><br>" + "<br>".join(NEXT_STEPS))
        self.next_steps.setObjectName("startNextSteps")
        self.next_steps.setWordWrap(True)
        self.next_steps.setTextFormat(Qt.TextFormat.RichText)
        rule = QFrame()
        rule.setFrameShape(QFrame.Shape.HLine)
        caution = QLabel(ONE_LINE_CAUTION)
        caution.setWordWrap(True)
        caution.setStyleSheet("color: #555555;")

        inner = QVBoxLayout()
        inner.addWidget(title)
        inner.addWidget(subtitle)
        inner.addSpacing(12)
        inner.addLayout(columns, 1)
        inner.addSpacing(12)
        inner.addWidget(self.next_steps)
        inner.addWidget(rule)
        inner.addWidget(caution)
        box = QWidget()
        box.setLayout(inner)
        box.setMaximumWidth(820)
        outer = QHBoxLayout(self)
        outer.addStretch(1)
        outer.addWidget(box, 10)
        outer.addStretch(1)

        prefs.recentChanged.connect(self.fill_recent)
        self.fill_recent()

    def fill_recent(self) -> None:
        """List the recent files, newest first; a file that has gone is shown as missing."""
        self.recent.clear()
        for path in self._prefs.recent_files():
            p = Path(path)
            missing = not p.is_file()
            item = QListWidgetItem(f"{p.name}    {p.parent}" + ("   (missing)" if missing else ""))
            item.setData(Qt.ItemDataRole.UserRole, path)
            item.setToolTip(path)
            if missing:
                item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEnabled)
            self.recent.addItem(item)
        has = self.recent.count() > 0
        self.recent.setVisible(has)
        self.recent_empty.setVisible(not has)

    def _recent_chosen(self, item: QListWidgetItem) -> None:
        path = item.data(Qt.ItemDataRole.UserRole)
        if path:
            self.recentRequested.emit(str(path))
