"""The diagnostics section of the worksheet, read from ``Diagnostics.to_dict()``.

Reads the plain dictionary, not the engine's classes, so the worksheet keeps
working as diagnostics grow: scalars become label/value facts, lists of records
become tables, nested mappings become sub-headed groups.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from .content import Block, Facts, Paragraph, Table
from .numbers import plain


def diagnostics_blocks(diagnostics: Any) -> tuple[Block, ...]:
    """Blocks describing ``diagnostics`` (anything with ``to_dict()`` or a mapping)."""
    data = diagnostics.to_dict() if hasattr(diagnostics, "to_dict") else diagnostics
    if not isinstance(data, Mapping) or not data:
        return (Paragraph("No diagnostics were computed."),)
    return tuple(_blocks(data, title="", key="diagnostics"))


def _label(key: str) -> str:
    return str(key).replace("_", " ").strip().capitalize()


def _blocks(data: Mapping, *, title: str, key: str) -> list[Block]:
    scalars = []
    nested: list[Block] = []
    for k, v in data.items():
        if isinstance(v, Mapping):
            nested.extend(_blocks(v, title=_label(k), key=f"{key}-{k}"))
        elif _is_records(v):
            nested.append(_records_table(v, title=_label(k), key=f"{key}-{k}"))
        elif isinstance(v, Sequence) and not isinstance(v, str):
            scalars.append((_label(k), ", ".join(plain(x) for x in v) if v else "none"))
        else:
            scalars.append((_label(k), plain(v)))
    out: list[Block] = []
    if scalars:
        out.append(Facts(tuple(scalars), title))
    elif title and nested:
        out.append(Facts((), title))
    out.extend(nested)
    return out


def _is_records(v: Any) -> bool:
    return (
        isinstance(v, Sequence)
        and not isinstance(v, str)
        and len(v) > 0
        and all(isinstance(r, Mapping) for r in v)
    )


def _records_table(records: Sequence[Mapping], *, title: str, key: str) -> Table:
    columns: list[str] = []
    for r in records:
        for c in r:
            if c not in columns:
                columns.append(c)
    rows = tuple(tuple(_cell_text(r.get(c)) for c in columns) for r in records)
    values = tuple(tuple(_cell_value(r.get(c)) for c in columns) for r in records)
    return Table(
        key=key,
        title=title,
        columns=tuple(_label(c) for c in columns),
        rows=rows,
        values=values,
    )


def _cell_text(v: Any) -> str:
    if isinstance(v, Mapping | list | tuple):
        return (
            ", ".join(f"{k}: {plain(x)}" for k, x in v.items())
            if isinstance(v, Mapping)
            else ", ".join(plain(x) for x in v)
        )
    return plain(v)


def _cell_value(v: Any):
    if v is None or isinstance(v, bool | int | float | str):
        return v
    return _cell_text(v)
