"""``appraise data SALES [--json]``: what was read from a sales file.

Rows in the file, rows used, every excluded row with its reason, the column
roles, the notes the reader made, and a summary of each column.
"""

from __future__ import annotations

import argparse

from ..engine.exclusions import (
    describe_exclusion,
    exclusion_records,
    reason_counts,
)
from ..engine.importing import UNIT_TEXT
from ..engine.roles import ROLES, save_role_map
from ..engine.sales import ColumnSummary, SalesTable
from ..report.numbers import number
from ..report.tables import write_exclusion_log
from .common import add_json_argument, add_sales_arguments, load_sales_from_args, print_json


def register(sub) -> None:
    p = sub.add_parser(
        "data",
        help="read a sales file and show what was used, what was excluded and why",
        description=__doc__,
    )
    add_sales_arguments(p)
    p.add_argument(
        "--save-roles", metavar="PATH", help="save the column roles used, to reuse with --roles"
    )
    p.add_argument(
        "--exclusions-csv",
        metavar="PATH",
        help="write the exclusion log (row, id, reason, column, source) to a CSV or .xlsx file",
    )
    add_json_argument(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    table = load_sales_from_args(args)
    if args.save_roles:
        save_role_map(table.roles, args.save_roles)
    if args.exclusions_csv:
        write_exclusion_log(table.excluded, args.exclusions_csv)
    if args.json:
        print_json(data_report(table))
    else:
        print(format_data(table))
    return 0


def data_report(table: SalesTable) -> dict:
    """The JSON document of ``appraise data --json``."""
    return {
        "rows_in_file": table.source.rows_in_file,
        "rows_used": table.n_used,
        "rows_excluded": len(table.excluded),
        "excluded": exclusion_records(table.excluded),
        "roles": table.roles.to_dict(),
        "area_unit": table.area_unit,
        "notes": list(table.notes),
        "columns": [c.to_dict() for c in table.column_summaries()],
        "source": {
            "path": table.source.path,
            "sha256": table.source.sha256,
            "format": table.source.format,
        },
    }


def _cell(v: object, kind: str) -> str:
    if v is None:
        return ""
    if kind == "date":
        return str(v)[:10] if str(v).endswith("00:00:00") else str(v)
    if isinstance(v, float):
        # years stay 1987, prices 412,500, a tiny value 0.00001 (never 1e-05)
        return number(v, 6).replace(",", "") if abs(v) < 1e4 else f"{v:,.0f}"
    return str(v)


def _summary_row(c: ColumnSummary) -> list[str]:
    if c.kind == "text":
        shown = ", ".join(f"{k} ({n})" for k, n in c.levels[:4])
        more = (c.distinct or 0) - min(4, len(c.levels))
        detail = f"{c.distinct} distinct: {shown}" + (", ..." if more > 0 else "")
    elif c.kind == "number":
        detail = f"mean {_cell(c.mean, c.kind)}"
    else:
        detail = ""
    return [
        c.name,
        c.role or "",
        c.kind,
        str(c.count),
        str(c.missing),
        _cell(c.min, c.kind),
        _cell(c.max, c.kind),
        detail,
    ]


def _table(header: list[str], rows: list[list[str]]) -> list[str]:
    widths = [max(len(r[j]) for r in [header, *rows]) for j in range(len(header))]
    out = []
    for r in [header, *rows]:
        out.append("  ".join(v.ljust(w) for v, w in zip(r, widths, strict=True)).rstrip())
    return out


def format_data(table: SalesTable) -> str:
    """The readable summary printed by ``appraise data``."""
    src = table.source
    lines = [
        f"Sales file: {src.path} ({src.format}, SHA-256 {src.sha256[:16]}...)",
        f"Rows in file: {src.rows_in_file}   used: {table.n_used}   "
        f"excluded: {len(table.excluded)}",
        f"Area unit: {UNIT_TEXT.get(table.area_unit, table.area_unit)}",
    ]
    if table.excluded:
        counts = ", ".join(f"{k} {n}" for k, n in reason_counts(table.excluded).items())
        lines += ["", f"Excluded rows ({len(table.excluded)}; by reason: {counts}):"]
        lines += [f"  {describe_exclusion(e)}" for e in table.excluded]
    lines += ["", "Roles:"]
    width = max(len(r) for r in ROLES)
    for role in ROLES:
        col = table.roles.column(role)
        lines.append(f"  {role:<{width}}  {col if col is not None else '(none)'}")
    if table.notes:
        lines += ["", "Notes:"]
        lines += [f"  - {n}" for n in table.notes]
    header = ["column", "role", "kind", "count", "missing", "min", "max", "mean / levels"]
    lines += ["", "Columns:"]
    lines += [
        "  " + line for line in _table(header, [_summary_row(c) for c in table.column_summaries()])
    ]
    return "\n".join(lines)
