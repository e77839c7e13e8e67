"""Shared fixtures of the report tests."""

from __future__ import annotations

import pytest

from appraise import pipeline
from appraise.engine.diagnostics import DiagnosticSettings
from appraise.report.worksheet import build_worksheet
from appraise.resources import sample_dir


@pytest.fixture(scope="session")
def sample_analysis():
    """The sample town analysed (fit, value, checks) and its worksheet: ``(run, ws)``."""
    d = sample_dir()
    run = pipeline.analyse(
        pipeline.load(d / "ashcombe_sales.csv"),
        pipeline.read_model(d / "ashcombe_model.toml"),
        subject=d / "subject.json",
        diagnostics=DiagnosticSettings(),
    )
    return run, build_worksheet(run.fit, run.valuation, diagnostics=run.diagnostics)
