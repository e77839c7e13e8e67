"""Plain-text renderings of fit, valuation and diagnostics, for the terminal and the window."""

from __future__ import annotations

from ..engine.diagnostics import Diagnostics
from ..engine.diagnostics.coverage import OUTSIDE_POINTS
from ..engine.fitting import COEF_CI_LEVEL, FitResult
from ..engine.spread import SPREAD_METHOD_TEXT
from ..engine.valuation import Valuation
from .diagnostics_section import PRB_CI_LEVEL
from .effects import coefficient_effects
from .labels import BREUSCH_PAGAN_FORMS, RATIO_MEASURE_LABELS, term_label, without_source_tags
from .numbers import MISSING, fixed, money, number, p_phrase, percent, pvalue, unscientific


def coefficient_count(fit: FitResult) -> str:
    """``"19 coefficients (18 terms and the intercept)"``: one wording wherever the
    size of the model is stated, so the counts agree."""
    terms = fit.p - int(bool(fit.spec.intercept))
    text = f"{fit.p} coefficient{'s' if fit.p != 1 else ''}"
    if fit.spec.intercept:
        return f"{text} ({terms} term{'s' if terms != 1 else ''} and the intercept)"
    return f"{text} (no intercept)"


def format_fit(fit: FitResult) -> str:
    """The fit as terminal text: the model, its size, and the coefficient table with
    each coefficient's plain effect (numbers never in scientific notation)."""
    lines = [
        f"Model: {fit.spec.response} response of '{fit.target}', {fit.cov_type} standard errors",
        f"Sales used {fit.n:,}, excluded {len(fit.excluded):,}; {coefficient_count(fit)}, "
        f"residual df {fit.df_resid:,}",
        f"R-squared {fixed(fit.r2, 4)}, adjusted {fixed(fit.adj_r2, 4)}, residual standard "
        f"error {number(fit.sigma, 5)}" + (" (log scale)" if fit.spec.response == "log" else ""),
        f"Fitted by: {fit.path_text}",
    ]
    refs = fit.references()
    for expr, ref in refs.items():
        lines.append(f"Reference level of {expr}: {ref!r}")
    for expr in refs:
        counts = [c for c in fit.levels if c.term == expr]
        if counts:
            lines.append(
                f"Sales per level of {expr}: " + ", ".join(f"{c.level} {c.count}" for c in counts)
            )
        for c in counts:
            if c.pooled:
                lines.append(f"Pooled into '{c.level}': {', '.join(c.pooled)}")
    ci = percent(COEF_CI_LEVEL)
    effects = coefficient_effects(fit)
    names = [term_label(t.name) for t in fit.terms]
    w = max(12, *(len(n) for n in names))
    lines.append("")
    lines.append(
        f"{'term':<{w}} {'coef':>13} {'std err':>12} {'t':>8} {'p':>9} {ci + ' low':>13} "
        f"{ci + ' high':>13}  effect on price"
    )
    for t, name, e in zip(fit.terms, names, effects, strict=True):
        if t.note is not None:
            lines.append(f"{name:<{w}} {number(t.coef, 6):>13}  {t.note}")
            continue
        lines.append(
            f"{name:<{w}} {number(t.coef, 6):>13} {number(t.se, 5):>12} {fixed(t.t, 3):>8} "
            f"{pvalue(t.p):>9} {number(t.ci_low, 6):>13} {number(t.ci_high, 6):>13}  {e.text}"
        )
    if fit.excluded:
        lines.append("")
        lines.append(f"Excluded sales ({len(fit.excluded)}):")
        for e in fit.excluded:
            sid = f" ({e.sale_id})" if e.sale_id else ""
            col = f" [{e.column}]" if e.column else ""
            lines.append(f"  row {e.row}{sid}: {e.reason}{col} <{e.source}>")
    for wmsg in fit.warnings:
        lines.append(f"warning: {unscientific(wmsg)}")
    return "\n".join(lines)


def format_valuation(v: Valuation, symbol: str = "$") -> str:
    pct = f"{v.level * 100:g}%"
    # what the subject's value rests on is read before the value itself
    first = [w for w in v.warnings if str(w).startswith("the subject's level")]
    lines = [f"warning: {w}" for w in first]
    lines.append(f"Estimated value: {money(v.estimate, symbol)}")
    if v.median is not None:
        lines[-1] += " (mean, Duan smearing)"
        lines.append(f"Median estimate: {money(v.median, symbol)}")
    lines.append(
        f"{pct} prediction interval for this sale: {money(v.low, symbol)} to {money(v.high, symbol)}"
    )
    typical = "median" if v.median is not None else "mean"
    lines.append(
        f"{pct} interval for the {typical} of similar properties: "
        f"{money(v.mean_low, symbol)} to {money(v.mean_high, symbol)}"
    )
    lines.append(
        f"Subject leverage {fixed(v.leverage, 4)} (largest among the sales "
        f"{fixed(v.max_sample_leverage, 4)})"
    )
    for w in v.warnings:
        if w not in first:
            lines.append(f"warning: {unscientific(w)}")
    return "\n".join(lines)


# --- text ---------------------------------------------------------------------------

MAX_BLOCKS = 10
"""Exclusion blocks printed in the text output (all of them are in the JSON)."""


def _num(v: float | None, digits: int = 4) -> str:
    """A number to ``digits`` significant digits, positional; "n/a" when missing."""
    text = number(v, digits)
    return "n/a" if text == MISSING else text


def _flag_lines(d: Diagnostics) -> list[str]:
    t = d.thresholds
    rules = [
        f"{t.leverage_rule} = {_num(t.leverage, 3)}",
        t.student_rule,
        f"{t.cooks_rule} = {_num(t.cooks, 3)}",
    ]
    if d.settings.dffits_multiple is not None:
        rules.append(f"{t.dffits_rule} = {_num(t.dffits, 3)}")
    out = [f"Sales to look at: {len(d.flags)} of {d.n} ({'; '.join(rules)})"]
    if not d.flags:
        out.append("  none")
        return out
    for f in d.flags:
        sid = f" ({f.sale_id})" if f.sale_id else ""
        out.append(f"  row {f.row}{sid}: " + unscientific("; ".join(x.text for x in f.findings)))
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
    out = [
        "Redundant terms: how far each term is explained by the others "
        "(variance inflation: VIF for one column, generalized VIF for a group, Fox and "
        "Monette 1992; std. error inflation = GVIF^(1/(2 df)))"
    ]
    if c.terms:
        names = [term_label(t.expression) for t in c.terms]
        w = max(4, *(len(n) for n in names))
        out.append(
            f"  {'term':<{w}} {'columns':>7} {'variance infl.':>14} {'std. error infl.':>16}  flag"
        )
        for t, name in zip(c.terms, names, strict=True):
            flag = f"  {t.rule}" if t.flagged else ""
            out.append(
                f"  {name:<{w}} {t.df:>7} {_num(t.gvif, 4):>14} "
                f"{fixed(t.gvif_root, 3) if t.gvif_root == t.gvif_root else 'n/a':>16}{flag}"
            )
    cond = c.condition
    verdict = "above" if cond.exceeds else "below"
    out.append(
        f"  condition number {fixed(cond.number, 1)}, {verdict} the threshold "
        f"{number(cond.threshold)}; scaling: {cond.scaling}"
    )
    for dep in cond.dependences:
        columns = ", ".join(term_label(c) for c in dep.columns)
        out.append(f"    near-dependence (index {fixed(dep.index, 1)}): {columns}")
    return out


def _tests_lines(d: Diagnostics) -> list[str]:
    r = d.residual_tests
    k, o, j = r.koenker, r.original, r.jarque_bera
    out = [
        f"Residual tests (alpha {number(r.alpha)})",
        f"  Breusch-Pagan, {BREUSCH_PAGAN_FORMS['koenker']} (n R^2): LM {_num(k.statistic)} on "
        f"{k.df} df, {p_phrase(k.p_value)}" + ("  uneven spread" if r.heteroskedastic else ""),
        f"  Breusch-Pagan, {BREUSCH_PAGAN_FORMS['original']} (ESS/2): LM {_num(o.statistic)}, "
        f"{p_phrase(o.p_value)}",
        f"  Jarque-Bera: {_num(j.statistic)}, {p_phrase(j.p_value)} (skewness "
        f"{fixed(j.skewness, 2)}, kurtosis {fixed(j.kurtosis, 2)})"
        + ("  not normal" if r.non_normal else ""),
    ]
    out.extend(f"  - {s}" for s in r.suggestions)
    return out


def _accuracy_lines(d: Diagnostics) -> list[str]:
    loo, kf = d.loo, d.kfold
    scale = "log price" if d.response == "log" else "price"
    out = [
        "Accuracy on sales left out of the fit",
        f"  leave-one-out: RMSE {money(loo.rmse_price)}, median absolute error "
        f"{_pct(loo.mdape)}, PRESS {_num(loo.press, 5)} ({scale})",
        f"  {kf.folds}-fold (seed {kf.seed}): RMSE {money(kf.rmse_price)}, median absolute "
        f"error {_pct(kf.mdape)}",
        f"  {percent(loo.coverage, 1)} of {loo.n_used:,} sales lie inside their own "
        f"leave-one-out {percent(loo.level, 1)} prediction interval (nominal "
        f"{percent(loo.level, 1)})",
    ]
    if kf.n_unpredictable:
        out.append(f"  {kf.n_unpredictable} sale(s) could not be predicted from the other folds")
    out.extend(coverage_lines(d))
    return out


def coverage_lines(d: Diagnostics) -> list[str]:
    """Coverage of the leave-one-out intervals by segment, marked where it strays."""
    c = d.coverage
    if c is None or not c.segments:
        return []
    spread = SPREAD_METHOD_TEXT.get(c.spread, c.spread)
    out = [
        f"Coverage by segment, nominal {percent(c.level, 1)}, marked beyond "
        f"{OUTSIDE_POINTS:g} points ({spread})"
    ]
    w = max(len(s.label) for s in c.segments)
    last = None
    for s in c.segments:
        if s.by != last:
            out.append(f"  by {s.by}")
            last = s.by
        mark = "  thin" if s.thin else ("  OUTSIDE" if s.outside(c.level) else "")
        out.append(f"    {s.label:<{w}} {s.n:>6,} sales  {percent(s.coverage, 1):>6}{mark}")
    worst = c.worst()
    if worst is not None:
        out.append(f"  worst: {worst.by} {worst.label}, {percent(worst.coverage, 1)} of its sales")
    return out


def _pct(points: float | None) -> str:
    """A value already in percent: ``5.83 -> "5.8%"``."""
    text = fixed(points, 1)
    return "n/a" if text == MISSING else f"{text}%"


def _ratio_lines(d: Diagnostics) -> list[str]:
    rs = d.ratio_study
    trim = (
        f"; trim fences {fixed(rs.fences[0], 3)} to {fixed(rs.fences[1], 3)}: "
        f"{len(rs.trimmed)} trimmed"
        if rs.fences is not None
        else "; no trim"
    )
    out = [f"Ratio study: leave-one-out value / sale price, {rs.n:,} sales{trim}"]
    for t in rs.trimmed:
        sid = f" ({t.sale_id})" if t.sale_id else ""
        out.append(f"  trimmed row {t.row}{sid}: ratio {fixed(t.ratio, 3)}")
    labels = [RATIO_MEASURE_LABELS.get(m.name, m.label) for m in rs.measures]
    w = max(len(x) for x in labels)
    for m, label in zip(rs.measures, labels, strict=True):
        value = fixed(m.value, {"cod": 2, "ppe10": 1}.get(m.name, 4))
        value = "n/a" if value == MISSING else value + ("%" if m.name == "ppe10" else "")
        ci = (
            f" ({percent(PRB_CI_LEVEL)} interval {fixed(m.ci_low, 4)} to {fixed(m.ci_high, 4)})"
            if m.ci_low == m.ci_low
            else ""
        )
        rng = f"range {m.range_text()}: {m.verdict}" if m.range_text() else ""
        out.append(f"  {label:<{w}} {value:>9}{ci}  {without_source_tags(rng)}".rstrip())
    out.append("  ranges: IAAO Standard on Ratio Studies (2013), single-family residential")
    return out


def format_diagnostics(d: Diagnostics, title: str = "") -> str:
    """The check-up as plain text for the terminal."""
    head = f"Model check: {title}" if title else "Model check"
    lines = [head, f"{d.response} response, {d.n} sales, {d.p} design columns", ""]
    for section in (_flag_lines, _collinearity_lines, _tests_lines, _accuracy_lines, _ratio_lines):
        lines.extend(section(d))
        lines.append("")
    lines.extend(f"warning: {unscientific(w)}" for w in d.warnings)
    return "\n".join(lines).rstrip("\n")
