"""The in-app help (F1): feature syntax with examples, role names, a glossary of the figures.

The text lives in :mod:`appraise.report.help_text` (no Qt); this module only shows it,
in a window that stays open beside the workbench.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QHBoxLayout,
    QLineEdit,
    QListWidget,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from appraise.report.help_text import help_html, help_sections


class HelpView(QDialog):
    """A non-modal help window: a list of sections beside the text, with a search box."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("appraise help")
        self.setObjectName("helpView")
        self.setModal(False)
        self.sections = help_sections()
        self.contents = QListWidget()
        self.contents.setObjectName("helpContents")
        for section in self.sections:
            self.contents.addItem(section.title)
        self.contents.setMaximumWidth(200)
        self.contents.currentRowChanged.connect(self._jump)
        self.text = QTextBrowser()
        self.text.setObjectName("helpText")
        self.text.setOpenExternalLinks(False)
        self.text.setHtml(help_html(self.sections))
        self.search = QLineEdit()
        self.search.setPlaceholderText("Find in help (Enter for the next match)")
        self.search.setClearButtonEnabled(True)
        self.search.returnPressed.connect(self.find_next)

        body = QHBoxLayout()
        body.addWidget(self.contents)
        body.addWidget(self.text, 1)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(self.close)
        lay = QVBoxLayout(self)
        lay.addWidget(self.search)
        lay.addLayout(body, 1)
        lay.addWidget(buttons)
        self.resize(760, 560)

    def show_section(self, key: str) -> None:
        """Show the window at the section named ``key`` ('syntax', 'roles', 'glossary'...)."""
        for i, section in enumerate(self.sections):
            if section.key == key:
                self.contents.setCurrentRow(i)
                break
        self.show()
        self.raise_()
        self.activateWindow()

    def _jump(self, row: int) -> None:
        if 0 <= row < len(self.sections):
            self.text.scrollToAnchor(self.sections[row].key)

    def find_next(self) -> bool:
        """Select the next match of the search text (wrapping round); False when none."""
        needle = self.search.text().strip()
        if not needle:
            return False
        if self.text.find(needle):
            return True
        cursor = self.text.textCursor()
        cursor.movePosition(cursor.MoveOperation.Start)
        self.text.setTextCursor(cursor)
        return self.text.find(needle)

    def keyPressEvent(self, event) -> None:  # noqa: N802 (Qt's name)
        if event.key() == Qt.Key.Key_Escape:
            self.close()
            return
        super().keyPressEvent(event)
