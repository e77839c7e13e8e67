"""The desktop app's preferences: one table of defaults, stored with QSettings.

The store is passed in (a ``QSettings``), so a test or a second profile can use its
own file; nothing here reads a global.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import replace
from types import MappingProxyType
from typing import Any

from PySide6.QtCore import QByteArray, QObject, QSettings, Signal

from appraise.engine.settings import ImportSettings

DEFAULTS: Mapping[str, Any] = MappingProxyType(
    {
        "currency_symbol": "$",
        "area_unit": "ft2",  # "ft2" | "m2"
        "date_order": "ISO",  # "ISO" | "DMY" | "MDY"
        "decimal": ".",  # "." | ","
        "embed_sales": True,  # keep a copy of the sales file inside saved workfiles
    }
)
"""Every preference and its default; the settings dialog shows exactly these."""

CHOICES: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {"area_unit": ("ft2", "m2"), "date_order": ("ISO", "DMY", "MDY"), "decimal": (".", ",")}
)
AREA_LABELS: Mapping[str, str] = MappingProxyType({"ft2": "ft²", "m2": "m²"})

MAX_RECENT = 8
_GEOMETRY_KEY = "window/geometry"
_RECENT_KEY = "recent_files"


class Preferences(QObject):
    """Typed access to the stored preferences, falling back to :data:`DEFAULTS`.

    A stored value of the wrong kind or outside :data:`CHOICES` reads as the default.
    ``changed`` is emitted after :meth:`update` stores anything new.
    """

    changed = Signal()
    recentChanged = Signal()

    def __init__(self, store: QSettings, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self._store = store

    def get(self, key: str) -> Any:
        default = DEFAULTS[key]
        raw = self._store.value(key, None)
        if raw is None:
            return default
        if isinstance(default, bool):  # INI files give booleans back as text
            value: Any = raw if isinstance(raw, bool) else str(raw).lower() in ("true", "1")
        else:
            value = str(raw)
        if key in CHOICES and value not in CHOICES[key]:
            return default
        return value

    def values(self) -> dict[str, Any]:
        return {k: self.get(k) for k in DEFAULTS}

    def update(self, values: Mapping[str, Any]) -> None:
        unknown = set(values) - set(DEFAULTS)
        if unknown:
            raise KeyError(f"unknown preference(s): {', '.join(sorted(unknown))}")
        if all(self.get(k) == v for k, v in values.items()):
            return
        for k, v in values.items():
            self._store.setValue(k, v)
        self._store.sync()
        self.changed.emit()

    def import_settings(self, base: ImportSettings | None = None) -> ImportSettings:
        """``base`` with the preferences that govern reading a sales file applied."""
        return replace(
            base or ImportSettings(),
            currency_symbol=self.get("currency_symbol"),
            area_unit=self.get("area_unit"),
            date_order=self.get("date_order"),
            decimal=self.get("decimal"),
        )

    # --- recent files --------------------------------------------------------------
    def recent_files(self) -> list[str]:
        raw = self._store.value(_RECENT_KEY, "[]")
        try:
            items = json.loads(str(raw))
        except json.JSONDecodeError:
            return []
        if not isinstance(items, list):
            return []
        return [p for p in items if isinstance(p, str)][:MAX_RECENT]

    def window_geometry(self) -> QByteArray | None:
        """The main window's saved size and place (Qt's own encoding), or None."""
        raw = self._store.value(_GEOMETRY_KEY, None)
        return raw if isinstance(raw, QByteArray) and not raw.isEmpty() else None

    def save_window_geometry(self, geometry: QByteArray) -> None:
        self._store.setValue(_GEOMETRY_KEY, geometry)
        self._store.sync()

    def add_recent(self, path: str) -> None:
        items = [path] + [p for p in self.recent_files() if p != path]
        self._store.setValue(_RECENT_KEY, json.dumps(items[:MAX_RECENT]))
        self._store.sync()
        self.recentChanged.emit()

    def clear_recent(self) -> None:
        self._store.setValue(_RECENT_KEY, "[]")
        self._store.sync()
        self.recentChanged.emit()
