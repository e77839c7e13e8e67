"""Names a reader sees for fields, terms and checks: one table the window and the
worksheet share (no Qt here).

The engine names things the way the model file and the JSON do (``bedrooms``,
``region[Copper Hill]``, ``gvif_root``); people read "Bedrooms", "Neighbourhood:
Copper Hill" and "Std. error inflation". The raw names stay in exports and JSON.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from types import MappingProxyType

FIELD_LABELS: Mapping[str, str] = MappingProxyType(
    {
        "address": "Address",
        "effective_date": "Effective date",
        "sale_date": "Sale date",
        "price": "Sale price",
        "living_area": "Living area",
        "lot_area": "Lot area",
        "year_built": "Year built",
        "bedrooms": "Bedrooms",
        "bathrooms": "Bathrooms",
        "latitude": "Latitude",
        "longitude": "Longitude",
        "region": "Neighbourhood",
        "condition": "Condition",
        "arms_length": "Arm's length",
        "sale_id": "Sale id",
        "id": "Id",
    }
)
"""Role names (and the subject's own keys) with the label shown for them."""

AREA_FIELDS: tuple[str, ...] = ("living_area", "lot_area")

AREA_UNIT_LABELS: Mapping[str, str] = MappingProxyType({"ft2": "sq ft", "m2": "m²"})
"""How an area unit (``SalesTable.area_unit``) is written beside a number."""


def area_unit_label(unit: str | None) -> str:
    """``"ft2" -> "sq ft"``, ``"m2" -> "m²"``; anything else as given."""
    return AREA_UNIT_LABELS.get(str(unit), str(unit or ""))


def field_label(name: str, area_unit: str | None = None) -> str:
    """The label of a subject or sale field.

    A role name or known key gets its label from :data:`FIELD_LABELS`; an area
    role gets its unit when ``area_unit`` is given (``Living area (sq ft)``). Any
    other name is a header from the file: a snake_case name is written out
    (``garage_spaces -> "Garage spaces"``), a header with capitals or spaces is
    kept as the file has it.
    """
    label = FIELD_LABELS.get(name)
    if label is None:
        text = str(name)
        label = text.replace("_", " ").capitalize() if text == text.lower() else text
    if name in AREA_FIELDS and area_unit:
        label = f"{label} ({area_unit_label(area_unit)})"
    return label


_LEVEL = re.compile(r"^(?P<term>.+?)\[(?P<level>.*)\]$")
_POWER = re.compile(r"\^(\d+)")
_SUPERSCRIPTS = str.maketrans("0123456789", "⁰¹²³⁴⁵⁶⁷⁸⁹")


def term_label(name: str) -> str:
    """A design column as a reviewer reads it.

    ``region[Copper Hill] -> "region: Copper Hill"``; ``age^2 -> "age²"``;
    ``living_area * dist_km -> "living_area × dist_km"``. The expression itself is
    kept otherwise, so the line can still be found in the model file.
    """
    text = str(name)
    m = _LEVEL.match(text)
    if m and "(" not in m.group("term"):
        text = f"{m.group('term')}: {m.group('level')}"
    text = _POWER.sub(lambda p: p.group(1).translate(_SUPERSCRIPTS), text)
    return text.replace(" * ", " × ")


_ONEHOT = re.compile(r"^(?:(?P<factor>.+?) \* )?onehot\((?P<column>[^,()]+)(?:,[^()]*)?\)$")
_POLY = re.compile(r"^poly\((?P<inputs>[^=()]+?),\s*degree=(?P<degree>\d+)\)$")


def group_label(expression: str) -> str:
    """A feature's expression as the name of its adjustment line or group.

    ``onehot(condition, ref='average') -> "condition"``;
    ``living_area * onehot(region) -> "living_area × region"``;
    ``poly(age, degree=2) -> "age (degree 2)"``; anything else as :func:`term_label`.
    """
    text = str(expression).strip()
    m = _ONEHOT.match(text)
    if m:
        column = m.group("column").strip().strip("`")
        factor = m.group("factor")
        return f"{term_label(factor)} × {column}" if factor else column
    m = _POLY.match(text)
    if m:
        return f"{m.group('inputs').strip()} (degree {m.group('degree')})"
    return term_label(text)


_SOURCE_TAG = re.compile(r"\s*\((?:verified|memory|recalled from memory)\)", re.IGNORECASE)


def without_source_tags(text: str) -> str:
    """Drop the "(verified)" / "(memory)" tags the engine keeps beside a rule's source
    for the tests and the JSON; a reader of the worksheet or the window gets the
    source without them."""
    return _SOURCE_TAG.sub("", str(text))


# --- checks --------------------------------------------------------------------------

COLLINEARITY_COLUMNS: Mapping[str, str] = MappingProxyType(
    {
        "term": "Term",
        "df": "Columns",
        "gvif": "Variance inflation",
        "gvif_root": "Std. error inflation (×)",
        "flagged": "Flagged",
    }
)
"""Headings of the collinearity table (keys as in the diagnostics JSON)."""

RATIO_MEASURE_LABELS: Mapping[str, str] = MappingProxyType(
    {
        "median": "Median ratio",
        "mean": "Mean ratio",
        "weighted_mean": "Weighted mean ratio",
        "cod": "COD (coefficient of dispersion)",
        "prd": "PRD (price-related differential)",
        "prb": "PRB (price-related bias)",
        "ppe10": "PPE10 (valued within 10% of price)",
    }
)
"""Ratio-study measures by their JSON name."""

RATIO_MEASURE_SHORT: Mapping[str, str] = MappingProxyType(
    {
        "median": "Median ratio",
        "mean": "Mean ratio",
        "weighted_mean": "Weighted mean ratio",
        "cod": "COD",
        "prd": "PRD",
        "prb": "PRB",
        "ppe10": "PPE10",
    }
)
"""The same, short enough for a tile of the checks' summary (the long name goes in its tip)."""

BREUSCH_PAGAN_FORMS: Mapping[str, str] = MappingProxyType(
    {
        "koenker": "Koenker's studentized form",
        "original": "original form (assumes normal errors)",
    }
)

HELP: Mapping[str, str] = MappingProxyType(
    {
        "Variance inflation": (
            "How much the variance of a term's coefficient grows because the term is "
            "explained by the other terms. One column: VIF = 1 / (1 - R²) of that column "
            "on the others. A group of columns (a onehot or a polynomial): the generalized "
            "VIF, GVIF = det(R11) det(R22) / det(R), from the correlation matrix R of the "
            "columns (Fox and Monette 1992)."
        ),
        "Std. error inflation (×)": (
            "How many times wider the term's confidence interval is than it would be if the "
            "term were unrelated to the others: GVIF^(1/(2 df)), where df is the number of "
            "its columns (the square root of the VIF for one column). Comparable across "
            "terms of different sizes; above about 3.16 (the square root of 10) the term's "
            "own coefficient is unstable."
        ),
        "Condition number": (
            "The ratio of the largest to the smallest singular value of the design with "
            "each column scaled to unit length (Belsley). Large values mean some "
            "combination of columns is nearly constant, so single coefficients are "
            "unstable even where the estimate of value is not."
        ),
        "Breusch-Pagan": (
            "Tests whether the spread of the residuals changes with the terms. Koenker's "
            "studentized form, LM = n R² of the squared residuals on the terms, does not "
            "assume normal errors; the original form, ESS / 2, does."
        ),
        "Studentized residual": (
            "A sale's price gap (sale minus model, on the model's scale) in standard errors "
            "of a model fitted without that sale: e_i / (s_(i) sqrt(1 - h_i)), with h_i "
            "its leverage; beyond about 3 either way the price is far from what the other "
            "sales predict."
        ),
        "Jarque-Bera": (
            "Tests whether the residuals are normal from their skewness S and kurtosis K: "
            "JB = n / 6 (S² + (K - 3)² / 4)."
        ),
    }
)
"""One sentence or two per figure whose heading hides a formula; for the help."""
