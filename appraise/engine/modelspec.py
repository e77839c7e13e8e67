"""The model file: what to fit, stated in a few readable lines of TOML.

Example::

    target = "price"            # column (or role name) holding the sale price
    response = "log"            # "linear" or "log"
    level = 0.90                # prediction-interval level
    cov_type = "HC1"            # "classical", "HC0", "HC1", "HC2" or "HC3"
    features = [
        "log(living_area)",
        "living_area * dist_km",
        "poly(age, degree=2)",
        "onehot(region, ref='Old Mill')",
        "months",
    ]

    [derived]                   # named helper variables usable in features
    dist_km = "distance_km(latitude, longitude, 44.0412, -71.3021)"
    months = "months_between(sale_date, '2026-06-30')"
    age = "2026 - year_built"

    [[exclude]]
    id = "S-0042"
    reason = "sold to a relative"
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Literal

from .errors import ModelFileError
from .limits import decode_utf8, load_toml_text

Response = Literal["linear", "log"]
CovType = Literal["classical", "HC0", "HC1", "HC2", "HC3"]

RESPONSES: tuple[str, ...] = ("linear", "log")
COV_TYPES: tuple[str, ...] = ("classical", "HC0", "HC1", "HC2", "HC3")
_KNOWN_KEYS = {
    "target",
    "response",
    "features",
    "derived",
    "level",
    "cov_type",
    "exclude",
    "intercept",
    "title",
    "effective_date",
    "spread",
    "spread_terms",
    "min_level_sales",
}
SPREAD_METHODS: tuple[str, ...] = ("constant", "modelled")  # see engine/spread.py
DEFAULT_SPREAD = "modelled"
"""Measured on two public house-sales tables (DEVELOPERS.md, "Interval spread"): the
modelled spread's leave-one-out intervals cover the nominal level overall and more evenly
by fifth of predicted price than the even spread's."""
DEFAULT_MIN_LEVEL_SALES = 5  # common practice; engine/levels.py explains the warning


@dataclass(frozen=True)
class ExcludedSale:
    """A sale the model file leaves out, by sale id, with the reason."""

    sale_id: str
    reason: str


@dataclass(frozen=True)
class ModelSpec:
    """A parsed model file. ``derived`` keeps its file order."""

    target: str
    features: tuple[str, ...]
    response: Response = "linear"
    derived: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    level: float = 0.90
    cov_type: CovType = "classical"
    exclude: tuple[ExcludedSale, ...] = ()
    intercept: bool = True
    title: str = ""
    effective_date: str | None = None  # ISO date the value is as of; default: today
    spread: str = DEFAULT_SPREAD
    """How wide a single sale's interval is: ``constant`` or ``modelled`` (engine/spread.py)."""
    spread_terms: tuple[str, ...] = ()
    """Extra covariates of the modelled spread (feature expressions)."""
    min_level_sales: int = DEFAULT_MIN_LEVEL_SALES
    """A ``onehot`` level with fewer sales than this is warned (engine/levels.py)."""

    def to_dict(self) -> dict:
        d: dict = {
            "target": self.target,
            "response": self.response,
            "level": self.level,
            "cov_type": self.cov_type,
            "intercept": self.intercept,
            "features": list(self.features),
            "derived": dict(self.derived),
            "exclude": [{"id": e.sale_id, "reason": e.reason} for e in self.exclude],
        }
        if self.title:
            d["title"] = self.title
        if self.effective_date:
            d["effective_date"] = self.effective_date
        d["spread"] = self.spread
        if self.spread_terms:
            d["spread_terms"] = list(self.spread_terms)
        if self.min_level_sales != DEFAULT_MIN_LEVEL_SALES:
            d["min_level_sales"] = self.min_level_sales
        return d

    def to_toml(self) -> str:
        """The spec as a TOML document that :func:`parse_model` reads back identically."""
        lines = []
        if self.title:
            lines.append(f"title = {toml_string(self.title)}")
        lines.append(f"target = {toml_string(self.target)}")
        lines.append(f"response = {toml_string(self.response)}")
        lines.append(f"level = {self.level!r}")
        lines.append(f"cov_type = {toml_string(self.cov_type)}")
        if not self.intercept:
            lines.append("intercept = false")
        if self.effective_date:
            lines.append(f"effective_date = {toml_string(self.effective_date)}")
        lines.append(f"spread = {toml_string(self.spread)}")
        if self.spread_terms:
            terms = ", ".join(toml_string(t) for t in self.spread_terms)
            lines.append(f"spread_terms = [{terms}]")
        if self.min_level_sales != DEFAULT_MIN_LEVEL_SALES:
            lines.append(f"min_level_sales = {self.min_level_sales}")
        lines.append("features = [")
        lines.extend(f"    {toml_string(f)}," for f in self.features)
        lines.append("]")
        if self.derived:
            lines.append("")
            lines.append("[derived]")
            lines.extend(f"{_toml_key(k)} = {toml_string(v)}" for k, v in self.derived.items())
        for e in self.exclude:
            lines.append("")
            lines.append("[[exclude]]")
            lines.append(f"id = {toml_string(e.sale_id)}")
            lines.append(f"reason = {toml_string(e.reason)}")
        return "\n".join(lines) + "\n"

    def sha256(self) -> str:
        """Hash of the canonical TOML text: the stamp a worksheet prints."""
        return hashlib.sha256(self.to_toml().encode("utf-8")).hexdigest()


def toml_string(s: str) -> str:
    """``s`` as a TOML basic string: backslash, quote and every control character escaped."""
    out = []
    for ch in s:
        if ch in ('"', "\\"):
            out.append("\\" + ch)
        elif ch in _TOML_SHORT_ESCAPES:
            out.append(_TOML_SHORT_ESCAPES[ch])
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04X}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


_TOML_SHORT_ESCAPES = {"\n": "\\n", "\t": "\\t", "\r": "\\r", "\b": "\\b", "\f": "\\f"}


def _toml_key(k: str) -> str:
    if k and all(c.isalnum() or c in "_-" for c in k):
        return k
    return toml_string(k)


def load_model(path: str | Path) -> ModelSpec:
    """Read and validate a model file."""
    p = Path(path)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise ModelFileError("model file not found", file=str(path)) from None
    except OSError as exc:
        raise ModelFileError(f"cannot read model file: {exc.strerror}", file=str(path)) from None
    text = decode_utf8(data, source=str(path), error=ModelFileError, what="the model file")
    return parse_model(text, source=str(path))


def parse_model(text: str, *, source: str = "<model>") -> ModelSpec:
    """Parse model-file TOML text. Errors name ``source`` and the offending key."""
    data = load_toml_text(text, source=source, error=ModelFileError, what="the model file")
    return model_from_dict(data, source=source)


def _effective_date(value: object, err: Callable[[str, str], ModelFileError]) -> str:
    """The model file's ``effective_date`` as ISO text ``YYYY-MM-DD``: a TOML date, or a
    string a sales file could hold as a date, with a year in 1678-2261 (the range every
    date of the app is held in). An impossible date (``2023-02-29``, ``0000-00-00``) or a
    time of day is refused, never ignored: the date decides which sales are plausible."""
    import datetime as _dt

    from .cells import parse_date

    if isinstance(value, _dt.datetime | _dt.time) or not isinstance(value, str | _dt.date):
        raise err(f"must be a date such as 2026-06-30, not {_brief_repr(value)}", "effective_date")
    try:
        reading = parse_date(value)
    except ValueError as exc:
        raise err(f"{exc} (write the date as YYYY-MM-DD)", "effective_date") from None
    if reading.value is None:
        raise err(
            f"'{value}' could be read day-first or month-first; write it as YYYY-MM-DD",
            "effective_date",
        )
    day = reading.value.date()
    if not 1678 <= day.year <= 2261:  # a TOML date is not range-checked by parse_date
        raise err(f"'{day.isoformat()}' is outside the years 1678-2261", "effective_date")
    return day.isoformat()


def _brief_repr(value: object) -> str:
    text = repr(value)
    return text if len(text) <= 80 else f"{text[:60]}… ({len(text):,} characters)"


def model_from_dict(data: Mapping, *, source: str = "<model>") -> ModelSpec:
    """Validate a mapping (from TOML or a workfile) into a :class:`ModelSpec`."""

    def err(msg: str, key: str | None = None) -> ModelFileError:
        return ModelFileError(msg if key is None else f"'{key}': {msg}", file=source)

    unknown = sorted(set(data) - _KNOWN_KEYS)
    if unknown:
        raise err(
            f"unknown setting(s) {', '.join(unknown)}; known: {', '.join(sorted(_KNOWN_KEYS))}"
        )
    target = data.get("target")
    if not isinstance(target, str) or not target.strip():
        raise err('must name the price column, e.g. target = "price"', "target")
    response = data.get("response", "linear")
    if response not in RESPONSES:
        raise err(f"must be one of {', '.join(RESPONSES)}, not {response!r}", "response")
    feats = data.get("features")
    if not isinstance(feats, list) or not feats:
        raise err("must be a non-empty list of expression strings", "features")
    for i, f in enumerate(feats):
        if not isinstance(f, str) or not f.strip():
            raise err(f"item {i + 1} must be a non-empty string", "features")
    derived = data.get("derived", {})
    if not isinstance(derived, Mapping) or not all(
        isinstance(k, str) and isinstance(v, str) and v.strip() for k, v in derived.items()
    ):
        raise err('must be a table of name = "expression" pairs', "derived")
    level = data.get("level", 0.90)
    if isinstance(level, bool) or not isinstance(level, int | float) or not 0 < level < 1:
        raise err(f"must be a number strictly between 0 and 1, not {level!r}", "level")
    cov = data.get("cov_type", "classical")
    if cov not in COV_TYPES:
        raise err(f"must be one of {', '.join(COV_TYPES)}, not {cov!r}", "cov_type")
    intercept = data.get("intercept", True)
    if not isinstance(intercept, bool):
        raise err("must be true or false", "intercept")
    excl_raw = data.get("exclude", [])
    if not isinstance(excl_raw, list):
        raise err("must be an array of tables [[exclude]] with id and reason", "exclude")
    excl = []
    for i, e in enumerate(excl_raw):
        if not isinstance(e, Mapping) or "id" not in e:
            raise err(f"entry {i + 1} needs an id", "exclude")
        reason = e.get("reason", "")
        if not isinstance(reason, str) or not reason.strip():
            raise err(f"entry {i + 1} ({e['id']}) needs a reason", "exclude")
        excl.append(ExcludedSale(str(e["id"]), reason.strip()))
    title = data.get("title", "")
    if not isinstance(title, str):
        raise err("must be a string", "title")
    eff = data.get("effective_date")
    if eff is not None:
        eff = _effective_date(eff, err)
    spread = data.get("spread", DEFAULT_SPREAD)
    if spread not in SPREAD_METHODS:
        raise err(f"must be one of {', '.join(SPREAD_METHODS)}, not {spread!r}", "spread")
    spread_terms = data.get("spread_terms", [])
    if not isinstance(spread_terms, list) or not all(
        isinstance(t, str) and t.strip() for t in spread_terms
    ):
        raise err('must be a list of expression strings, e.g. ["age"]', "spread_terms")
    if spread_terms and spread != "modelled":
        raise err('spread terms need spread = "modelled"', "spread_terms")
    min_level = data.get("min_level_sales", DEFAULT_MIN_LEVEL_SALES)
    if isinstance(min_level, bool) or not isinstance(min_level, int) or min_level < 1:
        raise err(
            f"must be a whole number of sales, at least 1, not {min_level!r}", "min_level_sales"
        )
    return ModelSpec(
        target=target.strip(),
        features=tuple(f.strip() for f in feats),
        response=response,
        derived=MappingProxyType({k: v.strip() for k, v in derived.items()}),
        level=float(level),
        cov_type=cov,
        exclude=tuple(excl),
        intercept=intercept,
        title=title,
        effective_date=eff,
        spread=spread,
        spread_terms=tuple(t.strip() for t in spread_terms),
        min_level_sales=min_level,
    )
