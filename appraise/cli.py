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

# Order is the order shown in --help.
COMMANDS: tuple[str, ...] = (
    "demo",
    "data",
    "fit",
    "value",
    "diagnose",
    "compare",
    "report",
    "open",
)


def build_parser() -> argparse.ArgumentParser:
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
    for name in COMMANDS:
        try:
            module = importlib.import_module(f"appraise.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"appraise.commands.{name}":
                continue  # command not built yet
            raise
        module.register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    args_list = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    if not args_list:
        args_list = ["open"]
    try:
        args = parser.parse_args(args_list)
    except SystemExit as exc:  # argparse: --help exits 0, bad usage exits 2
        return int(exc.code or 0)
    func = getattr(args, "func", None)
    if func is None:
        parser.print_help()
        return 2
    try:
        return int(func(args) or 0)
    except AppraiseError as exc:
        print(f"appraise: error: {exc}", file=sys.stderr)
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
