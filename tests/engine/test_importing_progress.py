"""load_sales reports its progress and stops when the progress callback says so."""

from __future__ import annotations

from pathlib import Path

import pytest

from appraise.engine.errors import Cancelled
from appraise.engine.importing import load_sales

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data" / "ashcombe_sales.csv"


def test_progress_rises_to_one_and_names_each_column():
    seen: list[tuple[float, str]] = []
    table = load_sales(SAMPLE, progress=lambda f, m: seen.append((f, m)))
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions) and fractions[0] == 0.0 and fractions[-1] == 1.0
    cleaning = [m for _, m in seen if m.startswith("cleaning column")]
    assert len(cleaning) == len([c for c in table.frame.columns if c != "_row"])


def test_a_callback_that_raises_cancelled_stops_the_read():
    calls = []

    def stop_at_third(fraction, message):
        calls.append(fraction)
        if len(calls) == 3:
            raise Cancelled("stop")

    with pytest.raises(Cancelled):
        load_sales(SAMPLE, progress=stop_at_third)
    assert len(calls) == 3
