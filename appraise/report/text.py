"""Plain-text renderings of fit, valuation and diagnostics, for the terminal and the window."""

from __future__ import annotations

from ..engine.diagnostics import Diagnostics
from ..engine.fitting import FitResult
from ..engine.valuation import Valuation
from .numbers import money


def format_fit(fit: FitResult) -> str:
    lines = [
        f"Model: {fit.spec.response} response of '{fit.target}', {fit.cov_type} standard errors",
        f"Sales used {fit.n}, excluded {len(fit.excluded)}; terms {fit.p}, residual df {fit.df_resid}",
        f"R-squared {fit.r2:.4f}, adjusted {fit.adj_r2:.4f}, residual standard error {fit.sigma:.5g}",
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
    w = max(12, *(len(t.name) for t in fit.terms))
    lines.append("")
    lines.append(
        f"{'term':<{w}} {'coef':>13} {'std err':>12} {'t':>8} {'p':>8} {'95% low':>13} {'95% high':>13}"
    )
    for t in fit.terms:
        if t.note is not None:
            lines.append(f"{t.name:<{w}} {t.coef:>13.6g}  {t.note}")
            continue
        lines.append(
            f"{t.name:<{w}} {t.coef:>13.6g} {t.se:>12.5g} {t.t:>8.3f} {t.p:>8.4f} "
            f"{t.ci_low:>13.6g} {t.ci_high:>13.6g}"
        )
    if fit.excluded:
        lines.append("")
        lines.append(f"Excluded sales ({len(fit.excluded)}):")
        for e in fit.excluded:
            sid = f" ({e.sale_id})" if e.sale_id else ""
            col = f" [{e.column}]" if e.column else ""
            lines.append(f"  row {e.row}{sid}: {e.reason}{col} <{e.source}>")
    for wmsg in fit.warnings:
        lines.append(f"warning: {wmsg}")
    return "\n".join(lines)


def format_valuation(v: Valuation, symbol: str = "$") -> str:
    pct = f"{v.level * 100:g}%"
    lines = [f"Estimated value: {money(v.estimate, symbol)}"]
    if v.median is not None:
        lines[0] += " (mean, Duan smearing)"
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
        f"Subject leverage {v.leverage:.4f} (largest among the sales {v.max_sample_leverage:.4f})"
    )
    for w in v.warnings:
        lines.append(f"warning: {w}")
    return "\n".join(lines)


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
