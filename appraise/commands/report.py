"""``appraise report SALES --model MODEL.toml --subject SUBJECT -o worksheet.pdf``

Writes the valuation worksheet as a PDF (Qt's own PDF writer, works without a
display), optionally the same content as HTML, and the coefficient and exclusion
tables as CSV and XLSX.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from ..engine.errors import ReportError
from ..report.cautions import ONE_LINE_CAUTION
from ..report.content import PAGE_SIZES
from ..report.numbers import money
from .common import (
    add_model_argument,
    add_sales_arguments,
    add_subject_arguments,
    effective_date_option,
    errors_name,
    import_settings,
    load_model_from_args,
    load_sales_from_args,
    model_file,
    read_subject_from_args,
    subject_file,
    subject_source,
    workfile_exclusions,
)


def register(sub) -> None:
    p = sub.add_parser(
        "report",
        help="write the valuation worksheet (PDF, optional HTML and tables)",
        description=__doc__,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    add_sales_arguments(p)
    add_model_argument(p)
    add_subject_arguments(p)
    p.add_argument("-o", "--output", required=True, metavar="WORKSHEET.pdf", help="PDF to write")
    p.add_argument("--html", metavar="WORKSHEET.html", help="also write the worksheet as HTML")
    p.add_argument(
        "--comps", metavar="ID,ID,...", help="comparables for the sales-comparison section"
    )
    p.add_argument(
        "--effective-date",
        metavar="YYYY-MM-DD",
        help="date of value (default: the subject's effective_date, else the model file's)",
    )
    p.add_argument("--no-grid", action="store_true", help="leave out the sales-comparison section")
    p.add_argument(
        "--page-size",
        choices=PAGE_SIZES,
        default=None,
        help="paper size of the PDF (default: the locale's, Letter in the US, else A4)",
    )
    p.add_argument(
        "--tables-dir",
        metavar="DIR",
        help="also write coefficients and exclusions as CSV and XLSX into DIR",
    )
    p.add_argument(
        "--tables",
        metavar="FILE.xlsx|DIR",
        help="also write every table of the worksheet (and the sales with their results): "
        "one workbook with a sheet each, or a CSV per table into DIR",
    )
    p.add_argument(
        "--sales-out",
        metavar="FILE.csv|FILE.xlsx",
        help="also write every sale with its fitted and leave-one-out value, interval, "
        "ratio and flags (spreadsheet-safe)",
    )
    p.add_argument("--currency", default="$", help="currency symbol printed (default '$')")
    p.add_argument(
        "--no-diagnostics", action="store_true", help="leave the diagnostics section out"
    )
    p.add_argument(
        "--workfile-id", help="identifier printed in every footer (default: from the file hashes)"
    )
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from ..qtrender.figures import worksheet_figures
    from ..qtrender.pdf import write_pdf
    from ..report.html import render_html
    from ..report.settings import ReportSettings
    from ..report.tables import export_tables
    from ..report.worksheet import build_worksheet

    out = Path(args.output)
    if out.suffix.lower() != ".pdf":
        raise ReportError("the output file should end in .pdf", file=str(out))
    for target in (out, *(Path(x) for x in (args.html,) if x)):
        if not target.parent.is_dir():  # fail before the fit, not after it
            raise ReportError("the folder does not exist", file=str(target))
        if len(target.name.encode("utf-8", "replace")) > 255:  # Qt failed only at the end
            raise ReportError("the file name is too long (at most 255 bytes)", file=str(target))
    if args.sales_out and args.no_diagnostics:  # before anything is written, not after the PDF
        raise ReportError("--sales-out needs the model check (drop --no-diagnostics)")
    if args.tables_dir and Path(args.tables_dir).exists() and not Path(args.tables_dir).is_dir():
        raise ReportError("--tables-dir names a file, not a folder", file=str(args.tables_dir))
    args.effective_date = effective_date_option(args.effective_date)
    from .. import pipeline
    from ..engine.diagnostics import DiagnosticSettings
    from ..engine.errors import ExpressionError, ModelFileError, SubjectError

    sales = load_sales_from_args(args)
    spec = load_model_from_args(args)
    subject = read_subject_from_args(args, sales)
    with (
        errors_name(model_file(args), ExpressionError, ModelFileError),
        errors_name(subject_file(args), SubjectError),
    ):
        run_ = pipeline.analyse(
            sales,
            spec,
            subject=subject,
            level=args.level,
            diagnostics=None if args.no_diagnostics else DiagnosticSettings(),
            user_exclusions=workfile_exclusions(args),
        )
    fit, valuation, diagnostics = run_.fit, run_.valuation, run_.diagnostics
    from ..report.paper import default_page_size

    args.page_size = args.page_size or default_page_size()
    settings = ReportSettings(currency=args.currency, page_size=args.page_size)
    grid, grid_figs = None, ()
    if not args.no_grid:
        from ..engine.errors import AppraiseError

        try:
            comps = [c.strip() for c in args.comps.split(",") if c.strip()] if args.comps else None
            grid, _ = pipeline.grid(
                fit,
                subject_source(args),
                effective_date=args.effective_date,
                import_settings=import_settings(args),
                comps=comps,
                level=args.level,
            )
        except AppraiseError as exc:
            print(f"Sales comparison left out: {exc}")
        else:
            from ..qtrender.grid_figures import index_figure

            grid_figs = (index_figure(grid),)
    worksheet = build_worksheet(
        fit,
        valuation,
        diagnostics=diagnostics,
        figures=worksheet_figures(fit, valuation, currency=args.currency),
        settings=settings,
        workfile_id=args.workfile_id,
        grid=grid,
        grid_figures=grid_figs,
    )
    pages = write_pdf(worksheet, out, page_size=args.page_size)
    print(f"Wrote {out} ({pages} pages, {args.page_size})")
    if args.html:
        html_path = Path(args.html)
        try:
            html_path.write_text(render_html(worksheet), encoding="utf-8")
        except OSError as exc:
            raise ReportError(f"cannot write HTML: {exc.strerror}", file=str(html_path)) from None
        print(f"Wrote {html_path}")
    if args.tables_dir:
        for path in export_tables(worksheet, args.tables_dir):
            print(f"Wrote {path}")
    if args.tables or args.sales_out:
        from ..report.sales_export import sales_results_table, write_sales_results
        from ..report.tables import export_all_tables

        extra = () if diagnostics is None else (sales_results_table(fit, diagnostics),)
        if args.tables:
            for path in export_all_tables(worksheet, args.tables, extra=extra):
                print(f"Wrote {path}")
        if args.sales_out:
            if diagnostics is None:
                raise ReportError("--sales-out needs the model check (drop --no-diagnostics)")
            print(f"Wrote {write_sales_results(fit, diagnostics, args.sales_out)}")
    cur = args.currency
    print(
        f"Estimate {money(valuation.estimate, cur)}; {100 * valuation.level:g}% prediction "
        f"interval {money(valuation.low, cur)} to {money(valuation.high, cur)}"
    )
    print(ONE_LINE_CAUTION)
    return 0
