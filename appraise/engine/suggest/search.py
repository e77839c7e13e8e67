"""Stepwise search for a better model, by cross-validated error, with an honest estimate.

The criterion is the mean squared held-out residual on the response scale (log price
for a log response): k-fold with the folds dealt once by a fixed seed
(:func:`appraise.engine.diagnostics.crossval.assign_folds`) and kept for the whole
search, so every comparison is paired; ``folds = 0`` uses leave-one-out, exact for
least squares and cheaper still. Every candidate is scored by updating the current
fit's decomposition (:mod:`.update`), never by refitting.

The stopping rule (one standard error)
--------------------------------------
For a change from model A to model B the per-sale differences
:math:`d_i = e_{B,i}^2 - e_{A,i}^2` of squared held-out residuals give the change in
CV error :math:`\\bar d` and its standard error :math:`s_d / \\sqrt{n}`. Each step:

1. *backward*: the simplifying change (dropping a term, or a form with fewer columns)
   that raises the CV error least is made when the rise is below one standard error
   (:math:`\\bar d < 1 \\cdot SE`), against the current model and against the best model
   met so far; a main effect is never dropped while an interaction of it is in the model:
   a simpler model that is not measurably worse is preferred;
2. otherwise *forward*: the best addition, or replacement of a term by another form of
   the same column, is taken only when it lowers the CV error by more than
   :math:`\\max(1, \\sqrt{2 \\ln m})` standard errors, m the number of distinct columns
   tried in the step (:func:`chance_multiple`: about the largest of m chance gains), and of
   the forms of that column the one with fewest columns within one SE of the best;
3. otherwise the search stops.

A model already visited is never visited again (no cycles), an addition is refused
once the model has ``max_lines`` feature lines (default 14), and the search stops
after ``max_steps`` steps.

The honest estimate
-------------------
The CV error of the chosen model is optimistic: the search picked it because it
scored well on those very folds. :func:`suggest` therefore also holds out a seeded
share of the sales (default 20 %), runs the whole search again on the rest alone,
fits the model chosen there on the rest and measures its error on the held-out sales
it never saw. Both figures are reported side by side.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from types import MappingProxyType

import numpy as np

from ..design import learn_design
from ..diagnostics.crossval import assign_folds
from ..errors import AppraiseError, FitError
from ..fitting import FitResult
from ..modelspec import ModelSpec
from ..sales import column_kind
from .candidates import CandidatePool, mentions, propose
from .guards import LEAKAGE, Refusal, Screen, protected_columns, screen_columns
from .update import CVState, cv_state, standardise

Progress = Callable[[float, str], None]

MAX_LEFT_OUT_SHARE = 0.05
"""Most sales the search leaves out so that columns missing on a few sales can compete."""


@dataclass(frozen=True)
class SearchSettings:
    """How the search runs. ``folds = 0`` means leave-one-out."""

    folds: int = 10
    seed: int = 0
    max_lines: int = 14
    se_multiple: float = 1.0
    holdout_share: float = 0.2
    honest: bool = True
    max_steps: int = 60

    def __post_init__(self) -> None:
        if self.folds == 1 or self.folds < 0:
            raise FitError(f"folds must be 0 (leave-one-out) or at least 2, not {self.folds}")
        if self.max_lines < 1:
            raise FitError(f"max lines must be at least 1, not {self.max_lines}")
        if not 0 < self.holdout_share < 0.5:
            raise FitError(
                f"the hold-out share must be between 0 and 0.5, not {self.holdout_share}"
            )


@dataclass(frozen=True, eq=False)
class Term:
    """A feature line with its design columns (raw, one row per sale used)."""

    feature: str
    key: str | None
    block: np.ndarray
    why: str = ""
    extra: bool = False
    onehot: bool = False
    requires: str | None = None
    pair: str | None = None
    """Feature of the required key added with this term when the model lacks that key."""
    inputs: tuple[str, ...] = ()
    """The sales' columns the term reads."""
    interaction: bool = False
    """A product of two inputs (``a * b``, ``x * onehot(c)``)."""


@dataclass(frozen=True, eq=False)
class Problem:
    """What a search works on: the response, the start model's terms and every candidate."""

    y: np.ndarray
    price: np.ndarray
    response: str
    intercept: bool
    start: tuple[Term, ...]
    forms: tuple[Term, ...]
    derived: Mapping[str, str]
    screen: Screen
    pool: CandidatePool
    skipped: tuple[tuple[str, str], ...]
    warnings: tuple[str, ...] = ()
    left_out: tuple[int, ...] = ()
    """File rows of sales the start model uses that the search leaves out: a candidate
    column is missing on them (at most :data:`MAX_LEFT_OUT_SHARE` of the sales)."""

    @property
    def n(self) -> int:
        return int(self.y.size)


@dataclass(frozen=True)
class Move:
    """One scored single change of a model.

    ``change`` is "add", "drop" or "swap" (``dropped`` replaced by ``added``).
    ``gain`` is the fall in CV mean squared error (positive is better) and ``se`` its
    standard error; ``rmse_before``/``rmse_after`` the CV root mean squared error.
    """

    change: str
    added: str | None
    dropped: str | None
    why: str
    rmse_before: float
    rmse_after: float
    gain: float
    se: float
    width: int = 0
    """Design columns added (negative: removed) by the change."""
    key: str | None = None
    """The column (or derived name) the added term encodes, when it has one."""
    lines: tuple[str, ...] = ()
    """The feature lines added (two for an interaction that brings its main effect)."""

    @property
    def simplifies(self) -> bool:
        return self.width < 0

    @property
    def rmse_gain(self) -> float:
        return self.rmse_before - self.rmse_after

    @property
    def rmse_se(self) -> float:
        """SE of the gain on the RMSE scale (delta method: SE_mse / (2 RMSE))."""
        return self.se / (2 * self.rmse_before) if self.rmse_before > 0 else float("nan")

    @property
    def gain_in_se(self) -> float:
        return self.gain / self.se if self.se > 0 else float("inf")

    def text(self) -> str:
        if self.change == "add":
            return f"add {self.added}"
        if self.change == "drop":
            return f"drop {self.dropped}"
        return f"{self.dropped} -> {self.added}"

    def to_dict(self) -> dict:
        return {
            "change": self.change,
            "added": self.added,
            "dropped": self.dropped,
            "text": self.text(),
            "lines_added": list(self.lines),
            "why": self.why,
            "cv_rmse_before": self.rmse_before,
            "cv_rmse_after": self.rmse_after,
            "gain_mse": self.gain,
            "se_mse": self.se,
            "gain_rmse": self.rmse_gain,
            "se_rmse": self.rmse_se,
        }


@dataclass(frozen=True)
class LineGain:
    """What one line of the final model is measured to do: dropping it would cost
    ``cost`` (CV mean squared error, SE ``se``); ``origin`` is "start" or "step k"."""

    feature: str
    origin: str
    cost: float
    se: float
    rmse_without: float

    def to_dict(self) -> dict:
        return {
            "feature": self.feature,
            "origin": self.origin,
            "drop_cost_mse": self.cost,
            "drop_se_mse": self.se,
            "cv_rmse_without": self.rmse_without,
        }


@dataclass(frozen=True)
class Path:
    """One run of the search on some rows."""

    start: tuple[str, ...]
    features: tuple[str, ...]
    steps: tuple[Move, ...]
    start_rmse: float
    final_rmse: float
    stopped: str
    heldout_start: np.ndarray = field(repr=False, default_factory=lambda: np.empty(0))
    heldout_final: np.ndarray = field(repr=False, default_factory=lambda: np.empty(0))


@dataclass(frozen=True)
class HonestEstimate:
    """The search run again without a seeded share of the sales, and scored on them."""

    share: float
    seed: int
    n_search: int
    n_holdout: int
    features: tuple[str, ...]
    in_search_rmse: float
    holdout_rmse: float
    start_holdout_rmse: float
    holdout_cod: float = float("nan")
    """COD (percent) of the chosen model's values of the held-out sales."""
    start_holdout_cod: float = float("nan")

    def to_dict(self) -> dict:
        return {
            "share": self.share,
            "seed": self.seed,
            "n_search": self.n_search,
            "n_holdout": self.n_holdout,
            "features": list(self.features),
            "in_search_cv_rmse": self.in_search_rmse,
            "holdout_rmse": self.holdout_rmse,
            "start_holdout_rmse": self.start_holdout_rmse,
            "holdout_cod": self.holdout_cod,
            "start_holdout_cod": self.start_holdout_cod,
        }


@dataclass(frozen=True)
class Suggestion:
    """Everything ``appraise suggest`` reports."""

    spec: ModelSpec
    proposed: ModelSpec
    settings: SearchSettings
    n: int
    path: Path
    lines: tuple[LineGain, ...]
    honest: HonestEstimate | None
    start_cod: float
    final_cod: float
    refused: tuple[Refusal, ...]
    skipped: tuple[tuple[str, str], ...]
    notes: tuple[str, ...]
    warnings: tuple[str, ...]
    n_candidates: int
    left_out: tuple[int, ...] = ()

    @property
    def steps(self) -> tuple[Move, ...]:
        return self.path.steps

    def to_dict(self) -> dict:
        p = self.path
        return {
            "n": self.n,
            "response": self.spec.response,
            "criterion": "leave-one-out"
            if self.settings.folds == 0
            else f"{self.settings.folds}-fold",
            "folds": self.settings.folds,
            "seed": self.settings.seed,
            "max_lines": self.settings.max_lines,
            "rule": f"{self.settings.se_multiple:g} standard error",
            "start": {"features": list(p.start), "cv_rmse": p.start_rmse, "cv_cod": self.start_cod},
            "steps": [dict(m.to_dict(), step=i + 1) for i, m in enumerate(p.steps)],
            "stopped": p.stopped,
            "final": {
                "features": list(p.features),
                "cv_rmse": p.final_rmse,
                "cv_cod": self.final_cod,
                "lines": [g.to_dict() for g in self.lines],
                "derived": dict(self.proposed.derived),
            },
            "honest": None if self.honest is None else self.honest.to_dict(),
            "candidates": self.n_candidates,
            "refused": [r.to_dict() for r in self.refused],
            "skipped": [{"what": w, "reason": r} for w, r in self.skipped],
            "notes": list(self.notes),
            "warnings": list(self.warnings),
            "left_out_rows": list(self.left_out),
        }


# --- building the problem -------------------------------------------------------------
def _term_key(
    feature: str, inputs: Sequence[str], kind: str, derived: Mapping[str, str]
) -> str | None:
    names = [d for d in derived if mentions(feature, d)]
    if "*" in feature:
        return None
    if len(names) == 1:
        return names[0]
    if not names and len(inputs) == 1 and kind in ("plain", "poly", "onehot"):
        return inputs[0]
    return None


def _is_interaction(expression: str, kind: str) -> bool:
    return kind == "onehot_product" or (kind == "plain" and "*" in expression.replace("**", ""))


def _main_effect_of(t: Term, others: Sequence[Term]) -> bool:
    """``t`` reads only inputs that an interaction among ``others`` multiplies: dropping it
    would leave the interaction without its main effect."""
    return (
        bool(t.inputs)
        and not t.interaction
        and any(u.interaction and set(t.inputs) <= set(u.inputs) for u in others)
    )


def leaky_inputs(fit: FitResult, screen: Screen) -> tuple[str, ...]:
    """Warnings for columns the start model reads that the leakage guard refuses (a date
    read through the time functions is fine)."""
    out = []
    for r in screen.refused:
        if r.guard != LEAKAGE or r.column not in fit.design.inputs:
            continue
        if column_kind(fit.frame[r.column]) == "date":
            continue
        out.append(
            f"the start model reads '{r.column}', which the leakage guard refuses ({r.reason}); "
            "drop that line: an estimate must not be computed from the price"
        )
    return tuple(out)


def build_problem(fit: FitResult, screen: Screen | None = None) -> Problem:
    """Screen the columns, propose candidates and build every candidate's columns.

    A candidate that cannot be evaluated on every sale the start model uses (a missing
    value, a log of zero) is skipped with the reason: the search compares models on the
    same sales.
    """
    frame = fit.frame
    roles = fit.sales.roles
    if screen is None:
        screen = screen_columns(frame, fit.target, roles)
    pool = propose(fit, screen)
    derived = {**fit.spec.derived, **pool.derived}
    names = fit.design.names
    start = []
    for g in fit.design.groups:
        cols = [names.index(c) for c in g.columns]
        start.append(
            Term(
                g.expression,
                _term_key(g.expression, g.inputs, g.kind, derived),
                np.asarray(fit.X[:, cols], dtype=float),
                onehot=g.kind == "onehot",
                inputs=tuple(g.inputs),
                interaction=_is_interaction(g.expression, g.kind),
            )
        )
    skipped: list[tuple[str, str]] = list(pool.skipped)
    forms = []
    left_out = np.empty(0, dtype=int)
    built_as: dict[str, str] = {}
    for f in pool.forms:
        try:
            d = learn_design([f.feature], frame, derived=derived, roles=roles, intercept=False)
            built = d.build(frame)
        except AppraiseError as exc:
            skipped.append((f.feature, f"cannot be built: {exc}"))
            continue
        bad_rows = np.flatnonzero(~np.asarray(built.row_ok))
        if bad_rows.size:
            reasons = {built.problems[k][1] for k in range(len(built.problems))}
            only_missing = all(r.startswith("missing") for r in reasons)
            union = np.union1d(left_out, bad_rows)
            if not only_missing or union.size > MAX_LEFT_OUT_SHARE * fit.n:
                what = "missing" if only_missing else "not defined"
                skipped.append(
                    (f.feature, f"{what} on {bad_rows.size:,} of the {fit.n:,} sales used")
                )
                continue
            left_out = union
        built_as[f.feature] = d.groups[0].expression
        forms.append(
            Term(
                d.groups[0].expression,
                f.key,
                np.asarray(built.matrix, dtype=float),
                f.why,
                f.extra,
                d.groups[0].kind == "onehot",
                f.requires,
                f.pair,
                tuple(d.inputs),
                _is_interaction(d.groups[0].expression, d.groups[0].kind),
            )
        )
    forms = [replace(t, pair=built_as.get(t.pair)) if t.pair else t for t in forms]
    warnings = protected_columns(fit.design.inputs, frame) + leaky_inputs(fit, screen)
    keep = np.setdiff1d(np.arange(fit.n), left_out)
    forms = [replace(t, block=t.block[keep]) for t in forms]
    start = [replace(t, block=t.block[keep]) for t in start]
    return Problem(
        y=np.asarray(fit.y, dtype=float)[keep],
        price=np.asarray(fit.price, dtype=float)[keep],
        response=fit.spec.response,
        intercept=fit.design.intercept,
        start=tuple(start),
        forms=tuple(forms),
        left_out=tuple(int(fit.rows[i]) for i in left_out),
        derived=MappingProxyType(derived),
        screen=screen,
        pool=pool,
        skipped=tuple(skipped),
        warnings=warnings,
    )


# --- scoring ------------------------------------------------------------------------
class _Rows:
    """Standardised blocks of the terms on one set of rows (cached)."""

    def __init__(self, problem: Problem, rows: np.ndarray) -> None:
        self.rows = rows
        self.centre = problem.intercept
        self._cache: dict[int, np.ndarray] = {}

    def block(self, term: Term) -> np.ndarray:
        k = id(term)
        if k not in self._cache:
            self._cache[k] = standardise(term.block[self.rows], self.centre)
        return self._cache[k]

    def design(self, terms: Sequence[Term]) -> np.ndarray:
        parts = [np.ones((self.rows.size, 1))] if self.centre else []
        parts += [self.block(t) for t in terms]
        return np.hstack(parts) if parts else np.empty((self.rows.size, 0))


def _columns_of(terms: Sequence[Term], index: int, intercept: bool) -> np.ndarray:
    start = (1 if intercept else 0) + sum(t.block.shape[1] for t in terms[:index])
    return np.arange(start, start + terms[index].block.shape[1])


def _pooled(term: Term) -> bool:
    return "min_count" in term.feature


def _same_encoding(a: Term, b: Term) -> bool:
    """Two onehots of one column that differ only in the reference level span the same space."""
    return a.onehot and b.onehot and not (_pooled(a) or _pooled(b))


def _moves(
    state: CVState,
    current: Sequence[Term],
    problem: Problem,
    rows: _Rows,
    settings: SearchSettings,
    visited: set[frozenset[str]] | None = None,
) -> list[tuple[Move, tuple[Term, ...], np.ndarray]]:
    """Every single change of ``current`` scored: (move, model after it, held-out residuals)."""
    base = state.heldout
    ok = np.isfinite(base)
    mse0 = float(np.mean(base[ok] ** 2))
    rmse0 = float(np.sqrt(mse0))
    n = int(ok.sum())
    feats = {t.feature for t in current}
    keys = {t.key for t in current if t.key is not None}
    out: list[tuple[Move, tuple[Term, ...], np.ndarray]] = []

    def seen(terms: Sequence[Term]) -> bool:
        return visited is not None and frozenset(t.feature for t in terms) in visited

    width0 = sum(t.block.shape[1] for t in current)

    def record(kind, added, dropped, why, e, after, lines=()) -> None:
        if not np.all(np.isfinite(e[ok])):
            return  # a sale lost its held-out residual (leverage 1): not comparable
        d = e[ok] ** 2 - base[ok] ** 2
        mse1 = mse0 + float(np.mean(d))
        se = float(np.std(d, ddof=1) / np.sqrt(n)) if n > 1 else float("inf")
        lines = tuple(lines) or ((added,) if added else ())
        key = next((t.key for t in after if lines and t.feature == lines[-1]), None)
        width = sum(t.block.shape[1] for t in after) - width0
        rmse1 = float(np.sqrt(max(mse1, 0.0)))
        gain = -float(np.mean(d))
        move = Move(kind, added, dropped, why, rmse0, rmse1, gain, se, width, key, lines)
        out.append((move, tuple(after), e))

    room = settings.max_lines - len(current)
    by_feature = {f.feature: f for f in problem.forms}
    adds: list[tuple[Term, ...]] = []
    for f in problem.forms:
        if f.feature in feats or not (f.extra or f.key not in keys):
            continue
        group: tuple[Term, ...] = (f,)
        if f.requires is not None and f.requires not in keys:
            pair = by_feature.get(f.pair) if f.pair else None
            if pair is None or pair.feature in feats:
                continue  # a hinge goes only beside its own line
            group = (pair, f)
        if len(group) <= room and not seen([*current, *group]):
            adds.append(group)
    if adds:
        res = state.score_add([np.hstack([rows.block(t) for t in g]) for g in adds])
        for j, g in enumerate(adds):
            text = " and ".join(t.feature for t in g)
            lines = tuple(t.feature for t in g)
            record("add", text, None, g[-1].why, res[:, j], [*current, *g], lines)
    for i, t in enumerate(current):
        cols = _columns_of(current, i, problem.intercept)
        rest = [*current[:i], *current[i + 1 :]]
        needed = (
            t.key is not None
            and any(u.requires == t.key for u in rest)
            and not any(u.key == t.key and not u.extra for u in rest)
        ) or _main_effect_of(t, rest)
        if rest and not needed and not seen(rest):
            record("drop", None, t.feature, "", state.score_drop(cols), rest)
        if t.key is None:
            continue
        swaps = [
            f for f in problem.forms
            if f.key == t.key and not f.extra and f.feature not in feats
            and not _same_encoding(t, f) and not seen([*current[:i], f, *current[i + 1 :]])
        ]  # fmt: skip
        res = state.score_swaps(cols, [rows.block(f) for f in swaps])
        for j, f in enumerate(swaps):
            after = [*current[:i], f, *current[i + 1 :]]
            record("swap", f.feature, t.feature, f.why, res[:, j], after)
    return out


def _pick(
    scored: list[tuple[Move, tuple[Term, ...], np.ndarray]],
    settings: SearchSettings,
    best_heldout: np.ndarray | None = None,
) -> tuple[Move, tuple[Term, ...]] | None:
    """The change to make, by the one-standard-error rule (see the module text).

    A simplifying change must also stay within one SE of the best model met so far
    (``best_heldout``, its held-out residuals), so that small losses cannot pile up.
    """
    k = settings.se_multiple

    def near_best(e: np.ndarray) -> bool:
        if best_heldout is None:
            return True
        ok = np.isfinite(best_heldout)
        d = e[ok] ** 2 - best_heldout[ok] ** 2
        se = float(np.std(d, ddof=1) / np.sqrt(d.size)) if d.size > 1 else float("inf")
        return float(np.mean(d)) < k * se

    simpler = [
        m for m in scored if m[0].simplifies and m[0].gain > -k * m[0].se and near_best(m[2])
    ]
    if simpler:
        m = max(simpler, key=lambda m: m[0].gain)
        return m[0], m[1]
    grow = [m for m in scored if not m[0].simplifies]
    k_up = k * chance_multiple(len({m[0].key or m[0].added for m in grow}))
    ups = [m for m in grow if m[0].gain > k_up * m[0].se]
    if not ups:
        return None
    best = max(ups, key=lambda m: m[0].gain)[0]
    # the simplest form of the same column whose gain is within one SE of the best
    near = [
        m for m in ups
        if m[0].key == best.key and m[0].gain >= best.gain - k * best.se
    ]  # fmt: skip
    m = min(near, key=lambda m: (m[0].width, -m[0].gain))
    return m[0], m[1]


def chance_multiple(m: int) -> float:
    """:math:`\\max(1, \\sqrt{2 \\ln m})`: about the largest of m standard normal gains,
    the multiple of its SE a gain must beat when m changes were tried at once."""
    return max(1.0, float(np.sqrt(2.0 * np.log(max(m, 1)))))


def _folds(n: int, settings: SearchSettings) -> np.ndarray | None:
    return None if settings.folds == 0 else assign_folds(n, settings.folds, settings.seed)


def run_path(
    problem: Problem,
    settings: SearchSettings,
    rows: np.ndarray | None = None,
    progress: Progress | None = None,
    span: tuple[float, float] = (0.0, 1.0),
) -> Path:
    """The stepwise search on ``rows`` (all sales by default); see the module text."""
    rows = np.arange(problem.n) if rows is None else np.asarray(rows)
    r = _Rows(problem, rows)
    y = problem.y[rows]
    folds = _folds(rows.size, settings)
    current: tuple[Term, ...] = problem.start
    state = cv_state(r.design(current), y, folds, centre=problem.intercept)
    start_state = state
    visited = {frozenset(t.feature for t in current)}
    best_heldout, best_mse = state.heldout, state.mse
    steps: list[Move] = []
    stopped = (
        "no addition or replacement gains more than the threshold, and no simplification "
        "costs less than one standard error"
    )
    lo, hi = span
    for k in range(settings.max_steps):
        if progress is not None:
            progress(lo + (hi - lo) * min(0.95, k / (settings.max_lines + 4)), f"step {k + 1}")
        scored = _moves(state, current, problem, r, settings, visited)
        if len(current) > settings.max_lines:  # over the cap: the cheapest drop, whatever it costs
            drops = [m for m in scored if m[0].change == "drop"]
            best = max(drops, key=lambda m: m[0].gain) if drops else None
            if best is not None:
                why = f"over the {settings.max_lines}-line cap: the cheapest line to drop"
                best = (replace(best[0], why=why), best[1])
        else:
            best = _pick(scored, settings, best_heldout)
        if best is None:
            break
        move, current = best
        visited.add(frozenset(t.feature for t in current))
        steps.append(move)
        state = cv_state(r.design(current), y, folds, centre=problem.intercept)
        if state.mse < best_mse:
            best_heldout, best_mse = state.heldout, state.mse
    else:
        stopped = f"the step limit ({settings.max_steps})"
    if len(current) >= settings.max_lines and stopped.startswith("no addition"):
        stopped += f" (additions stopped at the {settings.max_lines}-line cap)"
    return Path(
        start=tuple(t.feature for t in problem.start),
        features=tuple(t.feature for t in current),
        steps=tuple(steps),
        start_rmse=float(np.sqrt(start_state.mse)),
        final_rmse=float(np.sqrt(state.mse)),
        stopped=stopped,
        heldout_start=start_state.heldout,
        heldout_final=state.heldout,
    )


def rank_moves(
    problem: Problem, settings: SearchSettings, features: Sequence[str] | None = None
) -> tuple[Move, ...]:
    """Every single change of the model (the start model, or ``features`` drawn from the
    start terms and candidates) with its measured gain, best first."""
    terms = _terms_named(problem, features) if features is not None else problem.start
    rows = np.arange(problem.n)
    r = _Rows(problem, rows)
    state = cv_state(
        r.design(terms), problem.y, _folds(problem.n, settings), centre=problem.intercept
    )
    scored = _moves(state, terms, problem, r, settings)
    return tuple(sorted((m for m, _, _ in scored), key=lambda m: -m.gain))


def _terms_named(problem: Problem, features: Sequence[str]) -> tuple[Term, ...]:
    known = {t.feature: t for t in (*problem.start, *problem.forms)}
    missing = [f for f in features if f not in known]
    if missing:
        raise FitError("not a start term or a candidate: " + ", ".join(missing))
    return tuple(known[f] for f in features)


def line_gains(problem: Problem, path: Path, settings: SearchSettings) -> tuple[LineGain, ...]:
    """Each line of the final model: what dropping it alone would cost."""
    terms = _terms_named(problem, path.features)
    r = _Rows(problem, np.arange(problem.n))
    state = cv_state(
        r.design(terms), problem.y, _folds(problem.n, settings), centre=problem.intercept
    )
    base = state.heldout
    ok = np.isfinite(base)
    added_at = {m.added: i + 1 for i, m in enumerate(path.steps) if m.added}
    out = []
    for i, t in enumerate(terms):
        e = state.score_drop(_columns_of(terms, i, problem.intercept))
        d = e[ok] ** 2 - base[ok] ** 2
        se = float(np.std(d, ddof=1) / np.sqrt(d.size)) if d.size > 1 else float("nan")
        mse = float(np.mean(e[ok] ** 2)) if np.all(np.isfinite(e[ok])) else float("nan")
        origin = f"step {added_at[t.feature]}" if t.feature in added_at else "start"
        out.append(LineGain(t.feature, origin, float(np.mean(d)), se, float(np.sqrt(mse))))
    return tuple(out)


def _fit_predict(
    problem: Problem, terms: Sequence[Term], train: np.ndarray, test: np.ndarray
) -> np.ndarray:
    parts = [np.ones((problem.n, 1))] if problem.intercept else []
    X = np.hstack([*parts, *(t.block for t in terms)])
    coef, *_ = np.linalg.lstsq(X[train], problem.y[train], rcond=None)
    return problem.y[test] - X[test] @ coef


def honest_estimate(
    problem: Problem,
    settings: SearchSettings,
    progress: Progress | None = None,
    span: tuple[float, float] = (0.0, 1.0),
) -> HonestEstimate:
    """Hold out a seeded share, search on the rest, measure the chosen model on the share."""
    n = problem.n
    order = np.random.default_rng(settings.seed).permutation(n)
    n_hold = max(1, int(round(settings.holdout_share * n)))
    hold, search_rows = np.sort(order[:n_hold]), np.sort(order[n_hold:])
    path = run_path(problem, settings, search_rows, progress, span)
    chosen = _terms_named(problem, path.features)
    e = _fit_predict(problem, chosen, search_rows, hold)
    e0 = _fit_predict(problem, problem.start, search_rows, hold)

    def cod_of(residuals: np.ndarray) -> float:
        full = np.full(n, np.nan)
        full[hold] = residuals
        return cv_cod(problem, full)

    return HonestEstimate(
        share=settings.holdout_share,
        seed=settings.seed,
        n_search=int(search_rows.size),
        n_holdout=int(hold.size),
        features=path.features,
        in_search_rmse=path.final_rmse,
        holdout_rmse=float(np.sqrt(np.mean(e * e))),
        start_holdout_rmse=float(np.sqrt(np.mean(e0 * e0))),
        holdout_cod=cod_of(e),
        start_holdout_cod=cod_of(e0),
    )


def cv_cod(problem: Problem, heldout: np.ndarray) -> float:
    """COD (percent) of the held-out predictions in price units.

    COD does not change when every ratio is scaled, so a log model's median
    :math:`e^{\\hat y}` serves without a smearing factor.
    """
    from ..diagnostics.ratio_study import cod

    ok = np.isfinite(heldout)
    pred = problem.y[ok] - heldout[ok]
    value = np.exp(pred) if problem.response == "log" else pred
    return float(cod(value, problem.price[ok]).value)


def proposed_spec(spec: ModelSpec, problem: Problem, features: Sequence[str]) -> ModelSpec:
    """The start model file with the chosen features and the derived names they need."""
    derived = dict(spec.derived)
    for name, expr in problem.pool.derived.items():
        if any(mentions(f, name) for f in features):
            derived[name] = expr
    return replace(spec, features=tuple(features), derived=MappingProxyType(derived))


def features_after(features: Sequence[str], move: Move) -> tuple[str, ...]:
    """The feature lines after ``move``: added lines appended, a dropped line removed, a
    replaced line swapped in place."""
    out = list(features)
    if move.change == "add":
        return (*out, *(move.lines or (move.added,)))
    i = out.index(move.dropped)
    if move.change == "drop":
        del out[i]
    else:
        out[i] = move.added
    return tuple(out)


def spec_after(spec: ModelSpec, problem: Problem, move: Move) -> ModelSpec:
    """``spec`` with one ranked change made (lines as written in ``spec``, derived names
    added where the new lines need them): what applying a suggestion hands to the fit."""
    written = {t.feature: f for t, f in zip(problem.start, spec.features, strict=True)}
    start = tuple(t.feature for t in problem.start)
    features = tuple(written.get(f, f) for f in features_after(start, move))
    return proposed_spec(spec, problem, features)


def suggest(
    fit: FitResult,
    settings: SearchSettings = SearchSettings(),  # noqa: B008 - frozen, safe as a default
    progress: Progress | None = None,
    screen: Screen | None = None,
) -> Suggestion:
    """Search from ``fit``'s model; report the steps, the final model and the honest estimate.

    ``progress(fraction, message)`` is called as the search goes; raising
    :class:`~appraise.engine.errors.Cancelled` from it stops the search.
    """
    problem = build_problem(fit, screen)
    main_span = (0.0, 0.55) if settings.honest else (0.0, 0.95)
    path = run_path(problem, settings, None, progress, main_span)
    honest = honest_estimate(problem, settings, progress, (0.55, 0.95)) if settings.honest else None
    lines = line_gains(problem, path, settings)
    proposed = proposed_spec(fit.spec, problem, path.features)
    # the proposed model must be one the ordinary fit accepts
    learn_design(proposed.features, fit.frame, derived=proposed.derived, roles=fit.sales.roles)
    if progress is not None:
        progress(1.0, "done")
    return Suggestion(
        spec=fit.spec,
        proposed=proposed,
        settings=settings,
        n=problem.n,
        path=path,
        lines=lines,
        honest=honest,
        start_cod=cv_cod(problem, path.heldout_start),
        final_cod=cv_cod(problem, path.heldout_final),
        refused=problem.screen.refused,
        skipped=problem.skipped,
        notes=problem.pool.notes,
        warnings=problem.warnings,
        n_candidates=len(problem.forms),
        left_out=problem.left_out,
    )
