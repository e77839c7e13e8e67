"""``appraise batch SALES --model M.toml --subjects S.(csv|parquet) -o OUT.(csv|parquet) [--level L]``.

Values every row of a subjects file (a roll of properties) with the model fitted to the
sales, in chunks, and writes one output row per subject in input order: file row, id,
estimate, median (log response), the single-sale interval and the interval for the mean,
the level, leverage, warnings and, for a subject that cannot be valued, the reason.
A caution and what produced the file are written beside it (``OUT.about.txt``) and, for
Parquet, into the file's metadata.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from ..engine.batch import (
    DEFAULT_CHUNK_ROWS,
    BatchSummary,
    count_rows,
    summarise,
    value_file,
)
from ..engine.errors import DataError
from ..report.cautions import FULL_CAUTIONS, ONE_LINE_CAUTION
from ..report.numbers import integer as fmt_int
from .common import (
    add_model_argument,
    add_sales_arguments,
    errors_name,
    fit_from_args,
    import_settings,
)

if TYPE_CHECKING:  # pragma: no cover - typing only
    import pyarrow as pa

OUT_FORMATS = {".csv": "csv", ".parquet": "parquet", ".pq": "parquet"}
PROGRESS_FROM_ROWS = 200_000
"""A progress bar is drawn (on a terminal) for files with at least this many subjects."""


def register(sub) -> None:
    p = sub.add_parser(
        "batch",
        help="value every subject of a CSV or Parquet file (a roll) into CSV or Parquet",
        description=__doc__,
    )
    add_sales_arguments(p)
    add_model_argument(p)
    p.add_argument(
        "--subjects",
        required=True,
        metavar="SUBJECTS",
        help="the subjects: .csv or .parquet with the sales' columns (or role names)",
    )
    p.add_argument(
        "-o", "--out", required=True, metavar="OUT", help="where to write: .csv or .parquet"
    )
    p.add_argument(
        "--level",
        type=float,
        default=None,
        help="prediction-interval level (default: the model file's, else 0.90)",
    )
    p.add_argument("--id-column", metavar="HEADER", help="the subjects' id column (default: found)")
    p.add_argument(
        "--chunk-rows",
        type=int,
        default=DEFAULT_CHUNK_ROWS,
        help=f"subjects valued at a time (default {DEFAULT_CHUNK_ROWS:,})",
    )
    p.add_argument("--no-progress", action="store_true", help="never draw a progress bar")
    p.set_defaults(func=run)


CSV_DECIMALS = 6
"""Decimals of the numbers in a CSV result (``"%.6f"``)."""

_EXACT_BELOW = 4e9
"""Numbers of smaller magnitude are written by :func:`_fixed_decimals` (x 10^6 stays
below 2^52, where its rounding below is exact); larger ones, NaN and infinities by
Python's ``%`` formatting."""


def _fixed_decimals(x: np.ndarray) -> pa.Array:
    """Each number as ``"%.6f" % x`` writes it (``""`` for NaN, as pandas writes it), with
    no Python call per number below :data:`_EXACT_BELOW`.

    :math:`x \\cdot 10^6` is held exactly as ``hi + lo`` (Dekker's product: ``x`` split in
    halves of 26 bits, each times :math:`10^6` exact), then rounded to the nearest integer,
    a tie to the even one, exactly as the correctly rounded ``%`` does; the sign is the
    sign bit (``-0.000000`` for -0.0 or -1e-9, as ``%`` writes them).
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    scale = 10.0**CSV_DECIMALS
    fast = np.abs(x) < _EXACT_BELOW  # False for NaN and infinities
    xf = np.where(fast, x, 0.0)
    hi = xf * scale
    split = 134217729.0 * xf  # 2^27 + 1
    xh = split - (split - xf)
    lo = (xh * scale - hi) + (xf - xh) * scale
    r = np.rint(hi)  # ties to even
    t = hi - r  # exact: r is the integer nearest hi
    n = r + ((t == 0.5) & (lo > 0)) - ((t == -0.5) & (lo < 0))
    whole, part = np.divmod(np.abs(n).astype(np.int64), 10**CSV_DECIMALS)
    text = pc.binary_join_element_wise(
        pc.cast(pa.array(whole), pa.large_string()),
        pc.utf8_lpad(pc.cast(pa.array(part), pa.large_string()), CSV_DECIMALS, "0"),
        pa.scalar(".", pa.large_string()),
    )
    minus = np.signbit(x) & fast
    if minus.any():
        sign, empty = pa.scalar("-", pa.large_string()), pa.scalar("", pa.large_string())
        signed = pc.binary_join_element_wise(sign, text, empty)
        text = pc.if_else(pa.array(minus), signed, text)
    rest = np.flatnonzero(~fast)
    if rest.size:
        cells = np.asarray(text.to_numpy(zero_copy_only=False), dtype=object)
        cells[rest] = ["" if v != v else f"%.{CSV_DECIMALS}f" % v for v in x[rest].tolist()]
        text = pa.array(cells, type=pa.large_string())
    return text


def _csv_texts(values: pd.Series) -> pa.Array | None:
    """Text cells as pandas' CSV writer writes them (quoted when they hold a comma, a
    quote or a line feed; a quote doubled; ``""`` for a missing cell); None when the
    column is not text only."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if values.dtype == object and pd.api.types.infer_dtype(values, skipna=True) not in (
        "string",
        "empty",
    ):
        return None
    try:
        arr = pa.array(values, type=pa.large_string(), from_pandas=True)
    except (pa.ArrowInvalid, pa.ArrowTypeError):
        return None
    arr = pc.fill_null(arr, "")
    needs = pc.or_(
        pc.or_(pc.match_substring(arr, ","), pc.match_substring(arr, '"')),
        pc.match_substring(arr, "\n"),
    )
    q, empty = pa.scalar('"', pa.large_string()), pa.scalar("", pa.large_string())
    quoted = pc.binary_join_element_wise(q, pc.replace_substring(arr, '"', '""'), q, empty)
    return pc.if_else(needs, quoted, arr)


def csv_bytes(chunk: pd.DataFrame, header: bool) -> bytes | None:
    """A result chunk as ``chunk.to_csv(index=False, float_format="%.6f")`` writes it, built
    column by column in Arrow (pandas formats every number in Python, about 15 s a million
    subjects); None for a column of another kind than numbers or text."""
    import pyarrow as pa
    import pyarrow.compute as pc

    cols = []
    for name in chunk.columns:
        values = chunk[name]
        if pd.api.types.is_float_dtype(values.dtype):
            cols.append(_fixed_decimals(values.to_numpy(dtype=np.float64)))
        elif pd.api.types.is_integer_dtype(values.dtype):
            cols.append(pc.cast(pa.array(values.to_numpy()), pa.large_string()))
        elif (texts := _csv_texts(values)) is not None:
            cols.append(texts)
        else:
            return None
    head = (",".join(chunk.columns) + os.linesep).encode() if header else b""
    if not len(chunk):
        return head
    comma, empty = pa.scalar(",", pa.large_string()), pa.scalar("", pa.large_string())
    lines = pc.binary_join_element_wise(*cols, comma)
    lines = pc.binary_join_element_wise(lines, empty, pa.scalar(os.linesep, pa.large_string()))
    if isinstance(lines, pa.ChunkedArray):
        lines = lines.combine_chunks()
    offsets = np.frombuffer(lines.buffers()[1], dtype=np.int64)[lines.offset :]
    data = lines.buffers()[2]
    return head + data.to_pybytes()[offsets[0] : offsets[len(lines)]]


class _Writer:
    """Chunks appended to a temporary file, moved into place only when all are written."""

    def __init__(self, out: Path, fmt: str, metadata: dict[str, str]) -> None:
        self.out, self.fmt, self.metadata = out, fmt, metadata
        self.tmp = out.with_name(out.name + ".partial")
        self.parquet = None
        self.started = False

    def write(self, chunk) -> None:
        if self.fmt == "csv":
            text = csv_bytes(chunk, header=not self.started)
            if text is None:  # a column of another kind: pandas writes it
                chunk.to_csv(
                    self.tmp,
                    mode="a" if self.started else "w",
                    header=not self.started,
                    index=False,
                    float_format=f"%.{CSV_DECIMALS}f",
                )
            else:
                with self.tmp.open("ab" if self.started else "wb") as fh:
                    fh.write(text)
        else:
            import pyarrow as pa
            import pyarrow.parquet as pq

            table = pa.Table.from_pandas(chunk, preserve_index=False)
            if self.parquet is None:
                schema = table.schema.with_metadata(
                    {k.encode(): v.encode() for k, v in self.metadata.items()}
                )
                # dictionary pages only for the repetitive text columns: for the numbers
                # they cost five times the write and save nothing
                self.parquet = pq.ParquetWriter(
                    self.tmp, schema, use_dictionary=["warnings", "reason", "level"]
                )
            self.parquet.write_table(table.cast(self.parquet.schema))
        self.started = True

    def close(self) -> None:
        if self.parquet is not None:
            self.parquet.close()
        os.replace(self.tmp, self.out)

    def abandon(self) -> None:
        if self.parquet is not None:
            self.parquet.close()
        self.tmp.unlink(missing_ok=True)


def _progress_bar(path: str, disabled: bool):
    """A tqdm bar on stderr for long files (none when not a terminal), or None."""
    if disabled:
        return None, None
    total = count_rows(path)
    if total is None or total < PROGRESS_FROM_ROWS:
        return None, None
    from tqdm import tqdm

    bar = tqdm(total=total, unit=" subjects", unit_scale=True, file=sys.stderr, disable=None)

    def progress(done: int, _total: int | None) -> None:
        bar.update(done - bar.n)

    return bar, progress


def about_text(args: argparse.Namespace, summary, level: float, fit) -> str:
    lines = [
        "appraise batch valuation",
        "",
        f"subjects: {args.subjects}",
        f"sales: {args.sales} ({fmt_int(fit.n)} sales used)",
        f"model: {args.model}",
        f"interval level: {level:.0%} (single-sale prediction interval: low, high; "
        "interval for the mean: mean_low, mean_high)",
        f"rows: {fmt_int(summary.rows)}; valued: {fmt_int(summary.valued)}; "
        f"not valued (see 'reason'): {fmt_int(summary.not_valued)}; "
        f"valued with warnings: {fmt_int(summary.with_warnings)}",
    ]
    if summary.fit_warnings:
        lines += ["", "Warnings on the model:"] + [f"- {w}" for w in summary.fit_warnings]
    lines += ["", "Cautions:"]
    lines += [f"- {title}. {text}" for title, text in FULL_CAUTIONS]
    return "\n".join(lines) + "\n"


def run(args: argparse.Namespace) -> int:
    out = Path(args.out)
    fmt = OUT_FORMATS.get(out.suffix.lower())
    if fmt is None:
        raise DataError("the output of a batch is a .csv or .parquet file", file=str(out))
    if args.chunk_rows < 1:
        raise DataError("--chunk-rows must be at least 1")
    sales, spec, fit = fit_from_args(args)
    level = spec.level if args.level is None else args.level
    started = time.perf_counter()
    bar, progress = _progress_bar(args.subjects, args.no_progress)
    results = value_file(
        fit,
        sales,
        args.subjects,
        import_settings(args),
        level=args.level,
        id_header=args.id_column,
        chunk_rows=args.chunk_rows,
        progress=progress,
    )
    writer = _Writer(out, fmt, {"caution": ONE_LINE_CAUTION, "model": str(args.model)})
    parts = []  # one small summary per chunk: memory stays flat however long the roll
    try:
        with errors_name(args.subjects):  # a column the roll lacks: name the roll
            for chunk in results:
                writer.write(chunk)
                parts.append(summarise(chunk, fit))
        if not writer.started:
            raise DataError("the subjects file has a header but no rows", file=args.subjects)
        writer.close()
    except BaseException:
        writer.abandon()
        raise
    finally:
        if bar is not None:
            bar.close()
    summary = BatchSummary(
        sum(p.rows for p in parts),
        sum(p.valued for p in parts),
        sum(p.not_valued for p in parts),
        sum(p.with_warnings for p in parts),
        tuple(fit.warnings),
    )
    about = out.with_name(out.name + ".about.txt")
    about.write_text(about_text(args, summary, level, fit), encoding="utf-8")
    seconds = time.perf_counter() - started
    print(
        f"{fmt_int(summary.rows)} subjects: {fmt_int(summary.valued)} valued, "
        f"{fmt_int(summary.not_valued)} not valued (reason given), "
        f"{fmt_int(summary.with_warnings)} with warnings; written to {out} in {seconds:.1f} s"
    )
    for w in summary.fit_warnings:
        print(f"warning: {w}")
    print(ONE_LINE_CAUTION)
    return 0


__all__ = ["register", "run"]
