"""Build the valuation worksheet content from a fit, a valuation and (optionally)
diagnostics and rendered figures.

Everything printed is formatted here, once, with :mod:`appraise.report.numbers`;
renderers only place the strings. Nothing here imports Qt: figures arrive as
PNG bytes already rendered (``appraise.qtrender.figures`` makes them).
"""

from __future__ import annotations

import platform
from collections import Counter
from collections.abc import Mapping, Sequence
from datetime import datetime
from pathlib import PurePath
from typing import Any

from .. import __version__
from ..engine.fitting import COEF_CI_LEVEL
from ..engine.spread import SPREAD_METHOD_TEXT
from .cautions import (
    CERTIFICATION_FIELDS,
    CERTIFICATION_STATEMENT,
    FULL_CAUTIONS,
    SHORT_CAUTION,
)
from .content import Facts, Figure, Notice, Paragraph, Section, SignatureBlock, Table, Worksheet
from .diagnostics_section import diagnostics_blocks, diagnostics_warnings
from .effects import coefficient_effects
from .labels import field_label, term_label
from .numbers import MISSING, fixed, money, number, plain, pvalue, unscientific
from .settings import ReportSettings
from .suggest_text import protected_model_columns

COV_TYPE_TEXT: Mapping[str, str] = {
    "classical": "classical (assumes the same error variance for every sale)",
    "HC0": "HC0, robust to unequal error variance (White's original)",
    "HC1": "HC1, robust to unequal error variance (White, scaled by n/(n-p))",
    "HC2": "HC2, robust to unequal error variance (each residual corrected by its leverage)",
    "HC3": "HC3, robust to unequal error variance (weights influential sales more)",
}

EXCLUDED_BY_TEXT: Mapping[str, str] = {
    "import": "reading the file",
    "model": "the model",
    "user": "the user",
}


def level_text(level: float) -> str:
    """``0.9 -> "90%"``, ``0.975 -> "97.5%"``."""
    return f"{100.0 * float(level):g}%"


def build_worksheet(
    fit: Any,
    valuation: Any,
    *,
    diagnostics: Any = None,
    figures: Sequence[Figure] = (),
    settings: ReportSettings | None = None,
    workfile_id: str | None = None,
    generated: datetime | None = None,
    grid: Any = None,
    grid_figures: Sequence[Figure] = (),
) -> Worksheet:
    """Assemble the worksheet.

    Parameters
    ----------
    fit:
        A ``FitResult`` from ``engine.fitting.fit_model``.
    valuation:
        A ``Valuation`` from ``engine.valuation.value_subject`` for the same fit.
    diagnostics:
        Optional ``Diagnostics``; adds a diagnostics section from its ``to_dict()``.
    figures:
        Rendered figures (PNG bytes + caption), printed in the order given.
    settings:
        Currency symbol, page size, title override.
    workfile_id:
        Printed in every footer; by default built from the data and model hashes.
    generated:
        Time of preparation printed in the stamp (default: now, local time).
    """
    settings = settings or ReportSettings()
    spec = fit.spec
    sales = fit.sales
    cur = settings.currency
    when = (generated or datetime.now().astimezone()).replace(microsecond=0)
    data_sha = str(sales.source.sha256)
    model_sha = spec.sha256()
    wid = workfile_id or f"{data_sha[:8]}-{model_sha[:8]}"
    if grid is not None:
        effective = str(
            grid.to_dict()["effective_date"] if hasattr(grid, "to_dict") else grid["effective_date"]
        )
    elif spec.effective_date:
        effective = str(spec.effective_date)
    else:
        effective = f"{when.date().isoformat()} (date prepared; the model sets none)"
    title = settings.title or (
        f"Valuation worksheet: {spec.title}" if spec.title else "Valuation worksheet"
    )
    estimate_table = _estimate_table(fit, valuation, cur)
    warnings = _warnings(fit, valuation)
    if diagnostics is not None:
        warnings.extend(w for w in diagnostics_warnings(diagnostics) if w not in warnings)

    sections = [
        Section("summary", "Result in brief", _summary(fit, valuation, effective, warnings, cur)),
        Section("subject", "Subject property", (_subject_facts(fit, valuation),)),
        Section("data", "Sales data", _data_blocks(fit)),
        Section("model", "Model", _model_blocks(fit, model_sha)),
        Section("coefficients", "Estimated coefficients", (_coefficient_table(fit, cur),)),
        Section("fit", "Fit", (_fit_facts(fit),)),
        Section("estimate", "Estimate for the subject", (estimate_table,)),
        Section(
            "warnings",
            "Warnings",
            (Notice("warning", tuple(warnings)),)
            if warnings
            else (Paragraph("No warnings were raised for this fit and subject."),),
        ),
    ]
    if diagnostics is not None:
        sections.append(Section("diagnostics", "Diagnostics", diagnostics_blocks(diagnostics, cur)))
    if grid is not None:
        from .grid_section import grid_blocks

        sections.append(
            Section("sales-comparison", "Sales comparison", grid_blocks(grid, cur, grid_figures))
        )
    from .regions_section import neighbourhood_blocks  # only when the model has regions

    hood_blocks = neighbourhood_blocks(fit, valuation, cur)
    if hood_blocks:
        sections.append(Section("neighbourhoods", "Neighbourhoods", hood_blocks))
    if figures:
        sections.append(Section("figures", "Figures", tuple(figures), new_page=True))
    sections.append(
        Section(
            "certification",
            "Appraiser's review and certification",
            (SignatureBlock(CERTIFICATION_STATEMENT, CERTIFICATION_FIELDS),),
            new_page=True,
        )
    )
    sections.append(Section("stamp", "Reproducibility", _stamp(fit, model_sha, when)))
    sections.append(
        Section("appendix-exclusions", "Appendix: excluded sales", _exclusion_blocks(fit), True)
    )
    sections.append(
        Section(
            "cautions",
            "Cautions and limits",
            tuple(
                Paragraph(f"{i}. {head}. {text}")
                for i, (head, text) in enumerate(FULL_CAUTIONS, start=1)
            ),
            new_page=True,
        )
    )
    return Worksheet(
        title=title,
        effective_date=effective,
        workfile_id=wid,
        sections=tuple(sections),
        page_size=settings.page_size,
        generated=when.isoformat(sep=" "),
    )


# --- sections ---------------------------------------------------------------------
def _summary(fit: Any, valuation: Any, effective: str, warnings: Sequence[str], cur: str) -> tuple:
    lvl = level_text(valuation.level)
    rows = [("Effective date of value", effective)]
    sid = _subject_id(fit, valuation)
    if sid:
        rows.insert(0, ("Subject", sid))
    if fit.spec.response == "log":
        rows.append(("Estimated price (mean)", money(valuation.estimate, cur)))
        rows.append(("Estimated price (median)", money(valuation.median, cur)))
    else:
        rows.append(("Estimated price", money(valuation.estimate, cur)))
    rows.append(
        (
            f"{lvl} prediction interval",
            f"{money(valuation.low, cur)} to {money(valuation.high, cur)}",
        )
    )
    rows.append(("Sales used", f"{fit.n:,} of {fit.sales.source.rows_in_file:,} rows in the file"))
    rows.append(("Warnings", f"{len(warnings)} (see Warnings)" if warnings else "none"))
    # a value resting on a thin or pooled level is said beside the value, not only later
    level_notes = tuple(
        w for w in (valuation.warnings or ()) if str(w).startswith("the subject's level")
    )
    blocks: list = [Facts(tuple(rows))]
    if level_notes:
        blocks.append(Notice("warning", level_notes, "Before relying on this value"))
    blocks.append(Notice("caution", (SHORT_CAUTION,), "Caution"))
    return tuple(blocks)


def _subject_id(fit: Any, valuation: Any) -> str:
    col = fit.sales.roles.column("sale_id")
    subject = dict(valuation.subject or {})
    for key in (col, "id", "address", "name"):
        if key and key in subject and plain(subject[key]) != MISSING:
            return plain(subject[key])
    return ""


def subject_field_names(fit: Any, subject: Mapping[str, Any]) -> list[tuple[str, Any]]:
    """The subject's attributes as ``(field name, value)``, named as the window names
    them: a column with a role by its role (``Beds -> bedrooms``), the sale-date column
    as ``effective_date`` (the subject has not sold), anything else by its own key.
    The price and private keys are left out; a name met twice is shown once."""
    roles = fit.sales.roles
    by_header = {h: r for r, h in roles.columns.items()}
    date_col = roles.column("sale_date")
    hidden = {"_row", fit.spec.target, roles.column("price")}
    out: dict[str, Any] = {}
    for key, value in dict(subject or {}).items():
        if key in hidden or str(key).startswith("_"):
            continue
        name = "effective_date" if key == date_col else by_header.get(key, str(key))
        if name == "effective_date" and key == date_col and "effective_date" in subject:
            continue  # the subject's own effective date is the one shown
        out.setdefault(name, value)
    first = [n for n in ("address",) if n in out]
    return [(n, out[n]) for n in first + [n for n in out if n not in first]]


def _subject_facts(fit: Any, valuation: Any) -> Facts:
    rows = []
    for name, value in subject_field_names(fit, dict(valuation.subject or {})):
        rows.append((field_label(name, fit.sales.area_unit), plain(value)))
    if not rows:
        rows.append(("Attributes", "none given"))
    return Facts(tuple(rows))


def _data_blocks(fit: Any) -> tuple:
    src = fit.sales.source
    by_source = Counter(e.source for e in fit.excluded)
    breakdown = ", ".join(
        f"{by_source[k]:,} by {EXCLUDED_BY_TEXT.get(k, k)}" for k in sorted(by_source)
    )
    rows = [
        ("Source file", PurePath(str(src.path)).name),
        ("Rows read", f"{src.rows_in_file:,}"),
        ("Rows used in the fit", f"{fit.n:,}"),
        (
            "Rows excluded",
            f"{len(fit.excluded):,}"
            + (f" ({breakdown}; listed in the appendix)" if breakdown else ""),
        ),
        ("Area unit", str(fit.sales.area_unit)),
    ]
    # Hashes go on lines of their own: beside a label they would not fit and would wrap.
    blocks: list = [Facts(tuple(rows)), Paragraph(f"SHA-256 of the file: {src.sha256}")]
    notes = tuple(str(n) for n in getattr(fit.sales, "notes", ()) or ())
    if notes:
        blocks.append(Notice("note", notes, "How the file was read"))
    return tuple(blocks)


def _model_blocks(fit: Any, model_sha: str) -> tuple:
    spec = fit.spec
    response = f"log({spec.target})" if spec.response == "log" else spec.target
    facts = Facts(
        (
            ("Response", response),
            ("Intercept", "yes" if spec.intercept else "no"),
            ("Interval level", level_text(spec.level)),
            ("Standard errors", COV_TYPE_TEXT.get(fit.cov_type, str(fit.cov_type))),
            ("Interval spread", SPREAD_METHOD_TEXT.get(spec.spread, str(spec.spread))),
        )
    )
    rows = []
    for g in fit.design.groups:
        ref = g.reference if g.reference not in (None, "") else ""
        columns = ", ".join(term_label(c) for c in g.columns)
        rows.append((g.expression, g.kind, columns, plain(ref) if ref else ""))
    features = Table(
        key="features",
        title="Features and what they expand to",
        columns=("Expression", "Kind", "Design columns", "Reference level"),
        rows=tuple(rows),
    )
    blocks: list = [facts, Paragraph(f"SHA-256 of the model: {model_sha}"), features]
    levels = tuple(getattr(fit, "levels", ()) or ())
    if levels:
        minimum = getattr(spec, "min_level_sales", 5)
        blocks.append(
            Table(
                key="levels",
                title="Sales per level",
                columns=("Feature", "Level", "Sales", "Note"),
                rows=tuple(
                    (
                        c.term,
                        c.level,
                        f"{c.count:,}",
                        ("pooled: " + ", ".join(c.pooled) if c.pooled else "")
                        + ("; " if c.pooled and c.count < minimum else "")
                        + (
                            "one sale: not estimable"
                            if c.count == 1
                            else (f"thin: fewer than {minimum}" if c.count < minimum else "")
                        )
                        + ("reference" if c.column is None and c.count >= minimum else ""),
                    )
                    for c in levels
                ),
            )
        )
    if spec.derived:
        blocks.append(
            Table(
                key="derived",
                title="Derived variables",
                columns=("Name", "Definition"),
                rows=tuple((k, v) for k, v in spec.derived.items()),
            )
        )
    return tuple(blocks)


def _coefficient_table(fit: Any, currency: str = "$") -> Table:
    """Coefficients with their plain effect; printed to four significant digits, exported
    in full (the ``values`` keep the raw term names and numbers)."""
    lvl = level_text(COEF_CI_LEVEL)  # the level the coefficient intervals were computed at
    rows = []
    values = []
    for t, effect in zip(fit.terms, coefficient_effects(fit, currency), strict=True):
        estimable = t.note is None
        rows.append(
            (
                term_label(t.name),
                number(t.coef, 4),
                number(t.se, 3) if estimable else MISSING,
                fixed(t.t, 2) if estimable else MISSING,
                pvalue(t.p) if estimable else MISSING,
                number(t.ci_low, 3) if estimable else MISSING,
                number(t.ci_high, 3) if estimable else MISSING,
                effect.text if estimable else str(t.note),
            )
        )
        values.append(
            (
                t.name,
                float(t.coef),
                float(t.se),
                float(t.t),
                float(t.p),
                float(t.ci_low),
                float(t.ci_high),
                effect.text,  # with its unit: a bare 0.40 would not say "% per month"
            )
        )
    note = f"Standard errors: {COV_TYPE_TEXT.get(fit.cov_type, str(fit.cov_type))}."
    if fit.spec.response == "log":
        note += (
            " The response is the log of price: a coefficient b changes the price by "
            "100 x (e^b - 1) percent per unit; the effect column states it per step of "
            "the input, and per 1% more of a logged input (an elasticity)."
        )
    else:
        note += " The effect column states each coefficient per step of its input."
    note += (
        " A main term that also enters a product (a x b) holds where the other input is "
        "zero; a polynomial's effect is the slope of all its powers at the sales' median."
    )
    return Table(
        key="coefficients",
        title="",
        columns=(
            "Term",
            "Coefficient",
            "Std. error",
            "t",
            "p",
            f"{lvl} low",
            f"{lvl} high",
            "Effect on price",
        ),
        rows=tuple(rows),
        values=tuple(values),
        align=("l", "r", "r", "r", "r", "r", "r", "l"),
        note=note,
    )


def _fit_facts(fit: Any) -> Facts:
    scale = " (log scale)" if fit.spec.response == "log" else ""
    rows = [
        ("Sales used (n)", f"{fit.n:,}"),
        ("Parameters (p)", f"{fit.p:,}"),
        ("Residual degrees of freedom", f"{fit.df_resid:,}"),
        ("R-squared", fixed(fit.r2, 4)),
        ("Adjusted R-squared", fixed(fit.adj_r2, 4)),
        (f"Residual standard error{scale}", number(fit.sigma, 5)),
        ("AIC", fixed(fit.aic, 1)),
        ("BIC", fixed(fit.bic, 1)),
    ]
    smearing = getattr(fit, "smearing", None)
    if fit.spec.response == "log" and smearing is not None:
        rows.append(("Smearing factor (Duan 1983)", fixed(smearing, 5)))
    return Facts(tuple(rows))


def _estimate_table(fit: Any, valuation: Any, cur: str) -> Table:
    lvl = level_text(valuation.level)
    typical = "median" if fit.spec.response == "log" else "average"
    rows: list[tuple[str, str]] = []
    values: list[tuple[str, float | None]] = []

    def add(label: str, text: str, value: float | None) -> None:
        rows.append((label, text))
        values.append((label, value))

    if fit.spec.response == "log":
        add(
            "Estimated price (mean, smearing retransformation)",
            money(valuation.estimate, cur),
            _f(valuation.estimate),
        )
        add(
            "Estimated price (median, exp of the log prediction)",
            money(valuation.median, cur),
            _f(valuation.median),
        )
    else:
        add("Estimated price", money(valuation.estimate, cur), _f(valuation.estimate))
    add(f"{lvl} prediction interval: low", money(valuation.low, cur), _f(valuation.low))
    add(f"{lvl} prediction interval: high", money(valuation.high, cur), _f(valuation.high))
    add("Interval level", lvl, float(valuation.level))
    # For a log response the interval for the mean of log price maps to the median price.
    for end, value in (("low", valuation.mean_low), ("high", valuation.mean_high)):
        add(
            f"{lvl} interval for the {typical} price of similar properties: {end}",
            money(value, cur),
            _f(value),
        )
    add("Leverage of the subject", fixed(valuation.leverage, 4), _f(valuation.leverage))
    add(
        "Largest leverage among the sales",
        fixed(valuation.max_sample_leverage, 4),
        _f(valuation.max_sample_leverage),
    )
    return Table(
        key="estimate",
        title="",
        columns=("Quantity", "Value"),
        rows=tuple(rows),
        values=tuple(values),
        align=("l", "r"),
        note=(
            "The prediction interval is for the price of this one property; the interval "
            f"for the {typical} of similar properties is narrower because it leaves out the "
            "scatter of single sales. Amounts are rounded to whole currency units."
        ),
    )


def _f(x: Any) -> float | None:
    try:
        return None if x is None else float(x)
    except (TypeError, ValueError):
        return None


def _warnings(fit: Any, valuation: Any) -> list[str]:
    seen: dict[str, None] = {}
    protected = protected_model_columns(fit)  # a column the fair-lending guard refuses
    for w in (*protected, *tuple(fit.warnings or ()), *tuple(valuation.warnings or ())):
        text = unscientific(str(getattr(w, "message", w)))
        seen.setdefault(text, None)
    return list(seen)


def _stamp(fit: Any, model_sha: str, when: datetime) -> tuple:
    import numpy
    import pandas
    import statsmodels

    versions = Facts(
        (
            ("Prepared", when.isoformat(sep=" ")),
            ("appraise", __version__),
            ("Python", platform.python_version()),
            ("numpy", numpy.__version__),
            ("pandas", pandas.__version__),
            ("statsmodels", statsmodels.__version__),
        )
    )
    return (
        versions,
        Paragraph(f"SHA-256 of the data file: {fit.sales.source.sha256}"),
        Paragraph(f"SHA-256 of the model: {model_sha}"),
    )


def _exclusion_blocks(fit: Any) -> tuple:
    if not fit.excluded:
        return (Paragraph("No rows were excluded."),)
    rows = []
    values = []
    for e in sorted(fit.excluded, key=lambda e: (e.row, e.source)):
        sid = "" if e.sale_id is None else str(e.sale_id)
        col = "" if e.column is None else str(e.column)
        by = EXCLUDED_BY_TEXT.get(e.source, e.source)
        rows.append((str(int(e.row)), sid, by, col, e.reason))
        values.append((int(e.row), sid, by, col, e.reason))
    return (
        Table(
            key="exclusions",
            title="",
            columns=("File row", "Sale id", "Excluded by", "Column", "Reason"),
            rows=tuple(rows),
            values=tuple(values),
            align=("r", "l", "l", "l", "l"),
            note="File rows count the header as row 1, as a spreadsheet shows them.",
        ),
    )
