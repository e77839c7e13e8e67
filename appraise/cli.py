"""Command line: ``appraise COMMAND ...``. Thin over the engine and the report.

``main(argv) -> exit code``. Exit 0 on success, 2 on a user error (bad file,
bad model, bad subject: one line on stderr naming file, row and column, no
traceback), 1 on anything unexpected.

Each command lives in ``appraise/commands/<name>.py`` and exposes
``register(subparsers)``, which adds its parser and sets ``func`` to a
callable ``(args) -> int``.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
from collections.abc import Sequence

from . import __version__
from .engine.errors import AppraiseError
from .report.safe_text import TerminalStream

# name -> one-line summary; the order is the order shown in --help. Only the module of
# the command being run is imported (the engine pulls in pandas, scipy and statsmodels,
# which take seconds to import), so `appraise --help` answers at once.
COMMANDS: dict[str, str] = {
    "demo": "value the sample subject from the sample sales",
    "data": "read a sales file and show what was used, what was excluded and why",
    "fit": "fit a model file to the sales and print the coefficients",
    "value": "value the subject property with a prediction interval",
    "grid": "sales comparison: comparables, adjustment grid and reconciliation",
    "regions": "neighbourhood effects with intervals, tests, slopes and the ratio study by region",
    "diagnose": "check a model: influential sales, redundant terms, accuracy, ratio study",
    "compare": "rank candidate model files by leave-one-out error on the same sales",
    "suggest": "search for a better model by measured out-of-sample gains",
    "report": "write the valuation worksheet (PDF, optional HTML and tables)",
    "batch": "value every subject of a CSV or Parquet file (a roll) into CSV or Parquet",
    "open": "open the desktop workbench (the default with no command)",
}


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The argument parser.

    ``only`` names the one command whose module is imported and whose options are
    registered; the others appear with their summary alone. ``None`` registers all.
    """
    parser = argparse.ArgumentParser(
        prog="appraise",
        description=(
            "Value a subject property from comparable sales with a hedonic regression. "
            "With no command, opens the desktop workbench. Output is a statistical "
            "estimate, not an appraisal."
        ),
    )
    parser.add_argument("--version", action="version", version=f"appraise {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, summary in COMMANDS.items():
        if only is None or name == only:
            importlib.import_module(f"appraise.commands.{name}").register(sub)
        else:
            sub.add_parser(name, help=summary)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    args_list = list(sys.argv[1:] if argv is None else argv)
    if not args_list:
        args_list = ["open"]
    parser = build_parser(only=next((a for a in args_list if a in COMMANDS), ""))
    try:
        args = parser.parse_args(args_list)
    except SystemExit as exc:  # argparse: --help exits 0, bad usage exits 2
        return int(exc.code or 0)
    func = getattr(args, "func", None)
    if func is None:
        parser.print_help()
        return 2
    out, err = sys.stdout, sys.stderr
    # every string from a user's file reaches the terminal with its control characters escaped
    sys.stdout, sys.stderr = TerminalStream(out), TerminalStream(err)
    try:
        return _run(func, args)
    finally:
        sys.stdout, sys.stderr = out, err


def _run(func, args: argparse.Namespace) -> int:
    try:
        return int(func(args) or 0)
    except AppraiseError as exc:
        # one line: a reader's own message (Arrow's, openpyxl's) may span several
        print("appraise: error: " + " ".join(str(exc).split("\n")), file=sys.stderr)
        return 2
    except (RecursionError, MemoryError) as exc:  # a last guard: the readers check limits first
        print(
            f"appraise: error: an input is too large or nested too deeply ({type(exc).__name__})",
            file=sys.stderr,
        )
        return 2
    except KeyboardInterrupt:
        print("appraise: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # The reader went away (``appraise data ... | head``): stop quietly, as Unix tools do.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
