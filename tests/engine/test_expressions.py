"""The expression language: parsing, the whitelist, names, and the elementwise functions."""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from appraise.engine.errors import ExpressionError, UnknownNameError
from appraise.engine.expressions import (
    Binary,
    Call,
    Column,
    DerivedRef,
    Name,
    Number,
    Text,
    Unary,
    check_expression,
    expression_inputs,
    feature_shape,
    parse_expression,
    protect_backquotes,
    to_text,
)
from appraise.engine.functions import (
    DAYS_PER_MONTH,
    EARTH_MEAN_RADIUS_KM,
    FUNCTIONS,
    distance_km,
    hinge,
    months_between,
    years_between,
)
from appraise.engine.roles import RoleMap

COLUMNS = ["Living Area (sq ft)", "lot_area", "year_built", "region", "sale_date", "lat", "lon"]
ROLES = RoleMap({"living_area": "Living Area (sq ft)", "latitude": "lat", "longitude": "lon"})


# --- parsing and normalised text ----------------------------------------------------------
def test_normalised_text_puts_single_spaces_round_operators():
    assert to_text(parse_expression("living_area*dist_km")) == "living_area * dist_km"
    assert to_text(parse_expression("log(  lot_area )")) == "log(lot_area)"
    assert to_text(parse_expression("+x")) == "x"  # unary plus is dropped


def test_backquoted_names_keep_spaces_and_brackets():
    tree = parse_expression("log(`Living Area (sq ft)`) / 2")
    assert tree == Binary("/", Call("log", (Name("Living Area (sq ft)"),)), Number(2))
    assert to_text(tree) == "log(`Living Area (sq ft)`) / 2"


def test_backquote_inside_a_quoted_string_is_left_alone():
    prot = protect_backquotes("onehot(region, ref='a`b')")
    assert prot.names == {}
    tree = parse_expression("onehot(region, ref='a`b')")
    assert tree.keyword("ref") == Text("a`b")


def test_placeholders_keep_the_length_so_offsets_stay_true():
    text = "`Living Area (sq ft)` + `x y`"
    assert len(protect_backquotes(text).text) == len(text)


# Operator precedence and associativity are Python's (Python Language Reference,
# section 6 "Expressions": ** binds tighter than unary minus on its left and is
# right-associative; - and / are left-associative).
@pytest.mark.parametrize(
    ("text", "tree"),
    [
        ("-a ** 2", Unary("-", Binary("**", Name("a"), Number(2)))),
        ("2 ** 3 ** 2", Binary("**", Number(2), Binary("**", Number(3), Number(2)))),
        ("a - b - c", Binary("-", Binary("-", Name("a"), Name("b")), Name("c"))),
        ("a / b * c", Binary("*", Binary("/", Name("a"), Name("b")), Name("c"))),
        ("a ** -b", Binary("**", Name("a"), Unary("-", Name("b")))),
        ("a + b * c", Binary("+", Name("a"), Binary("*", Name("b"), Name("c")))),
    ],
)
def test_precedence_follows_python(text, tree):
    assert parse_expression(text) == tree


_names = st.sampled_from(["a", "b", "lot_area", "Living Area (sq ft)"]).map(Name)
_numbers = st.one_of(
    st.integers(min_value=0, max_value=1000),
    st.floats(min_value=0, max_value=1e6, allow_nan=False, allow_infinity=False),
).map(Number)


def _extend(children):
    return st.one_of(
        st.builds(Binary, st.sampled_from(["+", "-", "*", "/", "**"]), children, children),
        st.builds(Unary, st.just("-"), children),
        st.builds(lambda f, x: Call(f, (x,)), st.sampled_from(["log", "sqrt", "abs"]), children),
        st.builds(lambda x, y: Call("hinge", (x, y)), children, children),
    )


_trees = st.recursive(st.one_of(_names, _numbers), _extend, max_leaves=12)


@settings(max_examples=300, deadline=None)
@given(_trees)
def test_normalised_text_parses_back_to_the_same_tree(tree):
    # Property: to_text must insert every parenthesis the tree needs, and no more
    # than parsing undoes; a missing one would change the tree.
    assert parse_expression(to_text(tree)) == tree


_alphabet = st.sampled_from(
    list("ab_`'\"()+-*/.,=[]{}<>!~%&|@:;#\\ \n\t\x00é0123456789")
    + ["log", "poly", "onehot", "degree=", "ref=", "lambda", "__", "**", "1e999", "months_between"]
)


@settings(max_examples=500, deadline=None)
@given(st.lists(_alphabet, max_size=30).map("".join))
def test_any_text_either_parses_or_raises_expression_error(text):
    # Property: the parser never fails with anything but its own error class, and
    # whatever it accepts prints to text that parses back to the same tree.
    try:
        tree = parse_expression(text)
    except ExpressionError:
        return
    assert parse_expression(to_text(tree)) == tree


# --- the whitelist ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("text", "piece"),
    [
        ("lot_area.real", "lot_area.real"),
        ("lot_area[0]", "lot_area[0]"),
        ("(lambda: 1)()", "lambda"),
        ("lot_area > 1", "lot_area > 1"),
        ("lot_area and region", "lot_area and region"),
        ("lot_area if region else 1", "lot_area if region else 1"),
        ("__class__", "__class__"),
        ("log(__builtins__)", "__builtins__"),
        ("[lot_area]", "[lot_area]"),
        ("(lot_area, region)", "lot_area, region"),
        ("lot_area // 2", "lot_area // 2"),
        ("lot_area % 2", "lot_area % 2"),
        ("~lot_area", "~lot_area"),
        ("not lot_area", "not lot_area"),
        ("True + lot_area", "True"),
        ("None", "None"),
        ("2j * lot_area", "2j"),
        ("'abc' + lot_area", "'abc'"),
        ("f'{lot_area}'", "f'{lot_area}'"),
        ("(y := lot_area)", "y := lot_area"),
        ("log(*lot_area)", "*lot_area"),
        ("log(**lot_area)", "**lot_area"),
        ("np.log(lot_area)", "np.log(lot_area)"),
        ("log(lot_area)(2)", "log(lot_area)(2)"),
        ("`lot area`(2)", "`lot area`(2)"),
        ("{1: lot_area}", "{1: lot_area}"),
        ("1e999 * lot_area", "1e999"),
    ],
)
def test_disallowed_syntax_names_expression_and_piece(text, piece):
    with pytest.raises(ExpressionError) as err:
        parse_expression(text)
    msg = str(err.value)
    assert f"'{text}'" in msg
    assert piece in msg
    assert not isinstance(err.value, UnknownNameError)


def test_dunder_call_is_refused_as_an_unknown_function():
    with pytest.raises(UnknownNameError, match="unknown function '__import__'"):
        parse_expression("__import__('os')")


@pytest.mark.parametrize("text", ["log(", "lot_area +", "2 3", ")", "lot_area\nregion", "a = 1"])
def test_syntax_errors_quote_the_expression(text):
    with pytest.raises(ExpressionError, match="cannot read"):
        parse_expression(text)


@pytest.mark.parametrize("text", ["`lot area", "log(``)"])
def test_bad_backquotes(text):
    with pytest.raises(ExpressionError, match="backquote"):
        parse_expression(text)


def test_empty_and_overlong_expressions():
    with pytest.raises(ExpressionError):
        parse_expression("   ")
    with pytest.raises(ExpressionError, match="limit"):
        parse_expression("+".join(["a"] * 600))


def test_deep_nesting_is_refused_not_a_crash():
    with pytest.raises(ExpressionError, match="nested"):
        parse_expression("log(" * 120 + "a" + ")" * 120)


def test_unknown_function_suggests_the_closest():
    with pytest.raises(UnknownNameError, match="did you mean log") as err:
        parse_expression("lgo(lot_area)")
    assert "'lgo(lot_area)'" in str(err.value)


@pytest.mark.parametrize(
    "text",
    [
        "log(a, b)",
        "log()",
        "hinge(a)",
        "distance_km(a, b, c)",
        "min(a)",
        "onehot(a, b)",
        "months_between(a)",
        "poly(degree=2)",
    ],
)
def test_wrong_argument_count(text):
    with pytest.raises(ExpressionError, match="argument"):
        parse_expression(text)


@pytest.mark.parametrize("text", ["log(a, base=2)", "onehot(a, degree=2)", "poly(a, ref='x')"])
def test_keyword_not_taken_by_that_function(text):
    with pytest.raises(ExpressionError, match="not allowed"):
        parse_expression(text)


def test_min_and_max_take_two_or_more():
    assert parse_expression("max(a, b, c)") == Call("max", (Name("a"), Name("b"), Name("c")))


# --- onehot and poly placement and options -------------------------------------------------------
def test_onehot_and_poly_are_whole_features():
    assert feature_shape(parse_expression("onehot(region)")).kind == "onehot"
    shape = feature_shape(parse_expression("poly(age, log(lot_area), degree=3)"))
    assert (shape.kind, shape.degree, len(shape.args)) == ("poly", 3, 2)
    assert feature_shape(parse_expression("onehot(bedrooms, ref=3)")).ref == 3.0


@pytest.mark.parametrize(
    "text",
    [
        "onehot(region) * 2",
        "log(onehot(region))",
        "poly(onehot(region), degree=2)",
        "1 + poly(a, degree=2)",
        "onehot(poly(a, degree=2))",
    ],
)
def test_expanding_functions_inside_arithmetic_are_refused(text):
    with pytest.raises(ExpressionError, match="expands to several columns"):
        parse_expression(text)


def test_expanding_functions_refused_in_a_derived_variable():
    with pytest.raises(ExpressionError, match="single value"):
        parse_expression("onehot(region)", allow_expanding=False)


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("poly(a, degree=0)", "whole number >= 1"),
        ("poly(a, degree=-1)", "whole number >= 1"),
        ("poly(a, degree=2.5)", "whole number >= 1"),
        ("poly(a, degree=2.0)", "whole number >= 1"),
        ("poly(a, degree=b)", "whole number >= 1"),
        ("poly(a, degree='two')", "quoted text"),
        ("poly(a, b)", "needs degree"),
        ("poly(a, a, degree=2)", "more than once"),
        ("poly(a, 3, degree=2)", "involve a column"),
        ("onehot(region, ref=b)", "ref= must be a quoted level"),
    ],
)
def test_bad_options_of_expanding_functions(text, match):
    with pytest.raises(ExpressionError, match=match):
        parse_expression(text)


# --- dates ------------------------------------------------------------------------------------
@pytest.mark.parametrize("ref", ["2026-6-30", "30/06/2026", "2026-02-30", "yesterday"])
def test_reference_date_must_be_iso(ref):
    with pytest.raises(ExpressionError, match="YYYY-MM-DD"):
        parse_expression(f"months_between(sale_date, '{ref}')")


def test_text_only_where_a_function_takes_it():
    with pytest.raises(ExpressionError, match="quoted text"):
        parse_expression("months_between('2026-01-01', sale_date)")


def test_months_between_is_days_over_an_average_gregorian_month():
    sale = np.array(["2025-06-30", "2026-06-30", "2026-09-15"], dtype="datetime64[ns]")
    ref = np.datetime64("2026-06-30", "ns")
    # Independent: day counts from Python's datetime calendar arithmetic, and the
    # Gregorian mean year 365.2425 days (400-year cycle of 146097 days) / 12.
    days = [
        (dt.date(2025, 6, 30) - dt.date(2026, 6, 30)).days,
        0,
        (dt.date(2026, 9, 15) - dt.date(2026, 6, 30)).days,
    ]
    assert_allclose(months_between(sale, ref), np.array(days) / (146097 / 400 / 12), rtol=1e-12)
    assert months_between(sale, ref)[0] < 0  # earlier sales are negative
    assert_allclose(DAYS_PER_MONTH, 30.436875, rtol=0, atol=1e-12)


def test_years_between_and_missing_dates():
    d = np.array(["2024-06-30", "NaT"], dtype="datetime64[ns]")
    out = years_between(d, np.datetime64("2026-06-30", "ns"))
    # 2024-06-30 to 2026-06-30 spans 730 days (2025 and 2026 are not leap years
    # after February 2024): checked with Python's datetime.
    assert (dt.date(2026, 6, 30) - dt.date(2024, 6, 30)).days == 730
    assert_allclose(out[0], -730 / 365.2425, rtol=1e-12)
    assert np.isnan(out[1])


# --- distance -----------------------------------------------------------------------------------
def _law_of_cosines_km(lat1, lon1, lat2, lon2):
    # Independent formula: spherical law of cosines, d = R acos(sin p1 sin p2 + cos p1 cos p2 cos dl).
    p1, p2, dl = map(math.radians, (lat1, lat2, lon2 - lon1))
    c = math.sin(p1) * math.sin(p2) + math.cos(p1) * math.cos(p2) * math.cos(dl)
    return EARTH_MEAN_RADIUS_KM * math.acos(max(-1.0, min(1.0, c)))


@pytest.mark.parametrize(
    "pts",
    [
        (51.5074, -0.1278, 48.8566, 2.3522),
        (44.0412, -71.3021, 44.10, -71.20),
        (-33.87, 151.21, 35.68, 139.69),
        (0.0, 179.5, 0.0, -179.5),
    ],
)
def test_haversine_matches_the_law_of_cosines(pts):
    got = distance_km(*(np.array([v]) for v in pts))[0]
    assert_allclose(got, _law_of_cosines_km(*pts), rtol=1e-9)


def test_haversine_against_published_and_geometric_values():
    # Ed Williams, "Aviation Formulary", worked example LAX (33deg57'N, 118deg24'W) to
    # JFK (40deg38'N, 73deg47'W): central angle 0.623585 rad = 2144 nm (from memory).
    lax = (33 + 57 / 60, -(118 + 24 / 60))
    jfk = (40 + 38 / 60, -(73 + 47 / 60))
    d = distance_km(np.array([lax[0]]), np.array([lax[1]]), jfk[0], jfk[1])[0]
    assert_allclose(d / EARTH_MEAN_RADIUS_KM, 0.623585, rtol=2e-6)
    # Geometry: pole to equator is a quarter of a great circle, R * pi / 2.
    quarter = distance_km(np.array([90.0]), np.array([0.0]), 0.0, 0.0)[0]
    assert_allclose(quarter, EARTH_MEAN_RADIUS_KM * math.pi / 2, rtol=1e-12)
    # Antipodes are half a great circle (any haversine loses about half the digits
    # there: the angle is a square root of 1 - a, and a carries rounding of 1e-16).
    half = distance_km(np.array([10.0]), np.array([20.0]), -10.0, -160.0)[0]
    assert_allclose(half, EARTH_MEAN_RADIUS_KM * math.pi, rtol=1e-7)


def test_haversine_out_of_range_and_missing_give_nan():
    out = distance_km(np.array([91.0, 10.0, np.nan]), np.array([0.0, 200.0, 0.0]), 0.0, 0.0)
    assert np.isnan(out).all()


def test_hinge_is_zero_up_to_the_knot():
    x = np.array([10.0, 60.0, 75.0, np.nan])
    assert_allclose(hinge(x, 60.0), [0.0, 0.0, 15.0, np.nan], rtol=0, atol=0)


def test_every_listed_function_is_parsed_by_its_own_signature():
    # The signature shown to users must itself be a valid call (with names that exist).
    cols = ["x", "a", "b", "knot", "lat", "lon", "lat0", "lon0", "date", "category"]
    for info in FUNCTIONS.values():
        sig = info.signature.replace(", ...", "").replace("degree=m", "degree=2")
        check_expression(sig.replace("YYYY-MM-DD", "2026-06-30"), cols)


# --- names ------------------------------------------------------------------------------------
def test_names_resolve_to_columns_then_derived_then_roles():
    derived = {"age": "2026 - year_built", "dist_km": "distance_km(latitude, longitude, 44, -71)"}
    check_expression("log(living_area) * dist_km + age", COLUMNS, derived=derived, roles=ROLES)
    assert expression_inputs(
        "log(living_area) * dist_km + age", COLUMNS, derived=derived, roles=ROLES
    ) == ("Living Area (sq ft)", "lat", "lon", "year_built")


def test_a_column_header_wins_over_a_derived_name_of_the_same_spelling():
    from appraise.engine.expressions import NameScope

    scope = NameScope.of(["age"], {"age": "2026 - age"})
    assert scope.resolve(parse_expression("age"), "age") == Column("age", "age")
    # ...and the derived variable's own use of 'age' is the column, so there is no cycle.
    tree = NameScope.of(["year"], {"age": "2026 - year", "old": "age > 1"})
    assert isinstance(tree.resolve(parse_expression("age"), "age"), DerivedRef)


def test_unknown_name_suggests_columns_derived_and_roles():
    with pytest.raises(UnknownNameError, match="did you mean living_area") as err:
        check_expression("log(living_are)", COLUMNS, roles=ROLES)
    assert "'log(living_are)'" in str(err.value)
    with pytest.raises(UnknownNameError, match="did you mean `Living Area"):
        check_expression("`living area (sq ft)`", COLUMNS)
    with pytest.raises(UnknownNameError, match="did you mean months"):
        check_expression(
            "month", COLUMNS, derived={"months": "months_between(sale_date, '2026-06-30')"}
        )


def test_role_mapped_to_a_missing_column():
    with pytest.raises(UnknownNameError, match="not in the sales"):
        check_expression("bathrooms", COLUMNS, roles=RoleMap({"bathrooms": "Baths"}))


@pytest.mark.parametrize(
    ("derived", "cycle"),
    [
        ({"a": "a + 1"}, "a -> a"),
        ({"a": "b * 2", "b": "log(a)"}, "a -> b -> a"),
        ({"a": "b", "b": "c", "c": "a"}, "a -> b -> c -> a"),
    ],
)
def test_derived_cycles_are_errors(derived, cycle):
    with pytest.raises(ExpressionError, match="cycle") as err:
        check_expression("a", COLUMNS, derived=derived)
    assert cycle in str(err.value)
    assert "derived variable 'a'" in str(err.value)


def test_errors_inside_a_derived_variable_name_it():
    with pytest.raises(UnknownNameError, match="derived variable 'age'.*unknown name 'yr'"):
        check_expression("age", COLUMNS, derived={"age": "2026 - yr"})
    with pytest.raises(ExpressionError, match="derived variable 'r'.*single value"):
        check_expression("r", COLUMNS, derived={"r": "onehot(region)"})
