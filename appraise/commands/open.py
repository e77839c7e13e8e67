"""``appraise open [FILE]``: the desktop workbench (also what plain ``appraise`` runs)."""

from __future__ import annotations

import argparse
import sys


def register(sub) -> None:
    p = sub.add_parser(
        "open",
        help="open the desktop workbench (the default with no command)",
        description="Open the desktop workbench, optionally with a sales file "
        "(.csv, .xlsx, .parquet) or a saved workfile. Needs a display.",
    )
    p.add_argument("file", nargs="?", metavar="FILE", help="a sales file or a workfile to open")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from ..gui.app import run as run_app  # Qt is loaded only when the window is wanted

    return run_app(sys.argv[:1], path=args.file)
