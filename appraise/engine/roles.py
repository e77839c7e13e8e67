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
        "footage; sq ft; sqft; sqrft; sq m; sqm; livingarea",
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
        "count; baths; bathroom; bathrms; bths; full baths; bath; ba",
        "bed; beds; bedroom; bedrooms; br; half; partial",
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
        "condition; condition rating; overall condition; building condition; quality; quality "
        "rating; overall quality; construction quality; grade; cond; state of repair",
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


def suggest_roles(headers: Iterable[str]) -> RoleMap:
    """Suggest a column for each role from header names.

    Each header is reduced with :func:`header_words` and compared with the
    role's phrases: a header equal to a phrase beats one that merely contains
    it; an earlier (stronger) phrase beats a later one; fewer extra words beat
    more; then the leftmost header wins. A header containing one of the role's
    "avoid" words (``List Price``, ``Price per Sq Ft``) is never suggested for
    it. No role gets two columns and no column two roles.
    """
    headers = list(headers)
    candidates: list[tuple[tuple[int, int, int, int], str, str]] = []
    for pos, header in enumerate(headers):
        words = tuple(header_words(header).split())
        if not words:
            continue
        joined = " ".join(words)
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
                extra = len(words) - len(phrase.split())
                candidates.append(((level, rank, extra, pos), role, header))
                break
    candidates.sort(key=lambda c: c[0])
    chosen: dict[str, str] = {}
    used: set[str] = set()
    for _, role, header in candidates:
        if role in chosen or header in used:
            continue
        chosen[role] = header
        used.add(header)
    return RoleMap({r: chosen[r] for r in ROLES if r in chosen})


# --- checking a map against a file ----------------------------------------------------


def _squash(name: str) -> str:
    return " ".join(str(name).split()).casefold()


def resolve_roles(
    headers: Sequence[str], roles: RoleMap | None, *, file: str | None = None
) -> RoleMap:
    """The role map to read a file with.

    With ``roles`` None, the suggestion from :func:`suggest_roles`. Otherwise
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
        return suggest_roles(headers)
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
