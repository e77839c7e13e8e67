"""The workfile's schema, checked before anything in the file is used.

A workfile may have been edited by hand or by someone else. Every key the app reads is
checked here for its type, its allowed values and its length, and every nested setting
the window would apply (diagnostic checks, sales-comparison choices) is built once, so a
tampered file is refused with one message naming the key path -- ``'import_settings.decimal'
must be one of '.', ','; not 5`` -- and never half-applied.

Names and paths a workfile holds are treated as untrusted:

* an embedded sales file's name is reduced to a safe base name (:func:`safe_base_name`);
* ``sales.path`` and ``sales.absolute_path`` are hints. :func:`plain_sales_file` says
  whether a path may be read without asking: an existing regular file whose name and
  real target both end in a sales-file suffix. Anything else (``/etc/passwd``, a device,
  a link to a key file) is read only when the caller's ``confirm`` says yes
  (:func:`appraise.engine.workfile.restore`).
"""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

from .errors import AppraiseError, WorkfileError
from .roles import ROLES

MAX_TEXT = 10_000
"""Longest free text (a reason, a comment, a subject value)."""

MAX_NAME = 255
"""Longest name (a column, a role, a file name, a key)."""

MAX_PATH = 4_096
"""Longest recorded path."""

MAX_ITEMS = 1_000_000
"""Most entries in any list or object."""

SALES_SUFFIXES = (".csv", ".tsv", ".txt", ".xlsx", ".xlsm", ".parquet", ".pq")
"""Suffixes of files the importer reads (the same list as ``importing.FORMATS``)."""

_HEX64 = re.compile(r"[0-9a-f]{64}")
_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f]")

_IMPORT_SETTINGS: dict[str, tuple[str, ...] | None] = {
    "decimal": (".", ","),
    "date_order": ("ISO", "DMY", "MDY"),
    "area_unit": ("ft2", "m2"),
    "sheet": None,  # a name or a 0-based index: checked below
    "currency_symbol": None,  # short text: checked below
}


class _Check:
    def __init__(self, source: str) -> None:
        self.source = source

    def fail(self, where: str, what: str) -> WorkfileError:
        return WorkfileError(f"'{where}' {what}", file=self.source)

    def kind(self, value: Any, kinds: tuple[type, ...], where: str) -> Any:
        if isinstance(value, bool) and bool not in kinds:
            ok = False
        else:
            ok = isinstance(value, kinds)
        if not ok:
            names = " or ".join(_JSON_NAMES[k] for k in kinds)
            raise self.fail(where, f"must be {names}, not {_json_name(value)}")
        if isinstance(value, list | dict) and len(value) > MAX_ITEMS:
            raise self.fail(where, f"holds {len(value):,} entries; the limit is {MAX_ITEMS:,}")
        return value

    def text(self, value: Any, where: str, *, limit: int = MAX_TEXT, empty: bool = True) -> str:
        self.kind(value, (str,), where)
        if len(value) > limit:
            raise self.fail(where, f"is {len(value):,} characters long; the limit is {limit:,}")
        if not empty and not value.strip():
            raise self.fail(where, "must not be empty")
        return value

    def name(self, value: Any, where: str, *, limit: int = MAX_NAME) -> str:
        self.text(value, where, limit=limit, empty=False)
        if "\x00" in value:
            raise self.fail(where, "holds a NUL character")
        return value

    def one_of(self, value: Any, allowed: tuple[str, ...], where: str) -> Any:
        if isinstance(value, bool) or value not in allowed:
            listed = ", ".join(repr(a) for a in allowed)
            raise self.fail(where, f"must be one of {listed}; not {_short(value)}")
        return value

    def whole(self, value: Any, where: str, *, low: int = 0, high: int = 10**12) -> int:
        self.kind(value, (int,), where)
        if not low <= value <= high:
            raise self.fail(where, f"must be a whole number from {low:,} to {high:,}, not {value}")
        return value


_JSON_NAMES = {
    str: "text",
    int: "a whole number",
    float: "a number",
    bool: "true or false",
    dict: "an object",
    list: "a list",
    type(None): "null",
}


_NUMBER_PART = re.compile(r"[\d+\-()]")
_ONLY_SEPARATORS = re.compile(r"[.,'_eE\s]+")
"""A currency symbol is stripped from the cells that carry it: one holding a digit, a sign
or a bracket, or made only of separators, would change the number (``1`` made
``1150,000 sq ft`` read 50,000; ``-`` made ``150,001-`` read +150,001). ``kr.`` is fine."""


def _json_name(value: Any) -> str:
    for k in (bool, type(None), str, int, float, dict, list):
        if isinstance(value, k):
            return _JSON_NAMES[k]
    return type(value).__name__


def _short(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


def validate_workfile_document(doc: Mapping[str, Any], source: str) -> None:
    """Check a parsed workfile document against the schema (version 1).

    Raises
    ------
    WorkfileError
        Naming the key path and what it must be.
    """
    c = _Check(source)
    for key in ("created", "saved", "app_version"):
        c.text(doc.get(key), key, limit=64)
    sales = c.kind(doc.get("sales"), (dict,), "sales")
    sha = c.text(sales.get("sha256"), "sales.sha256", limit=64)
    if not _HEX64.fullmatch(sha):
        raise c.fail("sales.sha256", "is not a SHA-256 hex digest (64 characters 0-9, a-f)")
    for key in ("path", "absolute_path"):
        value = sales.get(key)
        if value is not None:
            c.name(value, f"sales.{key}", limit=MAX_PATH)
    emb = sales.get("embedded")
    if emb is not None:
        c.kind(emb, (dict,), "sales.embedded")
        c.text(emb.get("name"), "sales.embedded.name", limit=MAX_PATH)  # reduced when read
        c.one_of(emb.get("encoding"), ("base64",), "sales.embedded.encoding")
        c.kind(emb.get("data"), (str,), "sales.embedded.data")

    settings = c.kind(doc.get("import_settings"), (dict,), "import_settings")
    for key, value in settings.items():
        where = f"import_settings.{key}"
        if key not in _IMPORT_SETTINGS:
            known = ", ".join(_IMPORT_SETTINGS)
            raise c.fail(where, f"is not an import setting (known: {known})")
        allowed = _IMPORT_SETTINGS[key]
        if allowed is not None:
            c.one_of(value, allowed, where)
        elif key == "sheet":
            if isinstance(value, int) and not isinstance(value, bool):
                c.whole(value, where, high=10_000)
            else:
                c.kind(value, (str, int), where)
                c.name(value, where, limit=31)  # a sheet name has at most 31 characters
        else:  # currency_symbol
            c.text(value, where, limit=8)
            if _CONTROL.search(value):
                raise c.fail(where, "holds a control character")
            if _NUMBER_PART.search(value) or _ONLY_SEPARATORS.fullmatch(value):
                # stripped from a cell, such a symbol would change the number it is part of
                raise c.fail(where, "holds a digit, sign or bracket, or only separators")

    roles = c.kind(doc.get("roles"), (dict,), "roles")
    for role, column in roles.items():
        if role not in ROLES:
            raise c.fail(f"roles.{_short(role)}", f"is not a role (roles: {', '.join(ROLES)})")
        c.name(column, f"roles.{role}", limit=MAX_TEXT)

    excl = c.kind(doc.get("user_exclusions"), (list,), "user_exclusions")
    for i, e in enumerate(excl):
        where = f"user_exclusions[{i}]"
        c.kind(e, (dict,), where)
        c.whole(e.get("row"), f"{where}.row", low=2)
        if e.get("id") is not None:
            c.text(e.get("id"), f"{where}.id", limit=MAX_TEXT)
        c.text(e.get("reason"), f"{where}.reason", empty=False)

    c.kind(doc.get("model"), (dict,), "model")
    subject = c.kind(doc.get("subject"), (dict,), "subject")
    for key, value in subject.items():
        c.name(key, f"subject key {_short(key)}", limit=MAX_NAME)
        if value is not None:
            c.kind(value, (str, int, float, bool), f"subject.{key}")
            if isinstance(value, str):
                c.text(value, f"subject.{key}")

    app = c.kind(doc.get("settings"), (dict,), "settings")
    for key in app:
        c.name(key, f"settings key {_short(key)}", limit=MAX_NAME)
    last = doc.get("last_results")
    if last is not None:
        c.kind(last, (dict,), "last_results")
        for key in ("fit", "valuation"):
            if last.get(key) is not None:
                c.kind(last[key], (dict,), f"last_results.{key}")
    comps = doc.get("comparables")
    if comps is not None:
        c.kind(comps, (dict,), "comparables")
    _build_nested(doc, source)


def _build_nested(doc: Mapping[str, Any], source: str) -> None:
    """Build the settings the window applies on opening, so that a bad one fails here."""
    from .comparables import ComparablesChoice
    from .diagnostics.settings import DiagnosticSettings

    checks = doc["settings"].get("checks")
    if checks is not None:
        if not isinstance(checks, dict):
            raise WorkfileError(
                f"'settings.checks' must be an object, not {_json_name(checks)}", file=source
            )
        _build("settings.checks", lambda: DiagnosticSettings.from_dict(dict(checks)), source)
    comps = doc.get("comparables")
    if comps is not None:
        _check_comparables(comps, source)
        _build("comparables", lambda: ComparablesChoice.from_dict(comps), source)


def _check_comparables(comps: Mapping[str, Any], source: str) -> None:
    """The values of the sales-comparison choices that the window uses later, on a pool
    thread (the grid): a date that is no date, or a limit that is no finite number, failed
    there with a traceback after the workfile had been opened."""
    import datetime as _dt
    import math

    def fail(where: str, what: str, value: Any) -> WorkfileError:
        return WorkfileError(
            f"'comparables.{where}' must be {what}, not {_short(value)}", file=source
        )

    def number(where: str, value: Any) -> None:
        if value is None:
            return
        if (
            isinstance(value, bool)
            or not isinstance(value, int | float)
            or not math.isfinite(value)
        ):
            raise fail(where, "a finite number", value)
        if value < 0:
            raise fail(where, "zero or more", value)

    eff = comps.get("effective_date")
    if eff is not None:
        try:
            day = _dt.date.fromisoformat(eff) if isinstance(eff, str) and len(eff) == 10 else None
        except ValueError:
            day = None
        if day is None or not 1678 <= day.year <= 2261:
            raise fail("effective_date", "a date YYYY-MM-DD in the years 1678-2261", eff)
    filters = comps.get("filters") or {}
    if not isinstance(filters, dict):
        raise fail("filters", "an object", filters)
    for key in ("max_km", "max_months"):
        number(f"filters.{key}", filters.get(key))
    limits = comps.get("limits") or {}
    if not isinstance(limits, dict):
        raise fail("limits", "an object", limits)
    for key in ("net_pct", "gross_pct"):
        number(f"limits.{key}", limits.get(key))
    weights = comps.get("weights")
    if weights is not None:
        if not isinstance(weights, list):
            raise fail("weights", "a list of numbers", weights)
        for i, w in enumerate(weights):
            number(f"weights[{i}]", w)


def _build(where: str, make: Callable[[], Any], source: str) -> None:
    try:
        make()
    except AppraiseError as exc:
        raise WorkfileError(f"'{where}': {exc.message}", file=source) from None
    except (TypeError, ValueError, KeyError, AttributeError, OverflowError) as exc:
        raise WorkfileError(f"'{where}' cannot be read: {exc}", file=source) from None


# --- names and paths ---------------------------------------------------------------------
def safe_base_name(
    name: str, *, fallback_suffix: str | None = None, source: str | None = None
) -> str:
    """A file name from a workfile reduced to something safe to create in a fresh folder.

    Folders (``/`` and ``\\``) are dropped, control and NUL characters removed, leading
    dots and white space stripped (no ``.``, ``..`` or hidden files), Unicode normalised
    (NFKC) and the stem cut so the whole name is at most 100 characters. The suffix must
    be one the importer reads; when the name has none, ``fallback_suffix`` is used.

    Raises
    ------
    WorkfileError
        No sales-file suffix can be found.
    """
    text = unicodedata.normalize("NFKC", str(name))
    text = _CONTROL.sub("", text).replace("\\", "/").rsplit("/", 1)[-1]
    text = text.strip().lstrip(".").strip()
    stem, dot, suffix = text.rpartition(".")
    suffix = f".{suffix.lower()}" if dot else ""
    if suffix not in SALES_SUFFIXES:
        stem = text if not dot else f"{stem}.{suffix[1:]}"
        suffix = (fallback_suffix or "").lower()
    if suffix not in SALES_SUFFIXES:
        raise WorkfileError(
            f"the embedded sales file's name {_short(name)} has no sales-file suffix "
            f"({', '.join(SALES_SUFFIXES)})",
            file=source,
        )
    stem = re.sub(r"[^\w .()+,-]", "_", stem).strip(" .") or "sales"
    return stem[: 100 - len(suffix)] + suffix


def plain_sales_file(path: Path) -> bool:
    """Whether a recorded path may be read without asking: an existing regular file whose
    name, and the name of what it really points to, end in a sales-file suffix."""
    try:
        real = path.resolve(strict=True)
    except (OSError, RuntimeError, ValueError):
        return False
    if path.suffix.lower() not in SALES_SUFFIXES or real.suffix.lower() not in SALES_SUFFIXES:
        return False
    try:
        return real.is_file()
    except OSError:
        return False
