"""Small hand-built worksheets for renderer tests (no engine, no Qt)."""

from __future__ import annotations

import struct
import zlib

from appraise.report.cautions import FULL_CAUTIONS, SHORT_CAUTION
from appraise.report.content import (
    Facts,
    Figure,
    Notice,
    Paragraph,
    Section,
    SignatureBlock,
    Table,
    Worksheet,
)


def solid_png(width: int, height: int, rgb: tuple[int, int, int] = (200, 40, 30)) -> bytes:
    """A solid-colour 8-bit RGB PNG, encoded by hand after the PNG specification
    (W3C PNG 2nd edition: signature, IHDR, IDAT with filter byte 0 per row, IEND)."""

    def chunk(kind: bytes, data: bytes) -> bytes:
        return (
            struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))
        )

    raw = b"".join(b"\x00" + bytes(rgb) * width for _ in range(height))
    return (
        b"\x89PNG\r\n\x1a\n"
        + chunk(b"IHDR", struct.pack(">IIBBBBB", width, height, 8, 2, 0, 0, 0))
        + chunk(b"IDAT", zlib.compress(raw))
        + chunk(b"IEND", b"")
    )


TINY_PNG = solid_png(4, 2)

HOSTILE = "<script>alert('x')</script>"


def sample_worksheet(
    *, region: str = "Old Mill", figure_png: bytes | None = None, page_size: str = "A4"
) -> Worksheet:
    """A worksheet with every kind of block; ``region`` appears in facts, tables and captions."""
    coefficients = Table(
        key="coefficients",
        title="",
        columns=("Term", "Coefficient", "Std. error"),
        rows=(
            ("Intercept", "11.2", "0.31"),
            (f"onehot(region)[{region}]", "-0.0512", "0.0201"),
        ),
        values=(("Intercept", 11.2, 0.31), (f"onehot(region)[{region}]", -0.0512, 0.0201)),
        align=("l", "r", "r"),
        note="Standard errors: HC1.",
    )
    exclusions = Table(
        key="exclusions",
        title="",
        columns=("File row", "Sale id", "Reason"),
        rows=(("7", '=HYPERLINK("http://x")', "@SUM(A1)"), ("9", "S-9", "-dup")),
        values=((7, '=HYPERLINK("http://x")', "@SUM(A1)"), (9, "S-9", "-dup")),
    )
    blocks_fig = (Figure(figure_png or TINY_PNG, f"Sales in {region}", "map"),)
    return Worksheet(
        title=f"Valuation worksheet: {region}",
        effective_date="2026-06-30",
        workfile_id="wf-0042",
        page_size=page_size,
        sections=(
            Section(
                "summary",
                "Result in brief",
                (
                    Facts(
                        (("Subject", f"12 Mill Lane, {region}"), ("Estimated price", "$412,500"))
                    ),
                    Notice("caution", (SHORT_CAUTION,), "Caution"),
                ),
            ),
            Section("coefficients", "Estimated coefficients", (coefficients,)),
            Section("warnings", "Warnings", (Notice("warning", (f"thin data in {region}",)),)),
            Section("figures", "Figures", blocks_fig),
            Section(
                "certification", "Certification", (SignatureBlock("Complete this.", ("Name",)),)
            ),
            Section("appendix", "Appendix", (exclusions,), new_page=True),
            Section(
                "cautions",
                "Cautions and limits",
                tuple(Paragraph(f"{h}. {t}") for h, t in FULL_CAUTIONS),
                new_page=True,
            ),
        ),
    )
