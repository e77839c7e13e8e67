"""``appraise fit SALES --model MODEL.toml [--json]``: fit the model and print the coefficient table."""

from __future__ import annotations

import argparse

from ..report.text import format_fit
from .common import (
    add_json_argument,
    add_model_argument,
    add_sales_arguments,
    fit_from_args,
    print_json,
)


def register(sub) -> None:
    p = sub.add_parser(
        "fit", help="fit a model file to the sales and print the coefficients", description=__doc__
    )
    add_sales_arguments(p)
    add_model_argument(p)
    add_json_argument(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    _, _, fit = fit_from_args(args)
    if args.json:
        print_json(fit.to_dict())
    else:
        print(format_fit(fit))
    return 0
