"""Labels a reader sees: fields, terms, source tags, the checks' headings."""

from __future__ import annotations

from appraise.engine.diagnostics.ratio_study import IAAO_SOURCE
from appraise.report.labels import (
    COLLINEARITY_COLUMNS,
    HELP,
    field_label,
    term_label,
    without_source_tags,
)


def test_field_labels_for_roles_and_headers():
    assert field_label("bedrooms") == "Bedrooms"
    assert field_label("effective_date") == "Effective date"
    assert field_label("address") == "Address"
    assert field_label("living_area", "ft2") == "Living area (sq ft)"
    assert field_label("lot_area", "m2") == "Lot area (m²)"
    assert field_label("garage_spaces") == "Garage spaces"
    assert field_label("Pool (Y/N)") == "Pool (Y/N)"  # a header keeps its own spelling


def test_term_labels_drop_print_out_brackets_and_carets():
    assert term_label("region[Copper Hill]") == "region: Copper Hill"
    assert term_label("age^2") == "age²"
    assert term_label("age^2*lot_area") == "age²*lot_area"
    assert term_label("living_area * dist_km") == "living_area × dist_km"
    assert term_label("log(living_area)") == "log(living_area)"
    assert term_label("Intercept") == "Intercept"


def test_source_tags_are_dropped_and_the_source_kept():
    text = IAAO_SOURCE + " (verified); 5-10 for newer areas (memory); interval is 95 %"
    out = without_source_tags(text)
    assert "verified" not in out and "memory" not in out
    assert out.startswith(IAAO_SOURCE)
    assert out.endswith("5-10 for newer areas; interval is 95 %")


def test_every_renamed_heading_has_its_formula_in_the_help():
    assert "GVIF" not in COLLINEARITY_COLUMNS["gvif_root"]
    assert "GVIF^(1/(2 df))" in HELP[COLLINEARITY_COLUMNS["gvif_root"]]
    assert "1 / (1 - R²)" in HELP[COLLINEARITY_COLUMNS["gvif"]]


def test_the_help_glossary_carries_the_renamed_headings_with_their_formulas():
    from appraise.report.help_text import GLOSSARY

    glossary = dict(GLOSSARY)
    assert "GVIF^(1/(2 df))" in glossary[COLLINEARITY_COLUMNS["gvif_root"]]
    assert "1 - h_i" in glossary["Studentized residual"]
