"""Paper from the locale: Letter where the locale's territory uses it (the United
States and Canada among them, per the Unicode CLDR paper-size data, recalled from
memory), A4 elsewhere; POSIX precedence LC_ALL > LC_PAPER > LANG (POSIX.1-2017,
Locale chapter)."""

from __future__ import annotations

import pytest

from appraise.report.paper import default_page_size, paper_for_locale, territory_of


@pytest.mark.parametrize(
    ("name", "paper"),
    [
        ("en_US.UTF-8", "Letter"),
        ("fr_CA.UTF-8", "Letter"),
        ("es-MX", "Letter"),
        ("en_GB.UTF-8", "A4"),
        ("de_DE@euro", "A4"),
        ("C", "A4"),
        ("", "A4"),
        (None, "A4"),
    ],
)
def test_paper_for_locale(name, paper):
    assert paper_for_locale(name) == paper


def test_posix_precedence():
    assert default_page_size({"LANG": "en_US.UTF-8"}) == "Letter"
    assert default_page_size({"LANG": "en_US.UTF-8", "LC_PAPER": "en_GB.UTF-8"}) == "A4"
    assert default_page_size({"LC_ALL": "en_US.UTF-8", "LC_PAPER": "en_GB.UTF-8"}) == "Letter"
    assert default_page_size({"LC_ALL": "C", "LANG": "en_CA.UTF-8"}) == "Letter"
    assert default_page_size({}) == "A4"
    assert territory_of("pt_BR.UTF-8") == "BR"
