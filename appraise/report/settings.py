"""Settings for the worksheet, passed in by the caller (CLI, desktop app)."""

from __future__ import annotations

from dataclasses import dataclass

from .content import PageSize


@dataclass(frozen=True)
class ReportSettings:
    """How the worksheet is printed.

    currency:
        Symbol printed before money amounts (``$412,500``).
    page_size:
        Paper for the PDF: ``"A4"`` or ``"Letter"``.
    title:
        Overrides the title taken from the model file.
    """

    currency: str = "$"
    page_size: PageSize = "A4"
    title: str = ""
