"""The sales-comparison section of the worksheet: grid, index, reconciliation, flags.

Reads the plain dictionary of ``Grid.to_dict()`` (the JSON contract of ``appraise grid``).
The index figure itself is drawn by ``qtrender/grid_figures.py`` and passed in as a
:class:`Figure`.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from .content import Block, Facts, Figure, Notice, Paragraph, Table
from .labels import group_label
from .numbers import MISSING, fixed, money, percent


def _date(v: Any) -> str:
    return MISSING if v is None else str(v)


def grid_blocks(
    grid: Any, currency: str = "$", figures: Sequence[Figure] = ()
) -> tuple[Block, ...]:
    """Blocks of the sales-comparison section for ``grid`` (a Grid or its dict)."""
    d = grid.to_dict() if hasattr(grid, "to_dict") else dict(grid)
    comps = d["comparables"]
    blocks: list[Block] = [
        Facts(
            (
                ("Effective date of value", _date(d["effective_date"])),
                ("Comparables", str(len(comps))),
                ("How adjustments combine", d["order_note"]),
            ),
            "The comparison in brief",
        )
    ]
    head = ("Line", *[str(c["sale_id"]) for c in comps])
    rows: list[tuple[str, ...]] = [
        ("Sale price", *[money(c["sale_price"], currency) for c in comps]),
        ("Sale date", *[_date(c["sale_date"]) for c in comps]),
        (
            "Distance (km)",
            *[fixed(c["similarity"]["distance_km"], 2) for c in comps],
        ),
    ]
    for k, group in enumerate(d["adjustment_order"]):
        mc = comps[0]["adjustments"][k]["market_conditions"]
        label = f"Market conditions ({group_label(group)})" if mc else group_label(group)
        rows.append(
            (
                label,
                *[
                    f"{money(c['adjustments'][k]['amount'], currency)} "
                    f"(SE {money(c['adjustments'][k]['se'], currency)})"
                    for c in comps
                ],
            )
        )
    rows += [
        (
            "Net adjustment",
            *[
                f"{money(c['net']['amount'], currency)} ({percent(c['net']['pct'], 1)})"
                for c in comps
            ],
        ),
        (
            "Gross adjustment",
            *[
                f"{money(c['gross']['amount'], currency)} ({percent(c['gross']['pct'], 1)})"
                for c in comps
            ],
        ),
        (
            "Adjusted price (SE)",
            *[
                f"{money(c['adjusted_price']['amount'], currency)} "
                f"({money(c['adjusted_price']['se'], currency)})"
                for c in comps
            ],
        ),
        ("Weight", *[percent(c["weight"], 1) for c in comps]),
    ]
    blocks.append(
        Table(
            key="adjustment_grid",
            title="Adjustment grid",
            columns=head,
            rows=tuple(rows),
            align=("l", *["r"] * len(comps)),
            note="Each adjustment is the model's difference between the subject (at the "
            "effective date) and the comparable for that group of terms; SE from the "
            "coefficient covariance.",
        )
    )
    m = d["market_conditions"]
    if not m["has_time_term"]:
        blocks.append(
            Paragraph("The model has no time term: no market-conditions adjustment is applied.")
        )
    blocks.extend(figures)
    rec = d["reconciliation"]
    reg = rec["regression"]
    blocks.append(
        Facts(
            (
                ("Reconciled value", money(rec["value"], currency)),
                ("Weights from", str(rec["weights_from"])),
                (
                    "Range of adjusted prices",
                    f"{money(rec['range']['low'], currency)} to {money(rec['range']['high'], currency)}",
                ),
                ("Regression estimate", money(reg["estimate"], currency)),
                (
                    f"{percent(reg['interval']['level'])} single-sale interval",
                    f"{money(reg['interval']['low'], currency)} to "
                    f"{money(reg['interval']['high'], currency)}",
                ),
            ),
            "Reconciliation",
        )
    )
    flags = [
        f"{c['sale_id']}: {f}" + (f" Comment: {c['comment']}" if c.get("comment") else "")
        for c in comps
        for f in c["flags"]
    ]
    comments = [
        f"{c['sale_id']}: {c['comment']}" for c in comps if c.get("comment") and not c["flags"]
    ]
    if flags or comments:
        blocks.append(Notice("note", tuple(flags + comments), "Flags and comments"))
    if d["warnings"]:
        blocks.append(
            Notice("warning", tuple(str(w) for w in d["warnings"]), "Sales comparison warnings")
        )
    return tuple(blocks)


__all__ = ["grid_blocks"]
