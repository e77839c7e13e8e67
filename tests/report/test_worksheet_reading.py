"""The worksheet as a reviewer reads it, on the Ashcombe Vale sample: the window's
labels, every interval headed with its own level, no source tags, no scientific
notation, the plain-effect column, and the checks' headings in the tool's words."""

from __future__ import annotations

import re
from html import unescape

import pytest

from appraise.engine.fitting import COEF_CI_LEVEL
from appraise.report.content import Facts, Table
from appraise.report.diagnostics_section import PRB_CI_LEVEL
from appraise.report.effects import coefficient_effects
from appraise.report.html import render_html
from appraise.report.labels import term_label
from appraise.report.text import format_diagnostics, format_fit

SCIENTIFIC = re.compile(r"\b\d(?:\.\d+)?e[+-]\d{2,3}\b", re.IGNORECASE)
"""Python's exponent form (``1.2e-05``, ``7.5e+04``); hashes have no sign after an e."""


@pytest.fixture
def sample(sample_analysis):
    return sample_analysis


def _visible_text(ws) -> str:
    html = render_html(ws)
    html = re.sub(r'src="data:[^"]*"', "", html)
    return unescape(re.sub(r"<[^>]+>", " ", html))


def test_subject_section_uses_the_window_labels(sample):
    _, ws = sample
    (facts,) = ws.section("subject").blocks
    labels = [label for label, _ in facts.rows]
    assert labels[0] == "Address"
    for label in ("Bedrooms", "Bathrooms", "Living area (sq ft)", "Effective date"):
        assert label in labels
    for raw in ("Beds", "address", "effective_date", "Sale Date"):
        assert raw not in labels


def test_no_scientific_notation_and_no_source_tags_anywhere(sample):
    run, ws = sample
    for seen_in_print in ("-1.26986e-05", "1.031e+04", "σ=7.521e+04", "8.57e-11"):
        assert SCIENTIFIC.search(seen_in_print)  # the pattern does catch what was printed
    text = _visible_text(ws)
    assert not SCIENTIFIC.search(text), SCIENTIFIC.search(text)
    assert "(verified)" not in text and "(memory)" not in text
    assert "p = <" not in text and "p = < " not in text
    assert "GVIF^" not in text and "(koenker)" not in text
    # the terminal text too
    for out in (format_fit(run.fit), format_diagnostics(run.diagnostics)):
        assert not SCIENTIFIC.search(out), SCIENTIFIC.search(out)
        assert "(verified)" not in out and "(memory)" not in out and "p = <" not in out


def test_interval_headings_name_the_level_they_were_computed_at(sample):
    run, ws = sample
    coef = ws.table("coefficients")
    lvl = f"{100 * COEF_CI_LEVEL:g}%"
    assert coef.columns[5:7] == (f"{lvl} low", f"{lvl} high")
    pred = f"{100 * run.valuation.level:g}%"
    assert pred != lvl  # the sample predicts at 90%: the two levels must not be mixed up
    assert any(
        label.startswith(f"{pred} prediction interval") for label, _ in ws.table("estimate").rows
    )
    prb = next(r for r in ws.table("ratio_study").rows if r[0].startswith("PRB"))
    assert f"{100 * PRB_CI_LEVEL:g}% interval" in prb[1]


def test_coefficient_table_has_plain_effects_and_reader_labels(sample):
    run, ws = sample
    coef = ws.table("coefficients")
    assert coef.columns[-1] == "Effect on price"
    effects = coefficient_effects(run.fit)
    for row, values, t, e in zip(coef.rows, coef.values, run.fit.terms, effects, strict=True):
        assert row[0] == term_label(t.name)
        assert values[0] == t.name  # exports keep the model's own names
        assert row[-1] == e.text and values[-1] == e.text  # exported with its unit
    shown = {r[0]: r[-1] for r in coef.rows}
    assert shown["months"] == "+0.40% per month"
    assert shown["region: Heronmoor"].endswith("% vs Old Mill")


def test_checks_headings_are_the_tools_own(sample):
    _, ws = sample
    col = ws.table("collinearity")
    assert col.columns == (
        "Term",
        "Columns",
        "Variance inflation",
        "Std. error inflation (×)",
        "Flagged",
    )
    tests = next(
        b
        for b in ws.section("diagnostics").blocks
        if isinstance(b, Facts) and b.title == "Residual tests"
    )
    label, value = tests.rows[0]
    assert label == "Breusch-Pagan, Koenker's studentized form"
    assert value.startswith("LM ") and ("p = " in value or "p < " in value)
    ppe = next(r for r in ws.table("ratio_study").rows if r[0].startswith("PPE10"))
    assert ppe[1].endswith("%")
    assert all(isinstance(t, Table) for t in ws.tables())
