"""The workfile: one JSON file that reopens a valuation exactly as it was left.

A workfile records *what was done*, not a snapshot of memory: where the sales
came from (path and SHA-256 of the bytes, optionally the bytes themselves), how
they were read (import settings, role map), which sales the user left out and
why, the model, the subject, the settings, and the numbers the last fit gave.
Reopening reads the sales again, fits again and values again; the recomputed
numbers are compared with the stored ones (:func:`check_reproduced`).

Embedded sales are the original file bytes (base64), not the cleaned rows.
Re-reading the original bytes with the stored import settings goes through the
same importer as the first time, so every cleaning decision, every import
exclusion and every file-row number comes out the same; the SHA-256 stored
beside them proves the bytes are the ones that were read. Cleaned records
would have to re-encode dtypes, dates and the exclusion log in JSON and could
drift from what the importer does.

Layout (``schema_version`` 1)::

    {
      "format": "appraise-workfile",
      "schema_version": 1,
      "created": "2026-06-30T09:12:00+00:00",
      "saved": "2026-06-30T10:40:31+00:00",
      "app_version": "0.1.0",
      "sales": {
        "path": "../data/sales.csv",          # relative to the workfile, when possible
        "absolute_path": "/home/.../sales.csv",
        "sha256": "…",
        "embedded": {"name": "sales.csv", "encoding": "base64", "data": "…"} | null
      },
      "import_settings": {...}, "roles": {role: column},
      "user_exclusions": [{"row": 14, "id": "S-0107", "reason": "…"}],
      "model": {...}, "subject": {...}, "settings": {...},
      "last_results": {"fit": {...}, "valuation": {...}} | null
    }

Saving is atomic: the text is written to a temporary file in the target's
folder, flushed and fsync'ed, then moved over the target with
:func:`os.replace`, so a failure at any point leaves the previous workfile
untouched.
"""

from __future__ import annotations

import base64
import binascii
import dataclasses
import datetime as _dt
import hashlib
import json
import os
import tempfile
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, NamedTuple

from .. import __version__
from .errors import AppraiseError, SubjectError, WorkfileError
from .expressions import parse_expression
from .importing import load_sales
from .jsonable import to_jsonable
from .limits import MAX_NESTING, MAX_WORKFILE_BYTES, limited_int, nesting_depth
from .modelspec import ModelSpec, model_from_dict
from .plausibility import PlausibilityRules, effective_date_of, rules_at
from .roles import RoleMap
from .sales import ROW_COLUMN, Exclusion, SalesTable
from .settings import ImportSettings
from .subject import read_subject
from .workfile_schema import plain_sales_file, safe_base_name, validate_workfile_document

FORMAT_NAME = "appraise-workfile"
SCHEMA_VERSION = 1
"""The schema this version writes and the newest it reads."""

RELATIVE_TOLERANCE = 1e-9
""":func:`check_reproduced` reports numbers that differ by more than this, relatively."""


@dataclass(frozen=True)
class EmbeddedSales:
    """The original bytes of the sales file, kept inside the workfile.

    ``name`` is the file's name (its suffix tells the importer the format).
    """

    name: str
    data: bytes = field(repr=False)

    @property
    def sha256(self) -> str:
        return hashlib.sha256(self.data).hexdigest()


@dataclass(frozen=True)
class WorkfileState:
    """Everything a workfile holds, as plain JSON-safe values.

    ``location`` is the file the state was read from (set by
    :func:`load_workfile`, never written); relative sales paths are resolved
    against its folder.
    """

    sales_sha256: str
    model: Mapping[str, Any]
    sales_path: str | None = None
    sales_absolute_path: str | None = None
    embedded_sales: EmbeddedSales | None = None
    import_settings: Mapping[str, Any] = field(default_factory=dict)
    roles: Mapping[str, str] = field(default_factory=dict)
    user_exclusions: tuple[Mapping[str, Any], ...] = ()
    subject: Mapping[str, Any] = field(default_factory=dict)
    settings: Mapping[str, Any] = field(default_factory=dict)
    last_results: Mapping[str, Any] | None = None
    comparables: Mapping[str, Any] | None = None
    """Sales-comparison choices (``ComparablesChoice.to_dict()``); optional, absent in older files."""
    created: str = ""
    saved: str = ""
    app_version: str = __version__
    format: str = FORMAT_NAME
    schema_version: int = SCHEMA_VERSION
    location: str | None = field(default=None, compare=False)
    recovered: tuple[str, ...] = field(default=(), compare=False)
    """What opening did with temporary files an interrupted save left (never written)."""

    def to_json_dict(self) -> dict:
        """The JSON document this state is saved as."""
        embedded = None
        if self.embedded_sales is not None:
            embedded = {
                "name": self.embedded_sales.name,
                "encoding": "base64",
                "data": base64.b64encode(self.embedded_sales.data).decode("ascii"),
            }
        doc = {
            "format": self.format,
            "schema_version": self.schema_version,
            "created": self.created,
            "saved": self.saved,
            "app_version": self.app_version,
            "sales": {
                "path": self.sales_path,
                "absolute_path": self.sales_absolute_path,
                "sha256": self.sales_sha256,
                "embedded": embedded,
            },
            "import_settings": dict(self.import_settings),
            "roles": dict(self.roles),
            "user_exclusions": [dict(e) for e in self.user_exclusions],
            "model": dict(self.model),
            "subject": dict(self.subject),
            "settings": dict(self.settings),
            "last_results": None if self.last_results is None else dict(self.last_results),
        }
        if self.comparables is not None:
            doc["comparables"] = dict(self.comparables)
        return doc


class Restored(NamedTuple):
    """What :func:`restore` gives back, ready to fit and value again."""

    sales: SalesTable
    spec: ModelSpec
    subject: dict
    user_exclusions: tuple[Exclusion, ...]


# --- JSON-safe values ------------------------------------------------------------------------


def json_safe(value: Any, *, where: str = "value") -> Any:
    """``value`` as plain JSON types (:func:`.jsonable.to_jsonable`); anything a JSON
    file cannot hold is a :class:`WorkfileError` naming ``where`` (the key path), so a
    state that cannot be written is refused before the old workfile is touched."""
    return to_jsonable(value, where=where, error=WorkfileError, full_timestamps=True)


def import_settings_to_dict(settings: ImportSettings) -> dict:
    return dataclasses.asdict(settings)


def import_settings_from_dict(
    data: Mapping[str, Any], *, source: str | None = None
) -> ImportSettings:
    """Rebuild :class:`ImportSettings`; an unknown key is a :class:`WorkfileError`."""
    known = {f.name for f in dataclasses.fields(ImportSettings)}
    unknown = sorted(set(data) - known)
    if unknown:
        raise WorkfileError(
            f"unknown import setting(s) {', '.join(unknown)}; known: {', '.join(sorted(known))}",
            file=source,
        )
    return ImportSettings(**dict(data))


# --- building a state from a session's parts --------------------------------------------------


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes, read in 1 MiB blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def make_state(
    *,
    sales: SalesTable,
    spec: ModelSpec,
    subject: Mapping[str, Any] | None,
    import_settings: ImportSettings,
    user_exclusions: Sequence[Exclusion] = (),
    settings: Mapping[str, Any] | None = None,
    fit: Any = None,
    valuation: Any = None,
    workfile_path: str | Path | None = None,
    embed: bool = True,
    previous: WorkfileState | None = None,
    comparables: Mapping[str, Any] | None = None,
) -> WorkfileState:
    """Collect what a workfile records from the objects the app holds.

    Parameters
    ----------
    sales, spec, subject, import_settings, user_exclusions, settings:
        The state to record. ``subject`` is the dict of the subject's attributes
        as entered (values made JSON-safe here).
    fit, valuation:
        The last results (objects with ``to_dict()``), stored so that reopening
        can prove the numbers are reproduced. Both or neither.
    workfile_path:
        Where the workfile will be written, so the sales path can be stored
        relative to it.
    embed:
        Keep the sales file's bytes inside the workfile. The bytes on disk must
        still hash to ``sales.source.sha256``; if the file has gone or changed,
        the embedded copy of ``previous`` (same hash) is carried over.
    previous:
        The state this one replaces (keeps ``created`` and the embedded copy).
    """
    source = sales.source
    sales_abs = Path(source.path).expanduser().resolve()
    rel: str | None = None
    if workfile_path is not None:
        base = Path(workfile_path).expanduser().resolve().parent
        try:
            rel = Path(os.path.relpath(sales_abs, base)).as_posix()
        except ValueError:  # another drive on Windows
            rel = None
    embedded = None
    if embed:
        embedded = _embed(sales_abs, source.sha256, previous)
    last = None
    if fit is not None and valuation is not None:
        last = {
            "fit": json_safe(fit.to_dict(), where="fit"),
            "valuation": json_safe(valuation.to_dict(), where="valuation"),
        }
    elif fit is not None:
        last = {"fit": json_safe(fit.to_dict(), where="fit"), "valuation": None}
    exclusions = tuple(
        {"row": int(e.row), "id": e.sale_id, "reason": e.reason} for e in user_exclusions
    )
    now = _now()
    created = previous.created if previous is not None and previous.created else now
    return WorkfileState(
        sales_sha256=source.sha256,
        sales_path=rel,
        sales_absolute_path=str(sales_abs),
        embedded_sales=embedded,
        import_settings=import_settings_to_dict(import_settings),
        roles=dict(sales.roles.columns),
        user_exclusions=exclusions,
        model=spec.to_dict(),
        subject=json_safe(dict(subject or {}), where="subject"),
        settings=json_safe(dict(settings or {}), where="settings"),
        last_results=last,
        comparables=None
        if comparables is None
        else json_safe(dict(comparables), where="comparables"),
        created=created,
        saved=now,
    )


def _embed(path: Path, sha256: str, previous: WorkfileState | None) -> EmbeddedSales:
    data: bytes | None = None
    try:
        data = path.read_bytes()
    except OSError:
        data = None
    if data is not None and hashlib.sha256(data).hexdigest() == sha256:
        return EmbeddedSales(path.name, data)
    if (
        previous is not None
        and previous.embedded_sales is not None
        and previous.embedded_sales.sha256 == sha256
    ):
        return previous.embedded_sales
    state = "is missing" if data is None else "has changed since it was read"
    raise WorkfileError(
        f"cannot embed the sales: the file {state}; reload it or save without embedding",
        file=str(path),
    )


# --- writing ---------------------------------------------------------------------------------


def save_workfile(path: str | Path, state: WorkfileState) -> WorkfileState:
    """Write ``state`` to ``path`` atomically and return it as written.

    The ``saved`` timestamp is set to now (``created`` too if empty). The JSON
    text is built completely before anything is written; it then goes to a
    temporary file in the same folder, which is flushed, fsync'ed and moved over
    ``path`` with :func:`os.replace` (atomic on POSIX and Windows). On any
    failure the temporary file is removed and the old workfile is left as it was.
    Temporary files that earlier, interrupted saves left are then dealt with
    (:func:`clean_interrupted_saves`).
    """
    target = Path(path).expanduser()
    now = _now()
    written = replace(state, saved=now, created=state.created or now, location=str(target))
    doc = json_safe(written.to_json_dict(), where="workfile")
    text = json.dumps(doc, indent=1, ensure_ascii=False, allow_nan=False) + "\n"
    payload = text.encode("utf-8")
    folder = target.parent if str(target.parent) else Path(".")
    try:
        fd, tmp_name = tempfile.mkstemp(
            prefix=f"{_temp_prefix(target)}{os.getpid()}.", suffix=TEMP_SUFFIX, dir=folder
        )
    except OSError as exc:
        raise WorkfileError(
            f"cannot write in this folder: {exc.strerror}", file=str(target)
        ) from None
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp_name, target)
    except OSError as exc:
        _remove_quietly(tmp_name)
        raise WorkfileError(
            f"could not save the workfile ({exc.strerror or exc}); the previous file is unchanged",
            file=str(target),
        ) from None
    except BaseException:
        _remove_quietly(tmp_name)
        raise
    _fsync_folder(folder)
    clean_interrupted_saves(target)  # what earlier interrupted saves left, never a live one
    return written


TEMP_SUFFIX = ".tmp"
STALE_SECONDS = 600
"""A temporary file of this process (or of unknown origin) older than this is an orphan."""


def _temp_prefix(target: Path) -> str:
    return f".{target.name}."


def clean_interrupted_saves(
    path: str | Path, *, stale_seconds: float = STALE_SECONDS
) -> tuple[str, ...]:
    """Deal with the temporary files an interrupted save of ``path`` left beside it.

    A save writes ``.<name>.<pid>.<random>.tmp`` and renames it over ``<name>``; a save
    killed before the rename leaves that file behind. A temporary file is an orphan when
    the process that wrote it is gone (or, where that cannot be told, when it is older
    than ``stale_seconds``); a live save is never touched. An orphan that does not hold
    a complete workfile is removed; a complete one (killed between writing and renaming)
    is kept for recovery as ``<stem>.recovered-<k>.json`` beside the workfile.

    Returns
    -------
    tuple of str
        One sentence per file removed or kept, for the user.
    """
    target = Path(path).expanduser()
    folder = target.parent if str(target.parent) else Path(".")
    prefix = _temp_prefix(target)
    try:
        leftovers = sorted(
            p
            for p in folder.iterdir()
            if p.name.startswith(prefix) and p.name.endswith(TEMP_SUFFIX)
        )
    except OSError:
        return ()
    said: list[str] = []
    for tmp in leftovers:
        if not _orphaned(tmp, prefix, stale_seconds):
            continue
        if _complete_workfile(tmp):
            k = 1
            while (keep := folder / f"{target.stem}.recovered-{k}.json").exists():
                k += 1
            try:
                os.replace(tmp, keep)
            except OSError:
                continue
            said.append(
                f"an interrupted save left a complete workfile; kept as {keep.name} "
                "(open it to recover that state)"
            )
        else:
            try:
                size = tmp.stat().st_size
                tmp.unlink()
            except OSError:
                continue
            said.append(
                f"removed {tmp.name} ({size:,} bytes), left incomplete by an interrupted save"
            )
    return tuple(said)


def _orphaned(tmp: Path, prefix: str, stale_seconds: float) -> bool:
    import time

    pid_text = tmp.name[len(prefix) :].split(".", 1)[0]
    try:
        age = time.time() - tmp.stat().st_mtime
    except OSError:
        return False
    if pid_text.isdigit() and int(pid_text) != os.getpid() and os.name == "posix":
        try:
            os.kill(int(pid_text), 0)
        except ProcessLookupError:
            return True  # the writer is gone
        except OSError:
            pass  # alive under another user, or cannot tell
        return age > stale_seconds * 6  # alive (or pid reused): only when very old
    return age > stale_seconds


def _complete_workfile(tmp: Path) -> bool:
    try:
        load_workfile_text(tmp.read_bytes(), str(tmp))
    except (AppraiseError, OSError):
        return False
    return True


def _remove_quietly(name: str) -> None:
    try:
        os.unlink(name)
    except OSError:
        pass


def _fsync_folder(folder: Path) -> None:
    """Make the rename durable where the platform allows opening a folder."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


# --- reading ---------------------------------------------------------------------------------


def load_workfile(path: str | Path) -> WorkfileState:
    """Read and validate a workfile.

    Raises
    ------
    WorkfileError
        Missing or unreadable file; not valid JSON (with line and column); not a
        workfile; written by a newer schema; a key missing or of the wrong type.
    """
    p = Path(path).expanduser()
    src = str(p)
    try:
        size = p.stat().st_size
        if size > MAX_WORKFILE_BYTES:
            raise WorkfileError(
                f"the workfile is {size:,} bytes; the limit is {MAX_WORKFILE_BYTES:,} "
                "(a workfile with embedded sales is rarely a tenth of that)",
                file=src,
            )
        raw = p.read_bytes()
    except FileNotFoundError:
        raise WorkfileError("workfile not found", file=src) from None
    except OSError as exc:
        raise WorkfileError(f"cannot read the workfile: {exc.strerror}", file=src) from None
    except ValueError as exc:  # a NUL in the path
        raise WorkfileError(f"cannot read the workfile: {exc}", file=src) from None
    state = load_workfile_text(raw, src)
    recovered = clean_interrupted_saves(p)
    return replace(state, recovered=recovered) if recovered else state


def load_workfile_text(raw: bytes, src: str) -> WorkfileState:
    """Parse and validate the bytes of a workfile (see :func:`load_workfile`); ``src`` names
    it in errors and becomes the state's ``location``."""
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise WorkfileError(
            f"not a workfile: byte {exc.start} is not UTF-8 text", file=src
        ) from None
    depth = nesting_depth(text)
    if depth > MAX_NESTING:
        raise WorkfileError(
            f"not a workfile: nested {depth:,} levels deep; the limit is {MAX_NESTING}", file=src
        )
    try:
        doc = json.loads(text, parse_int=limited_int)
    except json.JSONDecodeError as exc:
        raise WorkfileError(
            f"not valid JSON at line {exc.lineno}, column {exc.colno}: {exc.msg}; "
            "the file was damaged or edited by hand",
            file=src,
        ) from None
    except ValueError as exc:  # a whole number longer than the limit
        raise WorkfileError(f"not a workfile: it holds {exc}", file=src) from None
    if not isinstance(doc, dict) or doc.get("format") != FORMAT_NAME:
        raise WorkfileError(f'not an appraise workfile (no "format": "{FORMAT_NAME}")', file=src)
    version = doc.get("schema_version")
    if isinstance(version, bool) or not isinstance(version, int) or version < 1:
        raise WorkfileError(
            f"'schema_version' must be a positive whole number, not {version!r}", file=src
        )
    if version > SCHEMA_VERSION:
        raise WorkfileError(
            f"written by a newer version of appraise (app {doc.get('app_version', '?')}, "
            f"workfile schema {version}); this version ({__version__}) reads schema "
            f"{SCHEMA_VERSION} at most. Update appraise to open it.",
            file=src,
        )
    state = _state_from_doc(doc, src)
    validate_workfile_document(doc, src)  # types, enumerations, lengths, nested settings
    return state


def _state_from_doc(doc: dict, src: str) -> WorkfileState:
    def need(mapping: Mapping, key: str, kind: type | tuple, where: str = "") -> Any:
        label = f"{where}.{key}" if where else key
        if key not in mapping:
            raise WorkfileError(f"'{label}' is missing", file=src)
        value = mapping[key]
        if not isinstance(value, kind) or isinstance(value, bool) and kind is not bool:
            names = (
                kind.__name__
                if isinstance(kind, type)
                else " or ".join("null" if k is type(None) else k.__name__ for k in kind)
            )
            raise WorkfileError(f"'{label}' must be {names}, not {type(value).__name__}", file=src)
        return value

    sales = need(doc, "sales", dict)
    sha = need(sales, "sha256", str, "sales")
    if len(sha) != 64 or any(c not in "0123456789abcdef" for c in sha):
        raise WorkfileError("'sales.sha256' is not a SHA-256 hex digest", file=src)
    rel = need(sales, "path", (str, type(None)), "sales")
    absolute = need(sales, "absolute_path", (str, type(None)), "sales")
    emb_doc = need(sales, "embedded", (dict, type(None)), "sales")
    embedded = None
    if emb_doc is not None:
        name = need(emb_doc, "name", str, "sales.embedded")
        if emb_doc.get("encoding") != "base64":
            raise WorkfileError("'sales.embedded.encoding' must be \"base64\"", file=src)
        data = need(emb_doc, "data", str, "sales.embedded")
        hint = next((Path(x).suffix for x in (rel, absolute) if isinstance(x, str)), None)
        name = safe_base_name(name, fallback_suffix=hint, source=src)  # never a path, '..' or NUL
        try:
            embedded = EmbeddedSales(name, base64.b64decode(data, validate=True))
        except (binascii.Error, ValueError):
            raise WorkfileError("'sales.embedded.data' is not valid base64", file=src) from None
        if embedded.sha256 != sha:
            raise WorkfileError(
                f"the embedded sales are damaged: their SHA-256 is {embedded.sha256}, "
                f"the workfile records {sha}",
                file=src,
            )
    if rel is None and absolute is None and embedded is None:
        raise WorkfileError("names no sales file and embeds none", file=src)

    exclusions = []
    for i, e in enumerate(need(doc, "user_exclusions", list)):
        where = f"user_exclusions[{i}]"
        if not isinstance(e, dict):
            raise WorkfileError(f"'{where}' must be an object with row, id and reason", file=src)
        row = need(e, "row", int, where)
        reason = need(e, "reason", str, where)
        sid = need(e, "id", (str, type(None)), where)
        exclusions.append({"row": row, "id": sid, "reason": reason})

    roles = need(doc, "roles", dict)
    if not all(isinstance(v, str) for v in roles.values()):
        raise WorkfileError("'roles' must map each role to a column name", file=src)
    last = need(doc, "last_results", (dict, type(None)))
    comparables = doc.get("comparables")  # optional: older workfiles have none
    if comparables is not None and not isinstance(comparables, dict):
        raise WorkfileError("'comparables' must be an object", file=src)
    return WorkfileState(
        sales_sha256=sha,
        sales_path=rel,
        sales_absolute_path=absolute,
        embedded_sales=embedded,
        import_settings=need(doc, "import_settings", dict),
        roles=roles,
        user_exclusions=tuple(exclusions),
        model=need(doc, "model", dict),
        subject=need(doc, "subject", dict),
        settings=need(doc, "settings", dict),
        last_results=last,
        comparables=comparables,
        created=need(doc, "created", str),
        saved=need(doc, "saved", str),
        app_version=need(doc, "app_version", str),
        format=doc["format"],
        schema_version=doc["schema_version"],
        location=src,
    )


# --- restoring -------------------------------------------------------------------------------


def candidate_sales_paths(state: WorkfileState) -> list[Path]:
    """Where the sales file is looked for, in order: relative to the workfile, then absolute."""
    out: list[Path] = []
    if state.sales_path is not None:
        rel = Path(state.sales_path)
        if not rel.is_absolute() and state.location is not None:
            rel = (Path(state.location).expanduser().resolve().parent / rel).resolve()
        out.append(rel)
    if state.sales_absolute_path is not None:
        out.append(Path(state.sales_absolute_path))
    seen: list[Path] = []
    for p in out:
        if p not in seen:
            seen.append(p)
    return seen


def path_to_confirm(state: WorkfileState) -> Path | None:
    """The recorded sales path :func:`restore` would read only with the user's say-so.

    None when a plain sales file comes first among the candidates (it is read without
    asking) or when no other recorded path exists. A front end asks the user about the
    path returned and passes the answer to :func:`restore` as ``confirm``.
    """
    for p in candidate_sales_paths(state):
        if plain_sales_file(p):
            if p.is_file():
                return None
        elif _exists(p):
            return p
    return None


def restore(state: WorkfileState, *, confirm: Callable[[Path], bool] | None = None) -> Restored:
    """Read the sales again and rebuild the model, subject and user exclusions.

    The sales file is looked for relative to the workfile, then at its absolute
    path. The recorded paths are hints from a file anyone may have edited: one is
    read without asking only when it is a plain sales file (an existing regular file
    whose name and real target end in a sales-file suffix,
    :func:`.workfile_schema.plain_sales_file`); any other path that exists is read
    only if ``confirm(path)`` returns true (no ``confirm``: never). A file read must
    hash to ``state.sales_sha256``. When it is missing, refused or different and the
    workfile embeds the original bytes, those are read instead and a note in
    ``sales.notes`` says so. Otherwise:

    Raises
    ------
    WorkfileError
        The sales file is missing (naming where it was looked for), or its
        SHA-256 differs from the recorded one (naming both); a user exclusion
        names a row the sales do not have, or a row whose sale id changed.
    """
    src = state.location
    settings = import_settings_from_dict(state.import_settings, source=src)
    roles = RoleMap(columns=dict(state.roles))
    try:
        spec = model_from_dict(state.model, source=src or "<workfile>")
        for expr in (*spec.features, *spec.derived.values(), *spec.spread_terms):
            parse_expression(expr)  # syntax, length and the function whitelist, no data needed
    except AppraiseError as exc:
        raise WorkfileError(f"the model it holds is invalid: {exc.message}", file=src) from None

    tried = candidate_sales_paths(state)
    found: Path | None = None
    found_sha: str | None = None
    refused: list[Path] = []
    for p in tried:
        if plain_sales_file(p) or (_exists(p) and confirm is not None and confirm(p)):
            if p.is_file():
                found = p
                found_sha = file_sha256(p)
                break
        elif _exists(p):
            refused.append(p)
    embedded = state.embedded_sales
    if found is None and refused and embedded is None:
        raise WorkfileError(
            f"the workfile names {refused[0]} as its sales file, which is not a plain sales "
            "file (.csv, .xlsx or .parquet); it was not read. Open the sales file yourself, "
            "or confirm that this path is meant",
            file=src,
        )
    # sales after the analysis's own effective date (plus the margin) are implausible
    rules = rules_at(effective_date_of(state.subject, spec.effective_date))
    if found is not None and found_sha == state.sales_sha256:
        sales = load_sales(found, settings, roles, rules=rules)
    elif embedded is not None:
        why = (
            f"{found} has SHA-256 {found_sha}, not the recorded {state.sales_sha256}"
            if found is not None
            else f"the recorded path {refused[0]} is not a plain sales file and was not read"
            if refused
            else f"the sales file was not found ({', '.join(str(p) for p in tried) or 'no path'})"
        )
        sales = _load_embedded(embedded, settings, roles, rules, src)
        original = str(tried[-1]) if tried else embedded.name
        sales = replace(
            sales,
            source=replace(sales.source, path=original),
            notes=(*sales.notes, f"sales read from the copy embedded in the workfile: {why}"),
        )
    elif found is not None:
        raise WorkfileError(
            f"the sales file has changed since the workfile was saved: its SHA-256 is "
            f"{found_sha}, the workfile records {state.sales_sha256}. Reopening would give "
            "different numbers; restore the original file or load the new one as a new valuation.",
            file=str(found),
        )
    else:
        where = " or ".join(str(p) for p in tried)
        raise WorkfileError(
            f"the sales file is missing (looked for {where}) and the workfile does not embed "
            "a copy; put the file back or move it beside the workfile",
            file=str(tried[0]) if tried else src,
        )
    if sales.source.sha256 != state.sales_sha256:  # the importer hashed other bytes
        raise WorkfileError(
            f"the sales read have SHA-256 {sales.source.sha256}, the workfile records "
            f"{state.sales_sha256}",
            file=sales.source.path,
        )
    exclusions = _restore_exclusions(state, sales)
    try:  # a value no subject editor could have saved (inf, a date that is no date)
        read_subject(dict(state.subject), sales, settings)
    except SubjectError as exc:
        raise WorkfileError(
            f"the subject it holds is invalid: {exc.message}", file=src, column=exc.column
        ) from None
    return Restored(sales, spec, dict(state.subject), exclusions)


def _exists(p: Path) -> bool:
    try:
        return p.exists()
    except (OSError, ValueError):
        return False


def _load_embedded(
    embedded: EmbeddedSales,
    settings: ImportSettings,
    roles: RoleMap,
    rules: PlausibilityRules,
    src: str | None = None,
) -> SalesTable:
    """The embedded sales read through the importer from a temporary copy; an error names
    the workfile and the embedded file's name, never the temporary path (which the user
    cannot open and which is gone by the time they read the message)."""
    with tempfile.TemporaryDirectory(prefix="appraise-") as folder:
        tmp = Path(folder) / embedded.name
        tmp.write_bytes(embedded.data)
        try:
            return load_sales(tmp, settings, roles, rules=rules)
        except AppraiseError as exc:
            if exc.file is None or exc.file == str(tmp):
                exc.file = f"{src or 'the workfile'} (its embedded copy of '{embedded.name}')"
            exc.message = exc.message.replace(str(tmp), embedded.name)
            exc.args = (exc.message,)
            raise


def _restore_exclusions(state: WorkfileState, sales: SalesTable) -> tuple[Exclusion, ...]:
    frame = sales.frame
    id_col = sales.roles.column("sale_id")
    ids: dict[int, str | None] = {}
    if ROW_COLUMN in frame.columns:
        rows = frame[ROW_COLUMN].to_numpy()
        values = frame[id_col].to_numpy() if id_col in frame.columns else [None] * len(rows)
        pairs = zip(rows, values, strict=True)
        ids = {int(r): (None if v is None or v != v else str(v)) for r, v in pairs}
    out = []
    for e in state.user_exclusions:
        row = int(e["row"])
        if row not in ids:
            raise WorkfileError(
                f"a sale the user excluded (reason: {e['reason']}) is not among the sales read",
                file=state.location,
                row=row,
            )
        if e.get("id") is not None and ids[row] is not None and ids[row] != e["id"]:
            raise WorkfileError(
                f"the sale excluded at this row was {e['id']}, the file now has {ids[row]}",
                file=state.location,
                row=row,
            )
        out.append(Exclusion(row=row, sale_id=e.get("id"), reason=e["reason"], source="user"))
    return tuple(out)


# --- proving the numbers are reproduced ---------------------------------------------------------


def check_reproduced(state: WorkfileState, fit: Any, valuation: Any = None) -> list[str]:
    """Compare recomputed results with the ones the workfile stored.

    Every number in ``fit.to_dict()`` and ``valuation.to_dict()`` is compared
    with its stored counterpart; a pair differs when
    ``|a - b| > 1e-9 * max(|a|, |b|)`` (exact zeros must match exactly). Text,
    flags and structure must match exactly.

    Returns
    -------
    list of str
        One line per difference, e.g. ``"fit.r2: stored 0.8123, now 0.8124"``;
        empty when everything is reproduced (or nothing was stored).
    """
    if state.last_results is None:
        return []
    now: dict[str, Any] = {"fit": json_safe(fit.to_dict(), where="fit")}
    if valuation is not None:
        now["valuation"] = json_safe(valuation.to_dict(), where="valuation")
    else:
        now["valuation"] = None
    stored = {
        "fit": state.last_results.get("fit"),
        "valuation": state.last_results.get("valuation"),
    }
    out: list[str] = []
    _compare(stored, now, "", out)
    return out


def _compare(a: Any, b: Any, path: str, out: list[str]) -> None:
    if isinstance(a, dict) and isinstance(b, dict):
        for key in list(a) + [k for k in b if k not in a]:
            where = f"{path}.{key}" if path else str(key)
            if key not in b:
                out.append(f"{where}: stored {_short(a[key])}, now absent")
            elif key not in a:
                out.append(f"{where}: not stored, now {_short(b[key])}")
            else:
                _compare(a[key], b[key], where, out)
        return
    if isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            out.append(f"{path}: stored {len(a)} items, now {len(b)}")
            return
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            _compare(x, y, f"{path}[{i}]", out)
        return
    num = (int, float)
    if (
        isinstance(a, num)
        and isinstance(b, num)
        and not isinstance(a, bool)
        and not isinstance(b, bool)
    ):
        if a != b and abs(a - b) > RELATIVE_TOLERANCE * max(abs(a), abs(b)):
            out.append(f"{path}: stored {a!r}, now {b!r}")
        return
    if a != b or type(a) is not type(b):
        out.append(f"{path}: stored {_short(a)}, now {_short(b)}")


def _short(v: Any) -> str:
    text = json.dumps(v, ensure_ascii=False)
    return text if len(text) <= 60 else text[:57] + "..."
