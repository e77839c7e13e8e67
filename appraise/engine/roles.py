"""Column roles: which column is the price, the sale date, the living area...

Roles are suggested from header names and always overridable. A role map can be
saved to and read from JSON so the same export layout is read the same way again::

    {"format": "appraise-roles", "version": 1,
     "roles": {"price": "Sale Price", "sale_date": "Closed On", "region": null}}

A role mapped to ``null`` (or left out) is unassigned. A map given to the
importer is used as it stands; suggestions are only made when no map is given.
"""

from __future__ import annotations

import json
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Literal

from .errors import RoleError
from .limits import load_json_text

# Role name -> one-line description. The order is the order shown to the user.
ROLES: Mapping[str, str] = MappingProxyType(
    {
        "price": "Sale price",
        "sale_date": "Date the sale closed",
        "living_area": "Gross living area",
        "lot_area": "Lot (site) area",
        "year_built": "Year built",
        "bedrooms": "Bedrooms",
        "bathrooms": "Bathrooms",
        "latitude": "Latitude (decimal degrees)",
        "longitude": "Longitude (decimal degrees)",
        "region": "Neighbourhood, district or zone",
        "condition": "Condition or quality rating",
        "arms_length": "Arm's-length flag (yes/no)",
        "sale_id": "Sale identifier",
    }
)

REQUIRED_ROLES: tuple[str, ...] = ("price",)

RoleKind = Literal["number", "date", "text", "flag"]

ROLE_KINDS: Mapping[str, RoleKind] = MappingProxyType(
    {
        "price": "number",
        "sale_date": "date",
        "living_area": "number",
        "lot_area": "number",
        "year_built": "number",
        "bedrooms": "number",
        "bathrooms": "number",
        "latitude": "number",
        "longitude": "number",
        "region": "text",
        "condition": "text",
        "arms_length": "flag",
        "sale_id": "text",
    }
)
"""What a column with a role holds; the importer reads the column as that kind."""

AREA_ROLES: tuple[str, ...] = ("living_area", "lot_area")

ROLE_MAP_FORMAT = "appraise-roles"
ROLE_MAP_VERSION = 1


@dataclass(frozen=True)
class RoleMap:
    """role -> column header. Roles absent from the mapping are unassigned.

    ``None`` values are accepted and dropped (an explicit "no column").
    """

    columns: Mapping[str, str] = field(default_factory=dict)

    def __post_init__(self) -> None:
        kept = {str(r): str(c) for r, c in dict(self.columns).items() if c is not None}
        object.__setattr__(self, "columns", MappingProxyType(kept))

    def column(self, role: str) -> str | None:
        return self.columns.get(role)

    def role_of(self, column: str) -> str | None:
        """The role a column has, if any."""
        for role, col in self.columns.items():
            if col == column:
                return role
        return None

    def with_role(self, role: str, column: str | None) -> RoleMap:
        """A copy with ``role`` mapped to ``column`` (``None`` unassigns it).

        A column holds one role: if ``column`` had another role, that role is unassigned.
        """
        if role not in ROLES:
            raise RoleError(f"unknown role '{role}'; roles are {', '.join(ROLES)}")
        new = {r: c for r, c in self.columns.items() if r != role and c != column}
        if column is not None:
            new[role] = column
        return RoleMap({r: new[r] for r in ROLES if r in new})

    def to_dict(self) -> dict[str, str]:
        """Assigned roles in the order of :data:`ROLES`."""
        return {r: self.columns[r] for r in ROLES if r in self.columns}


# --- suggestion ------------------------------------------------------------------------


@dataclass(frozen=True)
class _Synonyms:
    phrases: tuple[str, ...]  # normalised words, strongest first
    avoid: frozenset[str]  # a header with one of these words is not this role
    exact_only: frozenset[str]  # short phrases that must be the whole header


def _syn(phrases: str, avoid: str = "", exact_only: str = "") -> _Synonyms:
    """Phrases separated by ';', avoid words and exact-only phrases by ';' too."""

    def split(text: str) -> tuple[str, ...]:
        return tuple(p.strip() for p in text.split(";") if p.strip())

    return _Synonyms(split(phrases), frozenset(split(avoid)), frozenset(split(exact_only)))


# Our own lists of what exports call each column (normalised by header_words).
_SYNONYMS: Mapping[str, _Synonyms] = {
    "price": _syn(
        "sale price; sales price; sold price; selling price; close price; closing price; closed "
        "price; price sold; price paid; sale amount; sold amount; sales amount; saleprice; "
        "soldprice; sold for; consideration; price",
        "list; listing; asking; ask; original; orig; per; psf; ppsf; assessed; assessment; assess; "
        "appraised; tax; prior; previous; prev; land; estimate; estimated; predicted; fitted; log; "
        "ln; adjusted; adj; reduced; reduction; change; ratio; unit; index",
    ),
    "sale_date": _syn(
        "sale date; sold date; date sold; close date; closing date; closed date; date of sale; "
        "date closed; settlement date; transfer date; recording date; recorded date; deed date; "
        "saledate; solddate; contract date; sold on; closed on; date",
        "list; listing; built; expire; expiration; expiry; birth; pending; entry; entered; "
        "modified; updated; update; import; market; effective; inspection; valuation",
    ),
    "living_area": _syn(
        "gross living area; living area; gla; total living area; finished area; finished square "
        "feet; finished sq ft; finished sqft; heated area; heated square feet; living space; "
        "living sq ft; living sqft; floor area; interior area; above grade finished area; above "
        "grade area; house size; home size; building area; building size; square feet; square "
        "footage; sq ft; sqft; sqrft; sq m; sqm; livingarea; gr liv area; liv area; gross liv area; "
        "above grade living area; living area above grade",
        "lot; land; site; plot; parcel; basement; bsmt; garage; price; per; cost; below; acre; "
        "acres; porch; deck; yard; unfinished; patio",
    ),
    "lot_area": _syn(
        "lot size; lot area; lot sq ft; lot sqft; lot square feet; land area; land size; site "
        "area; site size; plot size; plot area; parcel size; parcel area; lotsize; lotarea; land "
        "sq ft; land sqft; lot; site",
        "price; per; value; cost; number; no; id; frontage; depth; width; acre; acres; ac; "
        "dimensions; dimension; shape; type; view",
        "lot; site",
    ),
    "year_built": _syn(
        "year built; yr built; built year; year of construction; construction year; year "
        "constructed; yearbuilt; yrbuilt; yr blt; year blt; built",
        "renovated; renovation; remodel; remodeled; remodelled; effective; eff; addition; roof",
        "built",
    ),
    "bedrooms": _syn(
        "bedrooms; bedrooms total; total bedrooms; number of bedrooms; bedroom count; beds; "
        "bedroom; bdrms; bdrm; bedrms; bed; br",
        "bath; baths; bathroom; bathrooms; ba",
        "bed; br",
    ),
    "bathrooms": _syn(
        "bathrooms; bathrooms total; total bathrooms; total baths; number of bathrooms; bathroom "
        "count; baths; bathroom; bathrms; bths; full baths; full bath; full bathrooms; bath; ba",
        "bed; beds; bedroom; bedrooms; br; half; partial; bsmt; basement",
        "bath; ba",
    ),
    "latitude": _syn(
        "latitude; lat",
        "long; longitude; lng; lon",
        "lat",
    ),
    "longitude": _syn(
        "longitude; lng; lon; long",
        "lat; latitude",
        "lng; lon; long",
    ),
    "region": _syn(
        "neighbourhood; neighborhood; neighbourhood name; neighborhood name; nbhd; nbh; district; "
        "zone; area name; market area; submarket; sub market; subdivision; community; locality; "
        "suburb; ward; region",
        "school; zoning; tax; flood; census; time; id; code; number",
    ),
    "condition": _syn(
        "condition; condition rating; overall condition; overall cond; building condition; "
        "quality; quality rating; overall quality; overall qual; construction quality; grade; "
        "cond; state of repair",
        "air; sale; sales; terms; financing; roof; kitchen",
        "cond",
    ),
    "arms_length": _syn(
        "arms length; arm length; arms length sale; arms length flag; arms length transaction; "
        "arms length indicator; armslength; qualified sale; sale qualification; valid sale; "
        "qualified; al",
        "non; not; no; nal",
        "al; qualified",
    ),
    "sale_id": _syn(
        "sale id; sales id; sale number; sale no; saleid; transaction id; transaction number; "
        "record id; listing id; listing number; mls number; mls id; mls; ml number; sale ref; id",
        "parcel; apn; pin; tax; agent; office; broker; buyer; seller; school; neighbourhood; "
        "neighborhood; region; zone; district",
        "id; mls",
    ),
}


def header_words(header: str) -> str:
    """A header reduced to lower-case words for matching.

    Bracketed parts (units such as ``(sq ft)`` or ``[$]``) are removed, camel
    case is split (``SalePrice`` -> ``sale price``), ``#`` reads as "number",
    apostrophes vanish (``Arm's`` -> ``arms``) and other punctuation becomes a space.
    """
    t = re.sub(r"[(\[{][^)\]}]*[)\]}]", " ", str(header))
    t = re.sub(r"(?<=[a-z])(?=[A-Z])", " ", t)
    t = re.sub(r"(?<=[A-Z])(?=[A-Z][a-z])", " ", t)
    t = t.replace("#", " number ").replace("&", " and ")
    t = re.sub(r"['’`´]", "", t.lower())
    t = re.sub(r"[^0-9a-z]+", " ", t)
    return t.strip()


def _contains(words: tuple[str, ...], phrase: tuple[str, ...]) -> bool:
    k = len(phrase)
    return any(words[i : i + k] == phrase for i in range(len(words) - k + 1))


Confidence = Literal["high", "medium", "low"]


@dataclass(frozen=True)
class RoleGuess:
    """A suggested column for a role, how sure the guess is, and why, in plain words."""

    role: str
    column: str
    confidence: Confidence
    reason: str


RATING_WORDS: frozenset[str] = frozenset(
    {
        "excellent", "very good", "good", "above average", "average", "typical", "normal",
        "below average", "fair", "poor", "very poor", "new", "like new", "superior", "inferior",
        "high", "low", "medium", "moderate", "luxury", "standard", "basic", "economy", "custom",
        "ex", "gd", "ta", "fa", "po", "avg", "vg", "exc", "a", "b", "c", "d", "e",
        "c1", "c2", "c3", "c4", "c5", "c6", "q1", "q2", "q3", "q4", "q5", "q6",
        "1", "2", "3", "4", "5", "6", "7", "8", "9", "10",
    }
)  # fmt: skip
"""Words a condition or quality rating is written in (normalised by :func:`header_words`)."""

ABSENT_WORDS: frozenset[str] = frozenset({"", "na", "n a", "none", "missing", "unknown"})
"""Values that say a rating is absent; ``No_Garage``-like values start with 'no'."""

YES_NO: frozenset[str] = frozenset(
    {"yes", "no", "y", "n", "true", "false", "t", "f", "1", "0", "qualified", "unqualified"}
)

_NUMBER_BOUNDS: Mapping[str, tuple[float, float, bool]] = MappingProxyType(
    {
        # role: (lowest, highest, whole numbers only)
        "price": (1.0, float("inf"), False),
        "living_area": (50.0, 100_000.0, False),
        "lot_area": (0.0, float("inf"), False),
        "year_built": (1500.0, 2100.0, True),
        "bedrooms": (0.0, 30.0, True),
        "bathrooms": (0.0, 30.0, False),
        "latitude": (-90.0, 90.0, False),
        "longitude": (-180.0, 180.0, False),
    }
)
"""What the values of a number role must lie in for the header's guess to stand."""

SAMPLE_VALUES = 2000
"""Values looked at per column when checking a guess against the content."""


def _as_number(v: object) -> float | None:
    if v is None or isinstance(v, bool):
        return None
    if isinstance(v, int | float):
        return float(v) if v == v else None
    t = re.sub(r"[\s$£€¥,]", "", str(v))
    if not t:
        return None
    try:
        return float(t)
    except ValueError:
        return None


_BLANKS = frozenset({"", "n/a", "na", "-", "--", "?", "null", "none", "nan", "missing"})


def _present(values: Sequence[object]) -> list[object]:
    out = []
    for v in values[:SAMPLE_VALUES]:
        if v is None or (isinstance(v, float) and v != v):
            continue
        if isinstance(v, str) and v.strip().casefold() in _BLANKS:
            continue
        out.append(v)
    return out


def looks_like_rating(values: Sequence[object]) -> bool:
    """Whether a column's values read as a condition or quality rating.

    Whole numbers 1 to 10 with at most ten distinct values, or words of
    :data:`RATING_WORDS` (``Good``, ``Above_Average``, ``C3``...) for at least 80% of the
    distinct values that are present (values saying "none" or "no ..." are set aside).
    A road-proximity code such as ``Norm``/``Feedr``/``PosN`` is not a rating.
    """
    present = _present(values)
    if not present:
        return False
    numbers = [_as_number(v) for v in present]
    if all(x is not None for x in numbers):
        distinct = set(numbers)
        return len(distinct) <= 10 and all(x == int(x) and 0 <= x <= 10 for x in distinct)
    words = {header_words(str(v)) for v in present}
    words = {w for w in words if w not in ABSENT_WORDS and not w.startswith("no ")}
    if not words:
        return False
    rated = sum(w in RATING_WORDS for w in words)
    return rated / len(words) >= 0.8


def _looks_like_date(values: Sequence[object]) -> bool:
    present = _present(values)
    if not present:
        return False
    hits = 0
    for v in present:
        if hasattr(v, "year") and hasattr(v, "month"):
            hits += 1
        elif isinstance(v, str) and re.fullmatch(
            r"\s*(\d{4}[-/.]\d{1,2}[-/.]\d{1,2}|\d{1,2}[-/.]\d{1,2}[-/.]\d{2,4}|"
            r"\d{1,2}\s+[A-Za-z]{3,9}\s+\d{4}|[A-Za-z]{3,9}\s+\d{1,2},?\s+\d{4})([ T].*)?\s*",
            v,
        ):
            hits += 1
    return hits / len(present) >= 0.5


def content_fit(role: str, values: Sequence[object] | None) -> tuple[bool | None, str]:
    """Whether a column's values suit ``role``: (True/False, why) or (None, "") unchecked.

    Number roles need numbers in a plausible range (years built 1500-2100, bedrooms
    whole numbers 0-30, latitudes within +-90...); the sale date needs dates; the
    condition role needs a rating (:func:`looks_like_rating`); the arm's-length flag
    two yes/no-like values.
    """
    if values is None:
        return None, ""
    present = _present(values)
    if not present:
        return None, ""  # nothing to go by: the header decides
    if role in _NUMBER_BOUNDS:
        low, high, whole = _NUMBER_BOUNDS[role]
        numbers = [_as_number(v) for v in present]
        good = [x for x in numbers if x is not None]
        if len(good) < 0.5 * len(present):
            return False, "most values are not numbers"
        inside = [x for x in good if low <= x <= high and (not whole or x == int(x))]
        if len(inside) < 0.9 * len(good):
            return False, "the values are outside what this role holds"
        lo, hi = min(good), max(good)
        shown = f"{lo:.0f} to {hi:.0f}" if role == "year_built" else f"{_plain(lo)} to {_plain(hi)}"
        return True, f"numbers from {shown}"
    if role == "sale_date":
        ok = _looks_like_date(present)
        return ok, "the values are dates" if ok else "the values are not dates"
    if role == "condition":
        ok = looks_like_rating(present)
        shown = ", ".join(sorted({str(v) for v in present})[:4])
        if ok:
            return True, f"the values look like a rating ({shown}...)"
        return False, f"the values do not look like a rating ({shown}...)"
    if role == "region":
        distinct = {str(v).strip() for v in present}
        numeric = all(_as_number(v) is not None for v in present)
        ok = not numeric and len(distinct) <= max(2, len(present) // 2)
        return ok, (
            f"{len(distinct)} named areas shared by the sales"
            if ok
            else "the values are not area names shared by several sales"
        )
    if role == "sale_id":
        distinct = {str(v).strip() for v in present}
        ok = len(distinct) >= 0.9 * len(present)
        return ok, "the values are (nearly) all different" if ok else "many values repeat"
    if role == "arms_length":
        distinct = {header_words(str(v)) for v in present}
        ok = len(distinct) <= 2 and distinct <= YES_NO
        return ok, "the values are yes/no" if ok else "the values are not yes/no"
    return None, ""


def _plain(x: float) -> str:
    return f"{x:,.0f}" if abs(x) >= 100 else f"{x:,.4g}"


CONTENT_DECIDES: frozenset[str] = frozenset(
    {"condition", "sale_date", "year_built", "bedrooms", "latitude", "longitude"}
)
"""Roles whose guess from the header is dropped when the values do not suit them; for
the others (the price above all: the importer explains each bad value by row) values
that do not suit only lower the confidence."""

_CONFIDENCE = {(0, True): "high", (0, None): "medium", (1, True): "medium", (1, None): "low"}


def guess_roles(
    headers: Iterable[str], values: Mapping[str, Sequence[object]] | None = None
) -> tuple[RoleGuess, ...]:
    """Suggest a column for each role from the headers and, when given, the values.

    Each header is reduced with :func:`header_words` and compared with the role's
    phrases: a header equal to a phrase beats one that merely contains it; an earlier
    (stronger) phrase beats a later one; fewer extra words beat more; then the
    leftmost header wins. A header containing one of the role's "avoid" words
    (``List Price``, ``Price per Sq Ft``) is never suggested for it. With ``values``
    (header -> the column's values, raw text is fine) a header whose content does not
    suit the role (:func:`content_fit`) is passed over, so ``Condition_1`` holding road
    codes does not become the condition rating. No role gets two columns and no
    column two roles. Only the roles of :data:`CONTENT_DECIDES` are passed over; for
    the others values that do not suit make the guess "low".

    Confidence: "high" for a header equal to a phrase whose values suit the role;
    "medium" for an equal header with no values to check, or a header containing a
    phrase whose values suit it; "low" for a header that only contains a phrase.
    """
    headers = list(headers)
    candidates: list[tuple[tuple[int, int, int, int], str, str, Confidence, str]] = []
    for pos, header in enumerate(headers):
        words = tuple(header_words(header).split())
        if not words:
            continue
        joined = " ".join(words)
        column_values = None if values is None else values.get(header)
        for role, syn in _SYNONYMS.items():
            if syn.avoid.intersection(words):
                continue
            for rank, phrase in enumerate(syn.phrases):
                if joined == phrase:
                    level = 0
                elif phrase not in syn.exact_only and _contains(words, tuple(phrase.split())):
                    level = 1
                else:
                    continue
                fit, why = content_fit(role, column_values)
                if fit is False and role in CONTENT_DECIDES:
                    break  # the header says this role, the values do not
                extra = len(words) - len(phrase.split())
                how = "is" if level == 0 else "contains"
                reason = f"the header {how} '{phrase}'" + (f"; {why}" if why else "")
                confidence: Confidence = (
                    "low" if fit is False else _CONFIDENCE[(level, fit)]  # type: ignore[assignment]
                )
                candidates.append(((level, rank, extra, pos), role, header, confidence, reason))
                break
    candidates.sort(key=lambda c: c[0])
    chosen: dict[str, RoleGuess] = {}
    used: set[str] = set()
    for _, role, header, confidence, reason in candidates:
        if role in chosen or header in used:
            continue
        chosen[role] = RoleGuess(role, header, confidence, reason)
        used.add(header)
    return tuple(chosen[r] for r in ROLES if r in chosen)


def suggest_roles(
    headers: Iterable[str], values: Mapping[str, Sequence[object]] | None = None
) -> RoleMap:
    """The role map of :func:`guess_roles` (headers alone, or headers and values)."""
    return RoleMap({g.role: g.column for g in guess_roles(headers, values)})


# --- checking a map against a file ----------------------------------------------------


def _squash(name: str) -> str:
    return " ".join(str(name).split()).casefold()


def resolve_roles(
    headers: Sequence[str],
    roles: RoleMap | None,
    *,
    file: str | None = None,
    values: Mapping[str, Sequence[object]] | None = None,
) -> RoleMap:
    """The role map to read a file with.

    With ``roles`` None, the suggestion from :func:`suggest_roles` (from the headers and,
    when given, the columns' ``values``). Otherwise
    ``roles`` itself, checked against ``headers``: a column named in it must
    exist (matched exactly, else ignoring case and spacing when that finds
    exactly one header), and no column may hold two roles.

    Raises
    ------
    RoleError
        An unknown role, a column not in the file (naming it and listing the
        headers found), or one column given two roles.
    """
    if roles is None:
        return suggest_roles(headers, values)
    found: dict[str, str] = {}
    by_squash: dict[str, list[str]] = {}
    for h in headers:
        by_squash.setdefault(_squash(h), []).append(h)
    for role, col in roles.columns.items():
        if role not in ROLES:
            raise RoleError(
                f"the role map names an unknown role '{role}'; roles are {', '.join(ROLES)}",
                file=file,
            )
        if col in headers:
            found[role] = col
            continue
        matches = by_squash.get(_squash(col), [])
        if len(matches) != 1:
            raise RoleError(
                f"the role map assigns {role} to column '{col}', which is not in the file. "
                f"Headers found: {list_headers(headers)}",
                file=file,
                column=col,
            )
        found[role] = matches[0]
    seen: dict[str, str] = {}
    for role, col in found.items():
        if col in seen:
            raise RoleError(
                f"the role map gives column '{col}' two roles: {seen[col]} and {role}",
                file=file,
                column=col,
            )
        seen[col] = role
    return RoleMap({r: found[r] for r in ROLES if r in found})


def list_headers(headers: Sequence[str], limit: int = 40) -> str:
    """Headers quoted and comma-separated, for messages."""
    shown = ", ".join(f"'{h}'" for h in headers[:limit])
    more = len(headers) - limit
    return shown + (f" and {more} more" if more > 0 else "")


# --- saving and reading a map -----------------------------------------------------------


def role_map_document(roles: RoleMap) -> dict:
    """The JSON document of a role map."""
    return {"format": ROLE_MAP_FORMAT, "version": ROLE_MAP_VERSION, "roles": roles.to_dict()}


def save_role_map(roles: RoleMap, path: str | Path) -> Path:
    """Write ``roles`` as JSON (see the module docstring). Returns the path.

    Raises
    ------
    RoleError
        The file cannot be written.
    """
    p = Path(path)
    text = json.dumps(role_map_document(roles), indent=2, ensure_ascii=False) + "\n"
    try:
        p.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise RoleError(f"cannot write the role map: {exc.strerror}", file=str(p)) from None
    return p


def role_map_from_document(doc: object, *, file: str | None = None) -> RoleMap:
    """Check a parsed role-map document and return the map.

    Raises
    ------
    RoleError
        Not a role map, an unsupported version, an unknown role, or a column
        that is not a string (or null).
    """
    if not isinstance(doc, dict) or doc.get("format") != ROLE_MAP_FORMAT:
        raise RoleError(
            f'not a role map: expected a JSON object with "format": "{ROLE_MAP_FORMAT}"',
            file=file,
        )
    if doc.get("version") != ROLE_MAP_VERSION:
        raise RoleError(
            f"role map version {doc.get('version')!r} is not supported (expected "
            f"{ROLE_MAP_VERSION})",
            file=file,
        )
    body = doc.get("roles")
    if not isinstance(body, dict):
        raise RoleError("'roles' must be an object mapping role names to columns", file=file)
    for role, col in body.items():
        if role not in ROLES:
            raise RoleError(
                f"unknown role '{role}' in the role map; roles are {', '.join(ROLES)}", file=file
            )
        if col is not None and not (isinstance(col, str) and col.strip()):
            raise RoleError(
                f"role '{role}' must name a column (a non-empty string) or be null", file=file
            )
    return RoleMap({r: body[r] for r in ROLES if r in body})


def load_role_map(path: str | Path) -> RoleMap:
    """Read a role map written by :func:`save_role_map` (or by hand).

    Raises
    ------
    RoleError
        The file is missing or unreadable, is not JSON (naming the line), or is
        not a valid role map.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise RoleError("role map file not found", file=str(p)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise RoleError(f"cannot read the role map: {exc}", file=str(p)) from None
    doc = load_json_text(text, source=str(p), error=RoleError, what="the role map")
    return role_map_from_document(doc, file=str(p))
