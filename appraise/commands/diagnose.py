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
"""

from __future__ import annotations

import argparse

from ..engine.diagnostics import Diagnostics, DiagnosticSettings, diagnose
from .common import (
    SHORT_CAUTION,
    add_json_argument,
    add_model_argument,
    add_sales_arguments,
    fit_from_args,
    print_json,
)
from .text import money


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


def diagnostic_settings(args: argparse.Namespace) -> DiagnosticSettings:
    return DiagnosticSettings(folds=args.folds, seed=args.seed, trim=args.trim)


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
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    settings = diagnostic_settings(args)
    _, spec, fit = fit_from_args(args)
    diag = diagnose(fit, settings)
    if args.json:
        print_json({"caution": SHORT_CAUTION, **diag.to_dict()})
    else:
        print(format_diagnostics(diag, title=spec.title or str(args.model)))
        print()
        print(SHORT_CAUTION)
    return 0


# --- text ---------------------------------------------------------------------------

MAX_BLOCKS = 10
"""Exclusion blocks printed in the text output (all of them are in the JSON)."""


def _num(v: float | None, fmt: str = ".4g") -> str:
    return "n/a" if v is None or v != v else format(v, fmt)


def _flag_lines(d: Diagnostics) -> list[str]:
    t = d.thresholds
    rules = [
        f"{t.leverage_rule} = {t.leverage:.3g}",
        t.student_rule,
        f"{t.cooks_rule} = {t.cooks:.3g}",
    ]
    if d.settings.dffits_multiple is not None:
        rules.append(f"{t.dffits_rule} = {t.dffits:.3g}")
    out = [f"Sales to look at: {len(d.flags)} of {d.n} ({'; '.join(rules)})"]
    if not d.flags:
        out.append("  none")
        return out
    for f in d.flags:
        sid = f" ({f.sale_id})" if f.sale_id else ""
        out.append(f"  row {f.row}{sid}: " + "; ".join(x.text for x in f.findings))
    out.append("")
    out.append("A flag asks for a second look, not for removal. To leave a sale out once its")
    out.append("cause is known, paste its block into the model file:")
    for f in d.flags[:MAX_BLOCKS]:
        out.append("")
        out.extend("  " + line for line in f.model_file_line().rstrip("\n").split("\n"))
    if len(d.flags) > MAX_BLOCKS:
        out.append("")
        out.append(
            f"  (blocks shown for the {MAX_BLOCKS} most influential; --json has all "
            f"{len(d.flags)} under 'flagged')"
        )
    return out


def _collinearity_lines(d: Diagnostics) -> list[str]:
    c = d.collinearity
    out = ["Redundant terms (VIF for one column, GVIF for a group; Fox and Monette 1992)"]
    if c.terms:
        w = max(4, *(len(t.expression) for t in c.terms))
        out.append(f"  {'term':<{w}} {'df':>3} {'(G)VIF':>10} {'GVIF^(1/2df)':>13}  flag")
        for t in c.terms:
            flag = f"  {t.rule}" if t.flagged else ""
            out.append(
                f"  {t.expression:<{w}} {t.df:>3} {_num(t.gvif, '.4g'):>10} "
                f"{_num(t.gvif_root, '.3f'):>13}{flag}"
            )
    cond = c.condition
    verdict = "above" if cond.exceeds else "below"
    out.append(
        f"  condition number {cond.number:.1f}, {verdict} the threshold {cond.threshold:g}; "
        f"scaling: {cond.scaling}"
    )
    for dep in cond.dependences:
        out.append(f"    near-dependence (index {dep.index:.1f}): {', '.join(dep.columns)}")
    return out


def _tests_lines(d: Diagnostics) -> list[str]:
    r = d.residual_tests
    k, o, j = r.koenker, r.original, r.jarque_bera
    out = [
        f"Residual tests (alpha {r.alpha:g})",
        f"  Breusch-Pagan, studentized n R^2 form: LM {k.statistic:.4g} on {k.df} df, "
        f"p = {k.p_value:.4g}" + ("  uneven spread" if r.heteroskedastic else ""),
        f"  Breusch-Pagan, original ESS/2 form (assumes normal errors): LM {o.statistic:.4g}, "
        f"p = {o.p_value:.4g}",
        f"  Jarque-Bera: {j.statistic:.4g}, p = {j.p_value:.4g} (skewness {j.skewness:.2f}, "
        f"kurtosis {j.kurtosis:.2f})" + ("  not normal" if r.non_normal else ""),
    ]
    out.extend(f"  - {s}" for s in r.suggestions)
    return out


def _accuracy_lines(d: Diagnostics) -> list[str]:
    loo, kf = d.loo, d.kfold
    scale = "log price" if d.response == "log" else "price"
    out = [
        "Accuracy on sales left out of the fit",
        f"  leave-one-out: RMSE {money(loo.rmse_price)}, median absolute error "
        f"{_num(loo.mdape, '.1f')}%, PRESS {loo.press:.5g} ({scale})",
        f"  {kf.folds}-fold (seed {kf.seed}): RMSE {money(kf.rmse_price)}, median absolute "
        f"error {_num(kf.mdape, '.1f')}%",
        f"  {100 * loo.coverage:.1f}% of {loo.n_used} sales lie inside their own leave-one-out "
        f"{100 * loo.level:g}% prediction interval (nominal {100 * loo.level:g}%)",
    ]
    if kf.n_unpredictable:
        out.append(f"  {kf.n_unpredictable} sale(s) could not be predicted from the other folds")
    return out


def _ratio_lines(d: Diagnostics) -> list[str]:
    rs = d.ratio_study
    trim = (
        f"; trim fences {rs.fences[0]:.3f} to {rs.fences[1]:.3f}: {len(rs.trimmed)} trimmed"
        if rs.fences is not None
        else "; no trim"
    )
    out = [f"Ratio study: leave-one-out value / sale price, {rs.n} sales{trim}"]
    for t in rs.trimmed:
        sid = f" ({t.sale_id})" if t.sale_id else ""
        out.append(f"  trimmed row {t.row}{sid}: ratio {t.ratio:.3f}")
    w = max(len(m.label) for m in rs.measures)
    for m in rs.measures:
        ci = f" [{m.ci_low:.4f}, {m.ci_high:.4f}]" if m.ci_low == m.ci_low else ""
        rng = f"range {m.range_text()}: {m.verdict}" if m.range_text() else ""
        out.append(f"  {m.label:<{w}} {_num(m.value, '.4f'):>9}{ci}  {rng}".rstrip())
    out.append("  ranges: IAAO Standard on Ratio Studies (2013), single-family residential")
    return out


def format_diagnostics(d: Diagnostics, title: str = "") -> str:
    """The check-up as plain text for the terminal."""
    head = f"Model check: {title}" if title else "Model check"
    lines = [head, f"{d.response} response, {d.n} sales, {d.p} design columns", ""]
    for section in (_flag_lines, _collinearity_lines, _tests_lines, _accuracy_lines, _ratio_lines):
        lines.extend(section(d))
        lines.append("")
    lines.extend(f"warning: {w}" for w in d.warnings)
    return "\n".join(lines).rstrip("\n")
