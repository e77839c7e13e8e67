"""Check settings survive a workfile's JSON, and a foreign key is refused, not ignored."""

from __future__ import annotations

import json

import pytest

from appraise.engine.diagnostics import DiagnosticSettings
from appraise.engine.errors import AppraiseError


def test_round_trip_through_json():
    s = DiagnosticSettings(trim=True, folds=7, seed=3, dffits_multiple=2.0, level=0.8)
    assert DiagnosticSettings.from_dict(json.loads(json.dumps(s.to_dict()))) == s


def test_unknown_key_and_bad_value_are_errors():
    with pytest.raises(AppraiseError, match="unknown check setting"):
        DiagnosticSettings.from_dict({"folds": 5, "speed": "fast"})
    with pytest.raises(AppraiseError, match="folds"):
        DiagnosticSettings.from_dict({"folds": 1})
