"""``appraise regions SALES --model M.toml [--subject S] [--level 0.95] [--term T] [--json]``.

Neighbourhood effects of the fitted model: each region against the reference and against
the average of all regions, the joint test, every pair with Holm-adjusted p values, the
groups of regions that cannot be told apart, region slopes, centres, the location effect
along the distance to the centre, and the leave-one-out ratio study by region and tier.
"""

from __future__ import annotations

import argparse

from ..engine.regions import DEFAULT_LEVEL, analyse_regions
from ..report.regions_text import format_regions
from .common import (
    SHORT_CAUTION,
    add_json_argument,
    add_model_argument,
    add_sales_arguments,
    fit_from_args,
    print_json,
    read_subject_from_args,
)


def _level(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        v = float("nan")
    if not 0.0 < v < 1.0:
        raise argparse.ArgumentTypeError(f"the level must be between 0 and 1, got {text!r}")
    return v


def register(sub) -> None:
    p = sub.add_parser(
        "regions",
        help="neighbourhood effects with intervals, tests, slopes and the ratio study by region",
        description=__doc__,
    )
    add_sales_arguments(p)
    add_model_argument(p)
    p.add_argument(
        "--subject",
        "-s",
        metavar="SUBJECT",
        help="the subject (JSON object or one-row CSV): marks its region, measures distances",
    )
    p.add_argument(
        "--level",
        type=_level,
        default=DEFAULT_LEVEL,
        help="level of the intervals; the tests use 1 - level (default 0.95)",
    )
    p.add_argument(
        "--term",
        metavar="FEATURE",
        help="the onehot feature (or its column) holding the regions, when it is not the "
        "one on the 'region' role",
    )
    p.add_argument("--trim", action="store_true", help="trim outlying ratios in the ratio study")
    add_json_argument(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    sales, _, fit = fit_from_args(args)
    subject = read_subject_from_args(args, sales) if args.subject else None
    ra = analyse_regions(fit, subject=subject, level=args.level, term=args.term, trim=args.trim)
    if args.json:
        print_json({**ra.to_dict(), "caution": SHORT_CAUTION})
    else:
        print(format_regions(ra, SHORT_CAUTION))
    return 0
