"""Turn results into plain JSON values: Python floats and ints, NaN and infinities as None."""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np


def plain(obj):
    """``obj`` with numpy scalars and arrays made plain and non-finite floats made None."""
    if isinstance(obj, bool | np.bool_):
        return bool(obj)
    if isinstance(obj, int | np.integer):
        return int(obj)
    if isinstance(obj, float | np.floating):
        return float(obj) if math.isfinite(obj) else None
    if isinstance(obj, np.ndarray):
        return plain(obj.tolist())
    if isinstance(obj, Mapping):
        return {str(k): plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [plain(v) for v in obj]
    return obj
