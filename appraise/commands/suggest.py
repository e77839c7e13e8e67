"""``appraise suggest SALES --model START.toml [-o PROPOSED.toml] [--json] [--max-lines 14]
[--folds 10] [--seed 0] [--no-holdout]``.

Searches from the start model for a better one by measured out-of-sample error: prints
each step (the change, CV error before and after, the gain and its standard error), the
final model, the honest hold-out estimate beside the search's own figure, and what the
leakage and fair-lending guards refused. ``-o`` writes the proposed model file, one
comment per feature line stating its measured gain.

JSON keys (``--json``): ``caution``, ``fair_lending_caution``, ``n``, ``response``,
``criterion``, ``folds``, ``seed``, ``max_lines``, ``rule``; ``start`` {``features``,
``cv_rmse``, ``cv_cod``}; ``steps`` (each ``{step, change, added, dropped, text, lines_added, why,
cv_rmse_before, cv_rmse_after, gain_mse, se_mse, gain_rmse, se_rmse}``); ``stopped``;
``final`` {``features``, ``cv_rmse``, ``cv_cod``, ``lines`` (each ``{feature, origin,
drop_cost_mse, drop_se_mse, cv_rmse_without}``), ``derived``}; ``honest`` (null with
``--no-holdout``, else ``{share, seed, n_search, n_holdout, features, in_search_cv_rmse,
holdout_rmse, start_holdout_rmse, holdout_cod, start_holdout_cod}``); ``candidates``; ``refused`` (each ``{column, guard,
reason}``, guard "leakage" or "fair lending"); ``skipped`` (each ``{what, reason}``);
``notes``; ``warnings``; ``left_out_rows``; ``proposed_file`` (the path written, or null).
CV errors are on the response scale (log price for a log response).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from ..engine.errors import ModelFileError
from ..engine.suggest.search import SearchSettings, suggest
from ..report.cautions import FAIR_LENDING_CAUTION
from ..report.suggest_text import format_suggestion, proposed_model_text
from .common import (
    SHORT_CAUTION,
    add_json_argument,
    add_model_argument,
    add_sales_arguments,
    fit_from_args,
    print_json,
)


def register(sub) -> None:
    p = sub.add_parser(
        "suggest",
        help="search for a better model by measured out-of-sample gains",
        description="Start from a model file and search, one change at a time, for the model "
        "with the lowest cross-validated error; report each step, the final model and an "
        "honest hold-out estimate, and write the proposed model file.",
    )
    add_sales_arguments(p)
    add_model_argument(p)
    p.add_argument(
        "-o", "--output", metavar="PROPOSED.toml", help="write the proposed model file here"
    )
    add_json_argument(p)
    g = p.add_argument_group("search")
    g.add_argument(
        "--max-lines", type=int, default=14, help="most feature lines in the model (default 14)"
    )
    g.add_argument(
        "--folds",
        type=int,
        default=10,
        help="folds of the cross-validation; 0 for leave-one-out (default 10)",
    )
    g.add_argument(
        "--seed", type=int, default=0, help="seed of the folds and the hold-out (default 0)"
    )
    g.add_argument(
        "--no-holdout",
        action="store_true",
        help="skip the honest estimate (the search run again without a 20%% hold-out)",
    )
    p.set_defaults(func=run)


def _progress_to_stderr():
    if not sys.stderr.isatty():
        return None

    def progress(fraction: float, message: str) -> None:
        sys.stderr.write(f"\r  searching {100 * fraction:3.0f}%  {message:<20}")
        if fraction >= 1:
            sys.stderr.write("\r" + " " * 40 + "\r")
        sys.stderr.flush()

    return progress


def run(args: argparse.Namespace) -> int:
    settings = SearchSettings(
        folds=args.folds, seed=args.seed, max_lines=args.max_lines, honest=not args.no_holdout
    )
    _, _, fit = fit_from_args(args)
    result = suggest(fit, settings, progress=_progress_to_stderr())
    written = None
    if args.output:
        out = Path(args.output)
        try:
            out.write_text(proposed_model_text(result, source=str(args.model)), encoding="utf-8")
        except OSError as exc:
            raise ModelFileError(f"cannot write: {exc.strerror}", file=str(out)) from None
        written = str(out)
    if args.json:
        print_json(
            {
                "caution": SHORT_CAUTION,
                "fair_lending_caution": FAIR_LENDING_CAUTION,
                **result.to_dict(),
                "proposed_file": written,
            }
        )
    else:
        print(format_suggestion(result))  # ends with the cautions
        if written:
            print()
            print(f"Proposed model written to {written}")
    return 0
