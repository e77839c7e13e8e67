"""Adjustment lines are named by the feature, not by its print-out expression."""

import pytest

from appraise.report.labels import group_label


@pytest.mark.parametrize(
    ("expression", "label"),
    [
        ("onehot(condition, ref='average')", "condition"),
        ("onehot(region)", "region"),
        ("onehot(`Sale Type`, min_count=5)", "Sale Type"),
        ("living_area * onehot(region, ref='Old Mill')", "living_area × region"),
        ("poly(age, degree=2)", "age (degree 2)"),
        ("living_area * dist_km", "living_area × dist_km"),
        ("log(living_area)", "log(living_area)"),
    ],
)
def test_group_label(expression, label):
    assert group_label(expression) == label
