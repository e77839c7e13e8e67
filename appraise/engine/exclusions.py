"""The exclusion log: every row not used, with why, ready to show or export.

Writing the log to a file is done by the layer that owns file exports
(``appraise.report.tables``, which makes cells safe for spreadsheets); the
engine gives the rows and the one-line wording.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Iterable

from .cells import brief
from .sales import Exclusion

EXCLUSION_FIELDS: tuple[str, ...] = ("row", "id", "reason", "column", "source")
"""Fields of one exclusion record, in export order (the keys of :meth:`Exclusion.to_dict`)."""


def exclusion_records(excluded: Iterable[Exclusion]) -> list[dict]:
    """The log as a list of records ``{row, id, reason, column, source}``, by file row."""
    ordered = sorted(excluded, key=lambda e: (e.row, e.source))
    return [{k: e.to_dict()[k] for k in EXCLUSION_FIELDS} for e in ordered]


_LINE_BREAKS = str.maketrans({"\n": "\\n", "\r": "\\r", "\t": "\\t"})


def describe_exclusion(e: Exclusion) -> str:
    """One line: ``row 14 (S-0107): price 'call agent' is not a number [Sale Price]``.

    One line whatever the file held: line breaks and tabs (a sale id that swallowed the
    rest of the file through an unclosed quote) are written ``\\n``, ``\\r``, ``\\t``, and
    the sale id is cut as a quoted cell is (:func:`.cells.brief`).
    """
    who = f" ({brief(e.sale_id)})" if e.sale_id else ""
    where = f" [{e.column}]" if e.column else ""
    by = "" if e.source == "import" else f" (excluded by {e.source})"
    return f"row {e.row}{who}: {e.reason}{where}{by}".translate(_LINE_BREAKS)


def reason_kind(reason: str) -> str:
    """A short category of a reason, for counts: the text before a quoted value or a number."""
    for stop in (" '", " (", " is ", ":"):
        head, sep, _ = reason.partition(stop)
        if sep:
            reason = head
    return reason.strip() or "other"


def reason_counts(excluded: Iterable[Exclusion]) -> dict[str, int]:
    """How many rows each kind of reason excluded, most frequent first."""
    counts = Counter(reason_kind(e.reason) for e in excluded)
    return dict(sorted(counts.items(), key=lambda kv: (-kv[1], kv[0])))
