"""Plain JSON values from results: the one normaliser every ``to_dict`` and file writer uses.

Dicts, lists, str, int, float, bool and None come out; numpy scalars and arrays become
Python values, non-finite floats and pandas' missing markers None, and dates ISO text
(a date at midnight as ``YYYY-MM-DD``, otherwise the full timestamp).
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from .errors import AppraiseError


def iso_date(value: Any) -> str | None:
    """A date or timestamp as ISO text; a midnight timestamp as the date alone."""
    if value is None or value is pd.NaT:
        return None
    if isinstance(value, np.datetime64):
        if np.isnat(value):
            return None
        value = pd.Timestamp(value)
    if isinstance(value, pd.Timestamp):
        if pd.isna(value):
            return None
        return value.date().isoformat() if value == value.normalize() else value.isoformat()
    if isinstance(value, _dt.datetime):
        midnight = value.time() == _dt.time(0) and value.tzinfo is None
        return value.date().isoformat() if midnight else value.isoformat()
    return value.isoformat()


def to_jsonable(
    value: Any,
    *,
    where: str = "value",
    error: type[AppraiseError] | None = None,
    full_timestamps: bool = False,
) -> Any:
    """``value`` as plain JSON types (see the module docstring).

    A value of any other type becomes its text, or, when ``error`` is given, raises that
    error naming ``where`` (the key path): a workfile refuses what it cannot hold.
    ``full_timestamps`` writes every pandas timestamp in full (``2024-03-05T00:00:00``),
    as workfiles do.
    """
    kw = {"error": error, "full_timestamps": full_timestamps}
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, bool | str):
        return value
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        f = float(value)
        return f if math.isfinite(f) else None
    if full_timestamps and isinstance(value, pd.Timestamp):
        return None if pd.isna(value) else value.isoformat()
    if full_timestamps and isinstance(value, np.datetime64):
        return None if np.isnat(value) else pd.Timestamp(value).isoformat()
    if isinstance(value, pd.Timestamp | _dt.date | np.datetime64):
        return iso_date(value)
    if isinstance(value, Mapping):
        out = {}
        for k, v in value.items():
            if not isinstance(k, str):
                if error is not None:
                    raise error(f"cannot be saved: key {k!r} in {where} is not text")
                k = str(k)
            out[k] = to_jsonable(v, where=f"{where}.{k}", **kw)
        return out
    if isinstance(value, list | tuple | np.ndarray):
        items = value.tolist() if isinstance(value, np.ndarray) else value
        return [to_jsonable(v, where=f"{where}[{i}]", **kw) for i, v in enumerate(items)]
    if error is not None:
        raise error(
            f"cannot be saved: {where} is a {type(value).__name__}, which a workfile cannot hold"
        )
    return str(value)


__all__ = ["iso_date", "to_jsonable"]
