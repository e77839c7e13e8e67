"""The one sequence both front ends run: load -> fit -> value -> check.

No Qt. The command line calls these functions directly; the window's background jobs
(``gui/workers.py``) call the same functions on a pool thread and only pass the reports
on. Settings are passed in; nothing is read from a global.

Every step is a plain function of frozen inputs, so a caller can run one step (a subject
edit only values again) or the whole of :func:`analyse`, which hands each result to a
``report(stage, payload)`` callback as soon as it exists.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import pandas as pd

from .engine.diagnostics import Diagnostics, DiagnosticSettings, diagnose
from .engine.errors import AppraiseError
from .engine.fitting import FitResult, fit_model
from .engine.importing import load_sales
from .engine.modelspec import ModelSpec, load_model
from .engine.plausibility import DEFAULT_RULES, PlausibilityRules
from .engine.roles import RoleMap, load_role_map
from .engine.sales import Exclusion, SalesTable
from .engine.settings import ImportSettings
from .engine.subject import read_subject
from .engine.valuation import Valuation, value_subject

Report = Callable[[str, object], None]
"""How a step hands over a result as soon as it exists: ``report(stage, payload)``."""

Progress = Callable[[float, str], None]

SubjectSource = str | Path | Mapping[str, Any] | pd.DataFrame


def _ignore(stage: str, payload: object) -> None:
    return None


# --- the steps ---------------------------------------------------------------------------
def load(
    path: str | Path,
    settings: ImportSettings = ImportSettings(),  # noqa: B008 - frozen, safe as a default
    roles: RoleMap | str | Path | None = None,
    progress: Progress | None = None,
    rules: PlausibilityRules = DEFAULT_RULES,
) -> SalesTable:
    """Read a sales file; ``roles`` is a role map or the path of a saved one; ``rules``
    the importer's plausibility rules (give the effective date there when it is known)."""
    if isinstance(roles, str | Path):
        roles = load_role_map(roles)
    return load_sales(path, settings, roles, progress=progress, rules=rules)


def read_model(path: str | Path) -> ModelSpec:
    """Read and check a model file (TOML)."""
    return load_model(path)


def fit(sales: SalesTable, spec: ModelSpec, user_exclusions: Iterable[Exclusion] = ()) -> FitResult:
    """Fit ``spec`` to ``sales`` (statsmodels OLS is the estimator of record)."""
    return fit_model(sales, spec, user_exclusions=tuple(user_exclusions))


def subject_frame(
    source: SubjectSource,
    sales: SalesTable,
    settings: ImportSettings = ImportSettings(),  # noqa: B008
) -> pd.DataFrame:
    """The subject as a one-row frame cleaned like ``sales``: from a file, a mapping or a frame."""
    if isinstance(source, pd.DataFrame):
        return source
    return read_subject(source, sales, settings)


ASSUMED_KEY = "assumed"
"""Key of a subject mapping naming the attributes that were not given but set to the
sales' medians (comma-separated field labels); the value then warns of them first."""


def assumed_warning(assumed: str) -> str:
    """The warning beside a value some of whose subject attributes are assumed."""
    return (
        f"assumed, not known: {assumed} set to the sales' medians; the value is only as "
        "good as that guess, so enter the subject's own figures"
    )


def filled(subject: Mapping[str, Any]) -> dict[str, Any]:
    """The attributes of a subject mapping that hold a value (blank form fields dropped)."""
    return {k: v for k, v in subject.items() if v is not None and str(v).strip() != ""}


def value(
    fit: FitResult,
    subject: SubjectSource,
    settings: ImportSettings = ImportSettings(),  # noqa: B008
    level: float | None = None,
) -> Valuation | None:
    """The subject's valuation; None for a mapping with no attribute filled in yet.

    A mapping's :data:`ASSUMED_KEY` (attributes set to the sales' medians) is not an
    attribute: it puts :func:`assumed_warning` first among the value's warnings.
    """
    assumed = ""
    if isinstance(subject, Mapping):
        assumed = str(subject.get(ASSUMED_KEY) or "").strip()
        subject = filled({k: v for k, v in subject.items() if k != ASSUMED_KEY})
        if not subject:
            return None
    frame = subject_frame(subject, fit.sales, settings)
    valuation = value_subject(fit, frame, level)
    if assumed:
        valuation = replace(valuation, warnings=(assumed_warning(assumed), *valuation.warnings))
    return valuation


def check(
    fit: FitResult,
    settings: DiagnosticSettings = DiagnosticSettings(),  # noqa: B008
) -> Diagnostics:
    """Influence, collinearity, residual tests, out-of-sample accuracy and the ratio study."""
    return diagnose(fit, settings)


def grid(
    fit: FitResult,
    subject: SubjectSource,
    *,
    effective_date: Any = None,
    import_settings: ImportSettings = ImportSettings(),  # noqa: B008
    selection: Any = None,
    pinned: Iterable[str] = (),
    comps: Iterable[str] | None = None,
    weights: Iterable[float] | None = None,
    limits: Any = None,
    comments: Mapping[str, str] | None = None,
    level: float | None = None,
    caution: str = "",
) -> Any:
    """Sales comparison: rank the candidates, choose comparables, build the adjustment grid.

    ``effective_date`` defaults to the subject's ``effective_date``, else the model file's.
    Returns ``(Grid, candidates frame)``; see :mod:`appraise.engine.grid`.
    """
    from .engine.comparables import SelectionSettings, candidates, select
    from .engine.grid import GridLimits, build_grid, subject_at
    from .engine.market import market_index

    if isinstance(subject, Mapping):
        subject = filled(subject)
    frame = subject_frame(subject, fit.sales, import_settings)
    eff = effective_date
    if (
        eff is None
        and "effective_date" in frame.columns
        and not pd.isna(frame["effective_date"].iloc[0])
    ):
        eff = frame["effective_date"].iloc[0]
    if eff is None:
        eff = fit.spec.effective_date
    if eff is None or (isinstance(eff, str) and not eff.strip()):
        raise AppraiseError(
            "the sales comparison needs an effective date of value: give --effective-date, "
            "an 'effective_date' in the subject, or effective_date in the model file"
        )
    eff = pd.Timestamp(eff)
    at = subject_at(fit, frame, eff)
    valuation = value_subject(fit, at, level)
    settings = selection if selection is not None else SelectionSettings()
    table = candidates(fit, at, eff, settings)
    chosen = select(table, settings, tuple(pinned), None if comps is None else list(comps))
    market = market_index(fit, at, eff, level)
    result = build_grid(
        fit,
        at,
        chosen.rows,
        effective_date=eff,
        valuation=valuation,
        market=market,
        similarity=table,
        pinned=chosen.pinned,
        weights=None if weights is None else list(weights),
        limits=limits if limits is not None else GridLimits(),
        warnings=chosen.warnings + valuation.warnings,
        comments=dict(comments or {}),
        caution=caution,
    )
    return result, table


# --- the whole sequence --------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Analysis:
    """What one run of :func:`analyse` produced.

    ``valuation`` is None when no subject was given (or none is filled in);
    ``valuation_error`` holds the one-line message when the subject could not be valued
    (the fit is still good); ``diagnostics`` is None when checks were not asked for.
    """

    sales: SalesTable
    spec: ModelSpec
    fit: FitResult
    valuation: Valuation | None = None
    valuation_error: str | None = None
    diagnostics: Diagnostics | None = None


def analyse(
    sales: SalesTable,
    spec: ModelSpec,
    *,
    subject: SubjectSource | None = None,
    import_settings: ImportSettings = ImportSettings(),  # noqa: B008
    user_exclusions: Iterable[Exclusion] = (),
    level: float | None = None,
    diagnostics: DiagnosticSettings | None = None,
    reuse: FitResult | None = None,
    report: Report = _ignore,
    strict_subject: bool = True,
) -> Analysis:
    """Fit (or reuse a fit made from the same inputs), value the subject, check the fit.

    Reports ``("fit", FitResult)`` for a new fit, then ``("valuation", Valuation | None)``
    or ``("valuation_error", message)``, then ``("diagnostics", Diagnostics)`` when
    ``diagnostics`` settings are given. With ``strict_subject`` a subject that cannot be
    valued raises (the command line); without it the message is reported and the run goes
    on to the checks (the window, where the user is still typing).
    """
    result = reuse
    if result is None:
        result = fit(sales, spec, user_exclusions)
        report("fit", result)
    valuation, error = None, None
    if subject is not None:
        try:
            valuation = value(result, subject, import_settings, level)
        except AppraiseError as exc:
            if strict_subject:
                raise
            error = str(exc)
            report("valuation_error", error)
        else:
            report("valuation", valuation)
    diag = None
    if diagnostics is not None:
        diag = check(result, diagnostics)
        report("diagnostics", diag)
    return Analysis(sales, spec, result, valuation, error, diag)


__all__ = [
    "Analysis",
    "Report",
    "analyse",
    "check",
    "filled",
    "fit",
    "grid",
    "load",
    "read_model",
    "subject_frame",
    "value",
]
