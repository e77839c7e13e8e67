"""Every error and warning the engine raises, in one place.

User errors (bad file, bad model, bad subject) derive from :class:`AppraiseError`.
They carry the place they happened -- file, row, column -- so the CLI and the
desktop app can print one clear line without a traceback.

Row numbers are 1-based *file* rows as a spreadsheet shows them: the header is
row 1, the first sale is row 2.
"""

from __future__ import annotations

import re

_LONGEST = 300  # characters of a file or column name, or of one quoted value, shown whole
_QUOTED = re.compile("'([^']{" + str(_LONGEST + 1) + ",})'")


def _cut(text: str) -> str:
    return f"{text[: _LONGEST - 40]}… ({len(text):,} characters)"


def _brief_quotes(message: str) -> str:
    """``message`` with every quoted value longer than 300 characters cut (a value from a
    file can be megabytes long; the message must stay one readable line)."""
    if len(message) <= _LONGEST:
        return message
    return _QUOTED.sub(lambda m: f"'{_cut(m.group(1))}'", message)


class AppraiseError(Exception):
    """Base of every user-facing error.

    Parameters
    ----------
    message:
        What went wrong and, where it helps, what to do about it.
    file, row, column:
        Where it went wrong, when known.
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        row: int | None = None,
        column: str | None = None,
    ) -> None:
        message = _brief_quotes(message)
        super().__init__(message)
        self.message = message
        self.file = file if file is None or len(str(file)) <= _LONGEST else _cut(str(file))
        self.row = row
        self.column = column if column is None or len(column) <= _LONGEST else _cut(column)

    def __str__(self) -> str:
        where = []
        if self.file is not None:
            where.append(str(self.file))
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column is not None:
            where.append(f"column '{self.column}'")
        return f"{', '.join(where)}: {self.message}" if where else self.message


# --- reading sales --------------------------------------------------------------
class DataError(AppraiseError):
    """A sales file cannot be read or understood."""


class RoleError(DataError):
    """A column role is missing, unknown or mapped to a column that does not exist."""


# --- model files and expressions ---------------------------------------------
class ModelFileError(AppraiseError):
    """A model file (TOML) is malformed or holds an unknown or invalid setting."""


class ExpressionError(AppraiseError):
    """A feature expression cannot be parsed or uses something not allowed."""


class UnknownNameError(ExpressionError):
    """An expression names a column or function that does not exist."""


class DesignError(AppraiseError):
    """An expression parsed, but cannot be turned into numbers for these rows
    (for example a level of a category never seen in the sales)."""


# --- fitting and valuing -----------------------------------------------------
class FitError(AppraiseError):
    """The model cannot be fitted (too few sales, no variation...)."""


class CollinearityError(FitError):
    """The design is rank deficient; ``terms`` names the columns involved."""

    def __init__(self, message: str, *, terms: tuple[str, ...] = (), **kw) -> None:
        super().__init__(message, **kw)
        self.terms = tuple(terms)


class SubjectError(AppraiseError):
    """The subject property cannot be valued with this model."""


class WorkfileError(AppraiseError):
    """A workfile cannot be opened, or does not match its data."""


class ReportError(AppraiseError):
    """A worksheet or export cannot be written."""


class Cancelled(Exception):  # noqa: N818 - a request, not a fault
    """The caller asked a long operation to stop (its progress callback raised this).

    Not an :class:`AppraiseError`: nothing is wrong with the user's input.
    """
