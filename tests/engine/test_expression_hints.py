"""Plain-language expression errors that say the fix.

Expected texts are this project's own wording (appraise/engine/expressions.py); each
suggested fix is checked by parsing it back.
"""

from __future__ import annotations

import pytest

from appraise.engine.errors import ExpressionError
from appraise.engine.expressions import backquote_hint, check_expression

COLUMNS = ["Living Area (sq ft)", "Living Area", "Sale-Price", "living_area", "Beds"]


@pytest.mark.parametrize(
    ("typed", "fix"),
    [
        ("log(Living Area (sq ft))", "log(`Living Area (sq ft)`)"),
        ("Living Area / 1000", "`Living Area` / 1000"),
        ("Sale-Price", "`Sale-Price`"),
        ("log(Living Area (sq ft)) * Living Area", "log(`Living Area (sq ft)`) * `Living Area`"),
    ],
)
def test_a_header_with_spaces_is_offered_in_backquotes(typed, fix):
    with pytest.raises(ExpressionError, match="needs backquotes") as caught:
        check_expression(typed, COLUMNS)
    assert caught.value.message.endswith(fix)
    check_expression(fix, COLUMNS)  # the fix is accepted


def test_no_hint_when_nothing_needs_quoting():
    assert backquote_hint("log(Bedz)", COLUMNS) is None
    assert backquote_hint("log(`Living Area`)", COLUMNS) is None
    with pytest.raises(ExpressionError, match="unknown name 'Bedz'"):
        check_expression("log(Bedz)", COLUMNS)


def test_caret_is_answered_with_the_power_operator():
    with pytest.raises(ExpressionError, match=r"use \*\* for powers: living_area \*\* 2"):
        check_expression("living_area^2", COLUMNS)
    with pytest.raises(ExpressionError, match=r"use \*\* for powers: \(Beds - 1\) \*\* 3"):
        check_expression("(Beds - 1)^3", COLUMNS)
    check_expression("living_area ** 2", COLUMNS)
