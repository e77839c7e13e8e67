"""Options and steps shared by the commands: read sales, read a model, fit, read a subject."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from ..engine.jsonable import to_jsonable
from ..engine.modelspec import ModelSpec
from ..engine.settings import ImportSettings
from ..report.cautions import ONE_LINE_CAUTION
from ..report.safe_text import terminal_text

SHORT_CAUTION = ONE_LINE_CAUTION  # the one wording the CLI, PDF footer and app share


def add_sales_arguments(parser: argparse.ArgumentParser) -> None:
    """SALES plus the import settings every command that reads sales accepts."""
    parser.add_argument(
        "sales",
        metavar="SALES",
        help="comparable sales: .csv, .xlsx or .parquet; or a saved workfile (.appraise.json), "
        "whose sales, model, subject and exclusions are used unless given here",
    )
    g = parser.add_argument_group("reading the sales")
    g.add_argument(
        "--decimal",
        choices=[".", ","],
        default=".",
        help="decimal mark of numbers in the file (default '.')",
    )
    g.add_argument(
        "--date-order",
        choices=["ISO", "DMY", "MDY"],
        default="ISO",
        help="how to read ambiguous dates like 03/04/2025 (default ISO: refuse them)",
    )
    g.add_argument(
        "--area-unit",
        choices=["ft2", "m2"],
        default="ft2",
        help="unit of the areas in the file (default ft2)",
    )
    g.add_argument("--sheet", default="0", help="worksheet name or 0-based index for .xlsx")
    g.add_argument("--roles", metavar="ROLEMAP.json", help="a saved column-role map to use")
    g.add_argument(
        "--plausibility",
        metavar="RULES.toml",
        help="plausibility rules replacing the defaults (min_price, max_price, earliest_sale, "
        "reference_date, future_margin_days, min_living_area, max_living_area, max_lot_area, "
        "year_built_margin)",
    )
    g.add_argument(
        "--read-recorded-path",
        action="store_true",
        help="with a workfile: read the sales file it names even when that is not a plain "
        ".csv/.xlsx/.parquet file (by default such a path is not read)",
    )


def is_workfile(path: str) -> bool:
    """A SALES argument naming a workfile rather than a sales export (sales are never JSON)."""
    return str(path).lower().endswith(".json")


def workfile_from_args(args: argparse.Namespace):
    """``(state, restored)`` when SALES is a workfile (read once per run), else ``None``."""
    if not is_workfile(args.sales):
        return None
    cached = getattr(args, "_workfile", None)
    if cached is None:
        from ..engine.workfile import load_workfile, restore

        state = load_workfile(args.sales)
        trust = getattr(args, "read_recorded_path", False)
        cached = (state, restore(state, confirm=(lambda p: True) if trust else None))
        args._workfile = cached
        for line in state.recovered:
            print(f"note: {line}", file=sys.stderr)
    return cached


def workfile_exclusions(args: argparse.Namespace) -> tuple:
    """The sales the workfile's user left out (none without a workfile)."""
    wf = workfile_from_args(args)
    return () if wf is None else tuple(wf[1].user_exclusions)


def subject_source(args: argparse.Namespace):
    """``--subject`` as given, else the workfile's subject; SubjectError when neither."""
    if getattr(args, "subject", None):
        return args.subject
    wf = workfile_from_args(args)
    if wf is not None:
        return dict(wf[1].subject)
    from ..engine.errors import SubjectError

    raise SubjectError("no subject: give --subject SUBJECT (or a workfile as SALES)")


def import_settings(args: argparse.Namespace) -> ImportSettings:
    wf = workfile_from_args(args) if hasattr(args, "sales") else None
    if wf is not None:
        from ..engine.workfile import import_settings_from_dict

        return import_settings_from_dict(wf[0].import_settings, source=wf[0].location)
    sheet: str | int = args.sheet
    if isinstance(sheet, str) and sheet.isdigit():
        sheet = int(sheet)
    return ImportSettings(
        decimal=args.decimal, date_order=args.date_order, area_unit=args.area_unit, sheet=sheet
    )


def load_sales_from_args(args: argparse.Namespace):
    from .. import pipeline

    wf = workfile_from_args(args)
    if wf is not None:
        return wf[1].sales
    bar, progress = _reading_bar(args.sales)
    try:
        return pipeline.load(
            args.sales,
            import_settings(args),
            getattr(args, "roles", None),
            rules=rules_from_args(args),
            progress=progress,
        )
    finally:
        if bar is not None:
            bar.close()


BAR_BYTES = 20 * 2**20
"""A sales file at least this large gets a progress bar while it is read (on a terminal)."""


def _reading_bar(path: str):
    """A tqdm bar on stderr for a large sales file (drawn only on a terminal), or None."""
    try:
        size = Path(path).stat().st_size
    except (OSError, ValueError):
        return None, None  # the reader says what is wrong with the path
    if size < BAR_BYTES:
        return None, None
    from tqdm import tqdm

    # the terminal itself: the bar's own control characters must reach it (the command
    # line's escaping stream would print them as text); the messages are escaped below
    stream = getattr(sys.stderr, "target", sys.stderr)
    bar = tqdm(total=100, unit="%", file=stream, disable=None, leave=False)

    def progress(fraction: float, message: str) -> None:
        bar.set_description_str(terminal_text(message)[:48], refresh=False)
        bar.update(max(round(100 * fraction) - bar.n, 0))

    return bar, progress


def rules_from_args(args: argparse.Namespace):
    """The plausibility rules with the effective date as the latest plausible sale date
    (plus the margin): the subject file's ``effective_date`` when it has one, else the
    model file's, else today. (``--effective-date`` of ``grid`` and ``report`` only dates
    the sales comparison; it does not remove sales from the fit.)"""
    from ..engine.errors import AppraiseError
    from ..engine.plausibility import DEFAULT_RULES, effective_date_of, rules_at, rules_from_mapping

    base = DEFAULT_RULES
    given = getattr(args, "plausibility", None)
    if given:
        from ..engine.errors import DataError
        from ..engine.importing import read_file_bytes
        from ..engine.limits import decode_utf8, load_toml_text

        data = read_file_bytes(Path(given))
        text = decode_utf8(data, source=given, error=DataError, what="the rules file")
        table = load_toml_text(text, source=given, error=DataError, what="the rules file")
        base = rules_from_mapping(table, source=given)
        if base.reference_date is not None:
            return base
    model_date = None
    if getattr(args, "model", None) and isinstance(args.model, str):
        model_date = load_model_from_args(args).effective_date
    subject = None
    if isinstance(getattr(args, "subject", None), str):
        from ..engine.subject import read_subject_attributes

        try:
            subject = read_subject_attributes(Path(args.subject), import_settings(args))
        except AppraiseError:
            subject = None  # the command reports the subject file's fault where it reads it
    return rules_at(effective_date_of(subject, model_date), base)


def add_model_argument(parser: argparse.ArgumentParser, *, multiple: bool = False) -> None:
    if multiple:
        parser.add_argument(
            "--model",
            "-m",
            metavar="MODEL.toml",
            action="append",
            required=True,
            help="a model file; give it several times to compare",
        )
    else:
        parser.add_argument(
            "--model",
            "-m",
            metavar="MODEL.toml",
            help="the model file (TOML); required unless SALES is a workfile",
        )


def add_subject_arguments(parser: argparse.ArgumentParser) -> None:
    """--subject and --level, for the commands that value the subject."""
    parser.add_argument(
        "--subject",
        "-s",
        metavar="SUBJECT",
        help="the subject: a JSON object or a one-row CSV with the sales' columns; "
        "required unless SALES is a workfile",
    )
    parser.add_argument(
        "--level",
        type=float,
        default=None,
        help="prediction-interval level (default: the model file's, else 0.90)",
    )


def add_json_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print machine-readable JSON")


def load_model_from_args(args: argparse.Namespace) -> ModelSpec:
    from .. import pipeline

    if args.model:
        return pipeline.read_model(args.model)
    wf = workfile_from_args(args)
    if wf is not None:
        return wf[1].spec
    from ..engine.errors import ModelFileError

    raise ModelFileError("no model: give --model MODEL.toml (or a workfile as SALES)")


def model_file(args: argparse.Namespace) -> str | None:
    """The file the model came from: ``--model``, else a workfile given as SALES."""
    given = getattr(args, "model", None)
    if isinstance(given, str) and given:
        return given
    return args.sales if is_workfile(args.sales) else None


def subject_file(args: argparse.Namespace) -> str | None:
    """The file the subject came from: ``--subject``, else a workfile given as SALES."""
    given = getattr(args, "subject", None)
    if given:
        return str(given)
    return args.sales if is_workfile(args.sales) else None


@contextmanager
def errors_name(file: str | None, *kinds: type) -> Iterator[None]:
    """Give an error that names no file the one the failing step read (``kinds``: only
    errors of these types; default every :class:`AppraiseError`). An expression error
    found while fitting belongs to the model file, a subject the model cannot value to the
    subject file: the line printed must say which file to open."""
    from ..engine.errors import AppraiseError

    try:
        yield
    except AppraiseError as exc:
        if exc.file is None and file and isinstance(exc, kinds or (AppraiseError,)):
            exc.file = file
        raise


def effective_date_option(text: str | None) -> str | None:
    """``--effective-date`` checked before any work: a real day ``YYYY-MM-DD`` in the years
    1678-2261 (``9999-99-99`` raised a DateParseError traceback after the fit), as ISO text."""
    if text is None:
        return None
    import datetime as _dt

    from ..engine.errors import SubjectError

    try:
        day = _dt.date.fromisoformat(text.strip()) if len(text.strip()) == 10 else None
    except ValueError:
        day = None
    if day is None or not 1678 <= day.year <= 2261:
        raise SubjectError(
            f"--effective-date '{text}' is not a date YYYY-MM-DD in the years 1678-2261"
        )
    return day.isoformat()


def fit_from_args(args: argparse.Namespace, spec: ModelSpec | None = None):
    """Read sales and model, fit; returns ``(sales, spec, fit)``."""
    from .. import pipeline

    sales = load_sales_from_args(args)
    spec = spec if spec is not None else load_model_from_args(args)
    with errors_name(model_file(args)):
        return sales, spec, pipeline.fit(sales, spec, workfile_exclusions(args))


def read_subject_from_args(args: argparse.Namespace, sales):
    from .. import pipeline

    level = getattr(args, "level", None)
    if level is not None and not 0 < level < 1:  # an option, not the subject file's fault
        from ..engine.errors import SubjectError

        raise SubjectError(f"--level must be strictly between 0 and 1, not {level}")
    source = subject_source(args)
    if isinstance(source, dict):
        source = pipeline.filled(source)
    with errors_name(subject_file(args)):
        return pipeline.subject_frame(source, sales, import_settings(args))


def print_json(obj) -> None:
    """JSON on stdout: NaN and infinities become null, so any JSON reader accepts it."""
    json.dump(to_jsonable(obj), sys.stdout, indent=2, allow_nan=False)
    sys.stdout.write("\n")
