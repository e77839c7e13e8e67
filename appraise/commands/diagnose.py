"""``appraise diagnose SALES --model MODEL.toml [--json] [--trim] [--folds 10] [--seed 0]``.

Checks a fitted model: sales to look at, redundant terms, residual tests,
accuracy on sales left out of the fit, and a ratio study of the leave-one-out values.

JSON keys (``--json``; NaN and infinities are null; values on the response scale are
log price for a log response, "price" values are in the currency of the sales):

- ``caution``: the caution that goes with every figure.
- ``response`` ("linear" or "log"), ``n`` (sales used), ``p`` (design columns),
  ``level`` (level of the leave-one-out prediction intervals).
- ``settings``: ``leverage_multiple, student_limit, cooks_multiple, dffits_multiple``
  (null: DFFITS not used for flags), ``vif_limit, gvif_root_limit, condition_threshold,
  alpha, folds, seed, trim, level``.
- ``thresholds``: ``leverage``, ``student_external``, ``cooks_distance``, ``dffits``,
  each ``{limit, rule}`` (limit filled in for this n and p).
- ``sales`` (one per sale used, in fit order): ``row`` (file row, header = 1),
  ``sale_id``, ``price``, ``leverage``, ``resid`` (response scale),
  ``student_internal``, ``student_external``, ``cooks_distance``, ``dffits``,
  ``loo_prediction`` (price), ``loo_error`` (price - loo_prediction), ``loo_low``,
  ``loo_high`` (leave-one-out prediction interval, price), ``in_loo_interval``,
  ``loo_ratio`` (loo_prediction / price), ``kfold_prediction`` (price),
  ``flags`` (list of codes: "own_fit", "leverage", "outlier", "cooks", "dffits").
- ``flagged`` (most influential first): ``row``, ``sale_id``, ``findings`` (list of
  ``{code, value, limit, text}``), ``reason`` (ready-made reason text),
  ``model_file_line`` (the ``[[exclude]]`` block to paste into the model file).
- ``terms`` (one per model term): ``term``, ``kind`` ("plain", "onehot", "poly"),
  ``columns``, ``df``, ``gvif`` (the VIF when df = 1), ``gvif_root``
  (GVIF^(1/(2 df))), ``flagged``, ``rule``.
- ``columns`` (one per non-intercept design column): ``name``, ``vif``.
- ``overall``:

  - ``condition``: ``number``, ``threshold``, ``exceeds``, ``scaling``, ``indices``,
    ``near_dependences`` (list of ``{condition_index, columns}``).
  - ``residual_tests``: ``alpha``, ``breusch_pagan`` (studentized n R² form) and
    ``breusch_pagan_original`` (ESS/2 form), each ``{form, statistic, df, p_value,
    f_statistic, f_p_value}``; ``jarque_bera`` ``{statistic, p_value, skewness,
    kurtosis}``; ``heteroskedastic``, ``non_normal``, ``suggestions`` (list of text).
  - ``accuracy``: ``leave_one_out`` ``{press (response scale), rmse (response scale),
    rmse_price, mdape (percent), coverage {nominal, empirical, n}, n_used,
    n_without_prediction}``; ``kfold`` ``{folds, seed, rmse_price, mdape, n_predicted,
    n_unpredictable}``.
  - ``ratio_study``: ``n``, ``trim``, ``fences`` (null or [low, high]), ``trimmed``
    (list of ``{row, sale_id, ratio}``), ``measures`` (list of ``{name, label, value,
    ci_low, ci_high, range_low, range_high, verdict ("within", "outside", "no range"),
    source, note}``; names "median", "mean", "weighted_mean", "cod", "prd", "prb",
    "ppe10").
- ``warnings``: list of text.

``--sales-out FILE`` also writes one row per row of the sales file (CSV, or XLSX by
its suffix): the sale's columns, whether it was used (or why not), the fitted value,
the leave-one-out value and interval, the ratio, leverage, studentized residual,
Cook's distance and the flags in words.
"""

from __future__ import annotations

import argparse

from .. import pipeline
from ..engine.diagnostics import DiagnosticSettings
from ..report.text import format_diagnostics
from .common import (
    SHORT_CAUTION,
    add_json_argument,
    add_model_argument,
    add_sales_arguments,
    fit_from_args,
    print_json,
)


def add_diagnostic_arguments(parser: argparse.ArgumentParser) -> None:
    """Options shared by ``diagnose`` and ``compare``."""
    g = parser.add_argument_group("checking")
    g.add_argument(
        "--folds", type=int, default=10, help="folds of the cross-validation (default 10)"
    )
    g.add_argument("--seed", type=int, default=0, help="seed of the fold shuffle (default 0)")
    g.add_argument(
        "--trim",
        action="store_true",
        help="ratio study: leave out ratios beyond 3 interquartile ranges of the quartiles",
    )
    g.add_argument(
        "--coverage-by",
        metavar="TERM",
        help="also split the interval coverage by this column or role (fifths when numeric)",
    )


def diagnostic_settings(args: argparse.Namespace) -> DiagnosticSettings:
    return DiagnosticSettings(
        folds=args.folds,
        seed=args.seed,
        trim=args.trim,
        coverage_term=getattr(args, "coverage_by", None),
    )


def register(sub) -> None:
    p = sub.add_parser(
        "diagnose",
        help="check a model: influential sales, redundant terms, accuracy, ratio study",
        description="Check a fitted model: sales to look at, redundant terms, residual tests, "
        "accuracy on sales left out, and a ratio study.",
    )
    add_sales_arguments(p)
    add_model_argument(p)
    add_json_argument(p)
    add_diagnostic_arguments(p)
    p.add_argument(
        "--sales-out",
        metavar="FILE.csv|FILE.xlsx",
        help="also write every sale with its fitted and leave-one-out value, interval, "
        "ratio and flags (spreadsheet-safe)",
    )
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    settings = diagnostic_settings(args)
    _, spec, fit = fit_from_args(args)
    diag = pipeline.check(fit, settings)
    if args.sales_out:
        from ..report.sales_export import write_sales_results

        written = write_sales_results(fit, diag, args.sales_out)
        if not args.json:
            print(f"Wrote {written}")
    if args.json:
        print_json({"caution": SHORT_CAUTION, **diag.to_dict()})
    else:
        print(format_diagnostics(diag, title=spec.title or str(args.model)))
        print()
        print(SHORT_CAUTION)
    return 0
