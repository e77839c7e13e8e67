"""Preferences dialog: currency symbol, area unit, date order, decimal mark, embedding.

Shows exactly the preferences of :data:`appraise.gui.preferences.DEFAULTS`; OK stores
them (they persist through QSettings) and the main window applies them.
"""

from __future__ import annotations

from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QFormLayout,
    QLabel,
    QLineEdit,
    QWidget,
)

from .preferences import AREA_LABELS, CHOICES, DEFAULTS, Preferences

CHOICE_LABELS = {
    "area_unit": {
        k: f"{v} ({'square feet' if k == 'ft2' else 'square metres'})"
        for k, v in AREA_LABELS.items()
    },
    "date_order": {
        "ISO": "Year first only (2024-03-04); refuse ambiguous dates",
        "DMY": "Day/month/year (04/03/2024 is 4 March)",
        "MDY": "Month/day/year (03/04/2024 is 4 March)",
    },
    "decimal": {".": "Point (412,500.00)", ",": "Comma (412.500,00)"},
}
FIELD_LABELS = {
    "currency_symbol": "&Currency symbol",
    "area_unit": "&Area unit of the files",
    "date_order": "&Dates in the files",
    "decimal": "Decimal &mark",
    "embed_sales": "&Keep a copy of the sales file inside saved workfiles",
}


class SettingsDialog(QDialog):
    """Edit the preferences; :meth:`accept` stores them."""

    def __init__(self, prefs: Preferences, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Preferences")
        self._prefs = prefs
        self.editors: dict[str, QWidget] = {}
        form = QFormLayout(self)
        current = prefs.values()
        for key, default in DEFAULTS.items():
            if key in CHOICES:
                w = QComboBox()
                for value in CHOICES[key]:
                    w.addItem(CHOICE_LABELS[key][value], value)
                w.setCurrentIndex(max(0, w.findData(current[key])))
            elif isinstance(default, bool):
                w = QCheckBox()
                w.setChecked(bool(current[key]))
            else:
                w = QLineEdit(str(current[key]))
                w.setMaxLength(4)
            w.setObjectName(f"pref_{key}")
            self.editors[key] = w
            form.addRow(FIELD_LABELS[key], w)
        note = QLabel(
            "Changes to how files are read apply to the loaded sales at once (they are read again)."
        )
        note.setWordWrap(True)
        form.addRow(note)
        buttons = QDialogButtonBox(
            QDialogButtonBox.StandardButton.Ok
            | QDialogButtonBox.StandardButton.Cancel
            | QDialogButtonBox.StandardButton.RestoreDefaults
        )
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        buttons.button(QDialogButtonBox.StandardButton.RestoreDefaults).clicked.connect(
            self.restore_defaults
        )
        form.addRow(buttons)

    def values(self) -> dict:
        out = {}
        for key, w in self.editors.items():
            if isinstance(w, QComboBox):
                out[key] = w.currentData()
            elif isinstance(w, QCheckBox):
                out[key] = w.isChecked()
            else:
                out[key] = w.text().strip() or DEFAULTS[key]
        return out

    def restore_defaults(self) -> None:
        for key, w in self.editors.items():
            if isinstance(w, QComboBox):
                w.setCurrentIndex(max(0, w.findData(DEFAULTS[key])))
            elif isinstance(w, QCheckBox):
                w.setChecked(bool(DEFAULTS[key]))
            else:
                w.setText(str(DEFAULTS[key]))

    def accept(self) -> None:
        self._prefs.update(self.values())
        super().accept()
