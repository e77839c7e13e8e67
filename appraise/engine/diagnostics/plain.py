"""Turn results into plain JSON values (kept as a name for the diagnostics' modules)."""

from __future__ import annotations

from ..jsonable import to_jsonable


def plain(obj):
    """``obj`` with numpy scalars and arrays made plain and non-finite floats made None."""
    return to_jsonable(obj)
