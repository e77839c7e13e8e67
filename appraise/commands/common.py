"""Options and steps shared by the commands: read sales, read a model, fit, read a subject."""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

from ..engine.errors import AppraiseError
from ..engine.modelspec import ModelSpec, load_model
from ..engine.settings import ImportSettings
from ..report.cautions import ONE_LINE_CAUTION

SHORT_CAUTION = ONE_LINE_CAUTION  # the one wording the CLI, PDF footer and app share


def add_sales_arguments(parser: argparse.ArgumentParser) -> None:
    """SALES plus the import settings every command that reads sales accepts."""
    parser.add_argument("sales", metavar="SALES", help="comparable sales: .csv, .xlsx or .parquet")
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


def import_settings(args: argparse.Namespace) -> ImportSettings:
    sheet: str | int = args.sheet
    if isinstance(sheet, str) and sheet.isdigit():
        sheet = int(sheet)
    return ImportSettings(
        decimal=args.decimal, date_order=args.date_order, area_unit=args.area_unit, sheet=sheet
    )


def load_sales_from_args(args: argparse.Namespace):
    from ..engine.importing import load_sales
    from ..engine.roles import load_role_map

    roles = load_role_map(args.roles) if getattr(args, "roles", None) else None
    return load_sales(args.sales, import_settings(args), roles)


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
            "--model", "-m", metavar="MODEL.toml", required=True, help="the model file (TOML)"
        )


def add_subject_arguments(parser: argparse.ArgumentParser) -> None:
    """--subject and --level, for the commands that value the subject."""
    parser.add_argument(
        "--subject",
        "-s",
        required=True,
        metavar="SUBJECT",
        help="the subject: a JSON object or a one-row CSV with the sales' columns",
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
    return load_model(args.model)


def fit_from_args(args: argparse.Namespace, spec: ModelSpec | None = None):
    """Read sales and model, fit; returns ``(sales, spec, fit)``."""
    from ..engine.fitting import fit_model

    sales = load_sales_from_args(args)
    spec = spec if spec is not None else load_model_from_args(args)
    return sales, spec, fit_model(sales, spec)


def read_subject_from_args(args: argparse.Namespace, sales):
    from ..engine.subject import read_subject

    return read_subject(args.subject, sales, import_settings(args))


def _clean(o):
    if isinstance(o, float) and not math.isfinite(o):
        return None
    if isinstance(o, dict):
        return {k: _clean(v) for k, v in o.items()}
    if isinstance(o, list | tuple):
        return [_clean(v) for v in o]
    return o


def print_json(obj) -> None:
    """JSON on stdout: NaN and infinities become null, so any JSON reader accepts it."""
    json.dump(_clean(obj), sys.stdout, indent=2, default=str, allow_nan=False)
    sys.stdout.write("\n")


def sample_dir() -> Path:
    """The shipped sample_data folder (beside the package in a source checkout)."""
    here = Path(__file__).resolve().parents[2] / "sample_data"
    if not (here / "ashcombe_sales.csv").is_file():
        raise AppraiseError(
            "the sample data folder was not found; run this from a source checkout of appraise",
            file=str(here),
        )
    return here


def has_display() -> bool:
    """Whether a Qt window can be shown: a display server, or an explicit Qt platform."""
    import os

    if os.environ.get("QT_QPA_PLATFORM"):
        return True
    if sys.platform.startswith("linux") or "bsd" in sys.platform:
        return bool(os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))
    return True  # Windows and macOS always have a window system
