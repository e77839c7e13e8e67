"""Plain-text renderings of results for the terminal."""

from __future__ import annotations

from ..engine.fitting import FitResult
from ..engine.valuation import Valuation
from ..report.numbers import money


def format_fit(fit: FitResult) -> str:
    lines = [
        f"Model: {fit.spec.response} response of '{fit.target}', {fit.cov_type} standard errors",
        f"Sales used {fit.n}, excluded {len(fit.excluded)}; terms {fit.p}, residual df {fit.df_resid}",
        f"R-squared {fit.r2:.4f}, adjusted {fit.adj_r2:.4f}, residual standard error {fit.sigma:.5g}",
    ]
    refs = fit.references()
    for expr, ref in refs.items():
        lines.append(f"Reference level of {expr}: {ref!r}")
    w = max(12, *(len(t.name) for t in fit.terms))
    lines.append("")
    lines.append(
        f"{'term':<{w}} {'coef':>13} {'std err':>12} {'t':>8} {'p':>8} {'95% low':>13} {'95% high':>13}"
    )
    for t in fit.terms:
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
