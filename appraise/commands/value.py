"""``appraise value SALES --model MODEL.toml --subject SUBJECT [--level 0.9] [--json]``."""

from __future__ import annotations

import argparse

from .. import pipeline
from ..engine.errors import DesignError, SubjectError
from ..report.text import format_valuation
from .common import (
    SHORT_CAUTION,
    add_json_argument,
    add_model_argument,
    add_sales_arguments,
    add_subject_arguments,
    errors_name,
    fit_from_args,
    print_json,
    read_subject_from_args,
    subject_file,
)


def register(sub) -> None:
    p = sub.add_parser(
        "value", help="value the subject property with a prediction interval", description=__doc__
    )
    add_sales_arguments(p)
    add_model_argument(p)
    add_subject_arguments(p)
    add_json_argument(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    sales, _, fit = fit_from_args(args)
    subject = read_subject_from_args(args, sales)
    # what the model cannot value is the subject's (a bad --level is no one's file)
    with errors_name(subject_file(args), SubjectError, DesignError):
        val = pipeline.value(fit, subject, level=args.level)
    if args.json:
        d = val.to_dict()
        d["caution"] = SHORT_CAUTION
        print_json(d)
    else:
        print(format_valuation(val))
        print()
        print(SHORT_CAUTION)
    return 0
