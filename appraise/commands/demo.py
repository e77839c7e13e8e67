"""``appraise demo``: the main job on the shipped sample data (Ashcombe Vale).

With a display it opens the desktop workbench with the sample sales, model and subject
loaded. Without one (or with ``--text``) it prints what was read, the fitted model and
the subject's value with its prediction interval.
"""

from __future__ import annotations

import argparse

from ..engine.settings import ImportSettings
from ..qtrender.qtapp import has_display
from ..report.text import format_fit, format_valuation
from ..resources import SAMPLE_MODEL, SAMPLE_SALES, SAMPLE_SUBJECT, sample_dir
from .common import SHORT_CAUTION


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
    from .. import pipeline

    folder = sample_dir()
    settings = ImportSettings()
    sales = pipeline.load(folder / SAMPLE_SALES, settings)
    spec = pipeline.read_model(folder / SAMPLE_MODEL)
    run_ = pipeline.analyse(sales, spec, subject=folder / SAMPLE_SUBJECT, import_settings=settings)
    fit, val = run_.fit, run_.valuation
    print("Sample scenario: Ashcombe Vale (invented town and sales)")
    print(
        f"Read {sales.source.rows_in_file} rows from {folder.name}/{SAMPLE_SALES}: "
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
