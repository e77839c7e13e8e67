"""The help the window shows on F1: how features are written, the role names, the figures.

Plain content, no Qt: sections of (term, explanation) pairs built from the engine's own
lists (functions, roles), so the help never names a function or role the program lacks.
:func:`help_html` renders it for the window; every string is escaped.
"""

from __future__ import annotations

import html
from dataclasses import dataclass

from appraise.engine.functions import FUNCTIONS
from appraise.engine.roles import ROLES
from appraise.report.cautions import FULL_CAUTIONS
from appraise.report.labels import COLLINEARITY_COLUMNS, HELP

SYNTAX_EXAMPLES: tuple[tuple[str, str], ...] = (
    ("living_area", "a column by its role name (works whatever the file calls the column)"),
    ("`Living Area (sq ft)`", "a header with spaces or symbols goes in backquotes"),
    ("log(living_area)", "the logarithm: with a log price, the effect is % per % of area"),
    ("living_area ** 2", "a power (write **, not ^)"),
    ("living_area * dist_km", "an interaction: the effect of area changes with distance"),
    ("lot_area / living_area", "a ratio of two columns"),
    ("hinge(age, 60)", "zero up to 60 years, then the years beyond: a bend in the age effect"),
    ("onehot(region, ref='Old Mill')", "one 0/1 column per neighbourhood except the reference"),
    (
        "living_area * onehot(region)",
        "with living_area and onehot(region) too: a price per unit of area in each neighbourhood",
    ),
    ("poly(age, degree=2)", "age and age squared (every product up to the degree)"),
    ("months_between(sale_date, '2026-06-30')", "months from the date of value: market change"),
)
"""Feature expressions with what each one means, one sentence each."""

GLOSSARY: tuple[tuple[str, str], ...] = (
    (
        "Prediction interval",
        "The range that the price of this one property is expected to fall in at the stated "
        "level, under the model's assumptions; wider than the interval for the mean price of "
        "similar properties.",
    ),
    (
        "Interval for the mean",
        "The range for the average price of many properties like the subject; it leaves out "
        "the scatter of single sales, so it is narrower than the prediction interval.",
    ),
    (
        "COD (coefficient of dispersion)",
        "The average distance of the value-to-price ratios from their median, as a percentage "
        "of the median: 100 x mean(|ratio - median|) / median; lower means more uniform.",
    ),
    (
        "PRD (price-related differential)",
        "The mean ratio divided by the price-weighted mean ratio; above 1 suggests cheaper "
        "properties are valued relatively higher than dear ones.",
    ),
    (
        "PRB (price-related bias)",
        "The change in the ratio when value doubles, from a regression of the ratio's "
        "relative distance from the median on log2 of value; near 0 means no bias by price.",
    ),
    (
        "Leverage",
        "How far a sale's (or the subject's) attributes lie from the bulk of the sales, "
        "between 0 and 1; a high value means the model is extrapolating there.",
    ),
    (
        "Cook's distance",
        "How much all the fitted values would move if this one sale were left out, scaled by "
        "the error spread; a large value marks a sale that steers the model.",
    ),
    (
        "Leave-one-out value",
        "The value the model gives a sale when it is fitted without that sale, so the sale "
        "cannot vouch for itself.",
    ),
    (
        "PPE10",
        "The share of sales whose leave-one-out value lies within 10% of the price.",
    ),
    (
        "Condition number",
        "How close the features come to repeating each other; a large number means small "
        "changes in the sales can swing the individual effects, though the value may hold.",
    ),
    # the checks' headings that replace statistics print-out names, with their formulas
    *(
        (name, HELP[name])
        for name in (
            COLLINEARITY_COLUMNS["gvif"],
            COLLINEARITY_COLUMNS["gvif_root"],
            "Studentized residual",
        )
    ),
    (
        "Reference level",
        "The neighbourhood (or other category) that the others are compared with; its effect "
        "is zero by definition.",
    ),
)
"""Figures the window shows, each explained in one sentence."""


@dataclass(frozen=True)
class HelpSection:
    """A heading, a line of introduction and (term, explanation) rows."""

    key: str
    title: str
    intro: str
    rows: tuple[tuple[str, str], ...]
    code_terms: bool = False  # the terms are text to type (shown in a fixed-width font)


def function_rows() -> tuple[tuple[str, str], ...]:
    """Every function an expression may call, with its summary (from the engine's table)."""
    return tuple((info.signature, info.summary) for info in FUNCTIONS.values())


def role_rows() -> tuple[tuple[str, str], ...]:
    """Every role name an expression may use, with what the column holds."""
    return tuple((name, description) for name, description in ROLES.items())


def help_sections() -> tuple[HelpSection, ...]:
    """The help, in the order the window shows it."""
    return (
        HelpSection(
            "syntax",
            "Writing a feature",
            "One feature per row of the model editor. Use + - * / ** and parentheses, numbers, "
            "role names, headers (in backquotes when they hold spaces or symbols) and the "
            "functions below. Press F2 in the editor for a list of every name you can type.",
            SYNTAX_EXAMPLES,
            code_terms=True,
        ),
        HelpSection(
            "functions",
            "Functions",
            "Every function a feature may call.",
            function_rows(),
            code_terms=True,
        ),
        HelpSection(
            "roles",
            "Role names",
            "Once a column has a role (see Column roles), its role name works in any feature "
            "in place of the header.",
            role_rows(),
            code_terms=True,
        ),
        HelpSection(
            "glossary",
            "What the figures mean",
            "The checks and the subject panel use these terms.",
            GLOSSARY,
        ),
        HelpSection(
            "caution",
            "What the estimate is",
            "",
            tuple(FULL_CAUTIONS),
        ),
    )


def help_html(sections: tuple[HelpSection, ...] | None = None) -> str:
    """The help as simple HTML (headings, tables of term and explanation), all text escaped."""
    parts: list[str] = []
    for section in sections or help_sections():
        parts.append(f"<h2 id='{section.key}'>{html.escape(section.title)}</h2>")
        if section.intro:
            parts.append(f"<p>{html.escape(section.intro)}</p>")
        parts.append("<table cellspacing='0' cellpadding='3'>")
        for term, text in section.rows:
            shown = html.escape(term)
            if section.code_terms:
                shown = f"<code>{shown}</code>"
            else:
                shown = f"<b>{shown}</b>"
            parts.append(
                f"<tr><td valign='top' style='padding-right:12px'>{shown}</td>"
                f"<td valign='top'>{html.escape(text)}</td></tr>"
            )
        parts.append("</table>")
    return "\n".join(parts)
