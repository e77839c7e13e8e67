"""Text of the model assistant: the steps it took, the final model, the honest estimate,
what the guards refused; and the proposed model file with one comment per feature line.
"""

from __future__ import annotations

from ..engine.modelspec import toml_string
from ..engine.suggest.guards import FAIR_LENDING, LEAKAGE, protected_columns
from ..engine.suggest.search import LineGain, Move, Suggestion
from .cautions import FAIR_LENDING_CAUTION, ONE_LINE_CAUTION, SUGGESTION_CAUTION
from .numbers import fixed, money

MAX_SKIPPED_SHOWN = 12


def error_text(value: float, response: str) -> str:
    """A CV error as people read it: log points to four decimals, or money."""
    return fixed(value, 4) if response == "log" else money(value)


def signed_error(value: float, response: str) -> str:
    body = error_text(abs(value), response)
    return ("-" if value < 0 else "+") + body


def criterion(s: Suggestion) -> str:
    st = s.settings
    how = "leave-one-out" if st.folds == 0 else f"{st.folds}-fold (seed {st.seed})"
    scale = "log price" if s.spec.response == "log" else "price"
    return f"{how} cross-validated RMSE of {scale}"


def move_line(m: Move, response: str) -> str:
    """One step: the change, CV error before and after, the gain and its standard error."""
    return (
        f"{m.text()}: CV RMSE {error_text(m.rmse_before, response)} -> "
        f"{error_text(m.rmse_after, response)} (gain {signed_error(m.rmse_gain, response)}, "
        f"SE {error_text(m.rmse_se, response)}, {fixed(m.gain_in_se, 1)} SE)"
    )


def line_comment(g: LineGain, final_rmse: float, response: str) -> str:
    """The measured gain of one line of the final model, for its comment."""
    cost = g.rmse_without - final_rmse
    se = g.se / (2 * final_rmse) if final_rmse > 0 else float("nan")
    where = f"added at {g.origin}" if g.origin.startswith("step") else "from the start model"
    return (
        f"{where}; without it CV RMSE {error_text(g.rmse_without, response)} "
        f"({signed_error(cost, response)}, SE {error_text(se, response)})"
    )


def format_suggestion(s: Suggestion) -> str:
    """The whole report as plain text."""
    r = s.spec.response
    p = s.path
    out = [
        f"Model assistant: {s.n:,} sales, {criterion(s)}",
        f"{s.n_candidates} candidate terms; rule: a change must gain more than one standard "
        "error (scaled for the number of columns tried); a term is dropped when it gains "
        f"less than one; at most {s.settings.max_lines} lines",
    ]
    if s.left_out:
        out.append(
            f"{len(s.left_out)} sale(s) left out of the search because a candidate column is "
            "missing on them (file rows " + ", ".join(map(str, s.left_out[:10])) + ")"
        )
    out += [
        "",
        f"Start model: CV RMSE {error_text(p.start_rmse, r)}, COD {fixed(s.start_cod, 1)}",
    ]
    out += [f"    {f}" for f in p.start]
    out += ["", "Steps:"]
    if not p.steps:
        out.append("    none")
    out += [f"{i:>4}. {move_line(m, r)}" for i, m in enumerate(p.steps, 1)]
    out.append(f"Stopped: {p.stopped}.")
    out += [
        "",
        f"Proposed model ({len(p.features)} lines): CV RMSE {error_text(p.final_rmse, r)}, "
        f"COD {fixed(s.final_cod, 1)}",
    ]
    for g in s.lines:
        out.append(f"    {g.feature}")
        out.append(f"        {line_comment(g, p.final_rmse, r)}")
    for name, expr in s.proposed.derived.items():
        if name not in s.spec.derived:
            out.append(f"    where {name} = {expr}")
    out += ["", "Honest estimate:"]
    out.append(
        f"    in-search figure (the search chose this model on it): {error_text(p.final_rmse, r)}"
    )
    h = s.honest
    if h is None:
        out.append("    hold-out not run (--no-holdout)")
    else:
        out.append(
            f"    the search run again on {h.n_search:,} sales without a seeded "
            f"{fixed(100 * h.share, 0)}% ({h.n_holdout:,} sales, seed {h.seed}):"
        )
        out.append(f"      its in-search figure {error_text(h.in_search_rmse, r)}")
        out.append(
            f"      on the held-out sales it never saw {error_text(h.holdout_rmse, r)}, "
            f"COD {fixed(h.holdout_cod, 1)} (start model: {error_text(h.start_holdout_rmse, r)}, "
            f"COD {fixed(h.start_holdout_cod, 1)})"
        )
    out += ["", *guard_lines(s)]
    if s.notes:
        out += ["", "Notes:", *(f"    {n}" for n in s.notes)]
    if s.warnings:
        out += ["", "Warnings:", *(f"    {w}" for w in s.warnings)]
    out += ["", SUGGESTION_CAUTION, ONE_LINE_CAUTION]
    return "\n".join(out)


def guard_lines(s: Suggestion) -> list[str]:
    """What the guards refused and the candidates skipped, with reasons and the caution."""
    out = ["Never proposed (leakage guard):"]
    leak = [x for x in s.refused if x.guard == LEAKAGE]
    out += [f"    {x.column}: {x.reason}" for x in leak] or ["    none"]
    out.append("Never proposed (fair-lending guard):")
    fair = [x for x in s.refused if x.guard == FAIR_LENDING]
    out += [f"    {x.column}: {x.reason}" for x in fair] or ["    none"]
    out.append(f"    {FAIR_LENDING_CAUTION}")
    if s.skipped:
        out.append(f"Not scored ({len(s.skipped)}):")
        out += [f"    {w}: {why}" for w, why in s.skipped[:MAX_SKIPPED_SHOWN]]
        if len(s.skipped) > MAX_SKIPPED_SHOWN:
            out.append(f"    ... and {len(s.skipped) - MAX_SKIPPED_SHOWN} more (see --json)")
    return out


def proposed_model_text(s: Suggestion, source: str = "") -> str:
    """The proposed model file: the start file's settings, the chosen features each with a
    comment stating its measured gain, and the derived names they need.

    ``parse_model`` reads it back to ``s.proposed``.
    """
    r = s.spec.response
    spec = s.proposed
    head = [
        f"# Proposed by appraise suggest{' from ' + source if source else ''}: {s.n:,} sales,",
        f"# {criterion(s)} {error_text(s.path.start_rmse, r)} -> "
        f"{error_text(s.path.final_rmse, r)}"
        + (
            f"; on a {fixed(100 * s.honest.share, 0)}% hold-out the search never saw "
            f"{error_text(s.honest.holdout_rmse, r)}"
            if s.honest is not None
            else ""
        )
        + ".",
        "# Each comment gives what the line is measured to do in this model.",
        f"# {ONE_LINE_CAUTION}",
    ]
    comments = {g.feature: line_comment(g, s.path.final_rmse, r) for g in s.lines}
    body = []
    for line in spec.to_toml().splitlines():
        stripped = line.strip()
        feature = next(
            (f for f in spec.features if stripped == f"{toml_string(f)},"),
            None,
        )
        if feature is not None and feature in comments:
            line = f"{line}  # {comments[feature]}"
        body.append(line)
    return "\n".join(head + body) + "\n"


def protected_model_columns(fit: object) -> tuple[str, ...]:
    """The fair-lending guard's warning for each column the fitted model reads that the
    assistant would never propose (a user may add one by hand; the worksheet repeats this)."""
    design, frame = getattr(fit, "design", None), getattr(fit, "frame", None)
    if design is None or frame is None:
        return ()
    return tuple(f"{w}. {FAIR_LENDING_CAUTION}" for w in protected_columns(design.inputs, frame))
