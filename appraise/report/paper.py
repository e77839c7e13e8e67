"""Which paper the worksheet is printed on by default: the user's locale decides
(Letter in the United States, Canada, Mexico and the other countries that use it,
A4 elsewhere); the command line and the window can always change it.

The locale is read the POSIX way: ``LC_ALL``, then ``LC_PAPER``, then ``LANG``
(the first that is set and not ``C``/``POSIX``), then the C library's current
setting (what Windows and macOS report; Windows names the territory in words).
"""

from __future__ import annotations

import locale as _locale
import re
from collections.abc import Mapping

from .content import PageSize

LETTER_TERRITORIES: frozenset[str] = frozenset(
    {"US", "CA", "MX", "PR", "PH", "CL", "CO", "VE", "CR", "GT", "PA", "SV", "DO", "NI", "BZ"}
)
"""ISO 3166 territories whose usual office paper is Letter (8.5 x 11 in)."""

_TERRITORY = re.compile(r"^[a-zA-Z]{2,3}[_-]([A-Za-z]{2})\b")


def territory_of(locale_name: str | None) -> str | None:
    """``"en_US.UTF-8" -> "US"``, ``"fr-CA" -> "CA"``; None when the name has none."""
    if not locale_name:
        return None
    m = _TERRITORY.match(locale_name.strip())
    return m.group(1).upper() if m else None


def paper_for_locale(locale_name: str | None) -> PageSize:
    """``"Letter"`` for a Letter territory, else ``"A4"`` (also when unknown)."""
    return "Letter" if territory_of(locale_name) in LETTER_TERRITORIES else "A4"


def locale_name(environ: Mapping[str, str] | None = None) -> str | None:
    """The locale that decides the paper (see the module docstring)."""
    import os

    env = os.environ if environ is None else environ
    for key in ("LC_ALL", "LC_PAPER", "LANG"):
        value = env.get(key, "").strip()
        if value and value.split(".")[0] not in ("C", "POSIX"):
            return value
    if environ is not None:
        return None
    try:  # the C library's current setting, as set (Python's getlocale() would turn
        # "C.UTF-8" into "en_US")
        raw = _locale.setlocale(_locale.LC_CTYPE)
    except (ValueError, _locale.Error):
        return None
    if not raw or raw.split(".")[0] in ("C", "POSIX"):
        return None
    for name, code in _WINDOWS_NAMES.items():  # "English_United States.1252"
        if f"_{name}" in raw:
            return f"xx_{code}"
    return raw


_WINDOWS_NAMES: Mapping[str, str] = {
    "United States": "US",
    "Canada": "CA",
    "Mexico": "MX",
    "Puerto Rico": "PR",
    "Philippines": "PH",
    "Chile": "CL",
    "Colombia": "CO",
}
"""Territory names Windows uses in its locale names, for the Letter territories."""


def default_page_size(environ: Mapping[str, str] | None = None) -> PageSize:
    """The paper of the user's locale: Letter in the US and its neighbours, else A4."""
    return paper_for_locale(locale_name(environ))
