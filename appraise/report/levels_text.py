"""Sales per level of each ``onehot`` term, as short lines for the window and the text.

One line per term: each level with its count, the reference marked, a thin level (fewer
sales than the model's ``min_level_sales``) marked, and what a pooled level holds.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class LevelLine:
    """One term's levels: ``text`` to show, and whether any level is thin."""

    term: str
    text: str
    thin: bool


def level_lines(fit: Any) -> list[LevelLine]:
    """The sales-per-level line of every ``onehot`` term of ``fit``."""
    minimum = int(getattr(fit.spec, "min_level_sales", 5))
    out = []
    terms = dict.fromkeys(c.term for c in fit.levels)
    for term in terms:
        parts, thin = [], False
        for c in (c for c in fit.levels if c.term == term):
            note = []
            if c.column is None:
                note.append("reference")
            if c.count == 1:
                note.append("one sale: not estimable")
            elif c.count < minimum:
                note.append(f"thin, under {minimum}")
            if c.pooled:
                note.append("pools " + ", ".join(c.pooled))
            thin = thin or c.count < minimum
            parts.append(f"{c.level} {c.count:,}" + (f" ({'; '.join(note)})" if note else ""))
        out.append(LevelLine(term, f"Sales per level of {term}: " + ", ".join(parts), thin))
    return out


__all__ = ["LevelLine", "level_lines"]
