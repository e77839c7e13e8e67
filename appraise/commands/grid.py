"""``appraise grid SALES --model M.toml --subject S [--comps ID,ID,...] [--effective-date YYYY-MM-DD] [--json]``.

The sales comparison approach: the comparables most similar to the subject, each adjusted
by the model's feature groups (market conditions first) to the effective date, then
reconciled beside the regression estimate.
"""

from __future__ import annotations

import argparse

from .. import pipeline
from ..engine.comparables import SelectionSettings
from ..engine.grid import GridLimits
from ..report.grid_text import format_grid
from .common import (
    SHORT_CAUTION,
    add_json_argument,
    add_model_argument,
    add_sales_arguments,
    add_subject_arguments,
    effective_date_option,
    fit_from_args,
    import_settings,
    print_json,
    subject_source,
)


def _ids(text: str | None) -> list[str] | None:
    if text is None:
        return None
    return [t.strip() for t in text.split(",") if t.strip()]


def register(sub) -> None:
    p = sub.add_parser(
        "grid",
        help="sales comparison: comparables, adjustment grid and reconciliation",
        description=__doc__,
    )
    add_sales_arguments(p)
    add_model_argument(p)
    add_subject_arguments(p)
    p.add_argument("--comps", metavar="ID,ID,...", help="use exactly these sale ids as comparables")
    p.add_argument("--pin", metavar="ID,ID,...", help="always include these sale ids")
    p.add_argument(
        "--effective-date",
        metavar="YYYY-MM-DD",
        help="date of value (default: the subject's effective_date, else the model file's)",
    )
    p.add_argument("--count", type=int, default=4, help="comparables to choose (default 4)")
    p.add_argument("--max-km", type=float, help="only sales within this distance")
    p.add_argument("--max-months", type=float, help="only sales within this many months")
    p.add_argument("--same-region", action="store_true", help="only sales in the subject's region")
    p.add_argument("--weights", metavar="W,W,...", help="reconciliation weights (sum to 1)")
    p.add_argument("--net-limit", type=float, default=0.15, help="net adjustment flag (fraction)")
    p.add_argument(
        "--gross-limit", type=float, default=0.25, help="gross adjustment flag (fraction)"
    )
    add_json_argument(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    args.effective_date = effective_date_option(args.effective_date)
    sales, _, fit = fit_from_args(args)
    weights = _ids(args.weights)
    result, _ = pipeline.grid(
        fit,
        subject_source(args),
        effective_date=args.effective_date,
        import_settings=import_settings(args),
        selection=SelectionSettings(
            max_km=args.max_km,
            max_months=args.max_months,
            same_region_only=args.same_region,
            count=args.count,
        ),
        pinned=_ids(args.pin) or (),
        comps=_ids(args.comps),
        weights=None if weights is None else [float(w) for w in weights],
        limits=GridLimits(net=args.net_limit, gross=args.gross_limit),
        level=args.level,
        caution=SHORT_CAUTION,
    )
    if args.json:
        print_json(result.to_dict())
    else:
        print(format_grid(result))
    return 0
