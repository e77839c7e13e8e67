"""``appraise demo``: the main job on the shipped sample data (Ashcombe Vale).

With a display it opens the desktop workbench with the sample sales, model and subject
loaded. Without one (or with ``--text``) it prints what was read, the fitted model and
the subject's value with its prediction interval.
"""

from __future__ import annotations

import argparse

from ..engine.fitting import fit_model
from ..engine.importing import load_sales
from ..engine.modelspec import load_model
from ..engine.settings import ImportSettings
from ..engine.subject import read_subject
from ..engine.valuation import value_subject
from .common import SHORT_CAUTION, has_display, sample_dir
from .text import format_fit, format_valuation


def register(sub) -> None:
    p = sub.add_parser(
        "demo", help="value the sample subject from the sample sales", description=__doc__
    )
    p.add_argument(
        "--text", action="store_true", help="print the valuation instead of opening the desktop app"
    )
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    if not args.text and has_display():
        from ..gui.app import open_sample

        return open_sample()
    folder = sample_dir()
    settings = ImportSettings()
    sales = load_sales(folder / "ashcombe_sales.csv", settings)
    spec = load_model(folder / "ashcombe_model.toml")
    fit = fit_model(sales, spec)
    subject = read_subject(folder / "subject.json", sales, settings)
    val = value_subject(fit, subject)
    print("Sample scenario: Ashcombe Vale (invented town and sales)")
    print(
        f"Read {sales.source.rows_in_file} rows from {folder.name}/ashcombe_sales.csv: "
        f"{sales.n_used} used, {len(sales.excluded)} excluded at import"
    )
    print()
    print(format_fit(fit))
    print()
    addr = val.subject.get("address")
    print(f"Subject{f': {addr}' if addr else ''}")
    print(format_valuation(val))
    print()
    print(SHORT_CAUTION)
    if not args.text:
        print()
        print(
            "No display found, so the desktop workbench was not opened. On a desktop, "
            "'appraise demo' opens it with this data; 'appraise --help' lists the commands."
        )
    return 0
