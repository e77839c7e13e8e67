"""The model file: parsing, validation errors naming the key, and a TOML round trip."""

from __future__ import annotations

from dataclasses import replace

import pytest
from hypothesis import given
from hypothesis import strategies as st

from appraise.engine.errors import ModelFileError
from appraise.engine.modelspec import load_model, parse_model

GOOD = """
title = "Test"
target = "price"
response = "log"
level = 0.8
cov_type = "HC3"
features = ["log(living_area)", "onehot(region, ref='North')"]
effective_date = 2026-06-30

[derived]
age = "2026 - year_built"

[[exclude]]
id = "S-1"
reason = "family sale"
"""


def test_parses_every_setting():
    spec = parse_model(GOOD)
    assert spec.target == "price"
    assert spec.response == "log"
    assert spec.level == 0.8
    assert spec.cov_type == "HC3"
    assert spec.features == ("log(living_area)", "onehot(region, ref='North')")
    assert dict(spec.derived) == {"age": "2026 - year_built"}
    assert spec.exclude[0].sale_id == "S-1" and spec.exclude[0].reason == "family sale"
    assert spec.effective_date == "2026-06-30"


def test_defaults():
    spec = parse_model('target = "price"\nfeatures = ["area"]\n')
    assert (spec.response, spec.level, spec.cov_type, spec.intercept) == (
        "linear",
        0.90,
        "classical",
        True,
    )


def test_round_trip_through_toml_is_identical():
    spec = parse_model(GOOD)
    again = parse_model(spec.to_toml())
    assert again == spec
    assert again.sha256() == spec.sha256()


@given(
    feats=st.lists(
        st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")), min_size=1).filter(
            lambda s: s.strip() == s and s
        ),
        min_size=1,
        max_size=5,
    ),
    title=st.text(alphabet=st.characters(blacklist_categories=("Cs",))),
)
def test_round_trip_any_strings(feats, title):
    spec = parse_model('target = "price"\nfeatures = ["x"]\n')
    spec = replace(spec, features=tuple(feats), title=title)
    assert parse_model(spec.to_toml()) == spec


@pytest.mark.parametrize(
    "text, key",
    [
        ('features = ["a"]', "target"),
        ('target = "p"\nfeatures = []', "features"),
        ('target = "p"\nfeatures = [1]', "features"),
        ('target = "p"\nfeatures = ["a"]\nresponse = "sqrt"', "response"),
        ('target = "p"\nfeatures = ["a"]\nlevel = 1.5', "level"),
        ('target = "p"\nfeatures = ["a"]\nlevel = true', "level"),
        ('target = "p"\nfeatures = ["a"]\ncov_type = "HC9"', "cov_type"),
        ('target = "p"\nfeatures = ["a"]\n[[exclude]]\nid = "x"', "exclude"),
        ('target = "p"\nfeatures = ["a"]\nfeaturs = ["b"]', "featurs"),
        ('target = "p"\nfeatures = ["a"]\n[derived]\nx = 3', "derived"),
    ],
)
def test_errors_name_the_key(text, key):
    with pytest.raises(ModelFileError) as ei:
        parse_model(text, source="m.toml")
    assert key in str(ei.value)
    assert "m.toml" in str(ei.value)


def test_not_toml():
    with pytest.raises(ModelFileError, match="not valid TOML"):
        parse_model("target = = 3", source="bad.toml")


def test_missing_file(tmp_path):
    with pytest.raises(ModelFileError, match="not found") as ei:
        load_model(tmp_path / "nope.toml")
    assert "nope.toml" in str(ei.value)
