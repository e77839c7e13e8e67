"""Files that ship with appraise: the sample scenario (the invented town of Ashcombe Vale)."""

from __future__ import annotations

from pathlib import Path

from .engine.errors import AppraiseError

SAMPLE_SALES = "ashcombe_sales.csv"
SAMPLE_MODEL = "ashcombe_model.toml"
SAMPLE_SUBJECT = "subject.json"


def sample_dir() -> Path:
    """The shipped sample_data folder (beside the package in a source checkout)."""
    here = Path(__file__).resolve().parents[1] / "sample_data"
    if not (here / SAMPLE_SALES).is_file():
        raise AppraiseError(
            "the sample data folder was not found; run this from a source checkout of appraise",
            file=str(here),
        )
    return here
