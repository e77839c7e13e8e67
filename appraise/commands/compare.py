"""``appraise compare SALES --model A.toml --model B.toml ... [--json] [--folds 10] [--seed 0]``.

Fits every model file to the same sales file and ranks the models by leave-one-out
RMSE in price units, with k-fold RMSE, adjusted R², AIC, BIC (raw and on the price
scale), COD of the leave-one-out values and the coverage of the leave-one-out
prediction intervals beside it. Warns when the models ended up using different sales.

JSON keys: ``caution``; ``models`` (best first), each ``{label, file, rank, response,
n, p, loo_rmse, kfold_rmse, loo_mdape, adj_r2, aic, bic, aic_price, bic_price, cod,
coverage, level}``; ``warnings`` (list of text).
"""

from __future__ import annotations

import argparse
from pathlib import Path

from .. import pipeline
from ..engine.diagnostics import Comparison, compare_models
from ..report.numbers import money
from .common import (
    SHORT_CAUTION,
    add_json_argument,
    add_model_argument,
    add_sales_arguments,
    load_sales_from_args,
    print_json,
)
from .diagnose import add_diagnostic_arguments, diagnostic_settings


def register(sub) -> None:
    p = sub.add_parser(
        "compare",
        help="rank candidate model files by leave-one-out error on the same sales",
        description="Fit several model files to the same sales and rank them by leave-one-out "
        "error in price units.",
    )
    add_sales_arguments(p)
    add_model_argument(p, multiple=True)
    add_json_argument(p)
    add_diagnostic_arguments(p)
    p.set_defaults(func=run)


def model_labels(paths: list[str]) -> list[str]:
    """File names without folder, or the paths as given when two names clash."""
    names = [Path(p).name for p in paths]
    return names if len(set(names)) == len(names) else list(paths)


def run(args: argparse.Namespace) -> int:
    settings = diagnostic_settings(args)
    sales = load_sales_from_args(args)
    fits = [pipeline.fit(sales, pipeline.read_model(path)) for path in args.model]
    labels = model_labels(args.model)
    comparison = compare_models(fits, labels, settings)
    if args.json:
        files = dict(zip(labels, args.model, strict=True))
        d = comparison.to_dict()
        for row in d["models"]:
            row["file"] = files[row["label"]]
        print_json({"caution": SHORT_CAUTION, **d})
    else:
        print(format_comparison(comparison))
        print()
        print(SHORT_CAUTION)
    return 0


def _f(v: float, fmt: str) -> str:
    return "n/a" if v != v else format(v, fmt)


def format_comparison(c: Comparison) -> str:
    """The ranking as a plain-text table."""
    w = max(5, *(len(r.label) for r in c.rows))
    head = (
        f"{'rank':>4}  {'model':<{w}}  {'response':<8} {'n':>5} {'p':>3} {'LOO RMSE':>11} "
        f"{'k-fold RMSE':>11} {'adj R2':>7} {'AIC':>10} {'BIC':>10} {'AIC price':>11} "
        f"{'COD':>6} {'coverage':>14}"
    )
    lines = ["Models ranked by leave-one-out RMSE (price units)", head]
    for r in c.rows:
        cover = f"{_f(100 * r.coverage, '.1f')}% of {100 * r.level:g}%"
        lines.append(
            f"{r.rank:>4}  {r.label:<{w}}  {r.response:<8} {r.n:>5} {r.p:>3} "
            f"{money(r.loo_rmse):>11} {money(r.kfold_rmse):>11} {_f(r.adj_r2, '.4f'):>7} "
            f"{_f(r.aic, '.1f'):>10} {_f(r.bic, '.1f'):>10} {_f(r.aic_price, '.1f'):>11} "
            f"{_f(r.cod, '.2f'):>6} {cover:>14}"
        )
    lines.append("")
    lines.append(
        "AIC price: AIC of the model as a density of the sale price (for a log response the "
        "raw AIC plus 2 sum(log price)), comparable across linear and log responses."
    )
    lines.extend(f"warning: {w}" for w in c.warnings)
    return "\n".join(lines)
