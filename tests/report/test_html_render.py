"""HTML rendering: every user string is escaped; figures are embedded as data URIs."""

from __future__ import annotations

import base64
import re
from html.parser import HTMLParser

from worksheet_samples import HOSTILE, TINY_PNG, sample_worksheet

from appraise.report.cautions import FULL_CAUTIONS, SHORT_CAUTION
from appraise.report.html import render_html


class _TagCollector(HTMLParser):
    """Collects start tags and text as a browser's tokenizer would (Python's html.parser)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.text: list[str] = []
        self.imgs: list[dict] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        if tag == "img":
            self.imgs.append(dict(attrs))

    def handle_data(self, data):
        self.text.append(data)


def _parse(html: str) -> _TagCollector:
    p = _TagCollector()
    p.feed(html)
    p.close()
    return p


def test_hostile_region_name_is_escaped_everywhere():
    html = render_html(sample_worksheet(region=HOSTILE))
    parsed = _parse(html)
    # Not one script element: the region appears only as text.
    assert "script" not in parsed.tags
    assert "<script" not in html.lower()
    text = "".join(parsed.text)
    # ...and it is still shown to the reader, unescaped, as text (title, facts, table, caption).
    assert text.count(HOSTILE) >= 4
    # Attribute values are escaped too (the alt text carries the caption).
    assert any(HOSTILE in img.get("alt", "") for img in parsed.imgs)


def test_figures_are_embedded_as_base64_png_data_uris():
    parsed = _parse(render_html(sample_worksheet()))
    assert len(parsed.imgs) == 1
    src = parsed.imgs[0]["src"]
    prefix = "data:image/png;base64,"
    assert src.startswith(prefix)
    assert base64.b64decode(src[len(prefix) :]) == TINY_PNG
    # Height keeps the PNG's aspect ratio (4 x 2 pixels -> half the width).
    assert int(parsed.imgs[0]["height"]) * 2 == int(parsed.imgs[0]["width"])


def test_cautions_on_first_screen_and_in_full_at_the_end():
    text = " ".join("".join(_parse(render_html(sample_worksheet())).text).split())
    first = text.find(" ".join(SHORT_CAUTION.split()))
    assert 0 <= first < text.find("Estimated coefficients")
    for heading, body in FULL_CAUTIONS:
        pos = text.find(" ".join(body.split()))
        assert pos > text.find("Appendix"), heading


def test_sections_and_page_breaks():
    html = render_html(sample_worksheet())
    # Two sections ask for a new page in print (appendix, cautions).
    assert len(re.findall(r"page-break-before:\s*always", html)) == 2
    assert "Effective date of value: <b>2026-06-30</b>" in html
    assert "wf-0042" in html
