import sys
from pathlib import Path

# Let tests import the small shared helpers that live beside them (tests/sales_factory.py).
sys.path.insert(0, str(Path(__file__).parent))

import pytest  # noqa: E402


@pytest.fixture(scope="session")
def sample_analysis():
    """The sample town analysed (fit, value, checks) and its worksheet: ``(run, ws)``."""
    from appraise import pipeline
    from appraise.engine.diagnostics import DiagnosticSettings
    from appraise.report.worksheet import build_worksheet
    from appraise.resources import sample_dir

    d = sample_dir()
    run = pipeline.analyse(
        pipeline.load(d / "ashcombe_sales.csv"),
        pipeline.read_model(d / "ashcombe_model.toml"),
        subject=d / "subject.json",
        diagnostics=DiagnosticSettings(),
    )
    return run, build_worksheet(run.fit, run.valuation, diagnostics=run.diagnostics)
