"""User text made safe for a terminal and for a spreadsheet.

Sale ids, headers, reasons and notes come from the user's files and may hold anything:
an ESC byte that recolours or rewrites the terminal, a BEL, a NUL that openpyxl refuses
to store, or a cell that a spreadsheet program would run as a formula.

Terminal (:func:`terminal_text`, :class:`TerminalStream`)
    Every C0 and C1 control character except newline and tab, DEL, and the
    Unicode bidirectional overrides (which can make a line read backwards) are
    written as visible escapes: ``\\x1b``, ``\\x07``, ``\\u202e``. Nothing is dropped,
    so the user can still see what the file held.

Export cells (:func:`export_text`)
    1. Control characters a workbook cannot hold (C0 except tab, newline and
       carriage return; DEL; C1) are written as the same visible escapes, so an
       XLSX export never fails on them.
    2. A cell is neutralised with a leading ``'`` when its first *visible*
       character would start a formula. Visible means after any white space and
       after invisible characters a reader skips (zero-width space, zero-width
       (non-)joiner, word joiner, byte-order mark, soft hyphen); formula starters
       are ``= + - @`` and their full-width forms ``＝ ＋ － ＠`` (some spreadsheet
       programs fold full-width to ASCII before deciding), plus a leading tab, CR
       or LF. Without the first rule ``"\\u200b=HYPERLINK(...)"`` would pass a
       check that looks only at the first character.
    3. A formula starter right after a field separator inside the cell (``;=``,
       ``,=``, tab then ``=``, and the same with ``+ - @`` or the full-width
       forms) gets a ``'`` inserted before it: a CSV opened in a locale that
       splits on ``;`` (or re-split by hand) would otherwise make the text after
       the separator a cell of its own that starts with ``=``. (The CSV writer
       quotes a cell only when it holds a comma, quote or line break, so a ``;``
       inside a cell is unquoted; the inserted quote protects every reader.)

    Numbers are never altered: a negative coefficient stays a number.
"""

from __future__ import annotations

import io
import re
from typing import TextIO

_TERMINAL_UNSAFE = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
_EXPORT_UNSAFE = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f]")

INVISIBLE = "\u200b\u200c\u200d\u2060\ufeff\u00ad"
"""Characters a reader skips before deciding what a cell starts with."""

FORMULA_STARTERS = "=+-@\uff1d\uff0b\uff0d\uff20"
"""``= + - @`` and their full-width forms."""

_LEADING = re.compile(f"[\\s{INVISIBLE}]*")
_SEPARATOR_THEN_FORMULA = re.compile(
    f"([;,\t|])([\\s{INVISIBLE}]*)([{re.escape(FORMULA_STARTERS)}])"
)


def _escape(ch: str) -> str:
    code = ord(ch)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def terminal_text(text: str) -> str:
    """``text`` with every control character except newline and tab shown as an escape."""
    return _TERMINAL_UNSAFE.sub(lambda m: _escape(m.group()), text)


def export_text(text: str) -> str:
    """One text cell made safe for CSV and XLSX (the three rules in the module docstring)."""
    text = _EXPORT_UNSAFE.sub(lambda m: _escape(m.group()), text)
    if text[:1] in ("\t", "\r", "\n"):
        return "'" + _SEPARATOR_THEN_FORMULA.sub(r"\1\2'\3", text)
    lead = _LEADING.match(text)
    first = text[lead.end() : lead.end() + 1] if lead else text[:1]
    text = _SEPARATOR_THEN_FORMULA.sub(r"\1\2'\3", text)
    if first and first in FORMULA_STARTERS:
        return "'" + text
    return text


def needs_neutralising(text: str) -> bool:
    """Whether :func:`export_text` changes ``text`` (for tests and callers that report it)."""
    return export_text(text) != text


class TerminalStream(io.TextIOBase):
    """A text stream that writes to ``target`` through :func:`terminal_text`.

    The command line wraps ``sys.stdout`` and ``sys.stderr`` in it while a command
    runs, so no string from a user's file reaches the terminal with a live control
    character, whichever command printed it.
    """

    def __init__(self, target: TextIO) -> None:
        super().__init__()
        self._target = target

    def write(self, s: str) -> int:
        self._target.write(terminal_text(s))
        return len(s)

    def flush(self) -> None:
        self._target.flush()

    def writable(self) -> bool:
        return True

    def fileno(self) -> int:
        return self._target.fileno()

    def isatty(self) -> bool:
        return self._target.isatty()

    @property
    def encoding(self) -> str:  # type: ignore[override]
        return getattr(self._target, "encoding", "utf-8")

    @property
    def target(self) -> TextIO:
        return self._target
