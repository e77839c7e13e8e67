"""Terminal text of the neighbourhood analysis: the worksheet section's tables as text."""

from __future__ import annotations

from ..engine.regions import RegionAnalysis
from .content import Facts, Notice, Paragraph, Table
from .regions_section import region_blocks


def table_text(t: Table) -> list[str]:
    """A table as aligned columns with its title and note."""
    widths = [
        max(len(t.columns[j]), *(len(r[j]) for r in t.rows)) if t.rows else len(t.columns[j])
        for j in range(len(t.columns))
    ]

    def line(cells) -> str:
        out = []
        for j, c in enumerate(cells):
            out.append(c.rjust(widths[j]) if t.alignment(j) == "r" else c.ljust(widths[j]))
        return "  ".join(out).rstrip()

    lines = [t.title, line(t.columns), line(["-" * w for w in widths])]
    lines += [line(r) for r in t.rows]
    if t.note:
        lines.append(t.note)
    return lines


def format_regions(ra: RegionAnalysis, caution: str = "", currency: str = "$") -> str:
    """The whole analysis as plain text, ending with the caution."""
    lines: list[str] = ["Neighbourhoods"]
    for b in region_blocks(ra, currency):
        if isinstance(b, Facts):
            if b.title:
                lines.append(b.title)
            width = max(len(k) for k, _ in b.rows)
            lines += [f"  {k:<{width}}  {v}" for k, v in b.rows]
        elif isinstance(b, Table):
            lines += table_text(b)
        elif isinstance(b, Paragraph):
            lines.append(b.text)
        elif isinstance(b, Notice):
            lines.append(b.title or "Notes")
            lines += [f"  - {i}" for i in b.items]
        lines.append("")
    if caution:
        lines.append(caution)
    return "\n".join(lines).rstrip() + "\n"


__all__ = ["format_regions", "table_text"]
