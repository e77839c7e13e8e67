"""Sales per level of every ``onehot`` term, and the warnings a thin level deserves.

A level held by few sales gets a coefficient that rests on those sales alone; a level
held by one sale has leverage 1 there: its coefficient only reproduces that sale's price,
its residual is zero whatever the price, and nothing about it can be checked by leaving it
out. Such a coefficient is reported as not estimable, and a subject in a thin level is
warned before its value is read.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

if TYPE_CHECKING:  # pragma: no cover
    from .design import DesignSpec

from .modelspec import DEFAULT_MIN_LEVEL_SALES

MIN_LEVEL_SALES = DEFAULT_MIN_LEVEL_SALES
"""Fewer sales than this in a level is thin (common practice; a setting of the model file,
``min_level_sales``)."""


@dataclass(frozen=True)
class LevelCount:
    """The used sales in one level of a ``onehot`` term (``column`` None for the reference)."""

    term: str
    level: str
    count: int
    column: str | None
    pooled: tuple[str, ...] = ()
    """For the level ``onehot(..., min_count=k)`` pooled: the original levels in it."""

    def to_dict(self) -> dict:
        out = {"term": self.term, "level": self.level, "count": self.count, "column": self.column}
        if self.pooled:
            out["pooled_levels"] = list(self.pooled)
        return out


def level_counts(design: DesignSpec, X: np.ndarray) -> tuple[LevelCount, ...]:
    """Sales per level from the fitted design matrix: an indicator column's sum, and for
    the reference level the sales with none of the term's indicators set."""
    names = list(design.names)
    out = []
    for g in design.groups:
        if g.kind != "onehot":
            continue
        cols = [names.index(c) for c in g.columns]
        block = X[:, cols] if cols else np.zeros((len(X), 0))
        sums = block.sum(axis=0)
        by_column = dict(zip(g.columns, sums, strict=True))
        for level in g.levels:
            pooled = tuple(g.pooled) if level == g.pool_label else ()
            if level == g.reference:
                n_ref = int(round(len(X) - block.sum()))
                out.append(LevelCount(g.expression, level, n_ref, None, pooled))
            else:
                col = next(c for c in g.columns if c.endswith(f"[{level}]"))
                out.append(LevelCount(g.expression, level, int(round(by_column[col])), col, pooled))
    return tuple(out)


def thin_level_warnings(counts: tuple[LevelCount, ...], minimum: int) -> list[str]:
    """One warning per level with fewer than ``minimum`` sales, naming term, level, count."""
    out = []
    for c in counts:
        if c.count == 1:
            out.append(
                f"{c.term}: level '{c.level}' is held by one sale: its coefficient only "
                "reproduces that sale and is not estimable; pool the level (onehot(..., "
                f"min_count={max(minimum, 2)})) or drop the sale before relying on a value in it"
            )
        elif c.count < minimum:
            out.append(
                f"{c.term}: level '{c.level}' has only {c.count} sales (fewer than {minimum}): "
                "its effect rests on those sales alone"
            )
    return out


def single_sale_columns(counts: tuple[LevelCount, ...]) -> set[str]:
    """Design columns of levels held by one sale (their coefficients are not estimable)."""
    return {c.column for c in counts if c.count == 1 and c.column is not None}


def subject_level_warnings(
    design: DesignSpec, counts: tuple[LevelCount, ...], subject: pd.DataFrame, minimum: int
) -> list[str]:
    """The thin-level warnings that concern the subject's own levels."""
    built = design.build(subject)
    if not built.row_ok[0]:
        return []
    x0 = dict(zip(design.names, built.matrix[0], strict=True))
    out = []
    for g in design.groups:
        if g.kind != "onehot":
            continue
        on = [c for c in g.columns if x0.get(c) == 1.0]
        level = g.reference if not on else on[0][on[0].rindex("[") + 1 : -1]
        if g.pool_label is not None and level == g.pool_label:
            col = g.inputs[0] if len(g.inputs) == 1 else None
            raw = None if col is None or col not in subject.columns else subject[col].iloc[0]
            out.append(
                (f"the subject's level '{raw}'" if raw is not None else "the subject's level")
                + f" of {g.expression} has fewer sales than the pooling minimum and is valued "
                f"as '{g.pool_label}' ({', '.join(g.pooled)} together)"
            )
        for c in counts:
            if c.term == g.expression and c.level == level and c.count < minimum:
                out.append(
                    f"the subject's level '{level}' of {g.expression} is held by only "
                    f"{c.count} sale{'s' if c.count != 1 else ''}: the value rests on "
                    + ("that one sale" if c.count == 1 else "those sales")
                )
    return out


__all__ = [
    "MIN_LEVEL_SALES",
    "LevelCount",
    "level_counts",
    "single_sale_columns",
    "subject_level_warnings",
    "thin_level_warnings",
]
