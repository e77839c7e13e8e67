"""The diagnostics section of the worksheet, read from ``Diagnostics.to_dict()``.

Reads the plain dictionary (the stable JSON contract of ``appraise diagnose``),
not the engine's classes, and picks what a reviewer needs on paper: the flagged
sales, collinearity, residual tests, out-of-sample accuracy and the ratio study
with its acceptable ranges. The per-sale table is left to the CSV/JSON output.
"""

from __future__ import annotations

import inspect
from collections.abc import Mapping
from typing import Any

from ..engine.diagnostics.ratio_study import prb
from ..engine.spread import SPREAD_METHOD_TEXT
from .content import Block, Facts, Notice, Paragraph, Table
from .labels import (
    BREUSCH_PAGAN_FORMS,
    COLLINEARITY_COLUMNS,
    RATIO_MEASURE_LABELS,
    term_label,
    without_source_tags,
)
from .numbers import MISSING, fixed, money, number, p_phrase, percent, plain, unscientific

PRB_CI_LEVEL: float = float(inspect.signature(prb).parameters["level"].default)
"""The level the ratio study's PRB interval is computed at (the engine's default)."""


def diagnostics_blocks(diagnostics: Any, currency: str = "$") -> tuple[Block, ...]:
    """Blocks describing ``diagnostics`` (anything with ``to_dict()``, or that dict)."""
    d = diagnostics.to_dict() if hasattr(diagnostics, "to_dict") else dict(diagnostics)
    overall = d.get("overall", {}) or {}
    blocks: list[Block] = []
    blocks.extend(_flagged(d))
    blocks.extend(_collinearity(d, overall.get("condition") or {}))
    blocks.extend(_residual_tests(overall.get("residual_tests") or {}))
    blocks.extend(_accuracy(overall.get("accuracy") or {}, currency))
    blocks.extend(_ratio_study(overall.get("ratio_study") or {}))
    return tuple(blocks) or (Paragraph("No diagnostics were computed."),)


def diagnostics_warnings(diagnostics: Any) -> tuple[str, ...]:
    d = diagnostics.to_dict() if hasattr(diagnostics, "to_dict") else dict(diagnostics)
    return tuple(unscientific(str(w)) for w in d.get("warnings", ()) or ())


def _flagged(d: Mapping) -> list[Block]:
    flagged = d.get("flagged") or []
    if not flagged:
        return [Facts((("Flagged sales", "none"),), "Sales to look at")]
    rows, values = [], []
    for f in flagged:
        texts = "; ".join(
            unscientific(without_source_tags(str(x.get("text", ""))))
            for x in f.get("findings", ()) or ()
        )
        sid = "" if f.get("sale_id") is None else str(f.get("sale_id"))
        rows.append((plain(f.get("row")), sid, texts))
        values.append((f.get("row"), sid, texts))
    rules = d.get("thresholds") or {}
    note = "; ".join(
        unscientific(without_source_tags(str(t.get("rule"))))
        for t in rules.values()
        if isinstance(t, Mapping) and t.get("rule")
    )
    return [
        Table(
            key="flagged",
            title="Sales to look at",
            columns=("File row", "Sale id", "Findings"),
            rows=tuple(rows),
            values=tuple(values),
            align=("r", "l", "l"),
            note=(f"Rules: {note}. " if note else "")
            + "A flag asks for a second look at the sale; it is not a reason to drop it.",
        )
    ]


def _collinearity(d: Mapping, condition: Mapping) -> list[Block]:
    terms = d.get("terms") or []
    out: list[Block] = []
    if terms:
        rows, values = [], []
        for t in terms:
            rows.append(
                (
                    term_label(str(t.get("term", ""))),
                    plain(t.get("df")),
                    number(t.get("gvif"), 4),
                    number(t.get("gvif_root"), 4),
                    "yes" if t.get("flagged") else "",
                )
            )
            values.append(
                (
                    t.get("term"),
                    t.get("df"),
                    t.get("gvif"),
                    t.get("gvif_root"),
                    bool(t.get("flagged")),
                )
            )
        rules = sorted({_reader_rule(str(t.get("rule"))) for t in terms if t.get("rule")})
        out.append(
            Table(
                key="collinearity",
                title="Collinearity: how far each term is explained by the others",
                columns=tuple(
                    COLLINEARITY_COLUMNS[k] for k in ("term", "df", "gvif", "gvif_root", "flagged")
                ),
                rows=tuple(rows),
                values=tuple(values),
                align=("l", "r", "r", "r", "l"),
                note=(
                    "Variance inflation is the VIF of a one-column term and the generalized "
                    "VIF of a group; the standard-error inflation is how many times wider "
                    "the term's interval is for it (formulas in the help)."
                    + (" Flagged when " + "; ".join(rules) + "." if rules else "")
                ),
            )
        )
    if condition:
        verdict = "above" if condition.get("exceeds") else "below"
        out.append(
            Facts(
                (
                    (
                        "Condition number",
                        f"{number(condition.get('number'), 4)} ({verdict} the threshold "
                        f"{plain(condition.get('threshold'))})",
                    ),
                    ("Scaling", str(condition.get("scaling", MISSING))),
                )
            )
        )
    return out


def _residual_tests(rt: Mapping) -> list[Block]:
    if not rt:
        return []
    rows = []
    bp = rt.get("breusch_pagan") or {}
    if bp:
        form = str(bp.get("form", ""))
        rows.append(
            (
                f"Breusch-Pagan, {BREUSCH_PAGAN_FORMS.get(form, form)}",
                f"LM {number(bp.get('statistic'), 5)} on {plain(bp.get('df'))} df, "
                f"{p_phrase(bp.get('p_value'))}",
            )
        )
    jb = rt.get("jarque_bera") or {}
    if jb:
        rows.append(
            (
                "Jarque-Bera",
                f"{number(jb.get('statistic'), 5)}, {p_phrase(jb.get('p_value'))} "
                f"(skewness {fixed(jb.get('skewness'), 2)}, kurtosis {fixed(jb.get('kurtosis'), 2)})",
            )
        )
    out: list[Block] = [Facts(tuple(rows), "Residual tests")] if rows else []
    suggestions = tuple(str(s) for s in rt.get("suggestions", ()) or ())
    if suggestions:
        out.append(Notice("note", suggestions, "What the tests suggest"))
    return out


def _accuracy(acc: Mapping, currency: str) -> list[Block]:
    rows = []
    loo = acc.get("leave_one_out") or {}
    if loo:
        cov = loo.get("coverage") or {}
        rows.append(("Leave-one-out RMSE", money(loo.get("rmse_price"), currency)))
        rows.append(("Leave-one-out median absolute % error", _pct_points(loo.get("mdape"))))
        if cov:
            rows.append(
                (
                    "Sales inside their leave-one-out interval",
                    f"{percent(cov.get('empirical'), 1)} (nominal {percent(cov.get('nominal'), 1)}, "
                    f"{plain(cov.get('n'))} sales)",
                )
            )
    seg = acc.get("coverage_by_segment") or {}
    worst = seg.get("worst")
    if seg:
        rows.append(("Interval spread", SPREAD_METHOD_TEXT.get(seg.get("spread"), "")))
    if worst:
        rows.append(
            (
                "Worst segment's coverage",
                f"{percent(worst.get('coverage'), 1)} ({worst.get('by')} {worst.get('segment')})",
            )
        )
    kf = acc.get("kfold") or {}
    if kf:
        rows.append((f"{plain(kf.get('folds'))}-fold RMSE", money(kf.get("rmse_price"), currency)))
        rows.append(
            (f"{plain(kf.get('folds'))}-fold median absolute % error", _pct_points(kf.get("mdape")))
        )
    out: list[Block] = [Facts(tuple(rows), "Accuracy on sales left out of the fit")] if rows else []
    segs = seg.get("segments") or ()
    if segs:
        nominal = seg.get("nominal")
        out.append(
            Table(
                key="coverage-by-segment",
                title="Coverage of the leave-one-out intervals by segment",
                columns=("Split by", "Segment", "Sales", "Coverage", "Against nominal"),
                rows=tuple(
                    (
                        str(s.get("by")),
                        str(s.get("segment")),
                        plain(s.get("n")),
                        percent(s.get("coverage"), 1),
                        "thin" if s.get("thin") else ("outside" if s.get("outside") else "within"),
                    )
                    for s in segs
                ),
                note=f"Nominal {percent(nominal, 1)}; a segment more than "
                f"{plain(seg.get('outside_points'))} points away is marked outside; under "
                f"{plain(seg.get('thin_below'))} sales it is marked thin and not judged.",
            )
        )
    return out


def _pct_points(x: Any) -> str:
    """A value already in percent (12.8 -> "12.8%")."""
    text = fixed(x, 1)
    return text if text == MISSING else f"{text}%"


PERCENT_MEASURES: tuple[str, ...] = ("ppe10",)
"""Ratio-study measures that are shares in percent (printed with their %)."""

MEASURE_DECIMALS: Mapping[str, int] = {"cod": 2, "ppe10": 1}
"""Decimals printed per measure; ratios (median, PRD, PRB...) get four."""


def _reader_rule(rule: str) -> str:
    """A flag rule in the table's own words (``GVIF^(1/(2 df)) > 3.16`` names the
    standard-error inflation column)."""
    return without_source_tags(rule).replace("GVIF^(1/(2 df))", "std. error inflation")


def _ratio_study(rs: Mapping) -> list[Block]:
    measures = rs.get("measures") or []
    if not measures:
        return []
    rows, values = [], []
    for m in measures:
        name = str(m.get("name", ""))
        lo, hi = m.get("range_low"), m.get("range_high")
        rng = f"{plain(lo)} to {plain(hi)}" if lo is not None and hi is not None else ""
        ci = ""
        if m.get("ci_low") is not None and m.get("ci_high") is not None:
            ci = (
                f"\n{percent(PRB_CI_LEVEL)} interval {number(m.get('ci_low'), 3)} to "
                f"{number(m.get('ci_high'), 3)}"
            )
        shown = fixed(m.get("value"), MEASURE_DECIMALS.get(name, 4))
        if name in PERCENT_MEASURES and shown != MISSING:
            shown += "%"
        source = "; ".join(
            without_source_tags(s)
            for s in (str(m.get("source") or ""), str(m.get("note") or ""))
            if s
        )
        source = source.replace("; interval is 95 %", "")
        rows.append(
            (
                RATIO_MEASURE_LABELS.get(name, str(m.get("label", name))),
                shown + ci,
                rng,
                str(m.get("verdict", "")),
                source,
            )
        )
        values.append((m.get("label"), m.get("value"), rng, m.get("verdict"), source))
    trimmed = rs.get("trimmed") or []
    note = f"Ratio = model value / sale price, {plain(rs.get('n'))} sales"
    note += f"; {len(trimmed)} trimmed as outliers." if rs.get("trim") else "; no trimming."
    return [
        Table(
            key="ratio_study",
            title="Ratio study",
            columns=("Measure", "Value", "Acceptable range", "Verdict", "Source and notes"),
            rows=tuple(rows),
            values=tuple(values),
            align=("l", "r", "l", "l", "l"),
            note=note,
        )
    ]
